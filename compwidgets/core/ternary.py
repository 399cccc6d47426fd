"""Geometry of the ternary diagram: projection, grid, ticks, centring, compositional lines.

Layout (used by every function here): an equilateral triangle of side 1 with

* part A (the first of the three) at the top vertex ``(1/2, sqrt(3)/2)``,
* part B (the second) at the bottom-left vertex ``(0, 0)``,
* part C (the third) at the bottom-right vertex ``(1, 0)``.

A closed composition ``(a, b, c)`` (a + b + c = 1) sits at the barycentric
point ``a * A + b * B + c * C``, i.e. ``x = c + a / 2``, ``y = a * sqrt(3) / 2``.

Centring (von Eynatten, Pawlowsky-Glahn & Egozcue 2002, "Understanding
perturbation on the simplex", Mathematical Geology 34) perturbs the data by
the inverse of their centre, ``x (+) g^-1``, which moves the centre to the
barycentre; the grid lines are perturbed by the same composition so that they
still read the original shares (they become curves).

Compositional lines are straight lines of the Aitchison geometry:
``x(t) = x0 (+) t (.) d``; through two compositions ``d = x2 (-) x1``. They are
computed in clr coordinates, where they are ordinary straight lines.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from ._arrays import CompositionError, close_rows
from .operations import closure
from .stats import center
from .transforms import clr, clr_inv

__all__ = [
    "HEIGHT",
    "VERTICES",
    "TernaryGrid",
    "TernaryTicks",
    "centre_of_centring",
    "centring_perturbation",
    "compositional_line",
    "grid_lines",
    "grid_levels",
    "grid_ticks",
    "line_along",
    "line_through",
    "perturb_closed",
    "spread_triples",
    "triple_spread",
    "ternary_to_xy",
    "xy_to_ternary",
]

#: Height of the triangle of side 1.
HEIGHT = float(np.sqrt(3.0) / 2.0)

#: Cartesian positions of the vertices of parts A (top), B (bottom left), C (bottom right).
VERTICES = np.array([[0.5, HEIGHT], [0.0, 0.0], [1.0, 0.0]])

#: Outward unit normals of the edges opposite each vertex (the edge where that part is 0):
#: opposite A = bottom edge, opposite B = right edge, opposite C = left edge.
_OUTWARD = np.array([[0.0, -1.0], [HEIGHT, 0.5], [-HEIGHT, 0.5]])


def _three_parts(X, what: str = "composition") -> np.ndarray:
    try:
        v = np.asarray(X, dtype=float)
    except (TypeError, ValueError) as err:
        raise CompositionError(f"ternary: {what} must be numbers ({err})") from None
    if v.ndim == 1:
        v = v[None, :]
    if v.ndim != 2 or v.shape[1] != 3:
        raise CompositionError(
            f"ternary: a {what} needs exactly 3 parts per row, got shape {np.shape(X)}"
        )
    return v


def ternary_to_xy(X) -> tuple[np.ndarray, np.ndarray]:
    """Cartesian coordinates of 3-part compositions in the triangle (see module layout).

    Parameters
    ----------
    X : array-like of shape (n, 3) or (3,)
        Non-negative parts (A, B, C); rows are closed first. Zeros are allowed
        (points on the edges); NaN, negative values and all-zero rows raise.

    Returns
    -------
    x, y : ndarray of shape (n,)
    """
    v = closure(_three_parts(X))
    v = np.asarray(v, dtype=float)
    return v[:, 2] + 0.5 * v[:, 0], HEIGHT * v[:, 0]


def xy_to_ternary(x, y) -> np.ndarray:
    """Inverse of :func:`ternary_to_xy`: closed (A, B, C) of Cartesian points.

    Points outside the triangle give negative shares (not an error).
    """
    xa = np.atleast_1d(np.asarray(x, dtype=float))
    ya = np.atleast_1d(np.asarray(y, dtype=float))
    a = ya / HEIGHT
    c = xa - 0.5 * a
    return np.column_stack([a, 1.0 - a - c, c])


def _positive_centre(centre) -> np.ndarray:
    g = _three_parts(centre, "centre")
    if g.shape[0] != 1:
        raise CompositionError(f"ternary: the centre must be one composition, got {g.shape[0]}")
    g = g[0]
    if not np.all(np.isfinite(g)) or np.any(g <= 0):
        raise CompositionError(
            f"ternary: the centre must have three positive finite parts, got {g.tolist()}"
        )
    return g / g.sum()


def centring_perturbation(centre=None, data=None) -> np.ndarray:
    """The composition ``g^-1 = C[1/g1, 1/g2, 1/g3]`` that moves ``g`` to the barycentre.

    Give either the centre ``g`` or the data (their centre is computed with
    :func:`compwidgets.core.center`).
    """
    if (centre is None) == (data is None):
        raise CompositionError("centring_perturbation: give either centre or data")
    g = _positive_centre(center(_three_parts(data, "data")) if data is not None else centre)
    inv = 1.0 / g
    return inv / inv.sum()


def centre_of_centring(perturbation) -> np.ndarray:
    """The centre ``g`` whose centring perturbation is ``perturbation``: ``C[1/p]``.

    The inverse of :func:`centring_perturbation` (the Aitchison inverse of a
    composition is the closure of its reciprocals): the grid of a centred
    diagram is drawn from it.

    >>> p = centring_perturbation(centre=[0.6, 0.3, 0.1])
    >>> centre_of_centring(p).round(12).tolist()
    [0.6, 0.3, 0.1]
    """
    inv = 1.0 / _positive_centre(perturbation)
    return inv / inv.sum()


def perturb_closed(X, p) -> np.ndarray:
    """``C[x (*) p]`` row by row, allowing zero parts in ``X`` (points on the edges).

    Perturbation of compositions on the boundary (used for grid lines and
    edge points of a centred diagram); for strictly positive data it equals
    :func:`compwidgets.core.perturb`.
    """
    v = _three_parts(X)
    q = _positive_centre(p)
    return np.asarray(closure(v * q), dtype=float)


class TernaryGrid(NamedTuple):
    """Grid lines of constant share, sampled as curves.

    Attributes
    ----------
    x, y : ndarray of shape (n_lines, n_points)
        Cartesian points of each line (straight without centring).
    part : ndarray of int, shape (n_lines,)
        Which part (0 = A, 1 = B, 2 = C) is constant along the line.
    level : ndarray of float, shape (n_lines,)
        The constant share (in the original, uncentred composition).
    """

    x: np.ndarray
    y: np.ndarray
    part: np.ndarray
    level: np.ndarray


class TernaryTicks(NamedTuple):
    """Where the grid lines meet the frame, for tick labels.

    Attributes
    ----------
    x, y : ndarray of shape (n,)
        Points on the frame.
    dx, dy : ndarray of shape (n,)
        Outward unit normal of the edge at that point (offset labels along it).
    part : ndarray of int, shape (n,)
    level : ndarray of float, shape (n,)
    """

    x: np.ndarray
    y: np.ndarray
    dx: np.ndarray
    dy: np.ndarray
    part: np.ndarray
    level: np.ndarray


def grid_levels(step: float = 0.1) -> np.ndarray:
    """Interior levels ``step, 2 step, ... < 1`` of the grid; ``1 / step`` need not be whole."""
    try:
        s = float(step)
    except (TypeError, ValueError):
        raise CompositionError(f"grid step must be a number, got {step!r}") from None
    if not (0.0 < s < 1.0) or not np.isfinite(s):
        raise CompositionError(f"grid step must be in (0, 1), got {step!r}")
    n = int(np.floor(1.0 / s + 1e-9))
    levels = s * np.arange(1, n + 1)
    return levels[levels < 1.0 - 1e-9]


def _line_points(part: int, level: float, u: np.ndarray, g: np.ndarray | None) -> np.ndarray:
    """Closed points of the line 'share of ``part`` = level', perturbed by g^-1 if given.

    ``u`` in [0, 1] is the share of the next part (cyclic order) among the two
    others *after* the perturbation, so that samples are spread evenly along
    the curve whatever the centre.
    """
    j, k = (part + 1) % 3, (part + 2) % 3
    if g is None:
        s = u
    else:
        # image ratio x_j' / x_k' = (s / (1 - s)) * (g_k / g_j); solve for s given u.
        s = u * g[j] / (u * g[j] + (1.0 - u) * g[k])
    pts = np.empty((u.shape[0], 3))
    pts[:, part] = level
    pts[:, j] = (1.0 - level) * s
    pts[:, k] = (1.0 - level) * (1.0 - s)
    if g is not None:
        pts = perturb_closed(pts, 1.0 / g)
    return pts


def grid_lines(step: float = 0.1, centre=None, n_points: int = 64) -> TernaryGrid:
    """Lines of constant share of each part, every ``step``.

    Parameters
    ----------
    step : float, default 0.1
        Spacing of the lines (0.1 = every 10 %).
    centre : array-like of 3 positive parts, optional
        The data centre of a centred diagram: the lines are perturbed by its
        inverse (they stay labelled with their original shares).
    n_points : int, default 64
        Samples per line when centred (2 otherwise: the lines are straight).

    Returns
    -------
    TernaryGrid
    """
    levels = grid_levels(step)
    g = None if centre is None else _positive_centre(centre)
    m = 2 if g is None else int(n_points)
    if m < 2:
        raise CompositionError(f"n_points must be at least 2, got {n_points!r}")
    u = np.linspace(0.0, 1.0, m)
    xs, ys, part, level = [], [], [], []
    for p in range(3):
        for lv in levels:
            x, y = ternary_to_xy(_line_points(p, float(lv), u, g))
            xs.append(x)
            ys.append(y)
            part.append(p)
            level.append(lv)
    shape = (len(xs), m)
    return TernaryGrid(
        np.asarray(xs).reshape(shape),
        np.asarray(ys).reshape(shape),
        np.asarray(part, dtype=int),
        np.asarray(level, dtype=float),
    )


def grid_ticks(step: float = 0.1, centre=None) -> TernaryTicks:
    """Tick positions of the grid lines on the frame.

    The ticks of part A are on the left edge (A-B, where C = 0), those of B on
    the bottom edge (B-C, where A = 0) and those of C on the right edge (C-A,
    where B = 0): each part's scale runs along one edge towards its vertex.
    With ``centre`` the ticks follow the perturbed grid lines (edges map to
    themselves under perturbation).
    """
    levels = grid_levels(step)
    g = None if centre is None else _positive_centre(centre)
    xs, ys, dxs, dys, part, level = [], [], [], [], [], []
    for p in range(3):
        zero = (p + 2) % 3  # the part that is 0 on this part's tick edge
        pts = np.zeros((levels.size, 3))
        pts[:, p] = levels
        pts[:, (p + 1) % 3] = 1.0 - levels
        if g is not None:
            pts = perturb_closed(pts, 1.0 / g)
        x, y = ternary_to_xy(pts)
        xs.append(x)
        ys.append(y)
        dxs.append(np.full(levels.size, _OUTWARD[zero, 0]))
        dys.append(np.full(levels.size, _OUTWARD[zero, 1]))
        part.append(np.full(levels.size, p))
        level.append(levels)
    cat = np.concatenate
    return TernaryTicks(cat(xs), cat(ys), cat(dxs), cat(dys), cat(part), cat(level))


def _positive_rows(X, what: str) -> np.ndarray:
    try:
        v = np.atleast_2d(np.asarray(X, dtype=float))
    except (TypeError, ValueError) as err:
        raise CompositionError(f"{what}: must be numbers ({err})") from None
    if not np.all(np.isfinite(v)) or np.any(v <= 0):
        raise CompositionError(
            f"{what}: compositional lines need strictly positive, finite parts, got {v.tolist()}"
        )
    return v


def compositional_line(origin, direction, t) -> np.ndarray:
    """Points ``origin (+) t (.) d`` of the compositional line with clr direction ``d``.

    Parameters
    ----------
    origin : array-like of shape (D,)
        A composition with positive parts.
    direction : array-like of shape (D,)
        A clr vector (its parts sum to zero; not all zero).
    t : array-like of shape (m,)
        Line parameters (Aitchison length along the line when ``||d|| = 1``).

    Returns
    -------
    ndarray of shape (m, D)
        Closed compositions.
    """
    x0 = _positive_rows(origin, "origin")
    if x0.shape[0] != 1:
        raise CompositionError("compositional_line: origin must be one composition")
    d = np.asarray(direction, dtype=float).ravel()
    if d.shape[0] != x0.shape[1]:
        raise CompositionError(
            f"compositional_line: direction has {d.shape[0]} values for {x0.shape[1]} parts"
        )
    if not np.all(np.isfinite(d)):
        raise CompositionError("compositional_line: direction contains NaN or inf")
    scale = max(1.0, float(np.abs(d).max()))
    if abs(float(d.sum())) > 1e-9 * scale:
        raise CompositionError(
            f"compositional_line: a clr direction sums to zero; this one sums to {d.sum():.3g}"
        )
    if not np.any(d != 0):
        raise CompositionError("compositional_line: the direction is zero")
    tt = np.atleast_1d(np.asarray(t, dtype=float))
    z = np.asarray(clr(x0), dtype=float)[0] + tt[:, None] * d[None, :]
    return np.asarray(clr_inv(z), dtype=float)


def _span(x0: np.ndarray, d: np.ndarray, min_share: float) -> float:
    """A parameter ``T`` so that ``x0 (+) (+-T) (.) d`` reaches shares below ``min_share``.

    Along the line the log-ratio of the parts with the largest and smallest
    direction components grows by ``T * (max d - min d)``; past
    ``log(1 / min_share)`` plus the starting spread of the log-parts, the
    smaller of them is below ``min_share``.
    """
    logs = np.log(x0)
    spread = float(logs.max() - logs.min())
    return (np.log(1.0 / min_share) + spread) / float(d.max() - d.min())


def line_through(x1, x2, n_points: int = 201, min_share: float = 1e-3, t=None) -> np.ndarray:
    """The compositional line ``x1 (+) t (.) (x2 (-) x1)`` through two compositions.

    ``t = 0`` gives ``x1`` and ``t = 1`` gives ``x2``. By default the line is
    sampled at ``n_points`` evenly spaced values of ``t`` on both sides, far
    enough for some part to fall below ``min_share`` at each end (so the
    curve runs close to the frame).

    Returns
    -------
    ndarray of shape (m, D)
        Closed compositions.
    """
    a = _positive_rows(x1, "x1")
    b = _positive_rows(x2, "x2")
    if a.shape != b.shape or a.shape[0] != 1:
        raise CompositionError(
            f"line_through: two single compositions of the same parts needed, "
            f"got shapes {a.shape} and {b.shape}"
        )
    d = np.asarray(clr(b), dtype=float)[0] - np.asarray(clr(a), dtype=float)[0]
    if not np.any(np.abs(d) > 1e-12):
        raise CompositionError(
            "line_through: the two compositions are equal (after closure); "
            "a line needs two distinct compositions"
        )
    if t is None:
        if not 0.0 < min_share < 1.0 / a.shape[1]:
            raise CompositionError(f"min_share must be in (0, 1/D), got {min_share!r}")
        span = _span(close_rows(a[0]), d, min_share)
        t = np.linspace(-span, span, int(n_points))
    return compositional_line(a[0], d, t)


def line_along(origin, direction, n_points: int = 201, min_share: float = 1e-3) -> np.ndarray:
    """The compositional line through ``origin`` along the clr direction ``direction``.

    Sampled like :func:`line_through`: ``n_points`` evenly spaced parameters on
    both sides of ``origin``, far enough for a part to fall below ``min_share``.

    Returns
    -------
    ndarray of shape (n_points, D)
        Closed compositions.
    """
    x0 = _positive_rows(origin, "origin")
    d = np.asarray(direction, dtype=float).ravel()
    if x0.shape[0] != 1 or d.shape[0] != x0.shape[1]:
        raise CompositionError(
            f"line_along: one origin and a direction of the same parts needed, "
            f"got shapes {x0.shape} and {d.shape}"
        )
    if not np.all(np.isfinite(d)) or not np.any(np.abs(d) > 1e-12):
        raise CompositionError("line_along: the direction must be finite and not zero")
    if not 0.0 < min_share < 1.0 / x0.shape[1]:
        raise CompositionError(f"min_share must be in (0, 1/D), got {min_share!r}")
    span = _span(close_rows(x0[0]), d, min_share)
    return compositional_line(x0[0], d, np.linspace(-span, span, int(n_points)))


#: Rows (a seeded sample beyond) on which the spread of each candidate triple is measured.
SPREAD_ROWS = 2000
#: Parts considered for automatic ternaries at most (the largest median shares): C(12, 3)
#: = 220 triples (a laboratory table rarely has more than 12 parts of 1 % or more).
SPREAD_PARTS = 12
#: Triples measured at a time (bounds the memory of the scoring).
_TRIPLE_CHUNK = 64


def triple_spread(X) -> float:
    """Spread of 3-part compositions as drawn in the triangle of side 1.

    The mean squared distance of the drawn points from their mean point
    (the trace of the covariance of ``x`` and ``y``, divisor ``n``): 0 when every
    point is at one place, 1/3 at most (a third of the points at each vertex).

    >>> triple_spread([[1, 0, 0], [0, 1, 0], [0, 0, 1]])
    0.333...
    """
    x, y = ternary_to_xy(X)
    return float(np.var(x) + np.var(y))


def spread_triples(
    X,
    count: int = 2,
    *,
    min_share: float = 0.01,
    max_parts: int = SPREAD_PARTS,
    max_rows: int = SPREAD_ROWS,
    seed: int = 0,
) -> list[tuple[int, int, int]]:
    """Triples of parts whose ternary diagrams spread the data, one per diagram.

    The rule:

    1. Candidates: the parts whose median share of the whole composition (each
       row divided by the sum of its known parts) is at least ``min_share``
       (every part when fewer than 3 are), at most ``max_parts`` of them with
       the largest median shares (ties: column order). A part a thousand times
       smaller than the others keeps every point on an edge.
    2. Each triple of candidates is drawn (its rows closed over the 3 parts,
       :func:`ternary_to_xy`) and scored by :func:`triple_spread`, the mean
       squared distance of the points from their mean point. Points piled in
       one corner or at one spot score near 0; a cloud over the whole triangle
       scores most. As in a ternary view, a row missing (NaN), zero or
       negative in one of the three parts is left out of that triple.
    3. The first triple has the largest spread; each next one the largest
       spread among the triples sharing the fewest parts with those chosen
       before (none, while enough candidates are left). Ties go to the first
       triple in lexicographic order; a triple with fewer than 2 rows to draw
       comes last.

    Spreads are measured on at most ``max_rows`` rows (a seeded random sample).

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, D)
        Compositions (closure not needed), D >= 3; NaN marks a missing value.
    count : int, default 2
        Triples wanted.
    min_share, max_parts, max_rows, seed
        See the rule above.

    Returns
    -------
    list of (int, int, int)
        Column positions, each triple in increasing order.

    Raises
    ------
    CompositionError
        Fewer than 3 parts, infinite values, or no triple with 2 rows to draw.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> logs = rng.normal(0, [1.0, 1.0, 1.0, 0.05], size=(200, 4))
    >>> X = np.exp(logs + [0, 0, 0, 3])  # a fourth part 20 times larger and steady
    >>> spread_triples(X, 1)
    [(0, 1, 2)]
    """
    try:
        v = np.asarray(X, dtype=float)  # read only: the rows used are copied below
    except (TypeError, ValueError) as err:
        raise CompositionError(f"spread_triples: the table must be numbers ({err})") from None
    if v.ndim != 2 or v.shape[1] < 3:
        raise CompositionError(
            f"spread_triples: needs a matrix of at least 3 parts, got shape {v.shape}"
        )
    if np.isinf(v).any():
        rows = np.flatnonzero(np.isinf(v).any(axis=1))
        raise CompositionError(f"spread_triples: infinite values in rows {rows[:5].tolist()}")
    if isinstance(count, bool) or int(count) != count or count < 1:
        raise CompositionError(f"spread_triples: count must be a positive integer, got {count!r}")
    if int(max_parts) < 3:
        raise CompositionError(f"spread_triples: max_parts must be at least 3, got {max_parts!r}")
    n, D = v.shape
    if n > max_rows:  # a copy of the sampled rows only
        v = v[np.sort(np.random.default_rng(seed).choice(n, int(max_rows), replace=False))]
    else:
        v = v.copy()  # non-positive cells become NaN below
    with np.errstate(invalid="ignore"):
        v[~(v > 0)] = np.nan  # missing, zero or negative: not drawn
    known = np.isfinite(v)
    with np.errstate(invalid="ignore", divide="ignore"):
        shares = v / np.nansum(v, axis=1, keepdims=True)
    share = np.array(
        [np.median(shares[known[:, j], j]) if known[:, j].any() else 0.0 for j in range(D)]
    )
    candidates = np.flatnonzero(share >= min_share)
    if candidates.size < 3:
        candidates = np.arange(D)
    ranked = candidates[np.argsort(-share[candidates], kind="stable")][: int(max_parts)]
    candidates = np.sort(ranked)
    triples = np.array(
        [(a, b, c) for a in candidates for b in candidates if b > a for c in candidates if c > b]
    )
    vt = np.ascontiguousarray(v.T)  # parts by row: each triple reads three rows
    spread = np.concatenate(
        [
            _spreads(vt, triples[s : s + _TRIPLE_CHUNK])
            for s in range(0, len(triples), _TRIPLE_CHUNK)
        ]
    )
    if not np.isfinite(spread).any():
        raise CompositionError(
            "spread_triples: no triple of parts has 2 rows with all three parts present and "
            "positive"
        )
    chosen: list[tuple[int, int, int]] = []
    used: set[int] = set()
    for _ in range(int(count)):
        shared = np.array([len(used & set(t)) for t in triples.tolist()])
        pool = np.flatnonzero(shared == shared.min())
        best = int(pool[np.argmax(spread[pool])])  # first of the largest: lexicographic
        chosen.append(tuple(int(p) for p in triples[best]))
        used |= set(chosen[-1])
    return chosen


def _spreads(vt: np.ndarray, triples: np.ndarray) -> np.ndarray:
    """:func:`triple_spread` of each triple (rows of ``vt``, the parts by row; NaN: not
    drawn); -inf for a triple with fewer than 2 rows to draw."""
    parts = vt[triples.T]  # (3, m, n): the three parts of each triple, by row
    total = parts.sum(axis=0)  # NaN where a part is missing
    parts /= total
    x, y = np.tensordot(VERTICES.T, parts, axes=1)  # as ternary_to_xy: shares @ VERTICES
    if not np.isnan(total).any():  # every row drawn: the plain variance, much faster
        return x.var(axis=1) + y.var(axis=1)
    drawn = np.isfinite(total).sum(axis=1)
    out = np.full(triples.shape[0], -np.inf)
    ok = drawn >= 2
    if ok.any():
        out[ok] = np.nanvar(x[ok], axis=1) + np.nanvar(y[ok], axis=1)
    return out
