"""Discriminant analysis on ilr coordinates (compwidgets.core.discriminant).

Outside references: scikit-learn's LinearDiscriminantAnalysis and
QuadraticDiscriminantAnalysis fitted directly on clr coordinates and on the
ilr coordinates of another orthonormal basis (rows of scipy.linalg.helmert),
scikit-learn's cross_val_predict and confusion_matrix with the same folds,
sklearn.covariance.MinCovDet, scipy.stats.chi2. The data are invented
(seeded logistic-normal groups).

Why clr and other bases must agree: linear and quadratic discriminant rules
are affine invariant (fitted on y R + c, R invertible, they give the same
posteriors), orthonormal ilr bases differ by a rotation, and clr coordinates
are ilr coordinates with one constant extra direction that the SVD solver
drops (Aitchison 1986, ch. 12; Hastie et al. 2009, 4.3; from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from conftest import valid_sbps
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats
from scipy.linalg import helmert
from sklearn.covariance import MinCovDet
from sklearn.discriminant_analysis import (
    LinearDiscriminantAnalysis,
    QuadraticDiscriminantAnalysis,
)
from sklearn.metrics import confusion_matrix
from sklearn.model_selection import StratifiedKFold, cross_val_predict

from compwidgets import core
from compwidgets.core import CompositionError
from compwidgets.core import discriminant as cd
from compwidgets.core.outliers import robust_distances

GROUPS = ["north", "south", "west"]


def invented_groups(n_per=(60, 45, 50), D=5, seed=0, spread=0.35):
    """Logistic-normal groups of D parts with shifted centres and shared correlation."""
    rng = np.random.default_rng(seed)
    mix = rng.normal(size=(D, D)) * spread
    X, labels = [], []
    for k, n in enumerate(n_per):
        centre = rng.normal(size=D) * 0.8
        X.append(np.exp(centre + rng.normal(size=(n, D)) @ mix))
        labels += [GROUPS[k % len(GROUPS)] if k < len(GROUPS) else f"g{k}"] * n
    return np.vstack(X), np.array(labels, dtype=object)


def clr_of(X):
    L = np.log(X)
    return L - L.mean(axis=1, keepdims=True)


def codes_of(labels, classes):
    return np.array([classes.index(v) for v in labels])


@pytest.mark.parametrize("priors", ["proportional", "equal"])
def test_linear_rule_equals_sklearn_on_clr_and_on_another_basis(priors):
    X, labels = invented_groups()
    fit = cd.fit_discriminant(X, labels, priors=priors)
    assert fit.classes == GROUPS
    y = codes_of(labels, fit.classes)
    Y = fit.coordinates(X)
    prior = np.bincount(y) / y.size if priors == "proportional" else np.full(3, 1 / 3)
    np.testing.assert_allclose(fit.priors, prior)
    # Source: scikit-learn LDA fitted on clr coordinates (rank D-1; SVD solver)
    ref = LinearDiscriminantAnalysis(solver="svd", priors=prior).fit(clr_of(X), y)
    np.testing.assert_allclose(fit.posteriors(Y), ref.predict_proba(clr_of(X)), atol=1e-9)
    np.testing.assert_array_equal(fit.predict(Y), ref.predict(clr_of(X)))
    # Source: scikit-learn LDA on the ilr coordinates of another orthonormal basis
    H = helmert(X.shape[1])
    ref_h = LinearDiscriminantAnalysis(priors=prior).fit(clr_of(X) @ H.T, y)
    np.testing.assert_allclose(fit.posteriors(Y), ref_h.predict_proba(clr_of(X) @ H.T), atol=1e-9)
    # ... and our own fit in that basis
    fit_h = cd.fit_discriminant(X, labels, priors=priors, basis=H)
    np.testing.assert_allclose(
        fit_h.posteriors(fit_h.coordinates(X)), fit.posteriors(Y), atol=1e-9
    )
    # the scores give the posteriors: softmax (scikit-learn's predict_proba)
    S = fit.scores(Y)
    soft = np.exp(S - S.max(axis=1, keepdims=True))
    np.testing.assert_allclose(
        soft / soft.sum(axis=1, keepdims=True), fit.posteriors(Y), atol=1e-9
    )


def test_quadratic_rule_equals_sklearn_on_another_basis():
    X, labels = invented_groups(n_per=(80, 70, 90))
    fit = cd.fit_discriminant(X, labels, kind="quadratic")
    y = codes_of(labels, fit.classes)
    H = helmert(X.shape[1])
    # Source: scikit-learn QDA on the ilr coordinates of another basis (affine invariance)
    ref = QuadraticDiscriminantAnalysis(priors=fit.priors).fit(clr_of(X) @ H.T, y)
    Y = fit.coordinates(X)
    np.testing.assert_allclose(fit.posteriors(Y), ref.predict_proba(clr_of(X) @ H.T), atol=1e-8)
    S = fit.scores(Y)  # our quadratic scores: the same log posteriors up to a row constant
    diff = S - np.log(ref.predict_proba(clr_of(X) @ H.T))
    np.testing.assert_allclose(diff - diff[:, :1], 0, atol=1e-6)


def test_quadratic_rule_of_tight_groups_is_fitted():
    # groups of compositions that vary by a few per cent: covariance eigenvalues of the
    # ilr coordinates near 1e-5, a regular (non-singular) covariance all the same
    X, labels = invented_groups(n_per=(80, 70, 90), spread=0.004)
    fit = cd.fit_discriminant(X, labels, kind="quadratic")
    y = codes_of(labels, fit.classes)
    H = helmert(X.shape[1])
    Z = clr_of(X) @ H.T
    assert np.linalg.eigvalsh(np.cov(Z[y == 0].T)).min() < 1e-4
    # Source: scikit-learn QDA with its absolute rank threshold switched off (tol=0)
    ref = QuadraticDiscriminantAnalysis(priors=fit.priors, tol=0.0).fit(Z, y)
    np.testing.assert_allclose(fit.posteriors(fit.coordinates(X)), ref.predict_proba(Z), atol=1e-8)


def test_two_groups_scores_and_plane():
    X, labels = invented_groups(n_per=(50, 60))
    fit = cd.fit_discriminant(X, labels)
    Y = fit.coordinates(X)
    assert fit.n_axes == 1 and fit.second_direction is not None
    S = fit.scores(Y)
    ref = LinearDiscriminantAnalysis(priors=fit.priors).fit(
        clr_of(X), codes_of(labels, fit.classes)
    )
    # Source: scikit-learn's decision function is the score difference of the two groups
    np.testing.assert_allclose(S[:, 1] - S[:, 0], ref.decision_function(clr_of(X)), atol=1e-8)
    P = fit.plane_coordinates(Y)
    assert P.shape == (X.shape[0], 2)
    # the second coordinate measures a direction orthogonal to the discriminant one
    u = np.asarray(fit.axes.scalings_)[:, 0]
    assert abs(u @ fit.second_direction) < 1e-10 * np.linalg.norm(u)


def test_clr_loadings_are_log_contrasts_independent_of_the_basis():
    X, labels = invented_groups()
    fit = cd.fit_discriminant(X, labels)
    L = fit.clr_loadings
    assert L.shape == (5, 2)
    np.testing.assert_allclose(L.sum(axis=0), 0, atol=1e-12)
    np.testing.assert_allclose(np.linalg.norm(L, axis=0), 1)
    assert all(L[np.argmax(np.abs(L[:, j])), j] > 0 for j in range(2))
    fit_h = cd.fit_discriminant(X, labels, basis=helmert(5))
    np.testing.assert_allclose(fit_h.clr_loadings, L, atol=1e-9)
    # Source: scikit-learn LDA on clr: its scalings, less the constant direction (which
    # scores every composition alike), normalised and oriented, are the same directions
    y = codes_of(labels, fit.classes)
    ref = LinearDiscriminantAnalysis(priors=fit.priors).fit(clr_of(X), y)
    R = np.asarray(ref.scalings_)[:, :2]
    R = R - R.mean(axis=0)
    R = R / np.linalg.norm(R, axis=0)
    R = R * np.sign(R[np.argmax(np.abs(R), axis=0), [0, 1]])
    np.testing.assert_allclose(R, L, atol=1e-8)
    np.testing.assert_allclose(fit.explained_ratio, ref.explained_variance_ratio_[:2], atol=1e-10)
    plus, minus = fit.top_parts(0, 2)
    assert plus[0] == fit.parts[int(np.argmax(L[:, 0]))]
    assert minus[0] == fit.parts[int(np.argmin(L[:, 0]))]
    # the axis coordinates are the scores of those log-contrasts (up to scale and shift)
    Z = fit.axis_coordinates(fit.coordinates(X))
    contrast = np.log(X) @ L[:, 0]
    assert abs(np.corrcoef(Z[:, 0], contrast)[0, 1]) > 1 - 1e-10


def test_cross_validation_equals_sklearn_cross_val_predict_with_the_same_folds():
    X, labels = invented_groups(n_per=(40, 35, 30), spread=0.7, seed=4)  # overlapping groups
    fit = cd.fit_discriminant(X, labels)
    y = codes_of(labels, fit.classes)
    cv = cd.cross_validate(fit, fit.coordinates(X), y, n_splits=5, seed=3)
    # Source: scikit-learn cross_val_predict with StratifiedKFold(5, shuffle, seed 3),
    # LDA on clr coordinates, and sklearn.metrics.confusion_matrix
    folds = StratifiedKFold(n_splits=5, shuffle=True, random_state=3)
    ref = LinearDiscriminantAnalysis(priors=fit.priors)
    predicted = cross_val_predict(ref, clr_of(X), y, cv=folds)
    np.testing.assert_array_equal(cv.predicted, predicted)
    np.testing.assert_array_equal(cv.confusion, confusion_matrix(y, predicted))
    assert cv.confusion.sum() == X.shape[0] and np.trace(cv.confusion) < X.shape[0]
    assert cv.accuracy == pytest.approx(np.mean(predicted == y))
    cell = cv.cell_rows(0, 1)
    np.testing.assert_array_equal(cell, np.flatnonzero((y == 0) & (predicted == 1)))


def test_stratified_sample_keeps_group_shares():
    codes = np.repeat([0, 1, 2, -1], [600, 300, 100, 50])
    rows = cd.stratified_rows(codes, 100, seed=1, minimum=5)
    assert np.all(np.diff(rows) > 0) and np.all(codes[rows] >= 0)
    np.testing.assert_array_equal(np.bincount(codes[rows]), [60, 30, 10])
    np.testing.assert_array_equal(rows, cd.stratified_rows(codes, 100, seed=1, minimum=5))
    assert not np.array_equal(rows, cd.stratified_rows(codes, 100, seed=2, minimum=5))
    np.testing.assert_array_equal(
        np.bincount(codes[cd.stratified_rows(codes, 50, 0, 8)]), [30, 15, 8]
    )
    np.testing.assert_array_equal(cd.stratified_rows(codes, None), np.flatnonzero(codes >= 0))


def test_fit_on_a_sample_uses_the_stated_rows_and_all_rows_for_priors():
    X, labels = invented_groups(n_per=(300, 200, 100))
    fit = cd.fit_discriminant(X, labels, max_rows=120, seed=5)
    np.testing.assert_array_equal(fit.n_train, [60, 40, 20])
    np.testing.assert_array_equal(fit.n_available, [300, 200, 100])
    np.testing.assert_allclose(fit.priors, [0.5, 1 / 3, 1 / 6])
    y = codes_of(labels, fit.classes)
    rows = cd.stratified_rows(y, 120, 5, fit.min_group_rows)
    np.testing.assert_array_equal(fit.fit_rows, rows)
    ref = LinearDiscriminantAnalysis(priors=fit.priors).fit(clr_of(X)[rows], y[rows])
    np.testing.assert_allclose(
        fit.posteriors(fit.coordinates(X)), ref.predict_proba(clr_of(X)), atol=1e-9
    )


@pytest.mark.parametrize("kind", cd.KINDS)
def test_boundaries_have_equal_scores_and_split_the_assignments(kind):
    X, labels = invented_groups(n_per=(70, 60, 80), D=3, seed=2, spread=0.5)
    fit = cd.fit_discriminant(X, labels, kind=kind)
    y = codes_of(labels, fit.classes)
    ref = (LinearDiscriminantAnalysis if kind == "linear" else QuadraticDiscriminantAnalysis)(
        priors=fit.priors
    ).fit(clr_of(X) @ fit.basis.T, y)
    pieces = cd.decision_boundaries(fit)
    # every change of assignment between neighbours of a grid over the triangle (all
    # shares >= 0.2 %, predictions of scikit-learn) lies within a grid step of a piece
    # of the boundary between those two groups
    step = 0.05
    u, v = np.meshgrid(np.arange(-7, 7, step), np.arange(-7, 7, step))
    grid = np.column_stack([u.ravel(), v.ravel()])
    inside = np.asarray(core.ilr_inv(grid, fit.basis)).min(axis=1) >= 2e-3
    label = np.where(inside, ref.predict(grid), -1).reshape(u.shape)
    change = (label[:, 1:] != label[:, :-1]) & (label[:, 1:] >= 0) & (label[:, :-1] >= 0)
    i, j = np.nonzero(change)
    found = set()
    for a, b_ in zip(i, j, strict=True):
        pair = tuple(sorted((label[a, b_], label[a, b_ + 1])))
        mid = np.array([u[a, b_] + step / 2, v[a, b_]])
        near = [
            np.min(np.linalg.norm(piece.ilr - mid, axis=1))
            for piece in pieces
            if piece.codes == pair
        ]
        assert near and min(near) < 2 * step, (pair, mid)
        found.add(pair)
    assert found == {b.codes for b in pieces} and len(found) >= 2
    for b in pieces:
        k, l = b.codes
        assert b.groups == (fit.classes[k], fit.classes[l])
        assert b.curve.shape == (200, 3) and np.all(b.curve >= 1e-3 * (1 - 1e-9))
        np.testing.assert_allclose(b.curve.sum(axis=1), 1)
        Y = np.asarray(core.ilr(b.curve, fit.basis))
        np.testing.assert_allclose(Y, b.ilr, atol=1e-9)
        # Source: scikit-learn's log posteriors of the two groups are equal along it ...
        logp = ref.predict_log_proba(Y)
        np.testing.assert_allclose(logp[:, k], logp[:, l], atol=1e-9)
        # ... and no third group is more probable there
        others = np.delete(logp, [k, l], axis=1)
        assert np.all(others <= logp[:, [k]] + 1e-9)
        # stepping off the curve to either side, one of the two groups is assigned
        g = np.gradient(Y, axis=0)
        normal = np.column_stack([-g[:, 1], g[:, 0]])
        normal /= np.linalg.norm(normal, axis=1, keepdims=True)
        inner = slice(5, -5)
        sides = [ref.predict(Y[inner] + s * 1e-4 * normal[inner]) for s in (-1, 1)]
        assert set(np.unique(np.concatenate(sides))) <= {k, l}
        assert np.all(sides[0] != sides[1])
        if kind == "linear":  # a straight line in ilr coordinates
            centred = Y - Y.mean(axis=0)
            assert np.linalg.svd(centred, compute_uv=False)[1] < 1e-9


def test_boundaries_need_three_parts():
    X, labels = invented_groups()
    with pytest.raises(CompositionError, match="3 parts"):
        cd.decision_boundaries(cd.fit_discriminant(X, labels))


def test_group_distances_are_mcd_distances_with_a_prediction_cutoff():
    X, labels = invented_groups(n_per=(120, 100, 110), spread=0.3)
    fit = cd.fit_discriminant(X, labels)
    Y = fit.coordinates(X)
    y = codes_of(labels, fit.classes)
    gd = cd.fit_group_distances(fit, Y, y, quantile=0.999, seed=0)
    p = 4
    for k, n in zip(range(3), (120, 100, 110), strict=True):
        assert gd.fitted_rows[k] == n
        # Source: Johnson & Wichern, Applied Multivariate Statistical Analysis, ch. 5, the
        # prediction region of a new observation, (m - 1) p (m + 1) / (m (m - p)) F(p, m - p),
        # with m = (n + p + 1) // 2, the MCD subset size (sklearn MinCovDet's default);
        # quantiles from scipy.stats.f
        m = (n + p + 1) // 2
        expected = np.sqrt((m - 1) * p * (m + 1) / (m * (m - p)) * stats.f.ppf(0.999, p, m - p))
        assert gd.cutoffs[k] == pytest.approx(expected, rel=1e-12)
        assert gd.cutoffs[k] > np.sqrt(stats.chi2.ppf(0.999, p))  # wider than the chi-square
    # Source: sklearn.covariance.MinCovDet on each group's rows (same seed)
    d = gd.distances(Y)
    for k in range(3):
        mcd = MinCovDet(random_state=0).fit(Y[y == k])
        np.testing.assert_allclose(d[:, k], np.sqrt(mcd.mahalanobis(Y)), rtol=1e-8)
    far = gd.far(Y)
    np.testing.assert_array_equal(far, (d > gd.cutoff_row()).all(axis=1))
    np.testing.assert_array_equal(gd.far(Y, distances=d), far)
    assert far.mean() < 0.05  # training rows are mostly near their group
    far_away = Y.mean(axis=0) + 30 * Y.std(axis=0)
    assert gd.far(far_away[None, :])[0]


@pytest.mark.parametrize(("p", "n"), [(5, 100), (20, 500), (49, 500)])
def test_far_flag_rate_on_new_members_is_near_its_nominal_level(p, n):
    # Seeded simulation: new samples from the same normal population as the training group.
    # The cut-off promises P(far | member) close to 1 - quantile = 0.001. The chi-square
    # cut-off with estimates treated as known gave about 0.08 at p = 49, n = 500 (seen while
    # writing this test); the bound below (5x nominal over 3 groups x 4,000 draws, i.e. a
    # binomial standard error of about 0.0003 at the nominal rate) fails for it.
    rng = np.random.default_rng(20261202 + p)
    quantile = 0.999
    rates = []
    for _ in range(3):
        A = rng.normal(size=(p, p))
        cov = A @ A.T + p * np.eye(p)
        L = np.linalg.cholesky(cov)
        train = rng.normal(size=(n, p)) @ L.T
        new = rng.normal(size=(4000, p)) @ L.T
        r = robust_distances(train, quantile=quantile, random_state=0)
        d = new - r.location
        d2 = np.einsum("ij,jk,ik->i", d, np.linalg.inv(r.covariance), d)
        cut = cd.mcd_prediction_cutoff(n, p, quantile)
        rates.append(float((d2 > cut**2).mean()))
    rate = float(np.mean(rates))
    assert rate <= 5 * (1 - quantile), rates
    # and not so wide that it never flags: at least a tenth of the nominal rate
    assert rate >= 0.1 * (1 - quantile), rates


def test_mcd_prediction_cutoff_refuses_too_few_rows():
    with pytest.raises(CompositionError, match="more fitted rows than coordinates"):
        cd.mcd_prediction_cutoff(5, 5, 0.999)
    with pytest.raises(CompositionError, match="quantile"):
        cd.mcd_prediction_cutoff(50, 5, 1.0)


def test_small_groups_are_left_out_and_named():
    X, labels = invented_groups(n_per=(40, 30, 3))
    fit = cd.fit_discriminant(X, labels)
    assert fit.classes == ["north", "south"] and fit.left_out == {"west": 3}
    with pytest.raises(CompositionError, match="at least two groups"):
        cd.fit_discriminant(X[:43], labels[:43])
    with pytest.raises(CompositionError, match="unknown discriminant"):
        cd.fit_discriminant(X, labels, kind="cubic")
    with pytest.raises(CompositionError, match="priors"):
        cd.fit_discriminant(X, labels, priors="flat")
    # quadratic: a group needs enough rows for its covariance in every training fold
    assert cd.default_min_group_rows("quadratic", 4, 5) == 8
    fitq = cd.fit_discriminant(X, labels, kind="quadratic")
    assert fitq.left_out == {"west": 3}


def test_rows_without_a_group_take_no_part():
    X, labels = invented_groups()
    with_none = labels.copy()
    with_none[:10] = None
    fit = cd.fit_discriminant(X, with_none)
    ref = cd.fit_discriminant(X[10:], labels[10:])
    np.testing.assert_allclose(
        fit.posteriors(fit.coordinates(X)), ref.posteriors(ref.coordinates(X)), atol=1e-12
    )
    assert fit.n_available.sum() == X.shape[0] - 10
    # labels not among the classes given take no part either
    two = cd.fit_discriminant(X, labels, classes=["south", "north"])
    assert two.classes == ["south", "north"]
    np.testing.assert_array_equal(
        two.n_available, [(labels == "south").sum(), (labels == "north").sum()]
    )


# ------------------------------------------------------------- geometric invariants
INVARIANCE = settings(max_examples=25, deadline=None)


@INVARIANCE
@given(data=st.data(), seed=st.integers(0, 10_000), D=st.integers(3, 6))
def test_posteriors_do_not_depend_on_the_sbp_basis(data, seed, D):
    # The balance basis of any SBP is orthonormal (Egozcue & Pawlowsky-Glahn 2005), and the
    # rules are affine invariant: the same posteriors and clr loadings in every such basis.
    X, labels = invented_groups(n_per=(30, 25, 35), D=D, seed=seed)
    sbp = data.draw(valid_sbps(D))
    kind = data.draw(st.sampled_from(cd.KINDS))
    base = cd.fit_discriminant(X, labels, kind=kind)
    other = cd.fit_discriminant(X, labels, kind=kind, basis=core.sbp_basis(sbp))
    np.testing.assert_allclose(
        other.posteriors(other.coordinates(X)), base.posteriors(base.coordinates(X)), atol=1e-7
    )
    np.testing.assert_allclose(other.clr_loadings, base.clr_loadings, atol=1e-6)


@INVARIANCE
@given(seed=st.integers(0, 10_000), shift=st.lists(st.floats(-3, 3), min_size=4, max_size=4))
def test_perturbing_every_composition_moves_the_rule_with_them(seed, shift):
    # Perturbation by a fixed composition p translates the ilr coordinates (Aitchison
    # geometry): a rule fitted on the perturbed data assigns x (+) p as the first assigns x.
    X, labels = invented_groups(n_per=(30, 25, 35), D=4, seed=seed)
    p = np.exp(np.asarray(shift))
    moved = np.asarray(core.perturb(X, p))
    fit = cd.fit_discriminant(X, labels)
    fit_moved = cd.fit_discriminant(moved, labels)
    np.testing.assert_allclose(
        fit_moved.posteriors(fit_moved.coordinates(moved)),
        fit.posteriors(fit.coordinates(X)),
        atol=1e-7,
    )
