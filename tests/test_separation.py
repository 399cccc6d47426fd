"""Group separation along balances (compwidgets.core.separation).

References: scipy.stats.f_oneway and scipy.stats.kruskal on the same values,
grouped with pandas; the between-group share by its definition
SS_between / SS_total (eta squared), computed with a pandas groupby.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from compwidgets.core import CompositionError
from compwidgets.core.separation import SEPARATION_KEYS, balance_separation


def _data(n=300, k=3, n_groups=4, seed=0):
    rng = np.random.default_rng(seed)
    codes = rng.integers(-1, n_groups, n).astype(np.int32)  # -1: no group
    B = rng.normal(size=(n, k)) + 0.4 * np.maximum(codes, 0)[:, None] * np.arange(k)
    B[rng.random((n, k)) < 0.05] = np.nan  # rows without a value
    return B, codes


def _reference(col, codes):
    frame = pd.DataFrame({"b": col, "g": codes})
    frame = frame[frame["g"] >= 0].dropna()
    samples = [grp["b"].to_numpy() for _, grp in frame.groupby("g")]
    means = frame.groupby("g")["b"].transform("mean")
    between = float(((means - frame["b"].mean()) ** 2).sum())
    total = float(((frame["b"] - frame["b"].mean()) ** 2).sum())
    return len(frame), samples, between / total


def test_separation_equals_scipy_one_way_tests():
    # Source: scipy.stats.f_oneway / kruskal on the rows with a value and a group.
    B, codes = _data()
    result = balance_separation(B, codes, 4, names=["b1", "b2", "b3"])
    assert [r["name"] for r in result] == ["b1", "b2", "b3"]
    for j, entry in enumerate(result):
        assert set(entry) == set(SEPARATION_KEYS)
        n, samples, share = _reference(B[:, j], codes)
        f = stats.f_oneway(*samples)
        h = stats.kruskal(*samples)
        assert entry["n"] == entry["kruskal_n"] == n
        assert entry["n_groups"] == 4
        assert entry["anova_f"] == pytest.approx(f.statistic, rel=1e-10)
        assert entry["anova_p"] == pytest.approx(f.pvalue, rel=1e-8)
        assert entry["kruskal_h"] == pytest.approx(h.statistic, rel=1e-10)
        assert entry["kruskal_p"] == pytest.approx(h.pvalue, rel=1e-8)
        assert entry["between_share"] == pytest.approx(share, rel=1e-10)
    # the column with no group effect separates least, the one with the largest most
    shares = [r["between_share"] for r in result]
    assert shares == sorted(shares)


def test_between_share_of_separated_and_of_mixed_groups():
    # By hand: groups constant at 0 and 1 (equal sizes): everything is between groups.
    col = np.repeat([0.0, 1.0], 10)[:, None]
    codes = np.repeat([0, 1], 10).astype(np.int32)
    (entry,) = balance_separation(col, codes, 2)
    assert entry["between_share"] == pytest.approx(1.0)
    assert entry["anova_f"] is None  # no spread within: F undefined
    # H with the tie correction, worked by hand: 14.2857 / (1 - 2 * 990 / 7980) = 19 = N - 1
    assert entry["kruskal_h"] == pytest.approx(19.0)
    # the same values, groups alternating: the group means coincide
    (entry,) = balance_separation(col, np.tile([0, 1], 10).astype(np.int32), 2)
    assert entry["between_share"] == pytest.approx(0.0, abs=1e-15)
    assert entry["anova_p"] == pytest.approx(1.0)


def test_ranked_subset_is_the_stated_random_rows():
    # Source: scipy.stats.kruskal on the rows numpy.random.default_rng(seed).choice picks.
    B, codes = _data(n=2_000, k=1, seed=3)
    ok = np.isfinite(B[:, 0]) & (codes >= 0)
    x, g = B[ok, 0], codes[ok]
    pick = np.sort(np.random.default_rng(11).choice(x.size, 500, replace=False))
    expected = stats.kruskal(*[x[pick][g[pick] == c] for c in range(4)])
    (entry,) = balance_separation(B, codes, 4, max_rank_rows=500, seed=11)
    assert entry["kruskal_n"] == 500
    assert entry["kruskal_h"] == pytest.approx(expected.statistic, rel=1e-10)
    assert entry["n"] == x.size  # F and the share still use every row
    assert entry["anova_f"] == pytest.approx(
        stats.f_oneway(*[x[g == c] for c in range(4)]).statistic, rel=1e-10
    )


def test_undefined_values_are_none():
    col = np.ones((12, 1))
    codes = np.repeat([0, 1, 2], 4).astype(np.int32)
    (entry,) = balance_separation(col, codes, 3)
    assert entry["anova_f"] is None and entry["kruskal_h"] is None
    assert entry["between_share"] is None
    # one group only
    (entry,) = balance_separation(np.arange(12.0)[:, None], np.zeros(12, np.int32), 3)
    assert entry["n_groups"] == 1 and entry["anova_f"] is None and entry["kruskal_p"] is None
    # an empty group is not counted
    (entry,) = balance_separation(np.arange(12.0)[:, None], codes % 2, 3)
    assert entry["n_groups"] == 2 and entry["anova_f"] is not None


@pytest.mark.parametrize(
    ("args", "message"),
    [
        ((np.ones(5), np.zeros(5, np.int32), 1), "2-D"),
        ((np.ones((5, 1)), np.zeros(4, np.int32), 1), "5 integers"),
        ((np.ones((5, 1)), np.full(5, 3, np.int32), 2), "codes must lie in -1 .. 1"),
        ((np.ones((5, 1)), np.zeros(5), 1), "integers"),
    ],
)
def test_bad_input_is_named(args, message):
    with pytest.raises(CompositionError, match=message):
        balance_separation(*args)
    with pytest.raises(CompositionError, match="max_rank_rows"):
        balance_separation(np.ones((5, 1)), np.zeros(5, np.int32), 1, max_rank_rows=1)
