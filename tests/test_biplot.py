"""Checks of compwidgets.core.biplot against sources outside the project.

Sources named at each check: scikit-learn's ``PCA`` (an independent SVD-based
principal component analysis), numpy (standard deviations, correlations),
scipy (``pdist``), and the definitions of Aitchison & Greenacre (2002,
"Biplots of compositional data", JRSS C 51): form biplot rows ``U S`` with
columns ``V``, covariance biplot rows ``sqrt(n-1) U`` with columns
``V S / sqrt(n-1)`` (definitions quoted from memory; each identity used is
also checked numerically against numpy/scipy/scikit-learn here). The
compositions are random, invented for these tests.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from conftest import compositions, positive_compositions
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from scipy.spatial.distance import pdist, squareform
from sklearn.decomposition import PCA

import compwidgets.core as core
from compwidgets.core import CompositionError
from compwidgets.core.biplot import (
    Biplot,
    clr_biplot,
    link_length,
    logratio_sd,
    nice_factor,
    ray_associations,
    ray_display_factor,
)

TOL = {"rtol": 1e-8, "atol": 1e-9}

#: Property tests here run an SVD per example: keep the count modest.
BIPLOT_SETTINGS = settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow]
)


def random_composition(n: int = 40, D: int = 6, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return np.exp(rng.normal(scale=[0.3, 0.6, 0.9, 1.2, 0.5, 0.8][:D], size=(n, D)))


def well_separated(s: np.ndarray, rtol: float = 1e-3) -> bool:
    """Distinct, non-zero singular values: every component direction is defined up to sign."""
    s = np.asarray(s)
    if s.size == 0 or s[-1] <= rtol * s[0]:
        return False
    return bool(np.all(np.diff(s) < -rtol * s[0]))


# ------------------------------------------------------------------ scikit-learn PCA


@pytest.mark.parametrize("scaling", ["covariance", "form"])
def test_matches_sklearn_pca(scaling):
    # Source: sklearn.decomposition.PCA on the same clr data. The biplot of
    # Aitchison & Greenacre (2002) is the PCA of column-centred clr coordinates.
    Z = core.clr(random_composition())
    b = clr_biplot(Z, scaling)
    pca = PCA().fit(Z)
    r = b.n_components
    assert r == Z.shape[1] - 1  # the clr covariance has rank D-1
    np.testing.assert_allclose(b.explained_ratio, pca.explained_variance_ratio_[:r], **TOL)
    # sklearn's explained_variance_ uses divisor n - 1, like compwidgets (ddof = 1).
    np.testing.assert_allclose(b.explained_variance, pca.explained_variance_[:r], **TOL)
    np.testing.assert_allclose(b.singular_values, pca.singular_values_[:r], **TOL)
    # Directions equal up to sign, component by component.
    for c in range(r):
        v, w = b.right_vectors[:, c], pca.components_[c]
        sign = np.sign(v @ w)
        assert sign != 0
        np.testing.assert_allclose(v, sign * w, **TOL)
        # Row scores of sklearn are U S: our form-biplot rows (up to the same sign).
        scores = pca.transform(Z)[:, c]
        form_rows = b.with_scaling("form").row_coords[:, c]
        np.testing.assert_allclose(form_rows, sign * scores, **TOL)


@BIPLOT_SETTINGS
@given(positive_compositions(min_parts=3, max_parts=7, min_rows=3, max_rows=25))
def test_property_matches_sklearn_pca(X):
    # Source: sklearn.decomposition.PCA (full SVD solver) on the same clr data.
    Z = core.clr(X)
    assume(np.ptp(Z, axis=0).max() > 1e-6)  # some variation
    b = clr_biplot(Z)
    pca = PCA(svd_solver="full").fit(Z)
    r = b.n_components
    assume(well_separated(b.singular_values))
    np.testing.assert_allclose(
        b.explained_ratio, pca.explained_variance_ratio_[:r], rtol=1e-7, atol=1e-9
    )
    dots = np.abs(np.sum(b.right_vectors * pca.components_[:r].T, axis=0))
    np.testing.assert_allclose(dots, 1.0, atol=1e-6)


# ------------------------------------------------- covariance biplot: sds and links


@BIPLOT_SETTINGS
@given(positive_compositions(min_parts=2, max_parts=8, min_rows=2, max_rows=30))
def test_property_covariance_rays_and_links(X):
    Z = core.clr(X)
    assume(np.ptp(Z, axis=0).max() > 1e-6)  # some variation
    b = clr_biplot(Z, "covariance")
    # Source: numpy std (ddof=1). Ray length over all components = sd of that clr coordinate.
    lengths = np.sqrt(np.sum(b.column_coords**2, axis=1))
    np.testing.assert_allclose(lengths, np.std(Z, axis=0, ddof=1), rtol=1e-7, atol=1e-9)
    # Source: variation matrix T_ij = var(ln(x_i/x_j)) (Aitchison 1986), cross-checked in
    # test_variation_matrix_matches_numpy_logratio_variance below with numpy directly.
    T = core.variation_matrix(X)
    tips = squareform(pdist(b.column_coords))
    np.testing.assert_allclose(tips, np.sqrt(T), rtol=1e-7, atol=1e-7)
    D = X.shape[1]
    for i in range(D):
        for j in range(D):
            assert link_length(b, i, j) == pytest.approx(np.sqrt(T[i, j]), rel=1e-7, abs=1e-7)


def test_variation_matrix_matches_numpy_logratio_variance():
    # Source: numpy var (ddof=1) of ln(x_i / x_j), the definition of the variation matrix.
    X = random_composition()
    T = core.variation_matrix(X)
    i, j = 1, 3
    assert T[i, j] == pytest.approx(np.var(np.log(X[:, i] / X[:, j]), ddof=1), rel=1e-12)
    b = clr_biplot(core.clr(X))
    expected = np.std(np.log(X[:, i] / X[:, j]), ddof=1)
    assert link_length(b, i, j) == pytest.approx(expected, rel=1e-10)


def test_covariance_cosines_are_clr_correlations():
    # Source: numpy corrcoef. In a covariance biplot with every component, the cosine
    # between two rays is the correlation of the two clr coordinates (Aitchison &
    # Greenacre 2002, from Z_c^T Z_c / (n-1) = G G^T with G the column coordinates).
    X = random_composition(n=50, D=5, seed=3)
    Z = core.clr(X)
    b = clr_biplot(Z)
    R = np.corrcoef(Z, rowvar=False)
    for i, part in enumerate(b.parts):
        assoc = ray_associations(b, part, components=None)
        for other, cos in assoc.items():
            assert cos == pytest.approx(R[i, b.parts.index(other)], abs=1e-10)
        assert list(assoc.values) == sorted(assoc.values, reverse=True)


def test_reconstruction_both_scalings():
    # Source: the definition of the biplot, rows @ columns^T = centred clr (numpy).
    Z = core.clr(random_composition(n=20, D=4))
    Zc = Z - Z.mean(axis=0)
    for scaling in ("covariance", "form"):
        b = clr_biplot(Z, scaling)
        np.testing.assert_allclose(b.row_coords @ b.column_coords.T, Zc, **TOL)


# ------------------------------------------------ form biplot: Aitchison distances


@BIPLOT_SETTINGS
@given(positive_compositions(min_parts=2, max_parts=8, min_rows=2, max_rows=30))
def test_property_form_rows_keep_aitchison_distances(X):
    Z = core.clr(X)
    assume(np.ptp(Z, axis=0).max() > 1e-6)
    b = clr_biplot(Z, "form")
    # Source: scipy.spatial.distance.pdist (Euclidean) on clr = Aitchison distance.
    d_biplot = pdist(b.row_coords)
    np.testing.assert_allclose(d_biplot, pdist(Z), rtol=1e-7, atol=1e-7)
    # And core.aitchison_distance of the first row against every row.
    d0 = core.aitchison_distance(X, X[0])
    np.testing.assert_allclose(
        np.sqrt(np.sum((b.row_coords - b.row_coords[0]) ** 2, axis=1)), d0, atol=1e-7
    )


def test_form_columns_orthonormal_and_covariance_rows_unit_variance():
    # Source: the definitions (Aitchison & Greenacre 2002): V^T V = I, and the covariance
    # biplot's row coordinates sqrt(n-1) U have variance 1 per component (numpy var ddof=1).
    Z = core.clr(random_composition())
    form = clr_biplot(Z, "form")
    np.testing.assert_allclose(form.column_coords.T @ form.column_coords, np.eye(5), atol=1e-10)
    cov = clr_biplot(Z, "covariance")
    np.testing.assert_allclose(np.var(cov.row_coords, axis=0, ddof=1), 1.0, rtol=1e-10)
    # The parts' loadings are contrasts (sum to zero): clr columns sum to zero.
    np.testing.assert_allclose(form.column_coords.sum(axis=0), 0.0, atol=1e-12)


def test_total_variance_and_ratios():
    # Source: core.total_variance cross-checked against numpy var (ddof=1) of clr columns.
    X = random_composition()
    Z = core.clr(X)
    b = clr_biplot(Z)
    assert b.total_variance == pytest.approx(np.var(Z, axis=0, ddof=1).sum(), rel=1e-12)
    assert b.total_variance == pytest.approx(core.total_variance(X), rel=1e-12)
    assert b.explained_ratio.sum() == pytest.approx(1.0, abs=1e-12)
    assert np.all(np.diff(b.singular_values) <= 0)


# ------------------------------------------------------------------ sign convention


def test_sign_convention_largest_loading_positive():
    X = random_composition(seed=5)
    b = clr_biplot(core.clr(X))
    V = b.right_vectors
    top = V[np.argmax(np.abs(V), axis=0), np.arange(V.shape[1])]
    assert np.all(top > 0)
    # Deterministic and independent of the row order.
    perm = np.random.default_rng(0).permutation(X.shape[0])
    b2 = clr_biplot(core.clr(X[perm]))
    np.testing.assert_allclose(b2.right_vectors, V, **TOL)
    np.testing.assert_allclose(b2.row_coords, b.row_coords[perm], **TOL)


def test_sign_tie_broken_by_first_part():
    # Two parts: the only component loads +-1/sqrt(2) (equal |loading|); the first part
    # decides, so it is positive.
    X = np.array([[1.0, 2.0], [3.0, 1.0], [2.0, 2.0], [1.0, 5.0]])
    b = clr_biplot(core.clr(X))
    assert b.n_components == 1
    np.testing.assert_allclose(b.right_vectors[:, 0], [2**-0.5, -(2**-0.5)], atol=1e-12)


def test_with_scaling_equals_fresh_fit():
    Z = core.clr(random_composition())
    for a, c in [("covariance", "form"), ("form", "covariance")]:
        switched = clr_biplot(Z, a).with_scaling(c)
        fresh = clr_biplot(Z, c)
        assert switched.scaling == c
        np.testing.assert_allclose(switched.row_coords, fresh.row_coords, **TOL)
        np.testing.assert_allclose(switched.column_coords, fresh.column_coords, **TOL)
    b = clr_biplot(Z)
    assert b.with_scaling("covariance") is b


# ----------------------------------------------------------- names, options, missing


def test_part_names_from_clr_columns_and_dataframe_rows():
    df = pd.DataFrame(random_composition(n=10, D=3), columns=["A", "B", "C"])
    b = clr_biplot(core.clr(df))
    assert b.parts == ["A", "B", "C"]
    assert clr_biplot(core.clr(df), parts=["p", "q", "r"]).parts == ["p", "q", "r"]
    assert clr_biplot(core.clr(df.to_numpy())).parts == ["x1", "x2", "x3"]


def test_n_components_keeps_leading_row_columns_only():
    Z = core.clr(random_composition())
    full = clr_biplot(Z)
    two = clr_biplot(Z, n_components=2)
    assert two.row_coords.shape == (Z.shape[0], 2)
    assert two.column_coords.shape == full.column_coords.shape
    np.testing.assert_allclose(two.row_coords, full.row_coords[:, :2], **TOL)
    np.testing.assert_allclose(
        two.with_scaling("form").row_coords, full.with_scaling("form").row_coords[:, :2], **TOL
    )


def test_missing_omit_keeps_every_row_and_counts_them():
    X = random_composition(n=25, D=4)
    Z = core.clr(X)
    Zn = Z.copy()
    Zn[[3, 17]] = np.nan
    before = Zn.copy()
    b = clr_biplot(Zn, missing="omit")
    np.testing.assert_array_equal(Zn, before)  # the caller's array is not changed
    assert b.row_coords.shape[0] == 25
    assert b.n_rows_left_out == 2 and b.n_rows_used == 23
    assert np.isnan(b.row_coords[[3, 17]]).all()
    ref = clr_biplot(np.delete(Z, [3, 17], axis=0))
    np.testing.assert_allclose(np.delete(b.row_coords, [3, 17], axis=0), ref.row_coords, **TOL)
    with pytest.raises(CompositionError, match=r"rows 3, 17.*missing='omit'"):
        clr_biplot(Zn)


@pytest.mark.parametrize(
    ("make", "message"),
    [
        (lambda Z: np.where(np.arange(Z.size).reshape(Z.shape) == 7, np.inf, Z), "infinite"),
        (lambda Z: np.log(random_composition(n=10, D=4)), "do not sum to zero"),
        (lambda Z: Z[:1], "at least 2 complete rows"),
        (lambda Z: np.tile(Z[:1], (5, 1)), "same composition"),
        (lambda Z: Z[:, :1], "at least 2 are needed"),
    ],
)
def test_bad_input_raises_clear_errors(make, message):
    Z = core.clr(random_composition(n=10, D=4))
    with pytest.raises(CompositionError, match=message):
        clr_biplot(make(Z))


def test_bad_options_raise():
    Z = core.clr(random_composition(n=10, D=4))
    with pytest.raises(CompositionError, match="unknown scaling 'pca'"):
        clr_biplot(Z, "pca")
    with pytest.raises(CompositionError, match="n_components must be in 1..3"):
        clr_biplot(Z, n_components=4)
    with pytest.raises(CompositionError, match="3 part names given for 4"):
        clr_biplot(Z, parts=["a", "b", "c"])
    with pytest.raises(CompositionError, match="duplicate part names 'a'"):
        clr_biplot(Z, parts=["a", "a", "b", "c"])
    with pytest.raises(CompositionError, match="missing must be"):
        clr_biplot(Z, missing="drop")
    b = clr_biplot(Z)
    with pytest.raises(CompositionError, match="unknown part 'zz'"):
        link_length(b, "zz", 0)
    with pytest.raises(CompositionError, match="component 3 is not one of 0..2"):
        ray_associations(b, 0, (0, 3))
    with pytest.raises(CompositionError, match="distinct"):
        link_length(b, 0, 1, (1, 1))


def test_error_names_the_row_label():
    df = pd.DataFrame(core.clr(random_composition(n=6, D=3)), index=list("abcdef"))
    df.iloc[2, 1] = np.nan
    with pytest.raises(CompositionError, match=r"rows 'c'"):
        clr_biplot(df)


# ----------------------------------------------------------------- ray associations


def test_ray_associations_in_a_plane_by_hand():
    # Source: cosine of the angle between 2-D vectors, worked with numpy on the plane
    # coordinates (the definition of the angle between two rays).
    X = random_composition(n=60, D=6, seed=11)
    b = clr_biplot(core.clr(X))
    plane = (0, 2)
    G = b.column_coords[:, list(plane)]
    assoc = ray_associations(b, "x4", plane)
    assert "x4" not in assoc.index and len(assoc) == 5
    g = G[3]
    for part, cos in assoc.items():
        h = G[b.parts.index(part)]
        assert cos == pytest.approx(g @ h / np.linalg.norm(g) / np.linalg.norm(h), abs=1e-12)
    assert assoc.is_monotonic_decreasing


def test_ray_associations_zero_length_ray():
    # A part whose clr coordinate is constant (here x3 = geometric mean of x1 and x2 in
    # every row) has a zero ray in the covariance biplot: its sd is 0.
    rng = np.random.default_rng(2)
    a = rng.normal(size=12)
    Z = np.column_stack([a, -a, np.zeros(12)])
    b = clr_biplot(Z)
    with pytest.raises(CompositionError, match="'x3' has zero length"):
        ray_associations(b, "x3", None)
    assoc = ray_associations(b, "x1", None)
    assert assoc.index[-1] == "x3" and np.isnan(assoc["x3"])
    assert assoc["x2"] == pytest.approx(-1.0)


def test_result_type_and_read_only():
    b = clr_biplot(core.clr(random_composition(n=8, D=3)))
    assert isinstance(b, Biplot)
    with pytest.raises(ValueError):
        b.row_coords[0, 0] = 1.0


@settings(max_examples=20, deadline=None)
@given(compositions(12, 4), st.sampled_from(["covariance", "form"]))
def test_property_input_not_mutated(X, scaling):
    Z = core.clr(X)
    assume(np.ptp(Z, axis=0).max() > 1e-6)  # some variation
    copy = Z.copy()
    clr_biplot(Z, scaling)
    np.testing.assert_array_equal(Z, copy)


# ------------------------------------------------------------ log-ratio sd and layout


@pytest.mark.parametrize("scaling", ["covariance", "form"])
def test_logratio_sd_is_numpy_std_in_either_scaling(scaling):
    # Source: numpy std (ddof=1) of ln(x_i / x_j) over the rows used.
    X = random_composition(n=30, D=5, seed=8)
    Z = core.clr(X)
    Z[4] = np.nan  # one row left out: the sd is over the other 29
    b = clr_biplot(Z, scaling, n_components=2, missing="omit")
    keep = np.arange(30) != 4
    for i, j in [(0, 1), (2, 4), (3, 0)]:
        expected = np.std(np.log(X[keep, i] / X[keep, j]), ddof=1)
        assert logratio_sd(b, i, j) == pytest.approx(expected, rel=1e-10)
    assert logratio_sd(b, "x2", "x2") == 0.0


# ---------------------------------------------------------- display scale of the rays


def _norms(a: np.ndarray) -> np.ndarray:
    return np.sqrt(np.sum(np.asarray(a, dtype=float) ** 2, axis=1))


@pytest.mark.parametrize(("components", "share"), [((0, 1), 0.8), ((0, 2), 0.5), ((1, 3), 1.0)])
def test_form_ray_factor_reaches_the_share_of_the_row_cloud(components, share):
    X = random_composition(n=60, D=6, seed=3)
    b = clr_biplot(core.clr(X), "form")
    f = ray_display_factor(b, components, share=share, rounded=False)
    # Source: sklearn PCA on the clr: form rows are the scores U S, form columns the
    # loadings V (components_.T), up to a sign per axis that does not change a norm.
    pca = PCA().fit(core.clr(X))
    rows = pca.transform(core.clr(X))[:, list(components)]
    cols = pca.components_.T[:, list(components)]
    drawn = f * b.column_coords[:, list(components)]
    assert _norms(drawn).max() == pytest.approx(share * _norms(rows).max(), rel=1e-9)
    assert f == pytest.approx(share * _norms(rows).max() / _norms(cols).max(), rel=1e-9)
    assert f > 1  # unit-length loadings are short next to the scores of this cloud


def test_form_ray_factor_is_readable_and_at_most_the_exact_one():
    X = random_composition(n=60, D=6, seed=3)
    b = clr_biplot(core.clr(X), "form")
    exact = ray_display_factor(b, rounded=False)
    f = ray_display_factor(b)
    assert exact / 2 < f <= exact
    mantissa = f / 10 ** np.floor(np.log10(f))
    assert min(abs(mantissa - m) for m in (1.0, 2.0, 2.5, 5.0)) < 1e-9
    # the longest drawn ray: between half the share and the share of the row cloud
    rows, cols = b.row_coords[:, :2], b.column_coords[:, :2]
    longest = _norms(f * cols).max() / _norms(rows).max()
    assert 0.4 < longest <= 0.8 + 1e-12


@pytest.mark.parametrize(
    ("value", "expected"),
    [(10.2, 10.0), (7.0, 5.0), (2.4999, 2.0), (2.5, 2.5), (1000.0, 1000.0), (0.3, 0.25),
     (0.049, 0.025), (0.0051, 0.005), (19.99, 10.0), (4.2e-7, 2.5e-7)],
)  # fmt: skip
def test_nice_factor_by_hand(value, expected):
    assert nice_factor(value) == pytest.approx(expected, rel=1e-12)


def test_nice_factor_rejects_non_positive():
    for bad in (0.0, -1.0, np.nan, np.inf):
        with pytest.raises(CompositionError, match="positive finite"):
            nice_factor(bad)


def test_covariance_rays_keep_true_length_unless_unreadable():
    X = random_composition(n=60, D=6, seed=3)
    b = clr_biplot(core.clr(X), "covariance")
    # numpy: longest ray / largest row distance in the plane (rows: sqrt(n-1) U)
    ratio = _norms(b.column_coords[:, :2]).max() / _norms(b.row_coords[:, :2]).max()
    assert 0.2 <= ratio <= 2.0  # a readable case: the precondition of the next line
    assert ray_display_factor(b) == 1.0
    # The same compositions to the power 0.01 (clr times 0.01): the rows (unit variance)
    # do not move, the rays are 100 times shorter, invisibly short: the factor applies.
    small = clr_biplot(core.clr(X**0.01), "covariance")
    np.testing.assert_allclose(small.column_coords, b.column_coords / 100, rtol=1e-6, atol=1e-12)
    f = ray_display_factor(small)
    assert f == nice_factor(0.8 / (ratio / 100))
    assert f > 10
    # and to the power 30: rays 30 times longer, they would crowd the points; factor < 1
    big = clr_biplot(core.clr(X**30), "covariance")
    f_big = ray_display_factor(big)
    assert f_big < 1
    assert f_big == nice_factor(0.8 / (ratio * 30))
    # forcing the fit: the share holds in covariance scaling too
    exact = ray_display_factor(b, keep_true_length=False, rounded=False)
    assert exact * _norms(b.column_coords[:, :2]).max() == pytest.approx(
        0.8 * _norms(b.row_coords[:, :2]).max(), rel=1e-12
    )


def test_ray_factor_bad_options():
    b = clr_biplot(core.clr(random_composition(n=30, D=5, seed=2)), "form", n_components=2)
    with pytest.raises(CompositionError, match="share must be positive"):
        ray_display_factor(b, share=0.0)
    with pytest.raises(CompositionError, match="beyond the 2 row-coordinate components"):
        ray_display_factor(b, (0, 3))
    with pytest.raises(CompositionError, match="true_length_range"):
        ray_display_factor(b, true_length_range=(2.0, 1.0))
    with pytest.raises(CompositionError, match="component 9 is not one of"):
        ray_display_factor(b, (0, 9))
