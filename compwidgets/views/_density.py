"""Density images for large views: all rows (muted) plus the selection, as one PNG.

The counts come from :mod:`compwidgets.core.geometry`; this module only turns
them into colours and encodes the PNG with Pillow. The bin of every point is
computed once per set of coordinates, and kept by model row too, so a new
selection costs one look-up of the selected rows' bins, one ``bincount`` and
one small image (the cost follows the size of the selection, not of the table).
"""

from __future__ import annotations

import io

import numpy as np
from PIL import Image

from ..core import geometry
from ._common import DENSITY_ALL_COLOUR, DENSITY_SELECTION_COLOUR, hex_to_rgb

__all__ = ["DensityImage", "encode_png", "compose_rgba"]


def encode_png(rgba: np.ndarray, level: int = 3) -> bytes:
    """PNG bytes of an RGBA image (8 bits per channel), encoded by Pillow.

    Parameters
    ----------
    rgba : ndarray of uint8, shape (height, width, 4)
        Row 0 is the top of the image.
    level : int, default 3
        zlib compression level (0-9).
    """
    img = np.ascontiguousarray(rgba, dtype=np.uint8)
    if img.ndim != 3 or img.shape[2] != 4:
        raise ValueError(f"encode_png needs an (height, width, 4) array, got {img.shape}")
    out = io.BytesIO()
    Image.fromarray(img, mode="RGBA").save(out, format="PNG", compress_level=int(level))
    return out.getvalue()


def _intensity(counts: np.ndarray) -> np.ndarray:
    """Log-scaled intensity in [0, 1] (0 where the count is 0)."""
    top = counts.max() if counts.size else 0
    if top <= 0:
        return np.zeros(counts.shape)
    return np.log1p(counts) / np.log1p(top)


def compose_rgba(all_counts: np.ndarray, selected_counts: np.ndarray | None = None) -> np.ndarray:
    """Colour two count grids (ny, nx; row 0 = lowest y) into one RGBA image, top row first.

    All rows are drawn in a muted grey whose opacity grows with the log count;
    the selection is drawn over it in a contrasting colour, with its own log
    scale (so a small selection stays visible). Empty cells are transparent.
    """
    base_rgb = np.array(hex_to_rgb(DENSITY_ALL_COLOUR), dtype=float) / 255.0
    sel_rgb = np.array(hex_to_rgb(DENSITY_SELECTION_COLOUR), dtype=float) / 255.0
    t_all = _intensity(all_counts)
    a_all = np.where(all_counts > 0, 0.18 + 0.5 * t_all, 0.0)
    if selected_counts is None or not np.any(selected_counts):
        a_out = a_all
        rgb = np.broadcast_to(base_rgb, a_all.shape + (3,))
    else:
        t_sel = _intensity(selected_counts)
        a_sel = np.where(selected_counts > 0, 0.45 + 0.55 * t_sel, 0.0)
        a_out = a_sel + a_all * (1.0 - a_sel)
        with np.errstate(invalid="ignore", divide="ignore"):
            w_sel = np.where(a_out > 0, a_sel / a_out, 0.0)[..., None]
        rgb = w_sel * sel_rgb + (1.0 - w_sel) * base_rgb
    out = np.empty(a_all.shape + (4,), dtype=np.uint8)
    out[..., :3] = np.round(rgb * 255.0)
    out[..., 3] = np.round(a_out * 255.0)
    return out[::-1]  # row 0 of the image is the top (highest y)


class DensityImage:
    """Density layers of one set of points on a fixed grid.

    Parameters
    ----------
    extent : (x0, x1, y0, y1)
        Data coordinates covered by the image.
    bins : (nx, ny)
        Image size in pixels (one bin per pixel).
    """

    def __init__(self, extent, bins):
        self.extent = tuple(float(v) for v in extent)
        self.bins = (int(bins[0]), int(bins[1]))
        self._index = np.zeros(0, dtype=np.int32)
        self._by_row: np.ndarray | None = None
        self._all = np.zeros(self.bins[::-1], dtype=np.int64)

    def set_points(
        self,
        x: np.ndarray,
        y: np.ndarray,
        rows: np.ndarray | None = None,
        n_rows: int | None = None,
        index: np.ndarray | None = None,
    ) -> None:
        """New coordinates: bins and the all-rows layer are recomputed.

        Parameters
        ----------
        x, y : ndarray, shape (n,)
        rows, n_rows : optional
            Model row of each point and the model's row count: the bins are then
            also kept by model row, for :meth:`counts_of_rows`.
        index : ndarray of int, shape (n,), optional
            Bin numbers of these points on this grid computed before
            (:func:`compwidgets.core.geometry.bin_index`), instead of computing them.
        """
        if index is None:
            index = geometry.bin_index(x, y, self.extent, self.bins)
        self._index = index
        self._all = geometry.counts_from_bins(index, self.bins)
        self._by_row = None
        if rows is not None and n_rows is not None:
            self._by_row = _bins_by_row(index, rows, n_rows)

    def set_all_counts(self, counts: np.ndarray) -> None:
        """Replace the all-rows layer by counts on this grid (e.g. of rows not held here)."""
        counts = np.asarray(counts, dtype=np.int64)
        if counts.shape != self._all.shape:
            raise ValueError(f"counts of shape {counts.shape}; the grid is {self._all.shape}")
        self._all = counts

    @property
    def all_counts(self) -> np.ndarray:
        return self._all

    @property
    def index(self) -> np.ndarray:
        """Bin number of each point (-1 outside the grid)."""
        return self._index

    def selection_counts(self, mask: np.ndarray | None) -> np.ndarray | None:
        """Counts of the points where ``mask`` is True (None for no selection)."""
        if mask is None or not mask.any():
            return None
        return geometry.counts_from_bins(self._index, self.bins, mask)

    def counts_of_rows(self, rows: np.ndarray) -> np.ndarray | None:
        """Counts of the points of model rows ``rows`` (None when none of them is shown)."""
        if self._by_row is None:
            raise ValueError("counts_of_rows needs set_points(..., rows=, n_rows=)")
        if rows.size == 0:
            return None
        picked = self._by_row[rows]
        picked = picked[picked >= 0]
        if picked.size == 0:
            return None
        nx, ny = self.bins
        return np.bincount(picked, minlength=nx * ny).reshape(ny, nx)

    def render(self, mask: np.ndarray | None = None) -> bytes:
        """PNG of all points plus the points of ``mask`` (bool, one per point)."""
        return encode_png(compose_rgba(self._all, self.selection_counts(mask)))

    def render_rows(self, rows: np.ndarray) -> bytes:
        """PNG of all points plus the points of the model rows ``rows``."""
        return encode_png(compose_rgba(self._all, self.counts_of_rows(rows)))


def _bins_by_row(index: np.ndarray, rows: np.ndarray, n_rows: int) -> np.ndarray:
    """Bin number per model row (-1 for rows not shown or outside the grid)."""
    dtype = np.int32 if index.dtype == np.int32 else np.int64
    out = np.full(int(n_rows), -1, dtype=dtype)
    out[np.asarray(rows, dtype=np.intp)] = index
    return out
