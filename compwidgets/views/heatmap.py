"""The variation matrix as one picture: a heat map drawn in the browser from an array.

:class:`VariationHeatmap` sends the D x D matrix once, as float32 values and
RGB colours (binary buffers), and its front end (``js/heatmap.js``) paints it on
one canvas; the part names are text in strips that stay in view while the
matrix scrolls, and the cell size zooms. Hovering a cell shows its value;
clicking one sets :attr:`VariationHeatmap.picked`. At 200 parts this is one
widget and 160 KB, where a table of labels would be 40,000 widgets.

Colours run from :data:`LOW_COLOUR` (0) to :data:`HIGH_COLOUR` (the largest
off-diagonal value), linear in the value.
"""

from __future__ import annotations

from collections.abc import Sequence

import anywidget
import numpy as np
import traitlets as t

from ._esm import bundle, read_asset

__all__ = ["HIGH_COLOUR", "LOW_COLOUR", "VariationHeatmap", "heat_colours"]

#: Ends of the colour scale (low -> high variation).
LOW_COLOUR = (250, 247, 240)
HIGH_COLOUR = (120, 52, 18)

#: Entry module of the front end (joined with what it imports by ``_esm.bundle``).
ENTRY = "heatmap.js"


def heat_colours(values: np.ndarray) -> np.ndarray:
    """RGB (uint8, shape + (3,)) of each value, linear from 0 to the largest off-diagonal one.

    Non-finite values take the low colour.
    """
    T = np.asarray(values, dtype=float)
    D = T.shape[0] if T.ndim == 2 else 0
    off = T[~np.eye(D, dtype=bool)] if D else np.zeros(0)
    off = off[np.isfinite(off)]
    top = float(off.max()) if off.size else 0.0
    with np.errstate(invalid="ignore", divide="ignore"):
        share = np.where(np.isfinite(T), T / top, 0.0) if top > 0 else np.zeros(T.shape)
    share = np.clip(share, 0.0, 1.0)[..., None]
    lo, hi = np.array(LOW_COLOUR, dtype=float), np.array(HIGH_COLOUR, dtype=float)
    return np.round(lo + (hi - lo) * share).astype(np.uint8)


def default_cell_px(size: int) -> int:
    """Cell size that fits about 380 px, but not below 12 px (readable names) nor above 28."""
    return int(np.clip(380 // max(int(size), 1), 12, 28))


class VariationHeatmap(anywidget.AnyWidget):
    """A D x D matrix of non-negative values (the variation matrix) as one heat-map picture.

    Traits (synced with the front end)
    ----------------------------------
    names : list of str
        Row (= column) names, as text.
    values : bytes
        The matrix, float32 little-endian, row-major.
    colours : bytes
        RGB per cell, uint8, row-major (see :func:`heat_colours`).
    cell_px : int
        Size of one cell on screen, 4-32 px (the zoom buttons change it).
    picked : list of int
        ``[row, column]`` of the last cell clicked (``[]`` before any).
    """

    _esm = bundle(ENTRY)
    _css = read_asset("heatmap.css")

    names = t.List(t.Unicode()).tag(sync=True)
    values = t.Bytes(b"").tag(sync=True)
    colours = t.Bytes(b"").tag(sync=True)
    cell_px = t.Int(14).tag(sync=True)
    picked = t.List(t.Int()).tag(sync=True)

    @t.validate("cell_px")
    def _check_cell(self, proposal):
        return int(np.clip(int(proposal["value"]), 4, 32))

    @t.validate("picked")
    def _check_picked(self, proposal):
        value = [int(v) for v in proposal["value"]]
        if value and (len(value) != 2 or not all(0 <= v < len(self.names) for v in value)):
            raise t.TraitError(
                f"picked must be [] or [row, column] within 0..{len(self.names) - 1}, got {value}"
            )
        return value

    def set_matrix(self, names: Sequence[str], values: np.ndarray) -> None:
        """Show ``values`` (D, D) with row and column ``names``; one message.

        The cell size is reset to :func:`default_cell_px` when D changes.
        """
        names = [str(n) for n in names]
        T = np.asarray(values, dtype=float)
        if T.shape != (len(names), len(names)):
            raise ValueError(
                f"set_matrix needs a square matrix of {len(names)} names, got shape {T.shape}"
            )
        with self.hold_sync():
            if len(names) != len(self.names):
                self.cell_px = default_cell_px(len(names))
            if self.picked:
                self.picked = []
            self.names = names
            self.values = np.ascontiguousarray(T, dtype="<f4").tobytes()
            self.colours = np.ascontiguousarray(heat_colours(T)).tobytes()

    def clear(self) -> None:
        """Show nothing."""
        with self.hold_sync():
            self.picked = []
            self.names = []
            self.values = b""
            self.colours = b""

    def matrix(self) -> np.ndarray:
        """The matrix as sent to the browser (float32 values, as float64), shape (D, D)."""
        D = len(self.names)
        return np.frombuffer(self.values, dtype="<f4").astype(float).reshape(D, D)

    def colour_grid(self) -> np.ndarray:
        """The colours as sent to the browser, uint8 (D, D, 3)."""
        D = len(self.names)
        return np.frombuffer(self.colours, dtype=np.uint8).reshape(D, D, 3)
