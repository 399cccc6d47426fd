"""Polygon editing of a scatter-like view: vertices clicked one by one, then closed.

:class:`PolygonEditing` is a part of :class:`~compwidgets.views._scatter.ScatterView`
(its methods run on the view). With the polygon tool on, a click on the figure's
background adds a vertex (bqplot's ``interactions={'click': 'add'}`` on the vertex
mark), and so does a click on a point (at the point) or on the density image (at
the click). The dashed line closes the outline drawn so far; "Close polygon"
(:meth:`PolygonEditing.close_polygon`) selects the rows inside, computed in the
kernel by :func:`compwidgets.core.geometry.points_in_polygon` on every row shown
(also in density mode, where only a subsample is drawn as points).
"""

from __future__ import annotations

import bqplot as bq
import numpy as np

from ..core import CompositionError
from . import _common as cm

__all__ = ["PolygonEditing"]


class PolygonEditing:
    """Polygon vertices of a :class:`ScatterView` (methods of the view)."""

    def _build_polygon_marks(self, xy: dict) -> None:
        self.polygon_marker = bq.Scatter(
            x=np.zeros(0), y=np.zeros(0), scales=xy, interactions={}, marker="circle",
            default_size=30, colors=[cm.SELECTION_COLOUR], enable_hover=False,
            visible=False,
        )  # fmt: skip
        self._polygon_line = bq.Lines(
            x=np.zeros(0), y=np.zeros(0), scales=xy, colors=[cm.SELECTION_COLOUR],
            stroke_width=1.5, line_style="dashed", interactions={}, enable_hover=False,
            visible=False,
        )  # fmt: skip
        self.polygon_marker.observe(self._guard(self._on_vertices), names=["x", "y"])

    def close_polygon(self) -> None:
        """Select the rows inside the polygon clicked so far, then start a new polygon."""
        n = min(len(self.polygon_marker.x), len(self.polygon_marker.y))
        if n < 3:
            self._set_note("polygon", f"a polygon needs at least 3 points; {n} clicked so far")
            return
        vertices = np.column_stack([self.polygon_marker.x[:n], self.polygon_marker.y[:n]])
        self._clear_vertices()
        self._set_note("polygon", "")
        try:
            self.select_polygon(vertices)
        except CompositionError as err:  # e.g. the last click closed it on the first
            self._set_note("polygon", f"no selection: {err}")

    def _clear_vertices(self) -> None:
        if len(self.polygon_marker.x) == 0 and len(self.polygon_marker.y) == 0:
            return
        with self.polygon_marker.hold_sync():
            self.polygon_marker.x = np.zeros(0)
            self.polygon_marker.y = np.zeros(0)

    def _on_vertices(self, change) -> None:
        n = min(len(self.polygon_marker.x), len(self.polygon_marker.y))
        xs = np.asarray(self.polygon_marker.x[:n], dtype=float)
        ys = np.asarray(self.polygon_marker.y[:n], dtype=float)
        if n >= 2:
            xs, ys = np.append(xs, xs[0]), np.append(ys, ys[0])
        with self._polygon_line.hold_sync():
            self._polygon_line.x = xs
            self._polygon_line.y = ys

    def _on_point_click(self, mark, content) -> None:
        """A click on a point with the polygon tool adds a vertex at that point."""
        self._vertex_from(content, "x", "y")

    def _vertex_from(self, content, x_key: str, y_key: str) -> None:
        """With the polygon tool, add the vertex a click message holds under these keys."""
        if self.tool != "polygon":
            return
        data = content.get("data") or {}
        if x_key in data and y_key in data:
            self._add_vertex(float(data[x_key]), float(data[y_key]))

    def _add_vertex(self, x: float, y: float) -> None:
        with self.polygon_marker.hold_sync():
            self.polygon_marker.x = np.append(self.polygon_marker.x, x)
            self.polygon_marker.y = np.append(self.polygon_marker.y, y)

    def _on_image_click(self, mark, content) -> None:
        """A click on the density image adds a polygon vertex (the image hides the background)."""
        self._vertex_from(content, "click_x", "click_y")
