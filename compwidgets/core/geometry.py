"""Plane geometry for selections and density images: rectangles, polygons, 2-D counts.

Everything here is vectorised over the points (one pass of numpy per polygon
edge at most), so that a selection on 1,000,000 points stays interactive.
Points with a NaN coordinate are never inside anything and are never counted.
"""

from __future__ import annotations

import numpy as np

from ._arrays import CompositionError

__all__ = [
    "bin_index",
    "bounding_corners",
    "counts_from_bins",
    "density_grid",
    "points_in_polygon",
    "points_in_rectangle",
]


def _xy(x, y) -> tuple[np.ndarray, np.ndarray]:
    try:
        xa = np.asarray(x, dtype=float)
        ya = np.asarray(y, dtype=float)
    except (TypeError, ValueError) as err:
        raise CompositionError(f"coordinates must be numbers ({err})") from None
    if xa.ndim != 1 or ya.ndim != 1:
        raise CompositionError(f"x and y must be 1-D arrays, got shapes {xa.shape} and {ya.shape}")
    if xa.shape != ya.shape:
        raise CompositionError(f"x has {xa.shape[0]} values but y has {ya.shape[0]}")
    return xa, ya


def _interval(bounds, name: str) -> tuple[float, float]:
    try:
        lo, hi = (float(v) for v in bounds)
    except (TypeError, ValueError):
        raise CompositionError(f"{name} must be two numbers (low, high), got {bounds!r}") from None
    if not (np.isfinite(lo) and np.isfinite(hi)):
        raise CompositionError(f"{name} must be finite, got {bounds!r}")
    return (lo, hi) if lo <= hi else (hi, lo)


def points_in_rectangle(x, y, x_range, y_range) -> np.ndarray:
    """Boolean mask of the points inside an axis-aligned rectangle (edges included).

    Parameters
    ----------
    x, y : array-like of shape (n,)
        Point coordinates.
    x_range, y_range : pair of float
        The rectangle's sides, in either order (as a brush selector reports them).

    Returns
    -------
    ndarray of bool, shape (n,)
    """
    xa, ya = _xy(x, y)
    x0, x1 = _interval(x_range, "x_range")
    y0, y1 = _interval(y_range, "y_range")
    return (xa >= x0) & (xa <= x1) & (ya >= y0) & (ya <= y1)


def _vertices(vertices) -> np.ndarray:
    try:
        v = np.asarray(vertices, dtype=float)
    except (TypeError, ValueError) as err:
        raise CompositionError(f"polygon vertices must be numbers ({err})") from None
    if v.ndim != 2 or v.shape[1] != 2:
        raise CompositionError(f"polygon vertices must have shape (k, 2), got {v.shape}")
    if not np.all(np.isfinite(v)):
        bad = int(np.flatnonzero(~np.all(np.isfinite(v), axis=1))[0])
        raise CompositionError(f"polygon vertex {bad} is not finite: {v[bad].tolist()}")
    if v.shape[0] > 1 and np.array_equal(v[0], v[-1]):
        v = v[:-1]  # an explicitly closed ring: the closing edge is implied anyway
    if v.shape[0] < 3:
        raise CompositionError(f"a polygon needs at least 3 vertices, got {v.shape[0]}")
    return v


def points_in_polygon(x, y, vertices) -> np.ndarray:
    """Boolean mask of the points inside a polygon, by the even-odd rule.

    A horizontal ray is cast from each point to the right; a point is inside
    when it crosses the polygon's edges an odd number of times (the classical
    crossing-number test). Self-intersecting polygons are handled by the same
    rule. Points exactly on an edge may fall on either side.

    Parameters
    ----------
    x, y : array-like of shape (n,)
    vertices : array-like of shape (k, 2), k >= 3
        The polygon's corners in order; the last is joined to the first.

    Returns
    -------
    ndarray of bool, shape (n,)
    """
    xa, ya = _xy(x, y)
    v = _vertices(vertices)
    inside = np.zeros(xa.shape, dtype=bool)
    # Only points in the bounding box can be inside: test those (cheap pre-filter).
    lo, hi = v.min(axis=0), v.max(axis=0)
    cand = np.flatnonzero((xa >= lo[0]) & (xa <= hi[0]) & (ya >= lo[1]) & (ya <= hi[1]))
    if cand.size == 0:
        return inside
    px, py = xa[cand], ya[cand]
    odd = np.zeros(cand.shape, dtype=bool)
    xj, yj = v[-1]
    for xi, yi in v:
        if yi != yj:
            crosses = (yi > py) != (yj > py)
            x_cross = xi + (py - yi) * (xj - xi) / (yj - yi)
            odd ^= crosses & (px < x_cross)
        xj, yj = xi, yi
    inside[cand] = odd
    return inside


def _bins(bins) -> tuple[int, int]:
    if np.ndim(bins) == 0:
        bins = (bins, bins)
    try:
        nx, ny = (int(b) for b in bins)
    except (TypeError, ValueError):
        raise CompositionError(f"bins must be an integer or (nx, ny), got {bins!r}") from None
    if nx < 1 or ny < 1 or (nx, ny) != tuple(float(b) for b in bins):
        raise CompositionError(f"bins must be positive integers, got {bins!r}")
    return nx, ny


def _extent(extent) -> tuple[float, float, float, float]:
    try:
        x0, x1, y0, y1 = (float(v) for v in extent)
    except (TypeError, ValueError):
        raise CompositionError(
            f"extent must be four numbers (x0, x1, y0, y1), got {extent!r}"
        ) from None
    if not all(np.isfinite(v) for v in (x0, x1, y0, y1)) or not (x1 > x0 and y1 > y0):
        raise CompositionError(f"extent needs finite x0 < x1 and y0 < y1, got {extent!r}")
    return x0, x1, y0, y1


def bin_index(x, y, extent, bins) -> np.ndarray:
    """Flat bin number ``iy * nx + ix`` of each point on a regular grid; -1 outside.

    Bins are half-open ``[edge, next edge)`` except the last in each direction,
    which includes its upper edge (as in :func:`numpy.histogram2d`).

    Parameters
    ----------
    x, y : array-like of shape (n,)
    extent : (x0, x1, y0, y1)
        The grid's outer edges.
    bins : int or (nx, ny)

    Returns
    -------
    ndarray of int32 (int64 when nx * ny does not fit), shape (n,)
    """
    xa, ya = _xy(x, y)
    x0, x1, y0, y1 = _extent(extent)
    nx, ny = _bins(bins)
    dtype = np.int32 if nx * ny < 2**31 - 1 else np.int64
    with np.errstate(invalid="ignore"):
        fx = (xa - x0) * (nx / (x1 - x0))
        fy = (ya - y0) * (ny / (y1 - y0))
        ok = (xa >= x0) & (xa <= x1) & (ya >= y0) & (ya <= y1)
        ix = np.minimum(np.where(ok, fx, 0.0).astype(dtype), nx - 1)
        iy = np.minimum(np.where(ok, fy, 0.0).astype(dtype), ny - 1)
    flat = iy * dtype(nx) + ix
    flat[~ok] = -1
    return flat


def counts_from_bins(index, bins, mask=None) -> np.ndarray:
    """Counts per bin from :func:`bin_index` output, optionally of a subset of points.

    Parameters
    ----------
    index : ndarray of int, shape (n,)
        Flat bin numbers (-1 = outside the grid, not counted).
    bins : int or (nx, ny)
    mask : ndarray of bool, shape (n,), optional
        Count only these points.

    Returns
    -------
    ndarray of int64, shape (ny, nx)
        ``counts[iy, ix]``; row 0 is the lowest y.
    """
    nx, ny = _bins(bins)
    idx = np.asarray(index)
    if mask is not None:
        m = np.asarray(mask)
        if m.dtype != bool or m.shape != idx.shape:
            raise CompositionError(
                f"mask must be boolean with shape {idx.shape}, got {m.dtype} {m.shape}"
            )
        idx = idx[m]
    idx = idx[idx >= 0]
    return np.bincount(idx, minlength=nx * ny).reshape(ny, nx)


def density_grid(x, y, extent, bins, weights_mask=None) -> np.ndarray:
    """Number of points in each cell of a regular grid (a fast 2-D histogram).

    Parameters
    ----------
    x, y : array-like of shape (n,)
    extent : (x0, x1, y0, y1)
        Outer edges of the grid; points outside (and NaN points) are not counted.
    bins : int or (nx, ny)
        Number of cells along x and y.
    weights_mask : array of bool, shape (n,), optional
        Count only the points where it is True (e.g. the selected rows).

    Returns
    -------
    ndarray of int64, shape (ny, nx)
        ``counts[iy, ix]`` with row 0 at the lowest y, i.e. the transpose of
        ``numpy.histogram2d(x, y, bins=(nx, ny), range=[[x0, x1], [y0, y1]])[0]``.
    """
    return counts_from_bins(bin_index(x, y, extent, bins), bins, weights_mask)


def bounding_corners(x, y) -> np.ndarray:
    """Lower-left and upper-right corners (2, 2) of the finite points' bounding box.

    Shape (0, 2) when no point is finite. Limits computed from these two points
    are those of all the points, at the cost of four numbers.
    """
    xa, ya = _xy(x, y)
    finite = np.isfinite(xa) & np.isfinite(ya)
    if finite.size and finite.all():
        xs, ys = xa, ya
    elif finite.any():
        xs, ys = xa[finite], ya[finite]
    else:
        return np.zeros((0, 2))
    return np.array([[xs.min(), ys.min()], [xs.max(), ys.max()]], dtype=float)
