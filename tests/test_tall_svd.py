"""The blocked thin SVD (TSQR) against LAPACK's direct SVD of the centred matrix.

References: ``numpy.linalg.svd`` and ``scipy.linalg.svd`` (both LAPACK) of the
centred matrix formed explicitly. Singular values of a backward-stable SVD are
accurate to a few ulps of the largest one; a singular vector to that over the
gap to the neighbouring singular values (Wedin's theorem; Golub & Van Loan,
Matrix Computations, 4th ed., section 8.6, quoted from memory). The checks use
those bounds, with the gaps of the test matrices, so a method that squares the
condition number (an eigen-decomposition of ``A^T A``) fails the ill-conditioned
cases.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.linalg

from compwidgets.core import biplot as core_biplot
from compwidgets.core import clr
from compwidgets.core.tall_svd import centred_thin_svd

EPS = np.finfo(float).eps


def _matrix(n: int, D: int, singular: np.ndarray, seed: int) -> np.ndarray:
    """Rows with a given spectrum: random orthonormal U (n, D) and V, then a column shift."""
    rng = np.random.default_rng(seed)
    U, _ = np.linalg.qr(rng.normal(size=(n, D)))
    U -= U.mean(axis=0)  # centred columns: the shift below is the only mean
    U, _ = np.linalg.qr(U)
    V, _ = np.linalg.qr(rng.normal(size=(D, D)))
    return (U * singular) @ V.T + rng.normal(size=D) * 10.0


def _check_against(reference, Z, k, block_rows, gaps_floor=0.0):
    mean = Z.mean(axis=0)
    U, s, V, ss = centred_thin_svd(Z, mean, k, block_rows=block_rows)
    A = Z - mean
    U0, s0, Vt0 = reference(A)
    K = min(Z.shape)
    assert U.shape == (Z.shape[0], k) and s.shape == (K,) and V.shape == (Z.shape[1], K)
    np.testing.assert_allclose(s, s0[:K], rtol=0, atol=50 * EPS * s0[0] * np.sqrt(Z.shape[0]))
    np.testing.assert_allclose(ss, np.sum(A * A), rtol=1e-12)
    for j in range(k):
        others = np.delete(s0[:K], j)
        gap = max(np.min(np.abs(others - s0[j])) if others.size else s0[0], gaps_floor)
        tol = 100 * EPS * s0[0] / gap * np.sqrt(Z.shape[0])
        sign = np.sign(V[:, j] @ Vt0[j])  # LAPACK fixes no sign: compare up to it
        assert sign != 0
        np.testing.assert_allclose(sign * V[:, j], Vt0[j], atol=tol, rtol=0)
        np.testing.assert_allclose(sign * U[:, j], U0[:, j], atol=tol, rtol=0)
    # orthonormal columns and the factorisation itself, to rounding
    np.testing.assert_allclose(U.T @ U, np.eye(k), atol=1e-12)
    np.testing.assert_allclose(V.T @ V, np.eye(K), atol=1e-12)
    if k == K:
        np.testing.assert_allclose((U * s) @ V.T, A, atol=1e-12 * np.abs(A).max())


@pytest.mark.parametrize(
    "reference",
    [
        lambda A: np.linalg.svd(A, full_matrices=False),
        lambda A: scipy.linalg.svd(A, full_matrices=False, lapack_driver="gesvd"),
    ],
    ids=["numpy", "scipy-gesvd"],
)
@pytest.mark.parametrize("seed", [0, 1])
def test_random_tall_matrices_in_many_blocks(reference, seed):
    spectrum = np.linspace(10.0, 1.0, 6)
    Z = _matrix(2_003, 6, spectrum, seed)  # 2,003 rows: the last block is short
    _check_against(reference, Z, k=6, block_rows=250)


@pytest.mark.parametrize("seed", [2, 3])
def test_ill_conditioned_matrix_keeps_the_small_singular_values(seed):
    # condition 1e9: A^T A would have condition 1e18 and lose the smallest value entirely
    spectrum = np.array([1.0, 0.5, 1e-3, 1e-6, 1e-9])
    Z = _matrix(1_500, 5, spectrum, seed)
    _check_against(lambda A: np.linalg.svd(A, full_matrices=False), Z, k=5, block_rows=128)
    U, s, _, _ = centred_thin_svd(Z, Z.mean(axis=0), 5, block_rows=128)
    # each singular value to a relative 1e-3 or better, the smallest included
    np.testing.assert_allclose(s, spectrum, rtol=1e-3)


def test_rank_deficient_and_wide_inputs():
    rng = np.random.default_rng(5)
    Z = rng.normal(size=(4, 9))  # fewer rows than columns: min(n, D) = 4 values
    _check_against(lambda A: np.linalg.svd(A, full_matrices=False), Z, k=3, block_rows=2)
    X = rng.lognormal(size=(300, 6))
    C = clr(X)  # clr rows sum to zero: one exact zero singular value after centring
    mean = C.mean(axis=0)
    _, s, _, _ = centred_thin_svd(C, mean, 0, block_rows=64)
    assert s[-1] <= 1e-13 * s[0]
    np.testing.assert_allclose(s, np.linalg.svd(C - mean, compute_uv=False), atol=1e-12)


def test_input_is_not_changed_and_k_is_checked():
    rng = np.random.default_rng(6)
    Z = rng.normal(size=(50, 4))
    before = Z.copy()
    centred_thin_svd(Z, Z.mean(axis=0), 2, block_rows=8)
    np.testing.assert_array_equal(Z, before)
    with pytest.raises(ValueError, match="k must be in 0..4"):
        centred_thin_svd(Z, Z.mean(axis=0), 5)


def test_biplot_of_many_blocks_matches_a_direct_svd_with_its_sign_convention():
    """clr_biplot (blocked) against numpy's SVD of the centred clr matrix, oriented by the
    documented rule (largest |loading| of each component positive)."""
    rng = np.random.default_rng(7)
    X = rng.lognormal(mean=rng.normal(size=7), sigma=0.4, size=(9_000, 7))  # 3 blocks
    Z = np.asarray(clr(X))
    fit = core_biplot.clr_biplot(Z, "form")
    A = Z - Z.mean(axis=0)
    U0, s0, Vt0 = np.linalg.svd(A, full_matrices=False)
    r = 6
    V0 = Vt0[:r].T
    top = np.argmax(np.abs(V0), axis=0)
    signs = np.sign(V0[top, np.arange(r)])
    np.testing.assert_allclose(fit.singular_values, s0[:r], rtol=1e-12)
    np.testing.assert_allclose(fit.right_vectors, V0 * signs, atol=1e-10)
    np.testing.assert_allclose(fit.row_coords, (U0[:, :r] * signs) * s0[:r], atol=1e-9)


def test_as_table_copies_unless_told_not_to():
    from compwidgets.core._arrays import as_table

    values = np.random.default_rng(9).lognormal(size=(20, 3))
    frame = pd.DataFrame(values, columns=list("abc"))
    assert not np.shares_memory(as_table(values).values, values)
    assert not np.shares_memory(as_table(frame).values, frame.to_numpy())
    assert np.shares_memory(as_table(values, copy=False).values, values)
    # a biplot no longer changes (nor needs a copy of) the clr matrix it is given
    Z = np.asarray(clr(values))
    Z.flags.writeable = False
    core_biplot.clr_biplot(Z)


def test_composition_biplot_equals_the_biplot_of_the_clr_matrix():
    """Blockwise clr (three blocks, two rows left out) against the clr matrix route, whose
    SVD is checked against numpy above; the clr itself: numpy log and row means."""
    rng = np.random.default_rng(10)
    X = rng.lognormal(mean=rng.normal(size=6), sigma=0.5, size=(9_000, 6))
    X[[5, 4_100], [2, 0]] = [np.nan, 0.0]  # a missing value and a zero
    frame = pd.DataFrame(X, columns=[f"p{j}" for j in range(6)])
    logs = np.log(np.where(X > 0, X, np.nan))
    Z = logs - logs.mean(axis=1, keepdims=True)
    for scaling in ("covariance", "form"):
        ref = core_biplot.clr_biplot(Z, scaling, n_components=3, missing="omit")
        fit = core_biplot.composition_biplot(frame, scaling, n_components=3, missing="omit")
        assert fit.parts == list(frame.columns)
        np.testing.assert_array_equal(fit.rows_used, ref.rows_used)
        assert not fit.rows_used[[5, 4_100]].any()
        np.testing.assert_allclose(fit.singular_values, ref.singular_values, rtol=1e-12)
        np.testing.assert_allclose(fit.clr_mean, ref.clr_mean, atol=1e-13)
        np.testing.assert_allclose(fit.column_coords, ref.column_coords, atol=1e-12)
        np.testing.assert_allclose(fit.row_coords, ref.row_coords, atol=1e-10)
        np.testing.assert_allclose(fit.row_column(1), ref.row_coords[:, 1], atol=1e-10)
        assert fit.total_variance == pytest.approx(ref.total_variance, rel=1e-12)
    with pytest.raises(core_biplot.CompositionError, match="rows 5, 4100"):
        core_biplot.composition_biplot(X)
