"""Suggested partitions: principal balances and Ward clustering of the parts.

Independent references used here:
- the balance formula ``b = sqrt(r s / (r + s)) ln(g(x+) / g(x-))`` of Egozcue &
  Pawlowsky-Glahn (2005), evaluated directly in a plain loop over
  ``itertools.combinations`` (the brute force the search must match);
- variances with ``numpy.var(ddof=1)``;
- ``scipy.cluster.hierarchy.linkage`` / ``fcluster`` and ``scipy.spatial.distance.pdist``;
- the fact that the balance variances of an orthonormal basis add up to the
  total variance (Egozcue & Pawlowsky-Glahn 2005; common practice), with the
  total variance computed from the variation matrix, ``sum_ij T_ij / (2D)``
  (Aitchison 1986).
"""

from __future__ import annotations

import itertools

import numpy as np
import pandas as pd
import pytest
from conftest import PROPERTY_SETTINGS, positive_compositions, valid_sbps
from hypothesis import given
from hypothesis import strategies as st
from scipy.cluster.hierarchy import fcluster, linkage
from scipy.spatial.distance import pdist, squareform

from compwidgets import core
from compwidgets.core.principal import principal_balances, ward_sbp


# ------------------------------------------------------------ references
def balance_direct(X: np.ndarray, plus, minus) -> np.ndarray:
    """Balance from its definition (Egozcue & Pawlowsky-Glahn 2005)."""
    logx = np.log(X)
    r, s = len(plus), len(minus)
    return np.sqrt(r * s / (r + s)) * (
        logx[:, list(plus)].mean(axis=1) - logx[:, list(minus)].mean(axis=1)
    )


def brute_force_best(X: np.ndarray, group) -> tuple[float, frozenset]:
    """Largest balance variance over all bipartitions of ``group`` (naive loop)."""
    group = list(group)
    best, best_side = -1.0, None
    for r in range(1, len(group)):
        for plus in itertools.combinations(group, r):
            minus = [g for g in group if g not in plus]
            v = np.var(balance_direct(X, plus, minus), ddof=1)
            if v > best:
                best, best_side = v, frozenset(plus)
    return best, best_side


def total_variance_reference(X: np.ndarray) -> float:
    """sum_ij var(ln(x_i/x_j)) / (2 D) (Aitchison 1986), from np.var."""
    logx = np.log(X)
    D = X.shape[1]
    T = sum(np.var(logx[:, i] - logx[:, j], ddof=1) for i in range(D) for j in range(D))
    return T / (2 * D)


def random_sbp(D: int, rng: np.random.Generator) -> np.ndarray:
    """Random valid SBP by recursive random splitting."""
    rows, open_groups = [], [list(range(D))]
    while open_groups:
        group = open_groups.pop(int(rng.integers(len(open_groups))))
        rng.shuffle(group)
        cut = int(rng.integers(1, len(group)))
        row = np.zeros(D, dtype=int)
        row[group[:cut]], row[group[cut:]] = 1, -1
        rows.append(row)
        open_groups += [g for g in (group[:cut], group[cut:]) if len(g) > 1]
    return np.array(rows)


def factor_data(n: int, D: int, seed: int, rank: int = 3) -> np.ndarray:
    """Invented positive data with a few latent log-scale factors plus noise."""
    rng = np.random.default_rng(seed)
    logx = rng.normal(size=(n, rank)) @ rng.normal(size=(rank, D)) + 0.2 * rng.normal(size=(n, D))
    return np.exp(logx + rng.normal(size=D))


def sides(row) -> frozenset:
    """The unordered bipartition of one SBP row."""
    row = np.asarray(row)
    return frozenset(
        {frozenset(np.flatnonzero(row > 0).tolist()), frozenset(np.flatnonzero(row < 0).tolist())}
    )


# ------------------------------------------------------- principal balances
def test_dominant_log_contrast_is_found():
    # 8 invented parts: ln(g(x1..x3) / g(x4..x8)) varies strongly, the rest is small noise.
    rng = np.random.default_rng(7)
    n, D = 300, 8
    contrast = np.where(np.arange(D) < 3, 1 / 3, -1 / 5)
    logx = rng.normal(0, 0.05, size=(n, D)) + rng.normal(0, 2.0, size=(n, 1)) * contrast
    X = np.exp(logx + rng.normal(size=D))
    S = principal_balances(X)
    assert sides(S[0]) == sides([1, 1, 1, -1, -1, -1, -1, -1])


@pytest.mark.parametrize(("D", "seed"), [(4, 0), (6, 1), (7, 2), (8, 3)])
def test_every_row_is_the_brute_force_best_split_of_its_group(D, seed):
    X = factor_data(60, D, seed)
    S = principal_balances(X)
    core.validate_sbp(S)
    for row in S:
        group = np.flatnonzero(row != 0)
        best, best_plus = brute_force_best(X, group)
        plus = np.flatnonzero(row > 0)
        got = np.var(balance_direct(X, plus, np.flatnonzero(row < 0)), ddof=1)
        assert got == pytest.approx(best, rel=1e-9)
        assert frozenset(plus.tolist()) in (best_plus, frozenset(group.tolist()) - best_plus)


def test_first_balance_beats_random_sbps():
    D = 8
    X = factor_data(80, D, 11)
    S = principal_balances(X)
    first = np.var(balance_direct(X, np.flatnonzero(S[0] > 0), np.flatnonzero(S[0] < 0)), ddof=1)
    rng = np.random.default_rng(5)
    for _ in range(200):
        R = random_sbp(D, rng)
        v = np.var(balance_direct(X, np.flatnonzero(R[0] > 0), np.flatnonzero(R[0] < 0)), ddof=1)
        assert first >= v - 1e-12
    assert first == pytest.approx(brute_force_best(X, range(D))[0], rel=1e-9)


def test_a_whole_sbp_can_hold_a_larger_single_balance_than_the_first():
    # What the search does not promise (core.principal notes): parts A and B vary strongly
    # and independently, C and D hardly at all. The best split of all four parts
    # (brute force over the balance formula) has a smaller variance than the balance
    # A | B, which the SBP {A,B | C,D; A | B; C | D} holds. With var ln A = var ln B = 1:
    # A | B,C,D gives 3/4 (1 + 1/9) = 0.83 and A | B gives 1/2 (1 + 1) = 1 (by hand).
    rng = np.random.default_rng(3)
    n = 4_000
    logx = np.column_stack([rng.standard_normal((n, 2)), 0.01 * rng.standard_normal((n, 2))])
    X = np.exp(logx)
    S = principal_balances(X)
    first = np.var(balance_direct(X, np.flatnonzero(S[0] > 0), np.flatnonzero(S[0] < 0)), ddof=1)
    assert first == pytest.approx(brute_force_best(X, range(4))[0], rel=1e-9)
    assert first == pytest.approx(0.83, abs=0.05)
    a_vs_b = np.var(balance_direct(X, [0], [1]), ddof=1)
    assert a_vs_b == pytest.approx(1.0, abs=0.06)
    assert a_vs_b > first + 0.1
    other = np.array([[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]])
    core.validate_sbp(other)  # a valid SBP holding the A | B balance
    # every row of the search is still the best split of its own group
    for row in S:
        group = np.flatnonzero(row != 0)
        got = np.var(balance_direct(X, np.flatnonzero(row > 0), np.flatnonzero(row < 0)), ddof=1)
        assert got == pytest.approx(brute_force_best(X, group)[0], rel=1e-9)


def test_orientation_and_preorder():
    X = factor_data(50, 7, 4)
    S = principal_balances(X)
    for row in S:  # the first part of each split group is on the +1 side
        assert row[np.flatnonzero(row != 0)[0]] == 1
    # Pre-order: the tree form gives back the same rows in the same order.
    from compwidgets.core.tree import sbp_to_tree, tree_to_sbp

    parts = [f"p{j}" for j in range(7)]
    np.testing.assert_array_equal(tree_to_sbp(sbp_to_tree(S, parts), parts)[0], S)


def test_variance_order_has_same_balances_in_sequential_order():
    X = factor_data(70, 8, 9)
    pre = principal_balances(X)
    seq = principal_balances(X, order="variance")
    core.validate_sbp(seq)
    assert {r.tobytes() for r in pre} == {r.tobytes() for r in seq}
    np.testing.assert_array_equal(pre[0], seq[0])
    # Sequential rule (Pawlowsky-Glahn et al. 2011): each row has at least the variance of
    # every row that splits a group already available at that step.
    var = np.var(core.balances(X, seq), axis=0, ddof=1)
    groups = {frozenset(range(8)): 0}  # group -> step at which it became available
    for k, row in enumerate(seq):
        for side in (np.flatnonzero(row > 0), np.flatnonzero(row < 0)):
            groups[frozenset(side.tolist())] = k + 1
    for k in range(len(seq)):
        for later in range(k + 1, len(seq)):
            support = frozenset(np.flatnonzero(seq[later] != 0).tolist())
            if groups[support] <= k:
                assert var[k] >= var[later] - 1e-12


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_heuristic_close_to_exhaustive_at_16_parts(seed):
    X = factor_data(120, 16, seed)
    exact = principal_balances(X, max_exhaustive=16)
    heur = principal_balances(X, max_exhaustive=8)  # groups of 9+ parts use the heuristic
    core.validate_sbp(heur)
    v_exact = np.var(
        balance_direct(X, np.flatnonzero(exact[0] > 0), np.flatnonzero(exact[0] < 0)), ddof=1
    )
    v_heur = np.var(
        balance_direct(X, np.flatnonzero(heur[0] > 0), np.flatnonzero(heur[0] < 0)), ddof=1
    )
    assert v_heur <= v_exact * (1 + 1e-9)  # the exhaustive search is the maximum
    assert v_heur >= 0.9 * v_exact  # on factor-structured data the local search gets close


def test_heuristic_20_parts_is_valid_sbp():
    X = factor_data(100, 20, 3)
    S = principal_balances(X)  # 20 > max_exhaustive=16: the root uses the heuristic
    core.validate_sbp(S)
    assert S.shape == (19, 20)
    var = np.var(core.balances(X, S), axis=0, ddof=1)
    assert var.sum() == pytest.approx(total_variance_reference(X), rel=1e-9)


def test_progress_callback():
    calls = []
    X = factor_data(40, 6, 1)
    principal_balances(X, progress=lambda done, total: calls.append((done, total)))
    assert calls[0] == (0, 5)
    assert calls[-1][0] == pytest.approx(5)
    assert all(total == 5 for _, total in calls)
    dones = [d for d, _ in calls]
    assert np.all(np.diff(dones) >= 0)


def test_inputs_clr_dataframe_and_incomplete_rows():
    X = factor_data(40, 5, 2)
    before = X.copy()
    S = principal_balances(X)
    np.testing.assert_array_equal(X, before)  # input not mutated
    logx = np.log(X)
    clr = logx - logx.mean(axis=1, keepdims=True)  # clr by its definition (Aitchison 1986)
    np.testing.assert_array_equal(principal_balances(clr), S)
    np.testing.assert_array_equal(principal_balances(clr, kind="clr"), S)
    frame = pd.DataFrame(X, columns=list("ABCDE"), index=[f"s{i}" for i in range(40)])
    np.testing.assert_array_equal(principal_balances(frame), S)
    holed = frame.copy()
    holed.iloc[3, 1] = np.nan
    with pytest.raises(core.CompositionError, match="s3"):
        principal_balances(holed)
    np.testing.assert_array_equal(
        principal_balances(holed, skip_incomplete=True), principal_balances(frame.drop("s3"))
    )
    bad = clr.copy()
    bad[2, 0] += 1.0
    with pytest.raises(core.CompositionError, match="do not sum to zero"):
        principal_balances(bad)
    with pytest.raises(core.CompositionError, match="kind"):
        principal_balances(X, kind="ilr")
    with pytest.raises(core.CompositionError, match="max_exhaustive"):
        principal_balances(X, max_exhaustive=1)
    with pytest.raises(core.CompositionError, match="at least 2"):
        principal_balances(X[:1])


def test_two_parts():
    X = factor_data(10, 2, 0)
    np.testing.assert_array_equal(principal_balances(X), [[1, -1]])


# ----------------------------------------------------------------- Ward
@pytest.mark.parametrize(("D", "seed"), [(5, 0), (8, 1), (12, 2)])
def test_ward_first_split_matches_scipy_fcluster(D, seed):
    X = factor_data(50, D, seed)
    logx = np.log(X)
    clr = logx - logx.mean(axis=1, keepdims=True)
    S = ward_sbp(clr, [f"p{j}" for j in range(D)])
    core.validate_sbp(S)
    # scipy reference: Ward linkage of the centred clr columns, cut into 2 clusters.
    centred = clr - clr.mean(axis=0)
    labels = fcluster(linkage(centred.T, method="ward"), 2, criterion="maxclust")
    expected = frozenset(
        frozenset(np.flatnonzero(labels == k).tolist()) for k in np.unique(labels)
    )
    assert sides(S[0]) == expected
    # Without centring: scipy on the plain clr columns.
    S_plain = ward_sbp(clr, centred=False)
    labels = fcluster(linkage(clr.T, method="ward"), 2, criterion="maxclust")
    assert sides(S_plain[0]) == frozenset(
        frozenset(np.flatnonzero(labels == k).tolist()) for k in np.unique(labels)
    )


def test_ward_distance_convention_is_variation_matrix():
    # The documented convention: squared distance of centred clr columns = (n-1) T_ij.
    X = factor_data(30, 6, 5)
    n = X.shape[0]
    logx = np.log(X)
    clr = logx - logx.mean(axis=1, keepdims=True)
    dist2 = squareform(pdist((clr - clr.mean(axis=0)).T)) ** 2
    T = np.array([[np.var(logx[:, i] - logx[:, j], ddof=1) for j in range(6)] for i in range(6)])
    np.testing.assert_allclose(dist2, (n - 1) * T, atol=1e-9)


def test_ward_groups_proportional_parts():
    # Parts 0-2 move together, parts 3-5 move together: Ward's first split separates them.
    rng = np.random.default_rng(3)
    a, b = rng.normal(size=(2, 80, 1))
    logx = np.hstack(
        [a + 0.01 * rng.normal(size=(80, 3)), 2 * b + 0.01 * rng.normal(size=(80, 3))]
    )
    S = ward_sbp(core.clr(np.exp(logx)))
    assert sides(S[0]) == sides([1, 1, 1, -1, -1, -1])


def test_ward_errors_and_incomplete_rows():
    holed = np.array([[0.1, np.nan, -0.1], [0.2, 0.0, -0.2]])
    with pytest.raises(core.CompositionError, match=r"1 row\(s\) \(first: \[0\]\)"):
        ward_sbp(holed)
    with pytest.raises(core.CompositionError, match="1 complete row"):
        ward_sbp(holed, skip_incomplete=True)
    clr = core.clr(factor_data(20, 4, 0))
    holed = np.vstack([clr, [np.nan] * 4])
    np.testing.assert_array_equal(ward_sbp(holed, skip_incomplete=True), ward_sbp(clr))
    with pytest.raises(core.SBPError, match="2 part names for 3"):
        ward_sbp(np.zeros((4, 3)), ["a", "b"])


# --------------------------------------------------------- variance sum
@PROPERTY_SETTINGS
@given(data=st.data(), X=positive_compositions(min_parts=2, max_parts=7, min_rows=3))
def test_balance_variances_add_up_to_total_variance(data, X):
    S = data.draw(valid_sbps(X.shape[1]))
    var = np.var(core.balances(X, S), axis=0, ddof=1)
    reference = total_variance_reference(X)
    assert var.sum() == pytest.approx(reference, rel=1e-9, abs=1e-9)
    assert core.total_variance(X) == pytest.approx(reference, rel=1e-9, abs=1e-9)
    P = principal_balances(X)
    assert np.var(core.balances(X, P), axis=0, ddof=1).sum() == pytest.approx(
        reference, rel=1e-9, abs=1e-9
    )
    # and the first principal balance has at least the variance of the random first row
    assert np.var(core.balances(X, P)[:, 0], ddof=1) >= var[0] - 1e-9 * (1 + var[0])
