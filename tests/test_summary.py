"""Per-balance summaries, checked against numpy and pandas computed independently.

References: ``numpy.nanvar(ddof=1)``, ``numpy.nanquantile`` (linear
interpolation, numpy's default), ``pandas.DataFrame.groupby().mean()``; for a
complete SBP the balance variances add up to the total variance (Egozcue &
Pawlowsky-Glahn 2005; common practice), so the shares add up to 1.
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from conftest import PROPERTY_SETTINGS, positive_compositions, valid_sbps
from hypothesis import given
from hypothesis import strategies as st

from compwidgets import core
from compwidgets.core.summary import quartile_summary, summarize_balances


def _matrix(seed=0, n=50, k=3):
    rng = np.random.default_rng(seed)
    B = rng.normal(size=(n, k)) * [1.0, 2.0, 0.5]
    B[[4, 9, 30]] = np.nan  # incomplete rows
    return B


def test_statistics_match_numpy_and_pandas():
    B = _matrix()
    before = B.copy()
    codes = np.arange(50) % 4 - 1  # -1 = no group, then groups 0..2
    selected = np.array([1, 2, 3, 4, 10, 11])
    out = summarize_balances(B, selected, codes, 3, total=5.0, names=["b1", "b2", "b3"])
    np.testing.assert_array_equal(B, before)  # not mutated
    assert json.loads(json.dumps(out)) == out  # plain JSON types
    groups = pd.DataFrame(B).assign(code=codes).groupby("code").mean()
    for j, entry in enumerate(out):
        col = B[:, j]
        assert entry["name"] == f"b{j + 1}" and entry["index"] == j
        assert entry["n"] == 47 and entry["n_missing"] == 3
        assert entry["variance"] == pytest.approx(np.nanvar(col, ddof=1), rel=1e-12)
        assert entry["share"] == pytest.approx(np.nanvar(col, ddof=1) / 5.0, rel=1e-12)
        assert entry["mean"] == pytest.approx(np.nanmean(col), rel=1e-12)
        for q in (5, 25, 50, 75, 95):
            assert entry[f"q{q}"] == pytest.approx(np.nanquantile(col, q / 100), rel=1e-12)
        sel = col[selected]
        assert entry["selection"]["n"] == 5  # row 4 is incomplete
        assert entry["selection"]["mean"] == pytest.approx(np.nanmean(sel), rel=1e-12)
        assert entry["selection"]["q25"] == pytest.approx(np.nanquantile(sel, 0.25), rel=1e-12)
        assert entry["selection"]["q75"] == pytest.approx(np.nanquantile(sel, 0.75), rel=1e-12)
        assert [g["code"] for g in entry["groups"]] == [0, 1, 2]
        for g in entry["groups"]:
            assert g["mean"] == pytest.approx(groups.loc[g["code"], j], rel=1e-12)
            assert g["n"] == int(((codes == g["code"]) & ~np.isnan(col)).sum())


def test_mask_and_positions_give_the_same_selection():
    B = _matrix(1)
    mask = np.zeros(50, dtype=bool)
    mask[[0, 7, 8]] = True
    assert summarize_balances(B, mask) == summarize_balances(B, np.array([0, 7, 8]))


def test_empty_and_degenerate_cases_give_none():
    B = np.full((3, 2), np.nan)
    B[0] = [1.0, 2.0]
    out = summarize_balances(B, np.array([1]), np.array([0, 0, -1]), n_groups=2, total=1.0)
    assert out[0]["n"] == 1 and out[0]["variance"] is None and out[0]["share"] is None
    assert out[0]["mean"] == 1.0 and out[0]["q50"] == 1.0
    assert out[0]["selection"] == {"n": 0, "mean": None, "q25": None, "q75": None}
    assert out[0]["groups"] == [
        {"code": 0, "n": 1, "mean": 1.0},
        {"code": 1, "n": 0, "mean": None},
    ]
    assert summarize_balances(B)[0]["selection"] is None
    assert summarize_balances(B)[0]["share"] is None  # no total given
    assert summarize_balances(np.zeros((0, 2)))[1]["n"] == 0


def test_errors():
    B = _matrix()
    with pytest.raises(core.CompositionError, match="2-D"):
        summarize_balances(B[:, 0])
    with pytest.raises(core.CompositionError, match="row position 50"):
        summarize_balances(B, np.array([50]))
    with pytest.raises(core.CompositionError, match="mask needs 50"):
        summarize_balances(B, np.ones(3, dtype=bool))
    with pytest.raises(core.CompositionError, match="codes must lie in -1 .. 1"):
        summarize_balances(B, codes=np.full(50, 2), n_groups=2)
    with pytest.raises(core.CompositionError, match="2 names for 3"):
        summarize_balances(B, names=["a", "b"])
    bad = B.copy()
    bad[2, 1] = np.inf
    with pytest.raises(core.CompositionError, match="row 2, balance 2"):
        summarize_balances(bad)


@PROPERTY_SETTINGS
@given(data=st.data(), X=positive_compositions(min_parts=2, max_parts=6, min_rows=3))
def test_shares_of_a_complete_sbp_add_up_to_one(data, X):
    S = data.draw(valid_sbps(X.shape[1]))
    out = summarize_balances(core.balances(X, S), total=core.total_variance(X))
    shares = [e["share"] for e in out]
    if core.total_variance(X) > 1e-12:
        assert sum(shares) == pytest.approx(1.0, rel=1e-9)


def test_quartile_summary_equals_numpy_per_column():
    # Source: numpy mean and quantile (linear interpolation) column by column
    B = np.random.default_rng(8).normal(size=(501, 4)) * [1, 2, 3, 4]
    out = quartile_summary(B)
    for j, entry in enumerate(out):
        assert entry["n"] == 501
        assert entry["mean"] == pytest.approx(float(np.mean(B[:, j])), rel=1e-12)
        assert entry["q25"] == pytest.approx(float(np.quantile(B[:, j], 0.25)), rel=1e-12)
        assert entry["q75"] == pytest.approx(float(np.quantile(B[:, j], 0.75)), rel=1e-12)
    # the same numbers as the selection entry of the full summary
    full = summarize_balances(B, selected=np.ones(501, dtype=bool))
    for entry, ref in zip(out, full, strict=True):
        assert entry == pytest.approx(ref["selection"], rel=1e-12)
    assert (
        quartile_summary(np.zeros((0, 2)))
        == [{"n": 0, "mean": None, "q25": None, "q75": None}] * 2
    )
    with pytest.raises(core.CompositionError, match="NaN"):
        quartile_summary(np.array([[1.0], [np.nan]]))


@PROPERTY_SETTINGS
@given(positive_compositions(min_parts=2, max_parts=7, min_rows=3, max_rows=25))
def test_total_variance_from_the_variation_matrix(X):
    # Aitchison (1986): the total variance is sum_ij T_ij / (2 D), and the trace of the
    # clr covariance; numpy var (ddof=1) of the clr columns written out here
    Z = np.log(X) - np.log(X).mean(axis=1, keepdims=True)
    expected = np.var(Z, axis=0, ddof=1).sum()
    T = core.variation_matrix(X)
    got = core.stats.total_variance_from_variation(T)
    assert got == pytest.approx(expected, rel=1e-9, abs=1e-12)


def test_balance_tables_are_read_in_place_and_left_unchanged():
    # a table of a million rows is summarised without a second copy of it
    from compwidgets.core.summary import balance_table, summarize_balances

    B = np.random.default_rng(12).normal(size=(50, 3))
    B.flags.writeable = False  # any write into it would raise
    assert np.shares_memory(balance_table(B, "test"), B)
    summarize_balances(B, codes=np.arange(50) % 2, n_groups=2)
    assert not np.shares_memory(balance_table(B.tolist(), "test"), B)
