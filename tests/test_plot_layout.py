"""Checks of compwidgets.views._plot_layout: axis limits and where a biplot's part names go.

The placement is checked against its rule written out with plain loops, against
boxes tested pairwise by definition (numpy), and by hand on small layouts. The
browser side (the text boxes Chromium draws) is checked in tests/browser/test_plots.py.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from compwidgets.core import CompositionError
from compwidgets.views._plot_layout import (
    plane_limits,
    ray_label_positions,
    text_width_px,
    tick_decimals,
)


def _norms(a: np.ndarray) -> np.ndarray:
    return np.sqrt(np.sum(np.asarray(a, dtype=float) ** 2, axis=1))


def test_the_layout_module_imports_no_widget_library():
    # in a fresh interpreter: the test process may have imported widgets already
    code = (
        "import sys, json; import compwidgets.views._plot_layout; "
        "print(json.dumps(sorted(m for m in sys.modules if m.split('.')[0] in "
        "('ipywidgets', 'traitlets', 'bqplot', 'anywidget', 'IPython', 'ipykernel'))))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert json.loads(out.stdout) == []


def test_plane_limits_contain_everything_and_respect_aspect():
    rng = np.random.default_rng(0)
    pts = rng.normal(size=(50, 2)) * [10.0, 0.5]  # very wide cloud
    pts[3] = np.nan  # ignored
    tips = np.array([[1.0, 2.0], [-0.5, -3.0]])
    (x0, x1), (y0, y1) = plane_limits(pts, tips, pad=0.05, right_margin=0.2)
    finite = pts[np.isfinite(pts).all(axis=1)]
    for a in (finite, tips, np.zeros((1, 2))):
        assert np.all(a[:, 0] > x0) and np.all(a[:, 0] < x1)
        assert np.all(a[:, 1] > y0) and np.all(a[:, 1] < y1)
    assert (x1 - x0) / (y1 - y0) <= 2.0 + 1e-12
    assert x1 - finite[:, 0].max() > 0.2 * np.ptp(finite[:, 0])  # room for a legend
    (a0, a1), (b0, b1) = plane_limits(np.zeros((0, 2)), np.zeros((2, 2)))
    assert a0 < 0 < a1 and b0 < 0 < b1  # nothing to show: still a valid window


def test_ray_label_positions_along_rays():
    tips = np.array([[3.0, 4.0], [0.0, 0.0], [-1.0, 0.0]])
    pos = ray_label_positions(tips, 0.5)
    np.testing.assert_allclose(pos, [[3.3, 4.4], [0.0, 0.0], [-1.5, 0.0]])


def test_ray_label_positions_zero_ray_without_boxes_stays_at_origin():
    # Unchanged behaviour without box sizes, by hand: the offset along each unit ray.
    pos = ray_label_positions(np.array([[0.0, -2.0], [0.0, 0.0]]), 0.25)
    np.testing.assert_allclose(pos, [[0.0, -2.25], [0.0, 0.0]])


# ------------------------------------------------------------------ ray label placement


def _boxes_intersect(centres: np.ndarray, half: np.ndarray) -> list[tuple[int, int]]:
    """Pairs of axis-aligned boxes whose interiors intersect (numpy, by definition)."""
    gap = np.abs(centres[:, None, :] - centres[None, :, :])
    touch = np.all(gap < half[:, None, :] + half[None, :, :] - 1e-12, axis=2)
    return [(i, j) for i, j in zip(*np.nonzero(np.triu(touch, 1)), strict=True)]


def _fan(n: int = 8):
    """n rays within 7 degrees and 8 % in length of each other: their names pile up."""
    angle = np.deg2rad(30.0 + np.arange(n))
    length = 1.0 + 0.01 * np.arange(n)[::-1]
    tips = np.column_stack([length * np.cos(angle), length * np.sin(angle)])
    names = [f"part{i}" for i in range(n)]
    sizes = np.array([[0.05 * len(name), 0.12] for name in names])
    return tips, sizes


def test_ray_labels_of_a_fan_do_not_overlap():
    tips, sizes = _fan(8)
    half = sizes / 2
    offset, radius = 0.02, 0.03
    # control: just beyond each tip (no moves allowed) the boxes do overlap
    unit = tips / _norms(tips)[:, None]
    reach = offset + (half[:, 0] + radius) * np.abs(unit[:, 0])
    first = tips + unit * (reach + (half[:, 1] + radius) * np.abs(unit[:, 1]))[:, None]
    assert len(_boxes_intersect(first, half)) >= 10
    pos = ray_label_positions(tips, offset, box_sizes=sizes, tip_radius=radius)
    assert _boxes_intersect(pos, half) == []
    # no box comes within the dot radius of any tip (its own included)
    near = np.all(np.abs(pos[:, None, :] - tips[None]) < half[:, None, :] + radius, axis=2)
    assert not near.any()
    # every label stays near its tip: within the documented bound (default max_shift = 8
    # times the tallest box), and on the far side of its tip along its ray
    bound = offset + radius + 8 * sizes[:, 1].max() + np.hypot(*(half + radius).T)
    assert np.all(_norms(pos - tips) <= bound)
    assert np.all(np.sum((pos - tips) * unit, axis=1) >= offset)
    # deterministic: the same call gives the same positions, bit for bit
    again = ray_label_positions(tips, offset, box_sizes=sizes, tip_radius=radius)
    np.testing.assert_array_equal(pos, again)


def test_ray_label_clears_its_tip_when_nothing_is_in_the_way():
    # By hand: four rays along the axes, far apart. Each box edge is `offset` beyond the dot.
    tips = np.array([[2.0, 0.0], [0.0, -3.0], [-1.0, 0.0], [0.0, 0.5]])
    sizes = np.array([0.4, 0.2])  # one size for every label
    pos = ray_label_positions(tips, 0.1, box_sizes=sizes, tip_radius=0.05)
    np.testing.assert_allclose(
        pos, [[2.35, 0.0], [0.0, -3.25], [-1.35, 0.0], [0.0, 0.75]], atol=1e-12
    )
    # a ray of zero length has its name above its tip
    pos0 = ray_label_positions(np.zeros((1, 2)), 0.1, box_sizes=sizes)
    np.testing.assert_allclose(pos0, [[0.0, 0.2]], atol=1e-12)


def test_ray_labels_without_room_nearby_go_further_and_never_overlap():
    # 60 names on one tip, at most 2 box heights of moves around it: most find no room
    # there. They take the wider rings (out to 8 times as far), and no two boxes intersect.
    tips = np.tile([[1.0, 1.0]], (60, 1))
    sizes = np.array([0.3, 0.1])
    # where each box clears the tip, by hand: along (1, 1) / sqrt 2 by 0.05 + (0.15 + 0.05)
    # / sqrt 2 (tip radius 0, half sizes 0.15 and 0.05)
    start = np.array([1.0, 1.0]) + (0.05 + 0.2 / np.sqrt(2)) / np.sqrt(2)
    pos = ray_label_positions(tips, 0.05, box_sizes=sizes, max_shift=0.2)
    half = np.tile(sizes / 2, (60, 1))
    assert _boxes_intersect(pos, half) == []
    shift = _norms(pos - start)
    assert 30 < (shift > 0.2 + 1e-12).sum() < 60  # some were placed nearby, most further
    assert np.all(shift <= 8 * 0.2 + 1e-9)  # within the widest ring
    assert np.all(np.sum((pos - start) * [1, 1], axis=1) >= -1e-12)  # never inward


def test_ray_labels_with_no_ring_to_move_in_go_on_outward_along_the_ray():
    # max_shift next to nothing: no push but none fits, so each name goes outward along its
    # ray (direction (1, 0)) to the first free place: a row of touching boxes, by hand
    tips = np.tile([[1.0, 0.0]], (5, 1))
    pos = ray_label_positions(tips, 0.1, box_sizes=[0.4, 0.2], max_shift=1e-12)
    # the first clears the tip at 1 + 0.1 + 0.2; each next one a box width further, or one
    # step of 0.1 more where rounding makes touching boxes count as overlapping
    assert pos[0, 0] == pytest.approx(1.3, abs=1e-12)
    gaps = np.diff(pos[:, 0])
    assert np.all((gaps >= 0.4 - 1e-12) & (gaps <= 0.5 + 1e-12)), gaps
    np.testing.assert_allclose(pos[:, 1], 0.0, atol=1e-12)


def test_ray_label_positions_rejects_bad_boxes():
    tips = np.array([[1.0, 0.0]])
    with pytest.raises(CompositionError, match="box sizes"):
        ray_label_positions(tips, 0.1, box_sizes=[-1.0, 0.2])
    with pytest.raises(CompositionError, match="tip_radius"):
        ray_label_positions(tips, 0.1, box_sizes=[1.0, 0.2], tip_radius=-1.0)


def _reference_pushes(step, inner, outer):
    k = int(np.floor(outer / step + 1e-9))
    pushes = [
        (a * step, b * step, np.hypot(a, b), a, b)
        for a in range(k + 1)
        for b in range(-k, k + 1)
        if np.hypot(a, b) * step <= outer * (1 + 1e-9)
        and (np.hypot(a, b) * step > inner * (1 + 1e-9) or (inner == 0 and a == b == 0))
    ]
    # nearest first; then smaller |b|, outward (smaller a), left (larger b) first
    pushes.sort(key=lambda p: (p[2], abs(p[4]), p[3], -p[4]))
    return [(p[0], p[1]) for p in pushes]


def reference_label_positions(tips, offset, boxes, tip_radius):
    """The placement rule of ``ray_label_positions`` written out with plain loops (one
    candidate and one box at a time), as its docstring states it."""
    T = np.asarray(tips, dtype=float)
    D = T.shape[0]
    half = boxes / 2
    length = np.hypot(T[:, 0], T[:, 1])
    along = np.array([T[i] / length[i] if length[i] > 0 else [0.0, 1.0] for i in range(D)])
    side = np.column_stack([-along[:, 1], along[:, 0]])
    reach = offset + (half[:, 0] + tip_radius) * np.abs(along[:, 0])
    reach = reach + (half[:, 1] + tip_radius) * np.abs(along[:, 1])
    start = T + along * reach[:, None]
    tallest = boxes[:, 1].max()
    step, max_shift = tallest / 2, 8 * tallest
    # the first ring out to max_shift, then rings to 2, 4 and 8 times it, coarser steps
    rings = [_reference_pushes(step, 0.0, max_shift)]
    for level in (1, 2, 3):
        outer = max_shift * 2**level
        rings.append(_reference_pushes(max(step, outer / 40), outer / 2, outer))
    placed: list[int] = []
    out = start.copy()

    def free(c, i):
        hit = any(np.all(np.abs(c - out[j]) < half[i] + half[j]) for j in placed)
        tip = any(np.all(np.abs(c - T[j]) < half[i] + tip_radius) for j in range(D))
        return not hit and not tip

    for i in sorted(range(D), key=lambda i: -length[i]):
        found = None
        for pushes in rings:
            for a, b in pushes:
                c = start[i] + a * along[i] + b * side[i]
                if free(c, i):
                    found = c
                    break
            if found is not None:
                break
        if found is None:  # then on outward along the ray, a step at a time
            outer_step = max(step, 8 * max_shift / 40)
            a = int(np.floor(8 * max_shift / outer_step)) + 1
            while not free(start[i] + a * outer_step * along[i], i):
                a += 1
            found = start[i] + a * outer_step * along[i]
        out[i] = found
        placed.append(i)
    return out


@settings(max_examples=25, deadline=None)
@given(st.integers(2, 14), st.integers(0, 10_000), st.floats(0.05, 1.0))
def test_label_positions_follow_their_rule(D, seed, spread):
    # crowded and sparse layouts alike: the vectorised placement (chunks of candidates,
    # nearby boxes only) gives the positions of the rule applied one candidate at a time
    rng = np.random.default_rng(seed)
    tips = rng.normal(size=(D, 2)) * spread
    boxes = np.column_stack([rng.uniform(0.05, 0.4, D), np.full(D, 0.08)])
    got = ray_label_positions(tips, 0.02, box_sizes=boxes, tip_radius=0.01)
    expected = reference_label_positions(tips, 0.02, boxes, 0.01)
    np.testing.assert_allclose(got, expected, atol=1e-12)


@settings(max_examples=30, deadline=None)
@given(st.integers(2, 60), st.integers(0, 10_000), st.floats(0.02, 1.0))
def test_no_two_label_boxes_ever_intersect(D, seed, spread):
    # crowded fans of up to 60 names (many rays nearly alike): whatever the layout, the
    # boxes are pairwise disjoint and none covers a tip (boxes tested pairwise by numpy)
    rng = np.random.default_rng(seed)
    angle = rng.normal(0.6, spread, D)
    length = rng.uniform(0.5, 1.0, D)
    tips = np.column_stack([length * np.cos(angle), length * np.sin(angle)])
    boxes = np.column_stack([rng.uniform(0.05, 0.3, D), np.full(D, 0.06)])
    pos = ray_label_positions(tips, 0.01, box_sizes=boxes, tip_radius=0.01)
    assert _boxes_intersect(pos, boxes / 2) == []
    near = np.all(np.abs(pos[:, None, :] - tips[None]) < boxes[:, None, :] / 2 + 0.01, axis=2)
    assert not near.any()


def test_text_width_grows_with_the_text_and_the_font():
    assert text_width_px("") == 0.0
    assert text_width_px("Fe2O3") > text_width_px("Fe")
    assert text_width_px("MW") > text_width_px("il")  # wide letters against narrow ones
    assert text_width_px("SiO2", 24) == pytest.approx(2 * text_width_px("SiO2", 12))


@pytest.mark.parametrize("top", [0.011, 0.05, 0.3, 0.66, 1.1, 4.8, 9.9, 12.0, 55.0, 110.0])
def test_tick_decimals_tell_every_tick_apart(top):
    # the ticks of [0, top] as a general plotting library places them (matplotlib's
    # MaxNLocator, at most ten, steps of 1, 2 or 5 times a power of ten as the browser's
    # axes use): each keeps its own label with the decimals chosen
    from matplotlib.ticker import MaxNLocator

    locator = MaxNLocator(nbins=10, steps=[1, 2, 5, 10])
    ticks = [v for v in locator.tick_values(0.0, top) if 0 <= v <= top * (1 + 1e-9)]
    decimals = tick_decimals(top)
    labels = [f"{v:.{decimals}f}" for v in ticks]
    assert len(set(labels)) == len(ticks), (top, labels)
    # and no more decimals than needed: one fewer would merge two labels (or none is needed)
    if decimals:
        fewer = {f"{v:.{decimals - 1}f}" for v in ticks}
        assert len(fewer) < len(ticks), (top, ticks)


def test_tick_decimals_of_an_empty_axis_are_zero():
    assert tick_decimals(0.0) == tick_decimals(-1.0) == tick_decimals(float("nan")) == 0
