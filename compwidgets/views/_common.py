"""Colours, styles and small helpers shared by every scatter-like view.

One palette and one rule for group colours (the k-th category of the model's
grouping column gets the k-th colour), so the same group has the same colour
in every view of a model.

The categorical palette was chosen for this package: nine colours spread in
lightness (about 23 to 85 in CIELAB L*) and hue, checked to stay apart (CIELAB
difference of at least 13 between any two) under simulated protanopia,
deuteranopia and tritanopia (severity-1 simulation matrices of Machado,
Oliveira & Fernandes 2009, values quoted from memory). Beyond nine groups
the colours repeat; the legend then says so.
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
    "#28384a",  # slate
)

#: Colour of rows without a group value (and of every row when there is no grouping).
NO_GROUP_COLOUR = "#9a9a9a"
#: Colour of every point when the model has no grouping column.
SINGLE_COLOUR = PALETTE[0]

#: Diverging scale for a balance (negative, zero, positive).
BALANCE_COLOURS: tuple[str, str, str] = ("#2d69c3", "#f2f0ea", "#c0561e")

#: Frame, grid and text colours.
FRAME_COLOUR = "#3a3a3a"
GRID_COLOUR = "#c8c8c8"
TEXT_COLOUR = "#303030"

#: Selected / unselected styles of points (CSS styles of the SVG elements). Fill opacity,
#: not opacity: an SVG element with opacity < 1 is a compositing group of its own, and
#: thousands of them made each repaint of a selection much slower in Chromium.
SELECTED_STYLE: dict = {"fill-opacity": "1", "stroke": "#111111", "stroke-width": "1.2"}
UNSELECTED_STYLE: dict = {"fill-opacity": "0.22"}

#: Marker drawn over rows with a replaced (below-detection) value among the shown parts:
#: a hollow diamond around the point, drawn without interactions.
REPLACED_MARKER: dict = {
    "marker": "diamond",
    "fill": False,
    "stroke": "#111111",
    "stroke_width": 1.0,
    "default_size": 70,
    "colors": ["#111111"],
}

#: Point style of scatter marks.
POINT_STYLE: dict = {"marker": "circle", "default_size": 22, "stroke": None}

#: Density images: colour of all rows (muted) and of the selection (contrasting).
DENSITY_ALL_COLOUR = "#6f7782"
DENSITY_SELECTION_COLOUR = "#e4572e"


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


def balance_colour_scale(values: np.ndarray) -> bq.ColorScale:
    """Continuous diverging scale centred on 0 for the values of a balance."""
    m = balance_limits(values)
    return bq.ColorScale(colors=list(BALANCE_COLOURS), min=-m, max=m, mid=0.0)


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
