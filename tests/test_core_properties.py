"""Property tests (hypothesis) of the geometric invariants of compwidgets.core.

Every property here is a theorem of the Aitchison geometry of the simplex
(Aitchison 1986; Egozcue et al. 2003; Egozcue & Pawlowsky-Glahn 2005), so it
must hold for any positive composition, whatever the implementation.
Tolerances are relative to the size of the log-ratios involved.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from conftest import PROPERTY_SETTINGS, compositions, positive_compositions, valid_sbps
from hypothesis import given
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

import compwidgets.core as core

RTOL = 1e-9
ATOL = 1e-9


def close_rows(X: np.ndarray) -> np.ndarray:
    """Closure computed here, independently of the package."""
    return X / X.sum(axis=1, keepdims=True)


def clr_here(X: np.ndarray) -> np.ndarray:
    """clr computed here: ln(x) minus the row mean of ln(x) (Aitchison 1986)."""
    L = np.log(X)
    return L - L.mean(axis=1, keepdims=True)


def assert_close(a, b, rtol=RTOL, atol=ATOL):
    np.testing.assert_allclose(np.asarray(a, dtype=float), np.asarray(b, dtype=float), rtol, atol)


@st.composite
def data_and_scales(draw):
    """A composition matrix and one positive multiplier per row (0.5e-4 .. 2e4)."""
    X = draw(positive_compositions())
    log_scales = draw(
        hnp.arrays(np.float64, (X.shape[0], 1), elements=st.floats(-10, 10, allow_nan=False))
    )
    return X, np.exp(log_scales)


@st.composite
def data_and_permutation(draw):
    X = draw(positive_compositions())
    perm = np.array(draw(st.permutations(range(X.shape[1]))))
    return X, perm


@st.composite
def data_and_sbp(draw, min_parts=2, max_parts=8):
    X = draw(positive_compositions(min_parts=min_parts, max_parts=max_parts))
    return X, draw(valid_sbps(X.shape[1]))


@st.composite
def paired_compositions(draw, k=2, min_parts=2):
    """k positive matrices of the same shape."""
    n = draw(st.integers(1, 20))
    D = draw(st.integers(min_parts, 8))
    return tuple(draw(compositions(n, D)) for _ in range(k))


# --------------------------------------------------------------------------------------
# Scale invariance: a composition carries only relative information.


@PROPERTY_SETTINGS
@given(data_and_scales())
def test_log_ratio_transforms_are_scale_invariant(case):
    X, c = case
    Xc = X * c
    assert_close(core.clr(Xc), core.clr(X))
    assert_close(core.ilr(Xc), core.ilr(X))
    assert_close(core.alr(Xc), core.alr(X))
    assert_close(core.alr(Xc, denominator=0), core.alr(X, denominator=0))
    assert_close(core.closure(Xc), core.closure(X))


@PROPERTY_SETTINGS
@given(data_and_scales())
def test_variation_matrix_and_total_variance_are_scale_invariant(case):
    X, c = case
    assert_close(core.variation_matrix(X * c), core.variation_matrix(X), atol=1e-8)
    assert_close(core.total_variance(X * c), core.total_variance(X), atol=1e-8)
    assert_close(core.clr_covariance(X * c), core.clr_covariance(X), atol=1e-8)


@PROPERTY_SETTINGS
@given(data_and_scales())
def test_aitchison_distance_is_scale_invariant(case):
    X, c = case
    Y = X[::-1]  # compare each row with another row of the set
    d = core.aitchison_distance(X, Y)
    assert_close(core.aitchison_distance(X * c, Y), d, atol=1e-8)
    assert_close(core.aitchison_distance(X, Y / c), d, atol=1e-8)
    assert_close(core.aitchison_norm(X * c), core.aitchison_norm(X), atol=1e-8)


# --------------------------------------------------------------------------------------
# Permutation invariance: the order of the parts carries no information.


@PROPERTY_SETTINGS
@given(data_and_permutation())
def test_distance_and_total_variance_ignore_part_order(case):
    X, perm = case
    Y = X[::-1]
    assert_close(
        core.aitchison_distance(X[:, perm], Y[:, perm]), core.aitchison_distance(X, Y), atol=1e-8
    )
    assert_close(core.total_variance(X[:, perm]), core.total_variance(X), atol=1e-8)
    assert_close(core.aitchison_norm(X[:, perm]), core.aitchison_norm(X), atol=1e-8)


@PROPERTY_SETTINGS
@given(data_and_permutation())
def test_clr_and_variation_matrix_permute_with_the_parts(case):
    X, perm = case
    assert_close(core.clr(X[:, perm]), core.clr(X)[:, perm])
    T = core.variation_matrix(X)
    assert_close(core.variation_matrix(X[:, perm]), T[np.ix_(perm, perm)], atol=1e-8)


# --------------------------------------------------------------------------------------
# Subcompositional coherence.


@st.composite
def data_and_subset(draw):
    X = draw(positive_compositions(min_parts=3))
    D = X.shape[1]
    size = draw(st.integers(2, D))
    subset = draw(st.permutations(range(D)))[:size]
    return X, list(subset)


@PROPERTY_SETTINGS
@given(data_and_subset())
def test_variation_matrix_of_subcomposition_is_the_sub_block(case):
    # Ratios inside a subcomposition do not depend on the parts left out, so the
    # variation matrix of a subcomposition is the matching block (common practice).
    X, subset = case
    T = core.variation_matrix(X)
    T_sub = core.variation_matrix(core.subcomposition(X, subset))
    assert_close(T_sub, T[np.ix_(subset, subset)], atol=1e-8)


@PROPERTY_SETTINGS
@given(data_and_subset())
def test_subcomposition_is_the_closed_selection(case):
    X, subset = case
    sub = core.subcomposition(X, subset)
    assert_close(sub, close_rows(X[:, subset]))
    assert_close(sub.sum(axis=1), 1.0)


# --------------------------------------------------------------------------------------
# Isometry of ilr and clr.


@PROPERTY_SETTINGS
@given(data_and_sbp())
def test_ilr_is_an_isometry_for_default_and_sbp_bases(case):
    X, sbp = case
    Y = X[::-1]
    d = core.aitchison_distance(X, Y)
    d_clr = np.linalg.norm(clr_here(X) - clr_here(Y), axis=1)
    d_ilr = np.linalg.norm(core.ilr(X) - core.ilr(Y), axis=1)
    V = core.sbp_basis(sbp)
    d_sbp = np.linalg.norm(core.ilr(X, V) - core.ilr(Y, V), axis=1)
    d_bal = np.linalg.norm(core.balances(X, sbp) - core.balances(Y, sbp), axis=1)
    for other in (d_clr, d_ilr, d_sbp, d_bal):
        assert_close(other, d, atol=1e-8)
    # Norms are kept too: ||x||_a = ||ilr(x)||.
    assert_close(np.linalg.norm(core.ilr(X, V), axis=1), core.aitchison_norm(X), atol=1e-8)


@PROPERTY_SETTINGS
@given(st.integers(2, 12).flatmap(valid_sbps))
def test_sbp_basis_is_orthonormal_contrast_matrix(sbp):
    V = core.sbp_basis(sbp)
    D = sbp.shape[1]
    assert V.shape == (D - 1, D)
    assert_close(V.sum(axis=1), 0.0, atol=1e-12)
    assert_close(V @ V.T, np.eye(D - 1), atol=1e-12)
    # The signs follow the SBP: positive on +1 parts, negative on -1, zero elsewhere.
    assert np.array_equal(np.sign(V), sbp)


@PROPERTY_SETTINGS
@given(st.integers(2, 12))
def test_default_basis_is_orthonormal_contrast_matrix(D):
    V = core.default_basis(D)
    assert V.shape == (D - 1, D)
    assert_close(V.sum(axis=1), 0.0, atol=1e-12)
    assert_close(V @ V.T, np.eye(D - 1), atol=1e-12)


# --------------------------------------------------------------------------------------
# Inverses.


@PROPERTY_SETTINGS
@given(positive_compositions())
def test_clr_rows_sum_to_zero_and_invert_to_the_closure(X):
    Z = core.clr(X)
    assert_close(Z.sum(axis=1), 0.0, atol=1e-10)
    assert_close(Z, clr_here(X))
    assert_close(core.clr_inv(Z), close_rows(X))


@PROPERTY_SETTINGS
@given(positive_compositions(), st.data())
def test_alr_round_trip_for_any_denominator(X, data):
    D = X.shape[1]
    k = data.draw(st.integers(-D, D - 1))
    Y = core.alr(X, denominator=k)
    assert Y.shape == (X.shape[0], D - 1)
    assert_close(core.alr_inv(Y, denominator=k), close_rows(X))


@PROPERTY_SETTINGS
@given(data_and_sbp())
def test_ilr_round_trip_for_default_and_sbp_bases(case):
    X, sbp = case
    assert_close(core.ilr_inv(core.ilr(X)), close_rows(X))
    V = core.sbp_basis(sbp)
    assert_close(core.ilr_inv(core.ilr(X, V), V), close_rows(X))
    assert_close(core.ilr_inv(core.balances(X, sbp), V), close_rows(X))


def frame(X: np.ndarray) -> pd.DataFrame:
    D = X.shape[1]
    return pd.DataFrame(
        X,
        columns=[f"part_{j}" for j in range(D)],
        index=pd.Index([f"s{i}" for i in range(X.shape[0])], name="sample"),
    )


@PROPERTY_SETTINGS
@given(data_and_sbp())
def test_round_trips_keep_part_names_and_index(case):
    X, sbp = case
    df = frame(X)
    parts = list(df.columns)
    expected = df.div(df.sum(axis=1), axis=0)
    kw = {"rtol": RTOL, "atol": ATOL}
    pd.testing.assert_frame_equal(core.clr_inv(core.clr(df)), expected, **kw)
    pd.testing.assert_frame_equal(core.ilr_inv(core.ilr(df), parts=parts), expected, **kw)
    V = core.sbp_basis(sbp)
    back = core.ilr_inv(core.balances(df, sbp), V, parts=parts)
    pd.testing.assert_frame_equal(back, expected, **kw)
    back = core.alr_inv(core.alr(df, denominator=parts[0]), denominator=0, parts=parts)
    pd.testing.assert_frame_equal(back, expected, **kw)
    back = core.alr_inv(core.alr(df), denominator=parts[-1], parts=parts)
    pd.testing.assert_frame_equal(back, expected, **kw)


# --------------------------------------------------------------------------------------
# Balances and total variance.


@PROPERTY_SETTINGS
@given(data_and_sbp())
def test_balance_variances_add_up_to_total_variance(case):
    # The D-1 balances of any SBP are orthonormal coordinates, so the sum of their
    # variances is the total variance (Egozcue & Pawlowsky-Glahn 2005).
    X, sbp = case
    B = core.balances(X, sbp)
    assert_close(np.var(B, axis=0, ddof=1).sum(), core.total_variance(X), atol=1e-8)
    # ... and the trace of the clr covariance is the same number.
    assert_close(np.trace(core.clr_covariance(X)), core.total_variance(X), atol=1e-8)


# --------------------------------------------------------------------------------------
# Vector-space structure: clr maps perturbation / powering to + / scalar product.


@PROPERTY_SETTINGS
@given(paired_compositions())
def test_clr_of_perturbation_is_sum_of_clrs(pair):
    X, Y = pair
    assert_close(core.clr(core.perturb(X, Y)), clr_here(X) + clr_here(Y), atol=1e-8)
    # Perturbation is commutative, and perturbing by the neutral element changes nothing.
    assert_close(core.perturb(X, Y), core.perturb(Y, X))
    assert_close(core.perturb(X, np.ones(X.shape[1])), close_rows(X))
    # One composition (D,) perturbs every row.
    assert_close(core.clr(core.perturb(X, Y[0])), clr_here(X) + clr_here(Y[:1]), atol=1e-8)


@PROPERTY_SETTINGS
@given(positive_compositions(), st.floats(-3, 3, allow_nan=False))
def test_clr_of_powering_is_scaled_clr(X, a):
    assert_close(core.clr(core.power(X, a)), a * clr_here(X), atol=1e-8)


@PROPERTY_SETTINGS
@given(positive_compositions(max_rows=10), st.data())
def test_power_with_one_exponent_per_row(X, data):
    a = data.draw(hnp.arrays(np.float64, X.shape[0], elements=st.floats(-3, 3, allow_nan=False)))
    assert_close(core.clr(core.power(X, a)), a[:, None] * clr_here(X), atol=1e-8)


@PROPERTY_SETTINGS
@given(paired_compositions(k=3), st.floats(-3, 3, allow_nan=False))
def test_aitchison_inner_product_is_symmetric_and_bilinear(triple, a):
    X, Y, Z = triple
    inner = core.aitchison_inner
    assert_close(inner(X, Y), inner(Y, X), atol=1e-8)
    assert_close(inner(core.perturb(X, Y), Z), inner(X, Z) + inner(Y, Z), atol=1e-7)
    assert_close(inner(core.power(X, a), Z), a * inner(X, Z), atol=1e-7)
    assert_close(inner(X, Y), np.sum(clr_here(X) * clr_here(Y), axis=1), atol=1e-8)
    # The norm and the distance come from the inner product.
    assert_close(inner(X, X), core.aitchison_norm(X) ** 2, atol=1e-8)
    d = core.aitchison_distance(X, Y)
    assert_close(d, core.aitchison_norm(core.perturb(X, core.power(Y, -1.0))), atol=1e-8)
    assert np.all(inner(X, X) >= 0)


# --------------------------------------------------------------------------------------
# Multiplicative replacement of values below detection.


@st.composite
def data_with_zeros(draw):
    """Closed-or-not data with some cells set to zero (>= 2 observed parts per row).

    Returns the data with zeros, the zero mask and per-cell detection limits
    scaled to the observed row total, so the replacements always fit.
    """
    X = draw(positive_compositions(min_parts=3, max_rows=15))
    n, D = X.shape
    mask = draw(hnp.arrays(np.bool_, (n, D)))
    # Keep at least two observed parts in each row.
    for i in range(n):
        keep = draw(st.permutations(range(D)))[:2]
        mask[i, keep] = False
    Xz = np.where(mask, 0.0, X)
    u = draw(hnp.arrays(np.float64, (n, D), elements=st.floats(0.01, 1.0)))
    dl = u * Xz.sum(axis=1, keepdims=True) / D
    return Xz, mask, dl


@PROPERTY_SETTINGS
@given(data_with_zeros(), st.floats(0.05, 0.95))
def test_multiplicative_replacement_properties(case, fraction):
    Xz, mask, dl = case
    out = core.multiplicative_replacement(Xz, dl, fraction=fraction)
    # Every cell is now strictly positive and the row totals are kept.
    assert np.all(out > 0)
    assert_close(out.sum(axis=1), Xz.sum(axis=1))
    # Replaced cells hold fraction * DL.
    assert_close(out[mask], fraction * dl[mask])
    # Observed cells are untouched in their ratios: out_ij / out_ik == x_ij / x_ik.
    for i in range(Xz.shape[0]):
        obs = ~mask[i]
        ratio_in = Xz[i, obs] / Xz[i, obs][0]
        ratio_out = out[i, obs] / out[i, obs][0]
        assert_close(ratio_out, ratio_in)
    # So the log-ratio geometry of the observed subcomposition is unchanged.
    assert np.all(out[~mask] <= Xz[~mask])


@PROPERTY_SETTINGS
@given(data_with_zeros())
def test_multiplicative_replacement_without_zeros_is_identity(case):
    Xz, mask, dl = case
    X = np.where(mask, dl, Xz)  # no zero left
    assert_close(core.multiplicative_replacement(X, dl), X)


@PROPERTY_SETTINGS
@given(data_and_sbp(min_parts=3), st.data())
def test_partial_sbp_gives_the_leading_balances(case, data):
    # The first k rows of an SBP are a valid partial partition: their balances are the
    # first k balances of the full SBP (only with complete=False).
    X, sbp = case
    k = data.draw(st.integers(1, sbp.shape[0] - 1))
    full = core.balances(X, sbp)
    partial = core.balances(X, sbp[:k], complete=False)
    assert_close(partial, full[:, :k])
    V = core.sbp_basis(sbp[:k], complete=False)
    assert_close(V @ V.T, np.eye(k), atol=1e-12)
    try:
        core.balances(X, sbp[:k])
    except core.SBPError as err:
        assert f"{k} rows for {X.shape[1]} parts" in str(err)
    else:
        raise AssertionError("a partial SBP was accepted without complete=False")


@PROPERTY_SETTINGS
@given(positive_compositions(), st.floats(0.5, 1.0))
def test_closure_is_scale_invariant_up_to_the_float_maximum(X, top):
    # closure(c x) = closure(x) for every c > 0 (Aitchison 1986), also when the largest
    # part of each row sits at the float maximum and the plain row sum overflows
    scaled = X / X.max(axis=1, keepdims=True) * (np.finfo(float).max * top)
    assert_close(core.closure(scaled), close_rows(X), rtol=1e-12, atol=0)
    assert_close(core.perturb(scaled, X), close_rows(X * X), rtol=1e-9, atol=1e-300)
