"""Density images for large views: all rows (muted) plus the selection, as one PNG.

The counts come from :mod:`compwidgets.core.geometry`; this module only turns
them into colours and encodes a PNG with numpy and zlib (no imaging library).
The bin of every point is computed once per set of coordinates, so a new
selection costs one ``bincount`` of the selected points and one small image.
"""

from __future__ import annotations

import struct
import zlib

import numpy as np

from ..core import geometry
from ._common import DENSITY_ALL_COLOUR, DENSITY_SELECTION_COLOUR, hex_to_rgb

__all__ = ["DensityImage", "encode_png", "compose_rgba"]

_PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"


def _chunk(kind: bytes, data: bytes) -> bytes:
    return (
        struct.pack(">I", len(data))
        + kind
        + data
        + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF)
    )


def encode_png(rgba: np.ndarray, level: int = 3) -> bytes:
    """PNG bytes of an RGBA image (8 bits per channel, no filtering, zlib ``level``).

    Parameters
    ----------
    rgba : ndarray of uint8, shape (height, width, 4)
        Row 0 is the top of the image.
    """
    img = np.ascontiguousarray(rgba, dtype=np.uint8)
    if img.ndim != 3 or img.shape[2] != 4:
        raise ValueError(f"encode_png needs an (height, width, 4) array, got {img.shape}")
    h, w, _ = img.shape
    raw = np.zeros((h, 1 + 4 * w), dtype=np.uint8)  # filter byte 0 ("none") per row
    raw[:, 1:] = img.reshape(h, 4 * w)
    header = struct.pack(">IIBBBBB", w, h, 8, 6, 0, 0, 0)  # 8-bit RGBA
    return (
        _PNG_SIGNATURE
        + _chunk(b"IHDR", header)
        + _chunk(b"IDAT", zlib.compress(raw.tobytes(), level))
        + _chunk(b"IEND", b"")
    )


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
        self._all = np.zeros(self.bins[::-1], dtype=np.int64)

    def set_points(self, x: np.ndarray, y: np.ndarray) -> None:
        """New coordinates: bins and the all-rows layer are recomputed."""
        self._index = geometry.bin_index(x, y, self.extent, self.bins)
        self._all = geometry.counts_from_bins(self._index, self.bins)

    @property
    def all_counts(self) -> np.ndarray:
        return self._all

    def selection_counts(self, mask: np.ndarray | None) -> np.ndarray | None:
        """Counts of the points where ``mask`` is True (None for no selection)."""
        if mask is None or not mask.any():
            return None
        return geometry.counts_from_bins(self._index, self.bins, mask)

    def render(self, mask: np.ndarray | None = None) -> bytes:
        """PNG of all points plus the points of ``mask`` (bool, one per point)."""
        return encode_png(compose_rgba(self._all, self.selection_counts(mask)))
