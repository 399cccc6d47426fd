"""compwidgets.core.ternary and compwidgets.core.regions against outside references.

Sources named at each check: barycentric (areal) coordinates as ratios of
triangle areas (the definition of barycentric coordinates), the equilateral
triangle's geometry, ``scipy.stats.gmean`` for the centre, ``numpy.linalg``
for collinearity, ``matplotlib.path.Path`` for "inside the curve",
``numpy.random.Generator.multivariate_normal`` for simulated samples, and the
chi-square law with 2 degrees of freedom, which is exponential with mean 2
(textbook fact: P(chi2_2 <= q) = 1 - exp(-q / 2)). Simulations are seeded;
their tolerances are 4 binomial standard deviations.
"""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from matplotlib.path import Path
from scipy.stats import gmean

import compwidgets.core as core
from compwidgets.core import CompositionError
from compwidgets.core import regions as rg
from compwidgets.core import ternary as tn

H = np.sqrt(3) / 2


def area(p, q, r):
    return 0.5 * abs((q[0] - p[0]) * (r[1] - p[1]) - (r[0] - p[0]) * (q[1] - p[1]))


# --------------------------------------------------------------------- projection


def test_vertices_and_edge_midpoints():
    # Source: layout documented in compwidgets.core.ternary (A top, B bottom-left,
    # C bottom-right, side 1) and the geometry of the equilateral triangle.
    x, y = tn.ternary_to_xy(np.eye(3))
    np.testing.assert_allclose(np.column_stack([x, y]), [[0.5, H], [0, 0], [1, 0]], atol=1e-15)
    mids = [[0.5, 0.5, 0], [0, 0.5, 0.5], [0.5, 0, 0.5]]  # mid A-B, mid B-C, mid C-A
    x, y = tn.ternary_to_xy(mids)
    np.testing.assert_allclose(
        np.column_stack([x, y]), [[0.25, H / 2], [0.5, 0], [0.75, H / 2]], atol=1e-15
    )
    x, y = tn.ternary_to_xy([1, 1, 1])  # the barycentre is the centroid (height / 3)
    np.testing.assert_allclose([x[0], y[0]], [0.5, H / 3], atol=1e-15)
    sides = [np.linalg.norm(tn.VERTICES[i] - tn.VERTICES[j]) for i, j in [(0, 1), (1, 2), (2, 0)]]
    np.testing.assert_allclose(sides, 1.0, rtol=1e-15)  # equilateral, side 1


def test_projection_is_barycentric_by_areas():
    # Source: definition of barycentric coordinates: the share of vertex A of
    # point P is area(P, B, C) / area(A, B, C), and likewise for B and C.
    rng = np.random.default_rng(0)
    X = rng.dirichlet([1.0, 2.0, 0.5], size=200)
    x, y = tn.ternary_to_xy(X * 37.0)  # closure happens inside
    A, B, C = tn.VERTICES
    total = area(A, B, C)
    for (px, py), comp in zip(np.column_stack([x, y]), X, strict=True):
        p = (px, py)
        shares = [area(p, B, C) / total, area(A, p, C) / total, area(A, B, p) / total]
        np.testing.assert_allclose(shares, comp, atol=1e-12)
    np.testing.assert_allclose(tn.xy_to_ternary(x, y), X, atol=1e-12)


def test_projection_rejects_bad_input():
    with pytest.raises(CompositionError, match="3 parts"):
        tn.ternary_to_xy(np.ones((4, 2)))
    with pytest.raises(CompositionError, match="negative"):
        tn.ternary_to_xy([[0.2, -0.1, 0.9]])


# ------------------------------------------------------------------ grid and ticks


def test_grid_lines_have_constant_share():
    g = tn.grid_lines(0.1)
    assert g.x.shape == (27, 2)  # 9 interior levels per part, straight segments
    np.testing.assert_allclose(sorted(set(np.round(g.level, 12))), np.arange(1, 10) / 10)
    for x, y, p, lv in zip(g.x, g.y, g.part, g.level, strict=True):
        shares = tn.xy_to_ternary(x, y)
        np.testing.assert_allclose(shares[:, p], lv, atol=1e-12)
        # both ends lie on the frame: one of the other two parts is zero there
        assert np.all(np.isclose(np.delete(shares, p, axis=1), 0, atol=1e-12).any(axis=1))
    # Source: geometry: the line "A = a" is horizontal at height a * H.
    a_lines = g.part == 0
    np.testing.assert_allclose(
        g.y[a_lines], np.repeat(g.level[a_lines, None] * H, 2, axis=1), atol=1e-12
    )


def test_centred_grid_is_the_perturbed_grid():
    # The centred grid, perturbed back by the centre, must be the plain grid lines:
    # perturbation by g undoes perturbation by g^-1 (Aitchison's group structure).
    centre = np.array([0.7, 0.2, 0.1])
    g = tn.grid_lines(0.2, centre=centre, n_points=33)
    assert g.x.shape == (12, 33)
    for x, y, p, lv in zip(g.x, g.y, g.part, g.level, strict=True):
        back = tn.perturb_closed(tn.xy_to_ternary(x, y), centre)
        np.testing.assert_allclose(back[:, p], lv, atol=1e-12)
    # the sampled points spread along each curve: no gap longer than half the curve
    seg = np.hypot(np.diff(g.x, axis=1), np.diff(g.y, axis=1))
    assert np.all(seg.max(axis=1) < 0.5 * seg.sum(axis=1))


def test_ticks_lie_on_the_documented_edges():
    t = tn.grid_ticks(0.25)
    shares = tn.xy_to_ternary(t.x, t.y)
    zero_part = {0: 2, 1: 0, 2: 1}  # A ticks where C = 0, B where A = 0, C where B = 0
    for s, p, lv, dx, dy in zip(shares, t.part, t.level, t.dx, t.dy, strict=True):
        assert s[p] == pytest.approx(lv, abs=1e-12)
        assert s[zero_part[p]] == pytest.approx(0, abs=1e-12)
        assert np.hypot(dx, dy) == pytest.approx(1)
    # outward: a small step along the normal leaves the triangle (a share turns negative)
    outward = tn.xy_to_ternary(t.x + 0.01 * t.dx, t.y + 0.01 * t.dy)
    assert np.all(outward.min(axis=1) < 0)


@pytest.mark.parametrize("step", [0, 1, -0.1, "a", np.nan])
def test_bad_grid_step(step):
    with pytest.raises(CompositionError, match="grid step"):
        tn.grid_lines(step)


# -------------------------------------------------------------------------- centring


def test_centred_data_centre_is_the_barycentre():
    # Source: von Eynatten, Pawlowsky-Glahn & Egozcue (2002): perturbing by the
    # inverse centre moves the centre to the barycentre. The centre of the centred
    # data is computed independently with scipy.stats.gmean (closed geometric means).
    rng = np.random.default_rng(5)
    X = np.exp(rng.normal([2.0, 0.0, -1.5], [0.4, 0.8, 0.6], size=(300, 3)))
    p = tn.centring_perturbation(data=X)
    Xc = np.asarray(core.perturb(X, p))
    g = gmean(Xc, axis=0)
    x, y = tn.ternary_to_xy(g / g.sum())
    assert abs(x[0] - 0.5) < 1e-12 and abs(y[0] - H / 3) < 1e-12
    # and the closed-form inverse: C[1/g] of the gmean centre
    g0 = gmean(X / X.sum(axis=1, keepdims=True), axis=0)
    np.testing.assert_allclose(p, (1 / g0) / (1 / g0).sum(), rtol=1e-12)
    np.testing.assert_allclose(tn.perturb_closed(X, p), Xc, rtol=1e-12)


def test_centring_needs_one_source():
    with pytest.raises(CompositionError, match="either"):
        tn.centring_perturbation()
    with pytest.raises(CompositionError, match="positive"):
        tn.centring_perturbation(centre=[0.5, 0.5, 0])


# --------------------------------------------------------------- compositional lines


def test_line_through_two_compositions():
    x1, x2 = np.array([0.2, 0.5, 0.3]), np.array([0.6, 0.1, 0.3])
    line = tn.line_through(x1, x2, t=[0.0, 0.5, 1.0, 2.0])
    np.testing.assert_allclose(line[0], x1, rtol=1e-12)
    np.testing.assert_allclose(line[2], x2, rtol=1e-12)
    # t = 1/2 is the closed geometric mean of x1 and x2 (definition of the midpoint
    # in Aitchison geometry: x1 (+) 1/2 (.) (x2 (-) x1) = C[sqrt(x1 x2)]).
    mid = np.sqrt(x1 * x2)
    np.testing.assert_allclose(line[1], mid / mid.sum(), rtol=1e-12)
    # t = 2: C[x2^2 / x1]
    far = x2**2 / x1
    np.testing.assert_allclose(line[3], far / far.sum(), rtol=1e-12)


def test_default_line_is_straight_in_log_ratios_and_reaches_the_frame():
    x1, x2 = [1.0, 2.0, 3.0], [3.0, 2.5, 1.0]
    line = tn.line_through(x1, x2, n_points=101)
    # Source: numpy SVD: the centred log-ratio points of a line have rank 1.
    Z = np.log(line) - np.log(line).mean(axis=1, keepdims=True)
    s = np.linalg.svd(Z - Z.mean(axis=0), compute_uv=False)
    assert s[1] < 1e-10 * s[0]
    assert line[0].min() < 1e-3 and line[-1].min() < 1e-3  # both ends run to the frame
    # evenly spaced t -> equal steps in Euclidean distance of clr coordinates
    steps = np.linalg.norm(np.diff(Z, axis=0), axis=1)
    np.testing.assert_allclose(steps, steps[0], rtol=1e-9)


def test_line_of_equal_b_and_c_is_the_altitude_from_a():
    # Source: symmetry of the equilateral triangle: compositions with b = c lie on the
    # vertical through the A vertex, x = 1/2.
    line = tn.line_through([1, 1, 1], [3, 1, 1])
    x, _ = tn.ternary_to_xy(line)
    np.testing.assert_allclose(x, 0.5, atol=1e-12)


def test_line_along_a_clr_direction():
    d = np.array([1.0, -0.5, -0.5])
    pts = tn.compositional_line([0.2, 0.3, 0.5], d, [0.0, 1.0])
    expected = np.array([0.2, 0.3, 0.5]) * np.exp(d)  # x (+) exp(d), closed
    np.testing.assert_allclose(pts[1], expected / expected.sum(), rtol=1e-12)
    with pytest.raises(CompositionError, match="sums to zero"):
        tn.compositional_line([0.2, 0.3, 0.5], [1.0, 0.0, 0.0], [0.0])
    with pytest.raises(CompositionError, match="equal"):
        tn.line_through([1, 2, 3], [2, 4, 6])
    with pytest.raises(CompositionError, match="positive"):
        tn.line_through([0, 2, 3], [2, 4, 6])


# --------------------------------------------------------------------------- regions

MU = np.array([0.3, -0.2])
SIGMA = np.array([[0.30, 0.12], [0.12, 0.20]])


def simulate(n, seed):
    rng = np.random.default_rng(seed)
    Y = rng.multivariate_normal(MU, SIGMA, size=n)
    return np.asarray(core.ilr_inv(Y))


def inside_curve(curve, X):
    cx, cy = tn.ternary_to_xy(curve)
    px, py = tn.ternary_to_xy(X)
    return Path(np.column_stack([cx, cy])).contains_points(np.column_stack([px, py]))


def test_chi2_radius_matches_closed_form():
    # Source: chi-square with 2 degrees of freedom is exponential with mean 2 (textbook).
    for a in (0.5, 0.9, 0.95, 0.99):
        expected = -2 * np.log(1 - a)
        assert rg.known_parameter_radius2(a) == pytest.approx(expected, rel=1e-10)
        assert rg.probability_radius2(a, kind="known_parameters") == pytest.approx(expected)


def test_prediction_radius_matches_a_closed_form():
    # Source: F(2, m) has the closed-form quantile m/2 ((1 - a)^(-2/m) - 1) (from the F
    # cdf 1 - (1 + 2x/m)^(-m/2), textbook), so with p = 2 the prediction radius
    # (n-1) p (n+1) / (n (n-p)) F_{p,n-p}(a) is (n^2 - 1) / n ((1 - a)^(-2/(n-2)) - 1).
    for n in (3, 5, 20, 200):
        for a in (0.5, 0.9, 0.95, 0.99):
            expected = (n * n - 1) / n * ((1 - a) ** (-2 / (n - 2)) - 1)
            assert rg.prediction_radius2(a, n) == pytest.approx(expected, rel=1e-9)
            assert rg.probability_radius2(a, n) == rg.prediction_radius2(a, n)
    # the prediction region is wider than the known-parameter one, and tends to it
    assert rg.prediction_radius2(0.95, 20) > rg.known_parameter_radius2(0.95)
    assert rg.prediction_radius2(0.95, 10**6) == pytest.approx(
        rg.known_parameter_radius2(0.95), rel=1e-5
    )


@pytest.mark.parametrize("kind", rg.PROBABILITY_KINDS)
def test_region_curve_lies_at_its_radius(kind):
    # The drawn curve, taken back to ilr (core.ilr), is the ellipse at the stated radius:
    # its Mahalanobis distances from the sample mean, with numpy's mean and cov (ddof=1).
    X = simulate(20, 9)
    Y = np.asarray(core.ilr(X))
    mean, S = Y.mean(axis=0), np.cov(Y, rowvar=False, ddof=1)
    for level in (0.9, 0.99):
        curve = np.asarray(core.ilr(rg.probability_region(X, level, kind=kind)))
        d = curve - mean
        m2 = np.einsum("ti,ij,tj->t", d, np.linalg.inv(S), d)
        np.testing.assert_allclose(m2, rg.probability_radius2(level, 20, kind), rtol=1e-9)


def test_probability_ellipse_is_strictly_inside_the_triangle():
    X = simulate(400, 1)
    tri = Path(tn.VERTICES)
    for curve in rg.probability_regions(X, [0.9, 0.95, 0.99]):
        assert curve.shape == (181, 3)
        np.testing.assert_array_equal(curve[0], curve[-1])  # closed
        assert np.all(curve > 0)
        x, y = tn.ternary_to_xy(curve)
        assert tri.contains_points(np.column_stack([x, y])).all()  # matplotlib: inside
    # wider levels enclose narrower ones (nested regions)
    r90, r99 = rg.probability_regions(X, [0.9, 0.99])
    assert inside_curve(r99, r90[:-1]).all()


def test_probability_region_coverage_on_simulated_samples():
    # 20,000 ilr-normal samples (numpy's multivariate_normal, seeded); the fitted
    # 95 % region drawn in the triangle must hold 95 % of them. Tolerance: 4 binomial
    # standard deviations, 4 * sqrt(0.95 * 0.05 / 20000) = 0.0062 (the curve is a
    # 721-gon and parameters are estimated: both effects are far below that).
    n = 20_000
    X = simulate(n, 2)
    curve = rg.probability_region(X, 0.95, n_points=721)
    frac = inside_curve(curve, X).mean()
    tol = 4 * np.sqrt(0.95 * 0.05 / n)
    assert abs(frac - 0.95) < tol, (frac, tol)


def test_centre_confidence_region_coverage_on_small_samples():
    # Hotelling's T^2 region (Johnson & Wichern, result 5.3) for the ilr mean of
    # samples of 8, repeated 2,000 times (seeded): the true centre ilr_inv(MU) must be
    # inside about 95 % of the regions; tolerance 4 binomial sd = 0.0195.
    rng = np.random.default_rng(3)
    true_centre = np.asarray(core.ilr_inv(MU[None, :]))
    reps, n = 2_000, 8
    hits = 0
    for _ in range(reps):
        X = np.asarray(core.ilr_inv(rng.multivariate_normal(MU, SIGMA, size=n)))
        hits += bool(inside_curve(rg.centre_confidence_region(X, 0.95, 121), true_centre)[0])
    tol = 4 * np.sqrt(0.95 * 0.05 / reps)
    assert abs(hits / reps - 0.95) < tol, (hits / reps, tol)


def test_centre_region_is_inside_the_probability_region():
    X = simulate(50, 4)
    centre_curve = rg.centre_confidence_region(X, 0.95)
    prob_curve = rg.probability_region(X, 0.95)
    assert inside_curve(prob_curve, centre_curve[:-1]).all()
    # the region is centred on the compositional centre (scipy gmean, closed)
    g = gmean(X, axis=0)
    assert inside_curve(centre_curve, (g / g.sum())[None, :])[0]


@pytest.mark.parametrize(
    ("X", "message"),
    [
        (np.ones((2, 3)), "at least 3 rows"),
        (np.array([[1, 2, 4], [1, 4, 16], [1, 8, 64.0]]), "one compositional line"),
        (np.ones((5, 4)), "3-part"),
    ],
)
def test_regions_refuse_bad_data(X, message):
    with pytest.raises(CompositionError, match=message):
        rg.probability_region(X)


def test_region_level_must_be_a_probability():
    with pytest.raises(CompositionError, match="level"):
        rg.probability_region(simulate(20, 5), 1.0)


def _coverage_of_new_samples(n, trials, radius2, seed):
    """Share of trials whose one new sample lies inside the region fitted on n others.

    Each trial draws n + 1 independent bivariate normal samples (numpy, seeded); the
    first n give the sample mean and covariance (ddof = 1), the last is the new sample.
    Trials are independent, so the count inside is binomial with the true coverage.
    """
    rng = np.random.default_rng(seed)
    samples = rng.standard_normal((trials, n + 1, 2)) @ np.linalg.cholesky(SIGMA).T + MU
    fit, new = samples[:, :n], samples[:, n]
    mean = fit.mean(axis=1)
    centred = fit - mean[:, None]
    cov = np.einsum("tni,tnj->tij", centred, centred) / (n - 1)
    d = new - mean
    m2 = np.einsum("ti,tij,tj->t", d, np.linalg.inv(cov), d)
    return float(np.mean(m2 <= radius2))


@pytest.mark.parametrize("n", [20, 200])
def test_region_coverage_of_new_samples_simulated(n):
    # Seeded simulation of each region type at n rows: 20,000 independent trials of n
    # rows plus one new sample. Tolerance: 4 binomial standard errors of the coverage,
    # 4 sqrt(c (1 - c) / 20000) (0.0085 at c = 0.9, 0.0062 at 0.95, 0.0028 at 0.99),
    # so a correct region fails with probability below 1e-4 per check.
    trials = 20_000
    for k, level in enumerate((0.9, 0.95, 0.99)):
        seed = 1000 * n + k
        # prediction region (F quantile): holds `level` of new samples at every n
        got = _coverage_of_new_samples(n, trials, rg.prediction_radius2(level, n), seed)
        tol = 4 * np.sqrt(level * (1 - level) / trials)
        assert abs(got - level) < tol, ("prediction", n, level, got, tol)
        assert rg.expected_coverage(level, n, "prediction") == level
        # known-parameter region (chi-square): holds its expected coverage, short of the
        # level at n = 20 (0.846 / 0.906 / 0.967) and close to it at n = 200
        expected = rg.expected_coverage(level, n, "known_parameters")
        got = _coverage_of_new_samples(n, trials, rg.known_parameter_radius2(level), seed + 500)
        tol_known = 4 * np.sqrt(expected * (1 - expected) / trials)
        assert abs(got - expected) < tol_known, ("known", n, level, got, expected)
        if n == 20:
            assert got < level - tol_known
            assert rg.under_covers(level, n, "known_parameters")
        else:
            assert abs(got - level) < 0.01
        assert not rg.under_covers(level, n, "prediction")


def test_known_parameter_coverage_matches_the_quoted_figures():
    # Figures of an independent simulation (2,000 repetitions, 200 new samples each),
    # quoted: the chi-square 95 % region held 90.6 % of new samples at n = 20 and about
    # 92-93 % at n = 30-50.
    assert rg.expected_coverage(0.95, 20, "known_parameters") == pytest.approx(0.906, abs=0.002)
    for n in (30, 50):
        assert 0.92 < rg.expected_coverage(0.95, n, "known_parameters") < 0.935


def test_unknown_region_kind_is_refused():
    with pytest.raises(CompositionError, match="unknown probability region 'tolerance'"):
        rg.probability_region(simulate(20, 5), 0.95, kind="tolerance")
    with pytest.raises(CompositionError, match="number of rows"):
        rg.prediction_radius2(0.95, None)


# ------------------------------------------------------------ centring, its inverse


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(0.01, 100.0), min_size=3, max_size=3))
def test_centre_of_centring_undoes_the_centring(g):
    # Aitchison inverse (closure of the reciprocals; Aitchison 1986, from memory): the
    # centre perturbed by its centring perturbation is the barycentre, and the centre
    # comes back from that perturbation
    g = np.asarray(g) / np.sum(g)
    p = tn.centring_perturbation(centre=g)
    np.testing.assert_allclose(tn.centre_of_centring(p), g, rtol=1e-12)
    np.testing.assert_allclose(tn.perturb_closed(g, p)[0], [1 / 3] * 3, rtol=1e-12)
    with pytest.raises(CompositionError, match="positive"):
        tn.centre_of_centring([0.5, 0.5, 0.0])


# -------------------------------------------------------- triples that spread the data


def _brute_spread(X, triple) -> float:
    """Mean squared distance of the drawn points from their mean, by numpy's covariance
    (bias=True: divisor n) of the barycentric points a*A + b*B + c*C (definition)."""
    sub = X[:, list(triple)]
    sub = sub / sub.sum(axis=1, keepdims=True)
    xy = sub @ np.array([[0.5, H], [0.0, 0.0], [1.0, 0.0]])
    return float(np.trace(np.cov(xy.T, bias=True)))


def test_spread_triples_takes_the_widest_triples_first():
    rng = np.random.default_rng(3)
    # six parts of similar size, three of them varying a lot, and a tiny seventh part
    logs = rng.normal(0, [1.2, 1.0, 0.9, 0.2, 0.15, 0.1, 1.5], size=(500, 7))
    X = np.exp(logs + [0, 0, 0, 0, 0, 0, -8])
    chosen = tn.spread_triples(X, 2)
    big = range(6)  # the seventh part's median share is far below 1 %
    spreads = {t: _brute_spread(X, t) for t in itertools.combinations(big, 3)}
    first = max(spreads, key=spreads.get)
    assert chosen[0] == first == (0, 1, 2)
    disjoint = {t: s for t, s in spreads.items() if not set(t) & set(first)}
    assert chosen[1] == max(disjoint, key=disjoint.get)
    assert tn.triple_spread(X[:, first]) == pytest.approx(spreads[first], rel=1e-12)


def test_spread_triples_on_the_demo_keep_points_out_of_the_corners():
    # The criterion, defined apart from the scoring: for each chosen ternary, no corner
    # (a part above 80 % of the three) holds a quarter of the points or more, and the
    # points cover at least 0.3 (of the side 1) between their 10th and 90th percentiles
    # along x or y. Control: a triple of the largest part with two small ones fails it.
    import compwidgets as cw
    from compwidgets.model import CompositionModel
    from compwidgets.workbench import default_ternary_parts

    table = cw.demo.stream_sediments()
    model = CompositionModel(cw.read_composition(table, detection_limits=cw.demo.DETECTION_LIMITS))

    def spread_out(parts) -> bool:
        v = model.part_values(parts)[model.complete_rows(parts)]
        X = v / v.sum(axis=1, keepdims=True)
        corners = (X > 0.8).mean(axis=0)
        x, y = X[:, 2] + X[:, 0] / 2, H * X[:, 0]
        cover = max(np.ptp(np.percentile(x, [10, 90])), np.ptp(np.percentile(y, [10, 90])))
        return bool(corners.max() < 0.25 and cover >= 0.3)

    triples = default_ternary_parts(model)
    assert len(triples) == 2 and not set(triples[0]) & set(triples[1])
    assert all(spread_out(t) for t in triples)
    assert not spread_out(["SiO2", "Na2O", "K2O"])  # the control fails the criterion


def test_spread_triples_leave_out_rows_missing_in_a_triple_only():
    # a part missing (NaN) or zero in half of the rows: the other triples keep those rows,
    # and its own triples are measured on the rows where it is present (as drawn)
    rng = np.random.default_rng(5)
    X = np.exp(rng.normal(0, [1.0, 0.9, 0.8, 1.3], size=(300, 4)))
    X[::2, 3] = np.nan
    X[1::4, 3] = 0.0
    spreads = {}
    for t in itertools.combinations(range(4), 3):
        ok = np.all(X[:, list(t)] > 0, axis=1)  # NaN > 0 is False
        spreads[t] = _brute_spread(X[ok], t)
    assert tn.spread_triples(X, 1) == [max(spreads, key=spreads.get)]
    assert np.isnan(X[0, 3]) and X[1, 3] == 0.0  # the caller's array is not changed


def test_spread_triples_refuses_bad_input():
    with pytest.raises(CompositionError, match="at least 3 parts"):
        tn.spread_triples(np.ones((4, 2)))
    with pytest.raises(CompositionError, match=r"infinite values in rows \[1\]"):
        tn.spread_triples([[1, 2, 3], [1, np.inf, 3]])
    with pytest.raises(CompositionError, match="no triple of parts has 2 rows"):
        tn.spread_triples([[1, 2, np.nan], [np.nan, 2, 3], [1, np.nan, 3]])
    with pytest.raises(CompositionError, match="count"):
        tn.spread_triples(np.ones((4, 3)), 0)
