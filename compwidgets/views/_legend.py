"""The colour key of a scatter-like view: point colours, group symbols and the legend.

:class:`ColourKey` is a part of :class:`~compwidgets.views._scatter.ScatterView`
(its methods run on the view): it colours the points by group or by the
model's ``colour_by`` balance, gives groups distinct symbols when the view's
``group_symbols`` is on, and draws the legend, all in marks made with the
view (no widget is made when colours change).

A balance is coloured on the scale chosen by the view's ``balance_scale``
(:func:`compwidgets.views._common.balance_scale`: diverging around 0 only when
the values span 0, else sequential over their range). The legend lists the
groups (or the scale's ends and middle), says when colours repeat, and
explains the replaced-value marker when the view shows one.
"""

from __future__ import annotations

import bqplot as bq
import numpy as np

from . import _common as cm
from ._mark_selection import same_array, show_selection

__all__ = ["ColourKey", "SYMBOL_TEXT"]

#: Legend titles start this share of the x range left of the swatches.
_LEGEND_TITLE_INDENT = 0.0125
#: Width of one character of legend text (bold, 12 px) allowed for, in pixels, and the
#: pixels between a swatch and the start of its text (bqplot Label x_offset) plus a gap.
_LEGEND_CHAR_PX = 7.0
_LEGEND_TEXT_START_PX = 14
#: Text sign of each group symbol, written before a group's name in the legend.
SYMBOL_TEXT = dict(
    zip(
        cm.GROUP_SYMBOLS, ("\u25cf", "\u25a0", "\u25b2", "\u25c6", "\u25bc", "\u271a"), strict=True
    )
)


class ColourKey:
    """Colours, group symbols and legend of a :class:`ScatterView` (methods of the view)."""

    def _build_colour_key(self, xy: dict) -> None:
        """The legend marks and one mark per group symbol beyond the first (made once)."""
        self._legend_swatches = bq.Scatter(
            x=np.zeros(0), y=np.zeros(0), scales=xy, marker="square", default_size=60,
            interactions={}, enable_hover=False, colors=[cm.SINGLE_COLOUR],
        )  # fmt: skip
        self._legend_text = bq.Label(
            x=np.zeros(0), y=np.zeros(0), text=np.array([], dtype=str), scales=xy,
            colors=[cm.TEXT_COLOUR], default_size=12, font_unit="px", align="start",
            x_offset=10, y_offset=4, interactions={}, enable_hover=False,
        )  # fmt: skip
        # Symbol marks lie under the points: the points of their groups are drawn
        # transparent in ``scatter``, which so keeps their hover, clicks and lasso.
        self._symbol_marks = [
            cm.point_mark(
                xy, self.colour_scale, marker=marker, interactions={}, enable_hover=False
            )
            for marker in cm.GROUP_SYMBOLS[1:]
        ]
        self._symbol_pos = [np.zeros(0, dtype=np.intp) for _ in self._symbol_marks]

    # ---------------------------------------------------------------- symbols
    def _symbol_of_points(self) -> np.ndarray | None:
        """Symbol number of each drawn point (0 = the points' own circle), or None if off."""
        m = self.model
        if not (self.group_symbols and m.group_column):
            return None
        codes = m.group_codes()[1][self._mark_rows]
        return np.where(codes >= 0, codes % len(cm.GROUP_SYMBOLS), 0)

    def _apply_symbols(self) -> None:
        """Draw each group's points with its symbol (or all as circles when off)."""
        symbols = self._symbol_of_points()
        opacities = np.zeros(0) if symbols is None else np.where(symbols == 0, 1.0, 0.0)
        current = self.scatter.opacities
        if current is None or not np.array_equal(np.asarray(current, dtype=float), opacities):
            self.scatter.opacities = opacities
        for k, mark in enumerate(self._symbol_marks, start=1):
            pos = np.zeros(0, np.intp) if symbols is None else np.flatnonzero(symbols == k)
            self._symbol_pos[k - 1] = pos
            pick = self._mark_pos[pos]
            cm.assign_arrays(
                mark,
                x=self._x[pick].astype(np.float32),
                y=self._y[pick].astype(np.float32),
            )
            colour = self.scatter.color
            mark_colour = None if colour is None or not pos.size else np.asarray(colour)[pos]
            if not same_array(mark.color, mark_colour):
                mark.color = mark_colour
        self._apply_symbol_selection()

    def _symbol_selections(self, selected_points: np.ndarray | None = None) -> list:
        """[(symbol mark, its ``selected``)] (``selected_points``: bool per drawn point)."""
        if selected_points is None:
            selected_points = self.model.selected_mask()[self._mark_rows]
        any_selected = bool(selected_points.any())
        out = []
        for mark, pos in zip(self._symbol_marks, self._symbol_pos, strict=True):
            # like the points: nothing selected in the view draws every point plainly
            sel = np.flatnonzero(selected_points[pos]).astype(np.uint32) if any_selected else None
            out.append((mark, sel if pos.size else None))
        return out

    def _apply_symbol_selection(self, selected_points: np.ndarray | None = None) -> None:
        """The ``selected`` of each symbol mark (``selected_points``: bool per drawn point)."""
        for mark, sel in self._symbol_selections(selected_points):
            show_selection(mark, sel)

    # ---------------------------------------------------------------- colours
    def _apply_colours(self) -> None:
        """Colour the points by group or by the model's colour_by balance; redraw the legend."""
        m = self.model
        entries: list[tuple[str | None, str]] = []
        self._balance_scale_box.layout.display = None if m.colour_by else "none"
        if m.colour_by:
            values = m.balance_values(m.colour_by)
            kind, scale, lo, hi = cm.balance_scale(values[self.rows], self.balance_scale)
            colours = list(scale)
            colour = values[self._mark_rows].astype(np.float32)
            what = "(diverging, 0 centre)" if kind == "diverging" else "(sequential, range)"
            mid = 0.0 if kind == "diverging" else (lo + hi) / 2
            top = cm.format_number(hi)
            entries = [
                (None, f"balance {m.colour_by}"),
                (None, what),
                (scale[2], top if kind == "sequential" else f"+{top}"),
                (scale[1], cm.format_number(mid)),
                (scale[0], cm.format_number(lo)),
            ]
            undefined = ~np.isfinite(colour)
            if undefined.any():
                # the browser draws NaN black: such rows get a value one colour step below
                # the scale, where the scale (evenly spaced colours from lo) is grey
                step = (hi - lo) / (len(colours) - 1)
                colours, lo = [cm.NO_GROUP_COLOUR, *colours], lo - step
                colour = np.where(undefined, np.float32(lo), colour).astype(np.float32)
                entries.append((cm.NO_GROUP_COLOUR, "(undefined)"))
        elif m.group_column:
            categories, codes = m.group_codes()
            palette = cm.group_colours(categories)
            colours = [cm.NO_GROUP_COLOUR, *palette]
            if len(colours) < 2:
                colours = colours * 2
            lo, hi = 0, max(1, len(categories))
            colour = (codes[self._mark_rows] + 1).astype(np.float32)
            present = np.bincount(codes[self.rows] + 1, minlength=len(categories) + 1) > 0
            entries = [(None, str(m.group_column))]
            symbols = self.group_symbols
            signs = [SYMBOL_TEXT[cm.GROUP_SYMBOLS[i % len(cm.GROUP_SYMBOLS)]] + " " for i in
                     range(len(categories))] if symbols else [""] * len(categories)  # fmt: skip
            listed = [
                (palette[i], signs[i] + str(c)) for i, c in enumerate(categories) if present[i + 1]
            ]
            if present[0]:
                listed.append((cm.NO_GROUP_COLOUR, ("\u25cf " if symbols else "") + "(no value)"))
            if len(listed) > self.legend_max:
                more = len(listed) - (self.legend_max - 1)
                listed = listed[: self.legend_max - 1] + [(None, f"... and {more} more")]
            if len(categories) > len(cm.PALETTE):
                repeat = f"(colours repeat after {len(cm.PALETTE)} groups"
                if not symbols:
                    repeat += "; 'symbols' tells them apart"
                listed.append((None, repeat + ")"))
            entries += listed
        else:
            colours, lo, hi, colour = [cm.SINGLE_COLOUR, cm.SINGLE_COLOUR], 0, 1, None
        if self._replaced_pos.size:
            entries += [(None, text) for text in cm.REPLACED_LEGEND]
        # The values first, then the scale: bqplot recolours the points on a scale change in
        # a transition scheduled for the next frame, which would repaint values sent after
        # it with the old values (seen in Chromium: points kept their group colours).
        if not same_array(self.scatter.color, colour):
            self.scatter.color = colour
        self._apply_symbols()
        with self.colour_scale.hold_sync():
            if list(self.colour_scale.colors) != colours:
                self.colour_scale.colors = colours
            if self.colour_scale.min != lo:
                self.colour_scale.min = float(lo)
            if self.colour_scale.max != hi:
                self.colour_scale.max = float(hi)
        self._draw_legend(entries)

    # ----------------------------------------------------------------- legend
    def _draw_legend(self, entries: list[tuple[str | None, str]]) -> None:
        """Draw the legend: (swatch colour or None for a title line, text) per line."""
        self._legend_entries = list(entries)
        sx, sy, tx, ty = self._legend_positions()
        colours = [c for c, _ in entries if c is not None] or [cm.SINGLE_COLOUR]
        with self._legend_swatches.hold_sync():
            self._legend_swatches.x = sx
            self._legend_swatches.y = sy
            self._legend_swatches.colors = colours
        n = self._legend_max_chars()
        text = [label if len(label) <= n else label[: n - 1] + "\u2026" for _, label in entries]
        with self._legend_text.hold_sync():
            self._legend_text.x = tx
            self._legend_text.y = ty
            self._legend_text.text = np.array(text, dtype=str)

    def _legend_max_chars(self) -> int:
        """Characters of legend text that fit between the legend's anchor and the right edge."""
        x, _, _ = self._legend_anchor()
        (x0, x1), (y0, y1) = self._ranges
        room = (x1 - x) * self._plot_height_px() / (y1 - y0) - _LEGEND_TEXT_START_PX
        return max(4, int(room // _LEGEND_CHAR_PX))

    def _legend_positions(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """(swatch x, swatch y, text x, text y) of the legend entries at the current anchor."""
        x, y, dy = self._legend_anchor()
        entries = self._legend_entries
        ys = y - dy * np.arange(len(entries), dtype=float)
        swatch = np.array([c is not None for c, _ in entries], dtype=bool)
        (x0, x1), _ = self._ranges
        # titles start a little to the left of the swatches
        tx = np.where(swatch, x, x - _LEGEND_TITLE_INDENT * (x1 - x0)).astype(float)
        return np.full(int(swatch.sum()), float(x)), ys[swatch], tx, ys

    def _place_legend(self) -> None:
        """Move the legend to the current anchor (positions only)."""
        sx, sy, tx, ty = self._legend_positions()
        cm.assign_arrays(self._legend_swatches, x=sx, y=sy)
        cm.assign_arrays(self._legend_text, x=tx, y=ty)
