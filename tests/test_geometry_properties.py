"""Property tests (hypothesis) of the plane geometry used by the views."""

import numpy as np
import pytest
import scipy.linalg
import scipy.stats
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from matplotlib.path import Path
from scipy.stats import gmean

import compwidgets.core as core
from compwidgets.core import CompositionError, geometry
from compwidgets.core import regions as rg
from compwidgets.core import ternary as tn

SETTINGS = settings(max_examples=60, deadline=None)
logs = st.floats(-6, 6, allow_nan=False)


def three_part(n_min=1, n_max=40):
    return st.integers(n_min, n_max).flatmap(
        lambda n: arrays(np.float64, (n, 3), elements=logs).map(np.exp)
    )


@SETTINGS
@given(three_part())
def test_projection_round_trip_is_the_closure(X):
    # barycentric coordinates of a point of the triangle are its closed parts
    # (definition of the ternary diagram: common practice)
    x, y = tn.ternary_to_xy(X)
    np.testing.assert_allclose(tn.xy_to_ternary(x, y), core.closure(X), atol=1e-12)


@SETTINGS
@given(three_part(n_min=2))
def test_centring_sends_the_data_centre_to_the_barycentre(X):
    # centre = closed geometric mean (scipy.stats.gmean, Aitchison 1986); perturbing by
    # its inverse gives (1/3, 1/3, 1/3) (von Eynatten, Pawlowsky-Glahn & Egozcue 2002)
    p = tn.centring_perturbation(data=X)
    centre = core.closure(gmean(X, axis=0))
    np.testing.assert_allclose(tn.perturb_closed(centre[None, :], p)[0], [1 / 3] * 3, atol=1e-9)


@SETTINGS
@given(
    st.integers(3, 12).flatmap(
        lambda k: st.tuples(
            arrays(np.float64, k, elements=st.floats(0, 2 * np.pi), unique=True),
            arrays(np.float64, k, elements=st.floats(0.1, 1.0)),
        )
    ),
    st.integers(0, 2**31 - 1),
)
def test_points_in_polygon_agrees_with_matplotlib(polygon, seed):
    # a star-shaped polygon (vertices sorted by angle) against matplotlib's Path
    angle, radius = polygon
    if np.min(np.diff(np.sort(angle))) < 1e-3:
        return  # (nearly) repeated vertices: not a polygon of k corners
    order = np.argsort(angle)
    vertices = np.column_stack(
        [radius[order] * np.cos(angle[order]), radius[order] * np.sin(angle[order])]
    )
    pts = np.random.default_rng(seed).uniform(-1.1, 1.1, size=(300, 2))
    ours = geometry.points_in_polygon(pts[:, 0], pts[:, 1], vertices)
    theirs = Path(vertices).contains_points(pts)
    # points within rounding distance of an edge may fall either way
    edges = np.roll(vertices, -1, axis=0) - vertices
    t = np.clip(
        np.einsum("pkd,kd->pk", pts[:, None, :] - vertices[None], edges)
        / np.maximum(np.einsum("kd,kd->k", edges, edges), 1e-300),
        0,
        1,
    )
    near = np.min(
        np.linalg.norm(pts[:, None, :] - (vertices[None] + t[..., None] * edges[None]), axis=2),
        axis=1,
    )
    clear = near > 1e-9
    np.testing.assert_array_equal(ours[clear], theirs[clear])


@SETTINGS
@given(st.integers(10, 60).flatmap(lambda n: arrays(np.float64, (n, 3), elements=logs)))
def test_probability_region_does_not_depend_on_the_ilr_basis(L):
    X = np.exp(L)
    level, n = 0.9, X.shape[0]
    # The sample covariance in another orthonormal basis (scipy.linalg.helmert rows) of
    # the clr coordinates computed here by definition (Aitchison 1986): ln x - mean ln x.
    V = scipy.linalg.helmert(3)
    Z = L - L.mean(axis=1, keepdims=True)
    Y = Z @ V.T
    mean, cov = Y.mean(axis=0), np.cov(Y, rowvar=False, ddof=1)
    eig = np.linalg.eigvalsh(cov)  # the same in every orthonormal basis
    if eig[0] <= 1e-14 * eig[-1]:
        # no 2-D spread (far below the code's own 1e-12 eigenvalue ratio): refused, never drawn
        with pytest.raises(CompositionError, match="one compositional line"):
            rg.probability_region(X, level)
        return
    # near-degenerate samples: the inverse covariance is too ill-conditioned to compare
    # boundary radii at rtol 1e-6 (condition number bound); and a spread of the order of
    # the float resolution of the log-values (~1e-15) cannot be resolved either
    assume(eig[-1] / eig[0] < 1e8)
    assume(np.sqrt(eig[0]) > 1e-6)
    # every boundary point sits on the same Mahalanobis radius of the same data in this
    # basis: chi2_2(level) (scipy.stats.chi2) for the known-parameter region,
    # (n^2 - 1) p / (n (n - p)) F_{p, n-p}(level) (scipy.stats.f) for the prediction region
    radius2 = {
        "known_parameters": scipy.stats.chi2.ppf(level, 2),
        "prediction": (n * n - 1) * 2 / (n * (n - 2)) * scipy.stats.f.ppf(level, 2, n - 2),
    }
    for kind, r2 in radius2.items():
        curve = rg.probability_region(X, level, kind=kind)
        B = core.clr(curve) @ V.T - mean
        m2 = np.einsum("ti,ij,tj->t", B, np.linalg.inv(cov), B)
        np.testing.assert_allclose(m2, r2, rtol=1e-6)
