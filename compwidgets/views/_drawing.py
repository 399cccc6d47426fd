"""Drawing tools of a scatter-like view: rectangle, lasso, polygon, and the selection they make.

:class:`DrawingTools` is a part of :class:`~compwidgets.views._scatter.ScatterView`
(its methods run on the view). Every selection is computed in the kernel:

* rectangle: bqplot's ``BrushSelector`` reports its corners when the drag ends;
  the view takes them, selects with :func:`compwidgets.core.geometry.points_in_rectangle`
  on every row shown, then empties the brush and draws the rectangle as its own
  outline. So each press starts a new rectangle (bqplot's brush would move the old
  one when pressed inside it), and only the last shape is drawn.
* lasso (points mode only): bqplot's ``LassoSelector`` marks the points inside in the
  browser and keeps every outline drawn, selecting in the union of them. After each
  lasso the view hands the figure the second of its two lasso selectors (made with
  the view), whose fresh outline layer drops the old ones: each lasso stands alone.
  The lasso sends points, not its outline, so it cannot select rows that are not
  drawn: in density mode it is replaced by the polygon, and a note says why.
* polygon: see :mod:`._polygon`.

A shape enclosing no row shown leaves the model's selection as it was and says so.
The last shape drawn is the view's ``selection_shape`` (kind and vertices in the
view's coordinates), None after a lasso or once the selection changed elsewhere.
"""

from __future__ import annotations

import bqplot as bq
import numpy as np

from ..core import geometry
from . import _common as cm

__all__ = ["DrawingTools", "EMPTY_SHAPE_NOTE", "LASSO_IN_DENSITY_NOTE"]

TOOL_LABELS = {"brush": "Rectangle", "lasso": "Lasso", "polygon": "Polygon", "none": "Off"}
#: Tooltips of the tool buttons (the browser cannot hover points under a drag tool).
TOOL_TIPS = {
    "brush": "Drag a rectangle to select the points inside",
    "lasso": "Draw around points to select them",
    "polygon": "Click vertices, then 'Close polygon' to select inside; points can be hovered",
    "none": "No selection tool: hover a point to see its values",
}
MODE_LABELS = {"replace": "new", "add": "add", "remove": "remove", "intersect": "intersect"}

#: Note of a shape that encloses no row shown (the selection is left as it was).
EMPTY_SHAPE_NOTE = "the shape encloses no rows; selection unchanged"
#: Why density mode has no lasso.
LASSO_IN_DENSITY_NOTE = (
    "no lasso here: it selects drawn points only, not the rows of the density; "
    "use Polygon (click vertices)"
)


class DrawingTools:
    """Selection tools of a :class:`ScatterView` (methods of the view)."""

    def _build_selectors(self) -> None:
        self.brush = bq.interacts.BrushSelector(
            x_scale=self.scale_x, y_scale=self.scale_y, marks=[], color=cm.SELECTION_COLOUR
        )
        self.brush.observe(
            self._guard(self._on_brush), names=["brushing", "selected_x", "selected_y"]
        )
        # two lassos: after each lasso the other takes over, with no outline drawn yet
        self._lassos = tuple(
            bq.interacts.LassoSelector(
                x_scale=self.scale_x,
                y_scale=self.scale_y,
                marks=[self.scatter],
                color=cm.SELECTION_COLOUR,
            )  # fmt: skip
            for _ in range(2)
        )
        self.lasso = self._lassos[0]
        self.scatter.observe(self._guard(self._on_mark_selected), names=["selected"])

    def _build_outline(self, xy: dict) -> None:
        """The outline of the last shape drawn (one Lines mark, made once)."""
        self.selection_outline = bq.Lines(
            x=np.zeros(0), y=np.zeros(0), scales=xy, colors=[cm.SELECTION_COLOUR],
            stroke_width=1.5, interactions={}, enable_hover=False,
        )  # fmt: skip

    # ------------------------------------------------------------------ tools
    @staticmethod
    def _tool_options(mode: str) -> list[tuple[str, str]]:
        keys = (
            ("brush", "lasso", "polygon", "none")
            if mode == "points"
            else ("brush", "polygon", "none")
        )
        return [(TOOL_LABELS[k], k) for k in keys]

    @classmethod
    def _tool_tips(cls, mode: str) -> list[str]:
        return [TOOL_TIPS[k] for _, k in cls._tool_options(mode)]

    def _on_tool_button(self, change):
        if getattr(self, "_syncing_buttons", False):
            return
        if change["new"] is not None and change["new"] != self.tool:
            self.tool = change["new"]

    def _apply_tool(self) -> None:
        tool = self.tool
        options = self._tool_options(self.active_mode)
        self._syncing_buttons = True  # new options reset the buttons' value: not a user choice
        try:
            if [v for _, v in self._tool_buttons.options] != [v for _, v in options]:
                with self._tool_buttons.hold_sync():
                    self._tool_buttons.options = options
                    self._tool_buttons.tooltips = self._tool_tips(self.active_mode)
            if self._tool_buttons.value != tool:
                self._tool_buttons.value = tool
        finally:
            self._syncing_buttons = False
        interaction = {"brush": self.brush, "lasso": self.lasso}.get(tool)
        if self.figure.interaction is not interaction:
            self.figure.interaction = interaction
        polygon = tool == "polygon"
        # clicks add vertices only while the polygon tool is on
        clicks = {"click": "add"} if polygon else {}
        if self.polygon_marker.interactions != clicks:
            self.polygon_marker.interactions = clicks
        self.polygon_marker.visible = polygon
        self._polygon_line.visible = polygon
        # hidden, not removed: the toolbar keeps its size, so the figure never moves
        self._close_button.layout.visibility = "visible" if polygon else "hidden"
        # the hover points would catch the clicks meant for polygon vertices
        self.scatter.visible = not (polygon and self.active_mode == "density")
        self._set_mode_note()

    def _set_mode_note(self) -> None:
        """Density mode says what it draws, and why it has no lasso."""
        if self.active_mode != "density":
            self._set_note("density", "")
            return
        text = (
            f"density of {self.rows.size:,} rows, {self._mark_rows.size:,} drawn as points; "
            + LASSO_IN_DENSITY_NOTE
        )
        self._set_note("density", text)

    # -------------------------------------------------------------- selecting
    def _select(self, view_mask: np.ndarray, mode: str | None = None) -> bool:
        """Select the view's rows where ``view_mask`` is True, combined by ``mode``.

        An empty mask leaves the model's selection as it was, with a note; returns
        whether the model was asked to select.
        """
        view_mask = np.asarray(view_mask, dtype=bool)
        if not view_mask.any():
            self._set_note("selection", EMPTY_SHAPE_NOTE)
            self._apply_selection()  # the lasso may have emptied the mark in the browser
            return False
        self._set_note("selection", "")
        rows = self.rows[view_mask]
        self._selecting = True
        try:
            self.model.select(rows, mode or self.select_mode)
        finally:
            self._selecting = False
        return True

    def select_rectangle(self, x_range, y_range, mode: str | None = None) -> None:
        """Select the rows shown inside a rectangle of data coordinates.

        A rectangle enclosing no row leaves the selection unchanged (the notes say so).
        """
        (x0, x1), (y0, y1) = sorted(map(float, x_range)), sorted(map(float, y_range))
        inside = geometry.points_in_rectangle(self._x, self._y, (x0, x1), (y0, y1))
        if self._select(inside, mode):
            self._set_shape({"kind": "rectangle", "vertices": [[x0, y0], [x1, y1]]})

    def select_polygon(self, vertices, mode: str | None = None) -> None:
        """Select the rows shown inside a polygon ((k, 2) data coordinates, even-odd rule).

        A polygon enclosing no row leaves the selection unchanged (the notes say so).
        """
        vertices = np.asarray(vertices, dtype=float).tolist()
        inside = geometry.points_in_polygon(self._x, self._y, vertices)
        if self._select(inside, mode):
            self._set_shape({"kind": "polygon", "vertices": vertices})

    def clear_selection(self) -> None:
        """Clear the model's selection and this view's shapes."""
        self._clear_brush()
        self._clear_vertices()
        self._set_shape(None)
        self._set_note("selection", "")
        self._fresh_lasso()
        self.model.clear_selection()

    def _set_shape(self, shape: dict | None) -> None:
        """Keep the last shape drawn and draw its outline (nothing for None)."""
        self.selection_shape = shape
        if shape is None:
            xs = ys = np.zeros(0)
        else:
            v = np.asarray(shape["vertices"], dtype=float)
            if shape["kind"] == "rectangle":
                (x0, y0), (x1, y1) = v
                v = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]])
            xs, ys = np.append(v[:, 0], v[0, 0]), np.append(v[:, 1], v[0, 1])
        cm.assign_arrays(self.selection_outline, x=xs, y=ys)

    def _fresh_lasso(self) -> None:
        """Hand the figure the other lasso: its outline layer starts empty."""
        if self.figure.interaction is not self.lasso:
            return
        self.lasso = self._lassos[1] if self.lasso is self._lassos[0] else self._lassos[0]
        self.figure.interaction = self.lasso

    def _clear_brush(self) -> None:
        self._last_brush = None
        if self.brush.selected_x is None and self.brush.selected_y is None:
            return
        was = self._updating
        self._updating = True
        try:
            with self.brush.hold_sync():
                self.brush.selected_x = None
                self.brush.selected_y = None
        finally:
            self._updating = was

    # --------------------------------------------------------- event handlers
    def _on_brush(self, change) -> None:
        if self._updating or self.brush.brushing:
            return
        sx, sy = self.brush.selected_x, self.brush.selected_y
        if sx is None or sy is None or len(sx) != 2 or len(sy) != 2:
            self._last_brush = None
            return
        key = (tuple(np.asarray(sx, float)), tuple(np.asarray(sy, float)))
        if key == self._last_brush:
            return
        self._last_brush = key
        self.select_rectangle(sx, sy)
        # the view draws the rectangle itself: an empty brush makes the next press a new one
        self._clear_brush()

    def _on_mark_selected(self, change) -> None:
        """The front end (lasso) changed the scatter's ``selected``: select those rows."""
        if self._updating:
            return
        new = change["new"]
        idx = np.zeros(0, dtype=np.int64) if new is None else np.asarray(new).astype(np.int64)
        if idx.size and (idx.min() < 0 or idx.max() >= self._mark_rows.size):
            bad = int(idx.min() if idx.min() < 0 else idx.max())
            raise IndexError(
                f"selected point {bad} is outside 0..{self._mark_rows.size - 1} of this view"
            )
        mask = np.zeros(self.rows.size, dtype=bool)
        mask[self._mark_pos[idx]] = True
        if self._select(mask):
            self._set_shape(None)  # the lasso's outline never reaches the kernel
        self._fresh_lasso()
