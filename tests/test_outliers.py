"""Robust outlier screening (compwidgets.core.outliers) against outside sources.

Sources named at each check: scikit-learn's ``MinCovDet`` (FAST-MCD,
Rousseeuw & Van Driessen 1999) fitted directly on the same ilr coordinates;
scipy's ``chi2.ppf`` and printed chi-square tables for the cut-off; the
definition of the robust Mahalanobis distance and its chi-square cut-off in
Filzmoser & Hron (2008, Math. Geosci. 40); ``scipy.linalg.helmert`` for an
ilr basis built outside the project. All data are random and invented here.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
from conftest import valid_sbps
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy import linalg, stats
from sklearn.covariance import MinCovDet

import compwidgets.core as core
from compwidgets.core import CompositionError
from compwidgets.core.outliers import (
    DEFAULT_QUANTILE,
    MIN_GROUP_FIT_ROWS,
    chi2_cutoff,
    compositional_outliers,
    group_fit_rows,
    robust_distances,
    robust_distances_by_group,
    spatial_median,
)

D = 5


def logistic_normal(n: int = 200, D: int = D, seed: int = 4) -> np.ndarray:
    """Invented compositions: exp of correlated normal log-values (not closed)."""
    rng = np.random.default_rng(seed)
    A = rng.normal(scale=0.4, size=(D, D))
    return np.exp(rng.normal(size=(n, D)) @ A + np.linspace(0, 2, D))


def helmert_ilr(X: np.ndarray) -> np.ndarray:
    """ilr with scipy's Helmert basis: rows orthonormal and summing to zero, so
    ``log(X) @ H.T`` needs no centring (Egozcue et al. 2003)."""
    H = linalg.helmert(X.shape[1])
    return np.log(X) @ H.T


def test_distances_equal_a_direct_mincovdet_fit():
    # Source: sklearn.covariance.MinCovDet on the same ilr coordinates (basis from
    # scipy.linalg.helmert, so the coordinates are built outside the project too),
    # and the Mahalanobis distance written out with numpy from its definition
    # d_i = sqrt((y_i - t)' C^-1 (y_i - t)) (Filzmoser & Hron 2008).
    X = logistic_normal()
    Y = helmert_ilr(X)
    mcd = MinCovDet(random_state=0).fit(Y)
    diff = Y - mcd.location_
    expected = np.sqrt(np.einsum("ij,jk,ik->i", diff, np.linalg.inv(mcd.covariance_), diff))

    direct = robust_distances(Y, random_state=0)
    np.testing.assert_allclose(direct.distances, expected, rtol=1e-9)
    np.testing.assert_allclose(direct.location, mcd.location_, rtol=1e-12)
    np.testing.assert_allclose(direct.covariance, mcd.covariance_, rtol=1e-12)
    np.testing.assert_array_equal(direct.support, mcd.support_)

    comp = compositional_outliers(X, random_state=0)  # core's pivot basis
    np.testing.assert_allclose(comp.distances, expected, rtol=1e-8)


def test_cutoff_is_the_chi_square_quantile():
    # Source: scipy.stats.chi2.ppf; and printed chi-square tables (from memory):
    # the 0.975 quantiles for 1, 2, 3 degrees of freedom are 5.024, 7.378, 9.348.
    for df, table in [(1, 5.024), (2, 7.378), (3, 9.348)]:
        assert chi2_cutoff(df) ** 2 == pytest.approx(table, abs=5e-4)
    for df in (1, 4, 16):
        for q in (0.9, 0.975, 0.999):
            assert chi2_cutoff(df, q) == pytest.approx(np.sqrt(stats.chi2.ppf(q, df)), rel=1e-12)
    X = logistic_normal()
    r = compositional_outliers(X)
    assert r.quantile == DEFAULT_QUANTILE
    # D parts -> D - 1 ilr coordinates -> D - 1 degrees of freedom (Filzmoser & Hron 2008)
    assert r.cutoff == pytest.approx(np.sqrt(stats.chi2.ppf(0.975, D - 1)), rel=1e-12)
    np.testing.assert_array_equal(r.outliers, r.distances > r.cutoff)


def test_cutoff_is_user_settable():
    X = logistic_normal()
    base = compositional_outliers(X)
    strict = compositional_outliers(X, quantile=0.999)
    assert strict.cutoff == pytest.approx(np.sqrt(stats.chi2.ppf(0.999, D - 1)))
    np.testing.assert_allclose(strict.distances, base.distances)  # only the cut-off moves
    assert strict.n_outliers <= base.n_outliers
    fixed = compositional_outliers(X, cutoff=2.0)
    assert fixed.quantile is None and fixed.cutoff == 2.0
    np.testing.assert_array_equal(fixed.outliers, base.distances > 2.0)


def test_planted_outliers_are_found():
    # Invented data: 290 logistic-normal rows plus 10 rows with one part raised
    # 60-fold (a contaminated-looking sample). Under normality about 2.5 % of clean
    # rows exceed the 0.975 cut-off; allow up to 6 % before calling it a failure.
    X = logistic_normal(n=300, seed=11)
    planted = np.arange(0, 300, 30)
    X[planted, 2] *= 60.0
    r = compositional_outliers(X)
    assert r.outliers[planted].all()
    clean = np.setdiff1d(np.arange(300), planted)
    assert r.outliers[clean].sum() <= 0.06 * clean.size
    assert not r.support[planted].any()  # the planted rows do not shape the estimate


@settings(max_examples=15, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(sbp=valid_sbps(D))
def test_distances_do_not_depend_on_the_ilr_basis(sbp):
    # Published fact: the MCD is affine equivariant, so robust Mahalanobis
    # distances are the same in every orthonormal ilr basis (Filzmoser & Hron 2008).
    X = logistic_normal(n=120, seed=2)
    default = compositional_outliers(X)
    other = compositional_outliers(X, basis=core.sbp_basis(sbp))
    np.testing.assert_allclose(other.distances, default.distances, rtol=1e-7)
    np.testing.assert_array_equal(other.outliers, default.outliers)


def test_distances_ignore_closure_and_part_order():
    # Facts of the trade (scale invariance of log-ratios; a permutation of parts is an
    # orthogonal change of ilr basis): neither changes the distances.
    X = logistic_normal(n=150, seed=5)
    r = compositional_outliers(X)
    scaled = X * np.random.default_rng(0).uniform(0.1, 50, size=(150, 1))
    np.testing.assert_allclose(compositional_outliers(scaled).distances, r.distances, rtol=1e-7)
    perm = [3, 0, 4, 1, 2]
    np.testing.assert_allclose(
        compositional_outliers(X[:, perm]).distances, r.distances, rtol=1e-7
    )


def test_fit_on_a_sample_of_rows_gives_distances_for_every_row():
    # Source: MinCovDet fitted directly on the documented sample
    # (numpy default_rng(random_state).choice(n, m, replace=False), sorted), and the
    # distance definition of Filzmoser & Hron (2008) written out with numpy.
    X = logistic_normal(n=400, seed=9)
    planted = np.arange(5, 400, 40)
    X[planted, 1] *= 80.0
    Y = helmert_ilr(X)
    r = robust_distances(Y, max_fit_rows=150, random_state=3)
    chosen = np.sort(np.random.default_rng(3).choice(400, 150, replace=False))
    assert np.flatnonzero(r.fitted).tolist() == chosen.tolist()
    mcd = MinCovDet(random_state=3).fit(Y[chosen])
    diff = Y - mcd.location_
    expected = np.sqrt(np.einsum("ij,jk,ik->i", diff, np.linalg.inv(mcd.covariance_), diff))
    np.testing.assert_allclose(r.distances, expected, rtol=1e-9)
    assert r.distances.shape == (400,)
    assert not r.support[~r.fitted].any() and r.support.sum() == mcd.support_.sum()
    assert r.outliers[planted].all()  # found whether or not they were in the sample
    full = robust_distances(Y, max_fit_rows=1000)  # more than n: every row is fitted
    assert full.fitted.all()


def test_by_group_equals_one_fit_per_group():
    # Invented mixture of two populations with different centres; one row of group
    # "b" is planted far from its own group but near the centre of group "a".
    Xa = logistic_normal(n=120, seed=1)
    Xb = logistic_normal(n=100, seed=1) * np.array([1.0, 8.0, 0.2, 3.0, 1.0])
    Y = helmert_ilr(np.vstack([Xa, Xb]))
    groups = np.array(["a"] * 120 + ["b"] * 100, dtype=object)
    Y[150] = np.median(Y[:120], axis=0)  # a "b" row that looks like group "a"
    groups[7] = None  # no group value: not screened
    fits, skipped = robust_distances_by_group(Y, groups)
    assert skipped == {} and list(fits) == ["a", "b"]
    for label in ("a", "b"):
        pos, fit = fits[label]
        expected_pos = np.flatnonzero(groups == label)
        assert pos.tolist() == expected_pos.tolist()
        # Source: sklearn MinCovDet fitted on that group alone
        mcd = MinCovDet(random_state=0).fit(Y[expected_pos])
        np.testing.assert_allclose(fit.distances, np.sqrt(mcd.mahalanobis(Y[expected_pos])))
    pos_b, fit_b = fits["b"]
    assert fit_b.outliers[pos_b.tolist().index(150)]
    assert 7 not in fits["a"][0] and 7 not in pos_b


def test_by_group_names_groups_too_small_to_screen():
    Y = np.random.default_rng(0).normal(size=(40, 3))
    groups = ["big"] * 36 + ["tiny"] * 4
    fits, skipped = robust_distances_by_group(Y, groups)
    assert list(fits) == ["big"]
    assert "4 rows for 3 coordinates" in skipped["tiny"]
    with pytest.raises(CompositionError, match="39 group labels for 40 rows"):
        robust_distances_by_group(Y, groups[:-1])


def test_dataframe_rows_keep_their_labels_and_input_is_untouched():
    X = logistic_normal(n=60, seed=8)
    df = pd.DataFrame(X, columns=list("abcde"), index=[f"S{i}" for i in range(60)])
    before = df.copy()
    r = compositional_outliers(df)
    assert list(r.index) == list(df.index)
    frame = r.to_frame()
    assert list(frame.columns) == ["distance", "outlier"] and frame.index.equals(df.index)
    pd.testing.assert_frame_equal(df, before)


@pytest.mark.parametrize(
    "data, kwargs, message",
    [
        ("zero", {}, "zero or negative values"),
        ("few", {}, "needs at least 6 rows"),
        ("plain", {"quantile": 1.0}, "quantile must be in"),
        ("plain", {"cutoff": -1}, "cutoff must be a positive"),
        ("plain", {"support_fraction": 1.5}, "support_fraction"),
    ],
)
def test_bad_input_is_named(data, kwargs, message):
    X = logistic_normal(n=40, seed=1)
    if data == "zero":
        X[7, 1] = 0.0
    elif data == "few":
        X = X[:5]
    with pytest.raises(CompositionError, match=message):
        compositional_outliers(X, **kwargs)


def test_nan_coordinates_name_the_rows():
    Y = pd.DataFrame(
        np.random.default_rng(0).normal(size=(30, 2)), index=[f"r{i}" for i in range(30)]
    )
    Y.iloc[4, 1] = np.nan
    with pytest.raises(CompositionError, match="'r4'"):
        robust_distances(Y)


def test_singular_scatter_is_refused():
    # Half of the rows repeated exactly: the MCD support has no spread.
    rng = np.random.default_rng(3)
    Y = np.vstack([np.tile([1.0, 2.0], (30, 1)), rng.normal(size=(10, 2))])
    with pytest.raises(CompositionError, match="singular"):
        robust_distances(Y)


def test_module_imports_no_widget_library_and_sklearn_only_when_used():
    probe = (
        "import sys, json\n"
        "import compwidgets.core.outliers as o\n"
        "before = 'sklearn' in sys.modules\n"
        "import numpy as np\n"
        "o.compositional_outliers(np.exp(np.random.default_rng(0).normal(size=(30, 3))))\n"
        "banned = ('ipywidgets', 'traitlets', 'bqplot', 'anywidget', 'IPython', 'ipykernel')\n"
        "print(json.dumps({'sklearn_at_import': before,\n"
        "  'loaded': sorted(m for m in sys.modules if m.split('.')[0] in banned)}))\n"
    )
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    result = json.loads(out.stdout)
    assert result == {"sklearn_at_import": False, "loaded": []}


# ------------------------------------------------------- bounded cost on wide tables
def wide_table(n: int = 600, p: int = 30, seed: int = 12) -> np.ndarray:
    """Invented coordinates with a few strong factors (as real trace data have)."""
    rng = np.random.default_rng(seed)
    factors = rng.normal(size=(n, 4)) @ (rng.normal(size=(4, p)) * 2.0)
    return factors + rng.normal(scale=0.3, size=(n, p))


def test_few_coordinates_ignore_max_coordinates():
    # Small D: exactly the MCD of the coordinates (sklearn MinCovDet, as before)
    Y = helmert_ilr(logistic_normal(n=200))
    plain = robust_distances(Y)
    limited = robust_distances(Y, max_coordinates=Y.shape[1])
    assert not limited.reduced and limited.orthogonal is None
    np.testing.assert_array_equal(limited.distances, plain.distances)
    np.testing.assert_array_equal(limited.outliers, plain.outliers)
    assert limited.method == f"MCD of {Y.shape[1]} coordinates"


def test_many_coordinates_are_reduced_to_spherical_components_and_said_so():
    Y = wide_table()
    r = robust_distances(Y, max_coordinates=8, max_fit_rows=400)
    assert r.reduced and r.location.size == 8 and r.n_input_coordinates == 30
    assert r.directions.shape == (30, 8)
    # orthonormal directions (numpy)
    np.testing.assert_allclose(r.directions.T @ r.directions, np.eye(8), atol=1e-10)
    assert 0.0 < r.explained <= 1.0
    assert "8 leading spherical principal components of 30 coordinates" in r.method
    assert "fitted on a random 400 of 600 rows" in r.method
    # the distance is the MCD distance of the scores (sklearn MinCovDet on the documented
    # sample, from the spatial median along the directions)
    scores = (Y - r.centre) @ r.directions
    chosen = np.sort(np.random.default_rng(0).choice(600, 400, replace=False))
    mcd = MinCovDet(random_state=0).fit(scores[chosen])
    np.testing.assert_allclose(r.distances, np.sqrt(mcd.mahalanobis(scores)), rtol=1e-8)
    # orthogonal distance: the length of what the directions leave out (numpy)
    resid = (Y - r.centre) - scores @ r.directions.T
    np.testing.assert_allclose(r.orthogonal, np.linalg.norm(resid, axis=1), atol=1e-8)
    # its cut-off: (median + MAD z_q)^(3/2) of od^(2/3) on the fitted rows
    # (Hubert, Rousseeuw & Vanden Branden 2005); scipy's norm quantile and MAD
    z = r.orthogonal[r.fitted] ** (2 / 3)
    mad = stats.median_abs_deviation(z, scale="normal")
    cut = (np.median(z) + mad * stats.norm.ppf(0.975)) ** 1.5
    assert r.orthogonal_cutoff == pytest.approx(cut, rel=1e-3)  # 1.4826 vs 1/Phi^-1(3/4)
    np.testing.assert_array_equal(
        r.outliers, (r.distances > r.cutoff) | (r.orthogonal > r.orthogonal_cutoff)
    )
    np.testing.assert_array_equal(r.outliers_at(0.975), r.outliers)
    assert r.outliers_at(0.999).sum() <= r.outliers.sum()


def test_rows_off_the_retained_components_are_flagged_by_their_orthogonal_distance():
    Y = wide_table(n=800, p=40, seed=3)
    off = np.arange(0, 800, 100)
    rng = np.random.default_rng(9)
    # a shift orthogonal to the 4 strong factors: it shows in the orthogonal distance
    direction = rng.normal(size=40)
    r0 = robust_distances(Y, max_coordinates=4)
    direction -= r0.directions @ (r0.directions.T @ direction)
    Y[off] += 4.0 * direction / np.linalg.norm(direction)
    r = robust_distances(Y, max_coordinates=4)
    assert (r.orthogonal[off] > r.orthogonal_cutoff).all()
    # the shift is invisible to the distance within the components: their mean is ordinary
    assert np.median(r.distances[off]) < r.cutoff
    assert r.outliers[off].all()
    clean = np.setdiff1d(np.arange(800), off)
    assert r.outliers[clean].mean() < 0.08  # two criteria at 2.5 % each, and some slack


@settings(max_examples=10, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000))
def test_reduced_distances_do_not_depend_on_an_orthogonal_change_of_basis(seed):
    # Spherical PCA and the MCD are orthogonally equivariant (Locantore et al. 1999;
    # Rousseeuw & Van Driessen 1999): rotating the coordinates (a change of orthonormal
    # ilr basis) leaves both distances unchanged. Rotation from scipy's QR of a random matrix.
    Y = wide_table(n=300, p=25, seed=seed % 97)
    Q, _ = linalg.qr(np.random.default_rng(seed).normal(size=(25, 25)))
    a = robust_distances(Y, max_coordinates=5)
    b = robust_distances(Y @ Q, max_coordinates=5)
    np.testing.assert_allclose(b.distances, a.distances, rtol=1e-5, atol=1e-7)
    np.testing.assert_allclose(b.orthogonal, a.orthogonal, rtol=1e-5, atol=1e-7)


def test_spatial_median_minimises_the_sum_of_distances():
    # Source: scipy.optimize.minimize of the sum of Euclidean distances (the definition)
    from scipy.optimize import minimize

    Y = np.random.default_rng(4).standard_t(3, size=(200, 4))
    m = spatial_median(Y)
    best = minimize(lambda c: np.linalg.norm(Y - c, axis=1).sum(), Y.mean(axis=0), tol=1e-12)
    np.testing.assert_allclose(m, best.x, atol=1e-5)


def test_groups_share_the_fitted_rows():
    assert group_fit_rows([3000, 3000], 5000) == [2500, 2500]
    assert group_fit_rows([300, 400], 5000) == [None, None]  # small table: never sampled
    assert group_fit_rows([9000] * 20, 5000) == [MIN_GROUP_FIT_ROWS] * 20  # floor per group
    assert group_fit_rows([9000], None) == [None]
    Y = np.random.default_rng(0).normal(size=(1400, 3))
    groups = ["a"] * 1200 + ["b"] * 200
    fits, _ = robust_distances_by_group(Y, groups, max_fit_rows=1000, shared_fit_rows=True)
    assert fits["a"][1].fitted.sum() == 500 and fits["b"][1].fitted.all()
    seen = []
    robust_distances_by_group(Y, groups, progress=lambda *a: seen.append(a))
    assert seen == [(0, 2, "a"), (1, 2, "b")]
