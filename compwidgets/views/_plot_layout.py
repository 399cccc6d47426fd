"""Layout of a biplot on the page: axis limits, the size of a part name, where names go.

Plain numpy, no widget imports (tests/test_plot_layout.py checks the imports): the
views call these functions with sizes in data units and draw what they return.
None of it is compositional maths; the numbers drawn come from
:mod:`compwidgets.core.biplot`.
"""

from __future__ import annotations

import numpy as np

from ..core import CompositionError

__all__ = ["plane_limits", "ray_label_positions", "text_width_px", "tick_decimals"]

#: Most pushes of a ray label along and across its ray (bounds the positions tried).
_MAX_PUSH_STEPS = 40
#: Candidate positions of a part name tested at a time (the first free one wins).
_PUSH_CHUNK = 32
#: Largest number of candidates tested at a time (chunks grow to it).
_MAX_CHUNK = 256
#: Rings of candidates tried beyond ``max_shift`` (out to ``2**_WIDER_RINGS`` times it).
_WIDER_RINGS = 3

#: Width in pixels of one character of 12 px sans-serif text, by kind (measured on the
#: text boxes of ray names in headless Chromium, then rounded up: a little wider than the
#: text, never narrower; other fonts differ a little, which the views' padding absorbs).
_CHAR_PX = 7.5
_CHAR_PX_NARROW = 3.5  # i l I . , : ; ' ! |
_CHAR_PX_SLIM = 5.0  # r t f j ( ) - space
_CHAR_PX_UPPER = 9.0
_CHAR_PX_WIDE = 11.0  # M W m w
_CHAR_PX_DIGIT = 7.5
_NARROW_CHARS = frozenset("ilI.,:;'!|")
_SLIM_CHARS = frozenset("rtfj()- ")
_WIDE_CHARS = frozenset("MWmw")


def text_width_px(text: str, font_px: float = 12.0) -> float:
    """Estimated width in pixels of ``text`` in a sans-serif font of ``font_px`` pixels.

    Meant to be at least the width a browser draws (a box made from it holds the text).

    >>> text_width_px("SiO2") > text_width_px("Ni")
    True
    """
    width = 0.0
    for ch in str(text):
        if ch in _NARROW_CHARS:
            width += _CHAR_PX_NARROW
        elif ch in _SLIM_CHARS:
            width += _CHAR_PX_SLIM
        elif ch in _WIDE_CHARS:
            width += _CHAR_PX_WIDE
        elif ch.isdigit():
            width += _CHAR_PX_DIGIT
        elif ch.isupper():
            width += _CHAR_PX_UPPER
        else:
            width += _CHAR_PX
    return width * float(font_px) / 12.0


def tick_decimals(top: float) -> int:
    """Decimals that tell apart the ticks of an axis from 0 to ``top`` (up to ten ticks).

    The tick step is the smallest 1, 2 or 5 times a power of ten that gives at most ten
    steps (the "nice" steps plotting libraries use); its decimals are returned (0 for
    steps of 1 and more). Fewer ticks have larger steps, which need no more decimals.
    Non-positive or non-finite ``top``: 0.
    """
    top = float(top)
    if not np.isfinite(top) or top <= 0:
        return 0
    least = top / 10.0
    power = 10.0 ** np.floor(np.log10(least))
    step = next(m * power for m in (1, 2, 5, 10) if m * power >= least * (1 - 1e-12))
    return max(0, -int(np.floor(np.log10(step) + 1e-9)))


def plane_limits(
    points,
    tips,
    *,
    pad: float = 0.08,
    right_margin: float = 0.0,
    aspect_range: tuple[float, float] = (0.75, 2.0),
) -> tuple[tuple[float, float], tuple[float, float]]:
    """Axis limits showing every point, every ray tip and the origin of a biplot plane.

    Parameters
    ----------
    points : array-like of shape (n, 2)
        Row coordinates in the plane (NaN rows are ignored; may be empty).
    tips : array-like of shape (D, 2)
        Ray tips in the plane.
    pad : float, default 0.08
        Margin on every side, as a share of the span.
    right_margin : float, default 0.0
        Extra room on the right (e.g. for a legend), as a share of the x span.
    aspect_range : (float, float), default (0.75, 2.0)
        Smallest and largest width / height: the shorter side is widened
        symmetrically to stay inside it (for drawing with equal aspect).

    Returns
    -------
    ((x0, x1), (y0, y1))
    """
    xy = [np.zeros((1, 2))]
    for arr in (points, tips):
        a = np.asarray(arr, dtype=float).reshape(-1, 2)
        xy.append(a[np.all(np.isfinite(a), axis=1)])
    allxy = np.concatenate(xy)
    lo, hi = allxy.min(axis=0), allxy.max(axis=0)
    span = hi - lo
    big = float(span.max())
    if not big > 0:
        span = np.array([2.0, 2.0])
        lo, hi = lo - 1.0, hi + 1.0
    else:
        span = np.maximum(span, 1e-6 * big)
        mid = (lo + hi) / 2
        lo, hi = mid - span / 2, mid + span / 2
    lo, hi = lo - pad * span, hi + pad * span
    hi[0] += right_margin * span[0]
    w, h = hi - lo
    a_min, a_max = aspect_range
    if w / h > a_max:
        extra = (w / a_max - h) / 2
        lo[1], hi[1] = lo[1] - extra, hi[1] + extra
    elif w / h < a_min:
        extra = (h * a_min - w) / 2
        lo[0], hi[0] = lo[0] - extra, hi[0] + extra
    return (float(lo[0]), float(hi[0])), (float(lo[1]), float(hi[1]))


def ray_label_positions(
    tips,
    offset: float,
    *,
    box_sizes=None,
    step: float | None = None,
    max_shift: float | None = None,
    tip_radius: float = 0.0,
) -> np.ndarray:
    """Centres (D, 2) of the part names of a biplot, just beyond the ray tips.

    Without ``box_sizes`` each position is a distance ``offset`` beyond its tip
    along the ray (a ray of zero length gets its label at the origin).

    With ``box_sizes`` (the width and height of each name's box, in data units,
    boxes centred on the returned positions) each box first just clears its
    tip: its edge is ``offset`` beyond the tip's dot (of radius ``tip_radius``)
    along the ray. Then the names are placed one at a time, from the longest
    ray to the shortest (ties in part order), each at the first of a fixed
    list of nearby positions where its box neither intersects a box placed
    before nor comes within ``tip_radius`` of a ray tip (in x or y): pushed
    outward along its ray by ``a`` steps and sideways by ``b`` steps (``a >=
    0``), nearest first, within ``max_shift``. A name that finds no such place
    there tries the same pushes on rings twice, four and eight times as far
    (``max_shift`` to ``2 max_shift``, ... ``8 max_shift``; steps of at least
    1/40 of the ring's outer radius), then goes on outward along its ray, a
    step at a time, to the first free position (there is one: beyond every box
    and tip). So no two boxes intersect and no box covers a tip. The result is
    deterministic and takes one pass (no iteration to convergence).

    Parameters
    ----------
    tips : array-like of shape (D, 2)
        Ray tips as drawn.
    offset : float
        Gap between a tip and its label (the label's centre without
        ``box_sizes``, its box's edge with them), in data units.
    box_sizes : array-like of shape (D, 2) or (2,), optional
        Width and height of each label's box in data units (>= 0), e.g. from
        :func:`text_width_px` times the data units per pixel.
    step : float, optional
        Length of one push (default: half the tallest box; at least
        ``max_shift / 40``).
    max_shift : float, optional
        Longest push of the first ring of positions (wider rings follow)
        (default: 8 times the tallest box).
    tip_radius : float, default 0.0
        Radius of the dots drawn at the tips, in data units (>= 0).

    Returns
    -------
    ndarray of shape (D, 2)
        Label centres. A label placed within ``max_shift`` of where its box
        clears its tip ends within ``offset + tip_radius + max_shift +`` half
        the box's diagonal (plus ``tip_radius``) of its tip; the others further.

    Examples
    --------
    Two names on the same tip: the second goes elsewhere.

    >>> pos = ray_label_positions([[1.0, 0.0], [1.0, 0.0]], 0.1, box_sizes=[0.4, 0.2])
    >>> bool(abs(pos[0, 1] - pos[1, 1]) >= 0.2 or abs(pos[0, 0] - pos[1, 0]) >= 0.4)
    True
    """
    T = np.asarray(tips, dtype=float).reshape(-1, 2)
    D = T.shape[0]
    length = np.sqrt(np.sum(T * T, axis=1, keepdims=True))
    with np.errstate(invalid="ignore", divide="ignore"):
        unit = np.where(length > 0, T / length, 0.0)
    if box_sizes is None:
        return T + float(offset) * unit

    B = np.broadcast_to(np.asarray(box_sizes, dtype=float), (D, 2))
    if not np.all(np.isfinite(B)) or np.any(B < 0):
        raise CompositionError("ray_label_positions: box sizes must be finite and >= 0")
    half = B / 2
    r = float(tip_radius)
    if not (np.isfinite(r) and r >= 0):
        raise CompositionError(f"ray_label_positions: tip_radius must be >= 0, got {r!r}")
    # a ray of zero length has no direction: its name goes above its tip
    along = np.where(length > 0, unit, np.array([0.0, 1.0]))
    side = np.column_stack([-along[:, 1], along[:, 0]])
    reach = float(offset) + (half[:, 0] + r) * np.abs(along[:, 0])
    reach += (half[:, 1] + r) * np.abs(along[:, 1])
    start = T + along * reach[:, None]
    tallest = float(B[:, 1].max()) if D else 0.0
    step = tallest / 2 if step is None else float(step)
    max_shift = 8 * tallest if max_shift is None else float(max_shift)
    if D == 0 or not (step > 0 and max_shift > 0):
        return start

    # pushes (along a, sideways b) in steps, nearest first; ties: smaller |b|, outward, left
    k = int(np.floor(max_shift / step + 1e-9))
    if k > _MAX_PUSH_STEPS:  # a step tiny next to max_shift: coarser steps, bounded work
        k, step = _MAX_PUSH_STEPS, max_shift / _MAX_PUSH_STEPS
    rings = [_pushes(step, 0.0, max_shift)]
    for level in range(1, _WIDER_RINGS + 1):  # wider rings, coarser steps: bounded work
        inner, outer = max_shift * 2 ** (level - 1), max_shift * 2**level
        rings.append(_pushes(max(step, outer / _MAX_PUSH_STEPS), inner, outer))

    placed = np.zeros((D, 2))
    placed_half = np.zeros((D, 2))
    positions = start.copy()
    widest = half.max(axis=0)
    for n, i in enumerate(np.argsort(-length[:, 0], kind="stable")):
        found = None
        for a, b in rings:
            # only boxes and tips within reach of some candidate can be hit: test those only
            farthest = float(np.hypot(a, b).max()) if a.size else 0.0
            room = farthest + half[i] + widest + r
            close = np.all(np.abs(placed[:n] - start[i]) < room, axis=1)
            tips_near = T[np.all(np.abs(T - start[i]) < room, axis=1)]
            found = _first_free(
                start[i], a, b, along[i], side[i], half[i], placed[:n][close],
                placed_half[:n][close], tips_near, r,
            )  # fmt: skip
            if found is not None:
                break
        if found is None:
            outer_step = max(step, max_shift * 2**_WIDER_RINGS / _MAX_PUSH_STEPS)
            found = _outward(
                start[i], along[i], half[i], outer_step, max_shift * 2**_WIDER_RINGS,
                placed[:n], placed_half[:n], T, r,
            )  # fmt: skip
        positions[i] = found
        placed[n], placed_half[n] = positions[i], half[i]
    return positions


def _pushes(step: float, inner: float, outer: float) -> tuple[np.ndarray, np.ndarray]:
    """Pushes (along, sideways) on a grid of ``step``, ``inner < distance <= outer``, along
    >= 0; nearest first, then smaller sideways push, outward, left."""
    k = int(np.floor(outer / step + 1e-9))
    a, b = np.meshgrid(np.arange(k + 1), np.arange(-k, k + 1), indexing="ij")
    a, b = a.ravel(), b.ravel()
    dist = np.hypot(a, b)
    keep = (dist * step <= outer * (1 + 1e-9)) & (dist * step > inner * (1 + 1e-9))
    if inner == 0:
        keep |= dist == 0
    a, b, dist = a[keep], b[keep], dist[keep]
    order = np.lexsort((-b, a, np.abs(b), dist))
    return a[order] * step, b[order] * step


def _first_free(origin, a, b, along, side, half, boxes, box_half, tips, r):
    """The first candidate ``origin + a along + b side`` whose box is free, else None."""
    first, size = 0, _PUSH_CHUNK
    limit = half + box_half  # (boxes, 2): closer centres than this intersect
    while first < a.size:
        cand = origin + a[first : first + size, None] * along
        cand = cand + b[first : first + size, None] * side  # (m, 2)
        # the candidates of a chunk lie close together: only boxes and tips near the
        # chunk's own bounding box can be hit
        lo, hi = cand.min(axis=0), cand.max(axis=0)
        mid, reach = (lo + hi) / 2, (hi - lo) / 2
        nb = np.all(np.abs(boxes - mid) < reach + limit, axis=1)
        gx = np.abs(cand[:, 0, None] - boxes[nb, 0]) < limit[nb, 0]
        gy = np.abs(cand[:, 1, None] - boxes[nb, 1]) < limit[nb, 1]
        blocked = (gx & gy).any(axis=1)
        nt = np.all(np.abs(tips - mid) < reach + half + r, axis=1)
        if nt.any():
            tx = np.abs(cand[:, 0, None] - tips[nt, 0]) < half[0] + r
            ty = np.abs(cand[:, 1, None] - tips[nt, 1]) < half[1] + r
            blocked |= (tx & ty).any(axis=1)
        free = np.flatnonzero(~blocked)
        if free.size:
            return cand[free[0]]
        # chunks grow: most names find room in the first few candidates, a crowded one
        # tests the rest in fewer, larger steps
        first, size = first + size, min(2 * size, _MAX_CHUNK)
    return None


def _outward(origin, along, half, step, beyond, boxes, box_half, tips, r) -> np.ndarray:
    """The first free position ``origin + a step along`` past ``beyond`` (one always is)."""
    # beyond this many steps the box has left the bounding box of every box and tip
    corners = np.concatenate([boxes - box_half, boxes + box_half, tips - r, tips + r])
    far = float(np.max(np.abs(corners - origin))) if corners.size else 0.0
    first = int(np.floor(beyond / step)) + 1
    last = (
        first + 2 + int(np.ceil((far + float(half.max())) / (step * float(np.abs(along).max()))))
    )
    for start in range(first, last + 1, _PUSH_CHUNK):
        a = np.arange(start, min(start + _PUSH_CHUNK, last + 1), dtype=float) * step
        free = _first_free(
            origin, a, np.zeros_like(a), along, along, half, boxes, box_half, tips, r
        )
        if free is not None:
            return free
    return origin + (last + 1) * step * along  # not reached: past every box and tip
