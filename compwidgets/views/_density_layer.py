"""The density layer of a scatter-like view: all rows as a picture, the selection on top.

:class:`DensityLayer` is a part of :class:`~compwidgets.views._scatter.ScatterView`
(its methods run on the view). In density mode the view shows one bqplot ``Image``
of the density of every row shown (muted) with the selection's density over it
(near-black), both counted on a grid by :class:`~._density.DensityImage`; a seeded
subsample of points is drawn on top for hover. A new selection costs one look-up of
the selected rows' bins and one small PNG, written into the one of two picture
widgets (made with the view) not shown, which then becomes the mark's image.
"""

from __future__ import annotations

import bqplot as bq
import ipywidgets as widgets
import numpy as np

from ..core import geometry
from ._density import DensityImage

__all__ = ["DensityLayer"]


class DensityLayer:
    """Density picture of a :class:`ScatterView` (methods of the view)."""

    def _build_density_layer(self, xy: dict) -> None:
        self._density_image = self._new_density_image()
        ex = self._density_image.extent
        # Two picture widgets made once: a new picture goes into the one not shown, which
        # then becomes the mark's image (bqplot's Image mark redraws when its ``image``
        # changes, not when the shown widget's value does; seen in Chromium). Messages
        # reach the front end in order, so the value is there before the switch.
        blank = self._density_image.render()
        self._pictures = (
            widgets.Image(value=blank, format="png"),
            widgets.Image(value=blank, format="png"),
        )
        self._png = self._pictures[0]
        self.density = bq.Image(
            image=self._png, x=[ex[0], ex[1]], y=[ex[2], ex[3]], scales=xy, visible=False
        )
        self.density.on_element_click(self._guard(self._on_image_click))

    def _new_density_image(self) -> DensityImage:
        """An empty density grid over ``_density_extent()``, ``density_pixels`` wide."""
        ex = self._density_extent()
        nx = int(self.density_pixels)
        ny = max(1, int(round(nx * (ex[3] - ex[2]) / (ex[1] - ex[0]))))
        return DensityImage(ex, (nx, ny))

    def _set_density_points(self, cached: bool = False) -> None:
        """Bin the points shown on the density grid (kept by model row for selections).

        With ``cached`` (coordinates straight from ``_coordinates()``) and a
        ``_coordinates_key()``, the bin numbers are kept in the model's cache
        per set of parts, so that showing these parts again does not bin again.
        """
        image = self._density_image
        key = self._coordinates_key() if cached else None
        index = None
        if key is not None:
            x, y = self._x, self._y
            index = self.model.derived(
                ("density-bins", type(self).__name__, key, image.extent, image.bins),
                self.shown_parts(),
                lambda: geometry.bin_index(x, y, image.extent, image.bins),
            )
        image.set_points(self._x, self._y, self.rows, self.model.n_rows, index=index)

    def _render_density(self, mask: np.ndarray | None = None) -> None:
        """Show the density image of the rows shown, with the selection on top.

        ``mask`` (model rows) is used when given; otherwise the model's selection
        is looked up in the bins kept by row (the cost follows the selection's size).
        """
        if mask is not None:
            in_view = mask[self.rows]
            png = self._density_image.render(in_view if in_view.any() else None)
        else:
            png = self._density_image.render_rows(self.model.selection)
        if png == self._png.value:
            return
        spare = self._pictures[1] if self._png is self._pictures[0] else self._pictures[0]
        spare.value = png
        self._png = spare
        self.density.image = spare
