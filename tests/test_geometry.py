"""compwidgets.core.geometry against references outside the project.

Sources: ``matplotlib.path.Path.contains_points`` (an independent point-in-
polygon test, used on simple polygons where every fill rule agrees), a
brute-force pure-Python crossing count with an *upward* ray and explicit
segment intersection (not the code's horizontal ray), ``numpy.histogram2d``
for the counts, and plain Python comparisons for rectangles.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from matplotlib.path import Path

from compwidgets.core import CompositionError
from compwidgets.core.geometry import (
    bin_index,
    counts_from_bins,
    density_grid,
    points_in_polygon,
    points_in_rectangle,
)


def star_polygon(k: int, seed: int) -> np.ndarray:
    """A random simple (star-shaped) polygon: k vertices at increasing angles."""
    rng = np.random.default_rng(seed)
    angles = np.sort(rng.uniform(0, 2 * np.pi, k))
    radii = rng.uniform(0.2, 1.0, k)
    return np.column_stack([0.1 + radii * np.cos(angles), -0.2 + radii * np.sin(angles)])


def brute_even_odd(px: float, py: float, verts) -> bool:
    """Even-odd rule by counting crossings of the upward vertical ray from (px, py)."""
    crossings = 0
    k = len(verts)
    for i in range(k):
        (x1, y1), (x2, y2) = verts[i], verts[(i + 1) % k]
        if x1 == x2:
            continue  # a vertical edge cannot cross a vertical ray transversally
        if (x1 <= px < x2) or (x2 <= px < x1):
            y_at = y1 + (px - x1) * (y2 - y1) / (x2 - x1)
            if y_at > py:
                crossings += 1
    return crossings % 2 == 1


@pytest.mark.parametrize("seed", range(6))
def test_polygon_matches_matplotlib_on_simple_polygons(seed):
    # Source: matplotlib.path.Path.contains_points (independent implementation).
    verts = star_polygon(5 + 3 * seed, seed)
    rng = np.random.default_rng(100 + seed)
    pts = rng.uniform(-1.2, 1.2, size=(20_000, 2))
    expected = Path(verts).contains_points(pts)
    got = points_in_polygon(pts[:, 0], pts[:, 1], verts)
    assert got.dtype == bool and got.shape == (20_000,)
    assert 0 < expected.sum() < expected.size  # the check is not trivially all-in / all-out
    np.testing.assert_array_equal(got, expected)


def test_polygon_matches_brute_force_on_self_intersecting_star():
    # Source: brute-force crossing count (upward ray) on a small case; a pentagram
    # under the even-odd rule leaves its central pentagon *outside* (common practice:
    # SVG's fill-rule "evenodd" draws a hollow star).
    angles = np.pi / 2 + np.arange(5) * 4 * np.pi / 5  # every second vertex of a pentagon
    verts = np.column_stack([np.cos(angles), np.sin(angles)])
    rng = np.random.default_rng(4)
    pts = rng.uniform(-1.1, 1.1, size=(3_000, 2))
    expected = np.array([brute_even_odd(x, y, verts.tolist()) for x, y in pts])
    got = points_in_polygon(pts[:, 0], pts[:, 1], verts)
    np.testing.assert_array_equal(got, expected)
    centre = points_in_polygon([0.0], [0.0], verts)
    tip = points_in_polygon([0.0], [0.8], verts)  # inside the top spike
    assert not centre[0] and tip[0]


def test_polygon_explicitly_closed_ring_and_nan_points():
    square = [(0, 0), (1, 0), (1, 1), (0, 1), (0, 0)]
    got = points_in_polygon([0.5, 1.5, np.nan, 0.25], [0.5, 0.5, 0.5, np.nan], square)
    assert got.tolist() == [True, False, False, False]


def test_polygon_agrees_with_rectangle_for_an_axis_aligned_box():
    rng = np.random.default_rng(8)
    x, y = rng.uniform(-1, 2, (2, 5_000))
    box = [(0.1, 0.2), (0.9, 0.2), (0.9, 0.7), (0.1, 0.7)]
    np.testing.assert_array_equal(
        points_in_polygon(x, y, box), points_in_rectangle(x, y, (0.1, 0.9), (0.2, 0.7))
    )


def test_rectangle_against_python_comparisons():
    # Source: plain comparisons, point by point; edges count as inside.
    rng = np.random.default_rng(1)
    x, y = rng.uniform(0, 1, (2, 500))
    x[:3], y[:3] = [0.2, 0.6, 0.2], [0.3, 0.3, 0.9]  # exactly on edges / corners
    x[3] = np.nan
    got = points_in_rectangle(x, y, (0.6, 0.2), (0.9, 0.3))  # reversed order, as a brush gives
    expected = [
        (not math.isnan(a)) and 0.2 <= a <= 0.6 and 0.3 <= b <= 0.9
        for a, b in zip(x, y, strict=True)
    ]
    assert got.tolist() == expected
    assert got[:3].all() and not got[3]


def test_density_grid_matches_numpy_histogram2d():
    # Source: numpy.histogram2d (same edges, last bin closed on the right).
    rng = np.random.default_rng(2)
    x = rng.normal(0.5, 0.3, 50_000)
    y = rng.normal(0.4, 0.2, 50_000)
    x[:5] = np.nan
    x[5], y[5] = 1.0, 0.8  # exactly on the upper corner: counted in the last bin
    extent, bins = (0.0, 1.0, 0.0, 0.8), (37, 23)
    expected, _, _ = np.histogram2d(
        x[5:], y[5:], bins=bins, range=[[extent[0], extent[1]], [extent[2], extent[3]]]
    )
    got = density_grid(x, y, extent, bins)
    assert got.shape == (23, 37)
    np.testing.assert_array_equal(got, expected.T)
    assert got.sum() < x.size - 5  # points outside the extent were left out of the counts


def test_density_grid_mask_counts_only_the_subset():
    rng = np.random.default_rng(3)
    x, y = rng.uniform(0, 1, (2, 10_000))
    mask = rng.random(10_000) < 0.1
    expected, _, _ = np.histogram2d(x[mask], y[mask], bins=16, range=[[0, 1], [0, 1]])
    np.testing.assert_array_equal(density_grid(x, y, (0, 1, 0, 1), 16, mask), expected.T)
    idx = bin_index(x, y, (0, 1, 0, 1), 16)
    np.testing.assert_array_equal(counts_from_bins(idx, 16, mask), expected.T)
    assert idx.min() >= 0 and idx.max() < 256


def test_bin_index_outside_is_minus_one():
    idx = bin_index([-0.1, 0.5, 1.1, np.nan], [0.5, 0.5, 0.5, 0.5], (0, 1, 0, 1), 4)
    assert idx.tolist() == [-1, 2 * 4 + 2, -1, -1]


def test_inputs_not_mutated():
    x = np.array([0.1, 0.5, 0.9])
    y = np.array([0.2, 0.5, 0.8])
    verts = np.array([[0.0, 0.0], [1.0, 0.0], [0.5, 1.0]])
    copies = x.copy(), y.copy(), verts.copy()
    points_in_polygon(x, y, verts)
    density_grid(x, y, (0, 1, 0, 1), 3)
    for a, b in zip((x, y, verts), copies, strict=True):
        np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize(
    ("call", "message"),
    [
        (lambda: points_in_polygon([0.1], [0.2], [(0, 0), (1, 1)]), "at least 3 vertices"),
        (lambda: points_in_polygon([0.1], [0.2], [(0, 0), (1, np.nan), (1, 1)]), "vertex 1"),
        (lambda: points_in_polygon([0.1, 0.2], [0.2], [(0, 0), (1, 0), (1, 1)]), "y has 1"),
        (lambda: points_in_polygon([0.1], [0.2], [(0, 0, 0)] * 3), r"shape \(k, 2\)"),
        (lambda: points_in_rectangle([0.1], [0.2], (0, np.inf), (0, 1)), "x_range"),
        (lambda: density_grid([0.1], [0.2], (1, 0, 0, 1), 4), "x0 < x1"),
        (lambda: density_grid([0.1], [0.2], (0, 1, 0, 1), 0), "positive integers"),
        (lambda: density_grid([0.1], [0.2], (0, 1, 0, 1), 4, [True, False]), "mask"),
    ],
)
def test_bad_input_is_named(call, message):
    with pytest.raises(CompositionError, match=message):
        call()
