"""Colours, styles and small helpers shared by every scatter-like view.

One palette and one rule for group colours (the k-th category of the model's
grouping column gets the k-th colour), so the same group has the same colour
in every view of a model.

The categorical palette was chosen for this package: eight colours spread in
lightness and hue. The selection is shown in near-black (:data:`SELECTION_COLOUR`:
the outline of selected points, the selection layer of density pictures, the
drawn shapes), and every group colour stays at a CIEDE2000 difference of at
least :data:`SELECTION_MIN_DELTA_E` from it for normal vision and under
simulated protanopia and deuteranopia (``tests/test_colour.py`` checks this
with the colour-science library). Beyond eight groups the colours repeat; the
legend then says so, and the option to draw groups with distinct symbols
(:data:`GROUP_SYMBOLS`) tells more groups apart.

A balance is coloured on a diverging scale centred on 0 when its values span 0,
else on a sequential scale over their range (:func:`balance_scale`).
"""

from __future__ import annotations

from collections.abc import Sequence

import bqplot as bq
import numpy as np

from .. import core

#: Categorical colours, in the order groups receive them.
PALETTE: tuple[str, ...] = (
    "#2d69c3",  # cobalt
    "#e8782a",  # pumpkin
    "#1d8f6a",  # pine
    "#a3246e",  # plum
    "#3cc0e8",  # glacier
    "#f2d16b",  # straw
    "#6b4423",  # walnut
    "#f0a6c8",  # blush
)

#: Colour of rows without a group value (and of every row when there is no grouping).
NO_GROUP_COLOUR = "#9a9a9a"
#: Colour of every point when the model has no grouping column.
SINGLE_COLOUR = PALETTE[0]

#: Diverging scale for a balance (negative, zero, positive).
BALANCE_COLOURS: tuple[str, str, str] = ("#2d69c3", "#f2f0ea", "#c0561e")
#: Sequential scale for a balance whose values do not span 0 (lowest, middle, highest):
#: lightness falls steadily from the lowest value to the highest.
SEQUENTIAL_COLOURS: tuple[str, str, str] = ("#f3e9c6", "#4f9a94", "#1f3566")
#: How a balance is coloured: "auto" (diverging when the values span 0, else sequential),
#: "diverging" (centred on 0) or "sequential" (over the values' range).
BALANCE_SCALES: tuple[str, ...] = ("auto", "diverging", "sequential")

#: Colour of the selection: outline of selected points, density selection layer, drawn
#: shapes. Near-black: far from every group colour also for red-green colour blindness.
SELECTION_COLOUR = "#111111"
#: Least CIEDE2000 difference between a group colour and the selection colour, for normal
#: vision and simulated protanopia / deuteranopia (tests/test_colour.py says why 20).
SELECTION_MIN_DELTA_E = 20.0

#: Symbols given to groups in turn when a view draws groups with symbols as well as colours
#: (bqplot marker names). With eight colours and six symbols, 24 groups differ in one or both.
GROUP_SYMBOLS: tuple[str, ...] = (
    "circle", "square", "triangle-up", "diamond", "triangle-down", "cross",
)  # fmt: skip

#: Frame, grid and text colours.
FRAME_COLOUR = "#3a3a3a"
GRID_COLOUR = "#c8c8c8"
TEXT_COLOUR = "#303030"

#: Opacity of unselected points while a selection is shown (points and replaced markers).
UNSELECTED_OPACITY = "0.22"
#: Selected / unselected styles of points (CSS styles of the SVG elements). Fill opacity,
#: not opacity: an SVG element with opacity < 1 is a compositing group of its own, and
#: thousands of them made each repaint of a selection much slower in Chromium. Marks with
#: these styles get their selection through ``_mark_selection.show_selection`` (bqplot
#: leaves a fill opacity set when the selection is cleared).
SELECTED_STYLE: dict = {"fill-opacity": "1", "stroke": SELECTION_COLOUR, "stroke-width": "1.2"}
UNSELECTED_STYLE: dict = {"fill-opacity": UNSELECTED_OPACITY}

#: Marker drawn over rows with a replaced (below-detection) value among the shown parts:
#: a hollow diamond around the point, drawn without interactions. It is hollow, so it
#: fades through its stroke: unselected, it has the points' unselected opacity.
REPLACED_MARKER: dict = {
    "marker": "diamond",
    "fill": False,
    "stroke": "#111111",
    "stroke_width": 1.0,
    "default_size": 70,
    "colors": ["#111111"],
    "selected_style": {"stroke-opacity": "1"},
    "unselected_style": {"stroke-opacity": UNSELECTED_OPACITY},
}
#: Legend lines explaining the replaced-value marker.
REPLACED_LEGEND = ("\u25c7 replaced value", "(below detection)")

#: Point style of scatter marks.
POINT_STYLE: dict = {"marker": "circle", "default_size": 22, "stroke": None}


def point_mark(xy: dict, colour_scale, **options) -> bq.Scatter:
    """An empty scatter mark of group-coloured points with the selection styles.

    ``xy``: the x and y scales; ``options`` override :data:`POINT_STYLE` or add
    bqplot ``Scatter`` arguments (e.g. ``marker``, ``tooltip``, ``interactions``).
    """
    return bq.Scatter(
        x=np.zeros(0, np.float32),
        y=np.zeros(0, np.float32),
        scales={**xy, "color": colour_scale},
        colors=[SINGLE_COLOUR],
        selected_style=dict(SELECTED_STYLE),
        unselected_style=dict(UNSELECTED_STYLE),
        **{**POINT_STYLE, **options},
    )


#: Density images: colour of all rows (muted) and of the selection (contrasting).
DENSITY_ALL_COLOUR = "#6f7782"
DENSITY_SELECTION_COLOUR = SELECTION_COLOUR


def hex_to_rgb(colour: str) -> tuple[int, int, int]:
    """``"#rrggbb"`` -> (r, g, b) in 0..255."""
    c = colour.lstrip("#")
    if len(c) != 6:
        raise ValueError(f"expected a colour like '#rrggbb', got {colour!r}")
    return int(c[0:2], 16), int(c[2:4], 16), int(c[4:6], 16)


def group_colours(categories: Sequence[str]) -> list[str]:
    """The colour of each category, by its position (shared by every view)."""
    return [PALETTE[i % len(PALETTE)] for i in range(len(categories))]


def group_colour_scale(categories: Sequence[str]) -> bq.OrdinalColorScale:
    """Ordinal scale for codes + 1 (0 = no group value, k + 1 = the k-th category)."""
    return bq.OrdinalColorScale(
        domain=list(range(len(categories) + 1)),
        colors=[NO_GROUP_COLOUR, *group_colours(categories)],
    )


def balance_limits(values: np.ndarray) -> float:
    """Symmetric colour limit of a balance: the largest finite absolute value (1 if none)."""
    finite = np.abs(values[np.isfinite(values)])
    m = float(finite.max()) if finite.size else 0.0
    return m if m > 0 else 1.0


def balance_scale(
    values: np.ndarray, kind: str = "auto"
) -> tuple[str, tuple[str, ...], float, float]:
    """How to colour the values of a balance: (kind used, colours, lower, upper limit).

    Parameters
    ----------
    values : ndarray of float
        The balance values shown (non-finite values are ignored).
    kind : {"auto", "diverging", "sequential"}
        "auto" is diverging when the finite values span 0 (some below, some
        above), else sequential.

    Returns
    -------
    (kind, colours, lo, hi)
        Diverging: :data:`BALANCE_COLOURS` from ``-m`` to ``m``, ``m`` the
        largest absolute value (0 in the middle). Sequential:
        :data:`SEQUENTIAL_COLOURS` from the smallest to the largest value (one
        unit wide around a single value). The colours are evenly spaced from
        ``lo`` to ``hi``.

    Examples
    --------
    >>> balance_scale(np.array([0.7, 3.0, 6.9]))[0::2]
    ('sequential', 0.7)
    >>> balance_scale(np.array([-1.0, 2.0]))[0::2], balance_scale(np.array([-1.0, 2.0]))[3]
    (('diverging', -2.0), 2.0)
    """
    if kind not in BALANCE_SCALES:
        raise ValueError(f"balance scale must be one of {BALANCE_SCALES}, got {kind!r}")
    finite = np.asarray(values, dtype=float)
    finite = finite[np.isfinite(finite)]
    lo = float(finite.min()) if finite.size else 0.0
    hi = float(finite.max()) if finite.size else 0.0
    if kind == "auto":
        kind = "diverging" if lo < 0.0 < hi else "sequential"
    if kind == "diverging":
        m = balance_limits(finite)
        return kind, BALANCE_COLOURS, -m, m
    if not finite.size:
        lo, hi = 0.0, 1.0
    elif hi <= lo:
        lo, hi = lo - 0.5, hi + 0.5
    return kind, SEQUENTIAL_COLOURS, lo, hi


def balance_colour_scale(values: np.ndarray, kind: str = "auto") -> bq.ColorScale:
    """A bqplot colour scale for the values of a balance (see :func:`balance_scale`)."""
    _, colours, lo, hi = balance_scale(values, kind)
    return bq.ColorScale(colors=list(colours), min=lo, max=hi)


def part_members(model, part: str) -> list[str]:
    """The parts of the composition summed into ``part`` (itself when not an amalgamation)."""
    return model.members(part)


def check_view_parts(model, parts: Sequence[str], count: int) -> list[str]:
    """Validate parts shown by a view: ``count`` distinct known parts sharing no member.

    The rule is :func:`compwidgets.core.check_parts`, the same as for the model's
    active parts.

    Raises
    ------
    compwidgets.core.CompositionError
        Naming the unknown, repeated or overlapping parts.
    """
    return core.check_parts(
        parts, model.parts, model.amalgamations, count=count, what="parts shown"
    )


def replaced_rows(model, parts: Sequence[str]) -> np.ndarray:
    """Boolean mask (n_rows,): a value below detection was replaced in one of ``parts``."""
    return model.replaced_rows(parts)


def left_out_message(n: int, parts: Sequence[str]) -> str:
    """Text of the 'rows left out' line (empty when none is left out)."""
    if n == 0:
        return ""
    rows = "row" if n == 1 else "rows"
    return f"{n} {rows} left out (missing or zero in {', '.join(map(str, parts))})"


def right_legend_anchor(view) -> tuple[float, float, float]:
    """Legend anchor of a scatter view that keeps ``legend_width_px`` free right of its data.

    (x, y of the first entry, step down) in data coordinates, for
    ``ScatterView._legend_anchor``: the legend starts that many pixels left of
    the right edge, 5 % of the height below the top.
    """
    (_, x1), (y0, y1) = view.view_ranges
    h = y1 - y0
    room = view.legend_width_px * h / view._plot_height_px()
    return x1 - room, y1 - 0.05 * h, 0.05 * h


def format_number(value: float) -> str:
    """Compact text for a value in a tooltip (4 significant digits)."""
    if value is None or not np.isfinite(value):
        return "n/a"
    return f"{value:.4g}"


def assign_arrays(mark, **values) -> None:
    """Set array traits of a widget in one message, skipping values equal to the current ones.

    Parameters
    ----------
    mark : ipywidgets.Widget
        Usually a bqplot mark.
    **values
        Trait name -> new value (arrays, lists).
    """
    changed = {}
    for name, value in values.items():
        current = getattr(mark, name)
        if current is None or np.shape(current) != np.shape(value):
            changed[name] = value
        elif not np.array_equal(np.asarray(current), np.asarray(value)):
            changed[name] = value
    if not changed:
        return
    with mark.hold_sync():
        for name, value in changed.items():
            setattr(mark, name, value)
