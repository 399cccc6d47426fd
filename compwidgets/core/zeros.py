"""Replacement of values below the detection limit.

Reference
---------
Martin-Fernandez, J.A., Barcelo-Vidal, C., Pawlowsky-Glahn, V. (2003) Dealing
with zeros and missing values in compositional data sets using nonparametric
imputation. Mathematical Geology 35(3), 253-278.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from . import _lazy
from ._arrays import CompositionError, _listing, as_table, require_finite

#: The fraction of the detection limit proposed by Martin-Fernandez et al. (2003).
DEFAULT_FRACTION = 0.65


def detection_limit_matrix(detection_limits, shape: tuple[int, int], parts) -> np.ndarray:
    """Broadcast detection limits (scalar, per part, mapping or per cell) to ``shape``."""
    n, D = shape
    if isinstance(detection_limits, (dict, pd.Series)):
        mapping = dict(detection_limits)
        unknown = [k for k in mapping if k not in parts]
        if unknown:
            raise CompositionError(
                f"detection limits name unknown part(s) {_listing(unknown)}; parts are "
                f"{_listing(list(parts))}"
            )
        try:
            row = np.array([mapping.get(p, np.nan) for p in parts], dtype=float)
        except (TypeError, ValueError) as err:
            raise CompositionError(f"detection limits: cannot read as numbers ({err})") from None
        return np.broadcast_to(row, shape).copy()
    if isinstance(detection_limits, pd.DataFrame):
        detection_limits = detection_limits.to_numpy(dtype=float)
    try:
        dl = np.asarray(detection_limits, dtype=float)
    except (TypeError, ValueError) as err:
        raise CompositionError(f"detection limits: cannot read as numbers ({err})") from None
    if dl.ndim == 0:
        return np.full(shape, float(dl))
    if dl.ndim == 1:
        if dl.shape[0] != D:
            raise CompositionError(
                f"detection limits: {dl.shape[0]} values given for {D} parts "
                f"({_listing(list(parts))})"
            )
        return np.broadcast_to(dl, shape).copy()
    if dl.shape != shape:
        raise CompositionError(
            f"detection limits: shape {dl.shape} does not match the data {shape}"
        )
    return dl.copy()


def _replacement_parts(X, detection_limits, fraction, below, total):
    """Checked input of the multiplicative replacement: table, mask, deltas, totals, loads."""
    if not 0 < fraction < 1:
        raise CompositionError(f"fraction must lie strictly between 0 and 1, got {fraction!r}")
    t = as_table(X, min_parts=2)
    require_finite(t)
    v = t.values
    parts = t.part_names()
    if (v < 0).any():
        r, c = np.argwhere(v < 0)[0]
        raise CompositionError(
            f"negative value {float(v[r, c])!r} at row {t.row_labels([r])[0]!r}, "
            f"column {parts[c]!r}; "
            "mark values below detection as 0 or with `below`"
        )
    mask = (v == 0) if below is None else np.asarray(below, dtype=bool)
    if mask.shape != v.shape:
        raise CompositionError(f"below: shape {mask.shape} does not match the data {v.shape}")
    dl = detection_limit_matrix(detection_limits, v.shape, parts)
    bad = mask & ~(np.isfinite(dl) & (dl > 0))
    if bad.any():
        r, c = np.argwhere(bad)[0]
        raise CompositionError(
            f"no positive detection limit for the value below detection at row "
            f"{t.row_labels([r])[0]!r}, column {parts[c]!r}"
        )
    delta = np.where(mask, fraction * np.where(mask, dl, 0.0), 0.0)
    observed = np.where(mask, 0.0, v)
    c = observed.sum(axis=1) if total is None else np.full(v.shape[0], float(total))
    return t, mask, delta, observed, c, delta.sum(axis=1)


def multiplicative_replacement_rows(
    X,
    detection_limits,
    fraction: float = DEFAULT_FRACTION,
    below=None,
    total: float | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Multiplicative replacement row by row, leaving out the rows where it is impossible.

    The arithmetic of :func:`multiplicative_replacement` (Martin-Fernandez et
    al. 2003; same arguments), but a row whose replacements would reach its
    total ``c`` (``sum(delta) >= c``, e.g. a row without an observed part) is
    not refused: it is returned unreplaced with a NaN factor.

    Returns
    -------
    values : ndarray of shape (n, D)
        Replaced values; rows that cannot be replaced keep their observed
        values and hold NaN in the cells below detection.
    factors : ndarray of shape (n,)
        The factor ``1 - sum(delta) / c`` each row's observed parts were
        multiplied by (1.0 for rows without a value below detection, NaN where
        the replacement is impossible).
    """
    _, values, factors = _replace_rows(X, detection_limits, fraction, below, total)
    return values, factors


def _replace_rows(X, detection_limits, fraction, below, total):
    t, mask, delta, observed, c, load = _replacement_parts(
        X, detection_limits, fraction, below, total
    )
    feasible = load < c
    factors = np.where(feasible, 1.0 - load / np.where(feasible, c, 1.0), np.nan)
    values = np.where(mask, np.where(feasible[:, None], delta, np.nan), observed)
    values[feasible] *= np.where(mask[feasible], 1.0, factors[feasible, None])
    return t, values, factors


def multiplicative_replacement(
    X,
    detection_limits,
    fraction: float = DEFAULT_FRACTION,
    below=None,
    total: float | None = None,
):
    """Multiplicative replacement of values below detection (Martin-Fernandez et al. 2003).

    Each cell below detection gets ``delta = fraction * DL`` of its part; the
    observed parts of the same row are multiplied by ``1 - sum(delta) / c`` so
    the row keeps its total ``c`` and every ratio among observed parts is kept.

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, D)
        Values in one unit; cells below detection hold 0 (or are marked by ``below``).
    detection_limits : scalar, sequence of D, mapping part -> limit, or (n, D) array
        In the same unit as ``X``.
    fraction : float, default 0.65
        Share of the detection limit used as the replacement value.
    below : boolean array-like (n, D), optional
        Cells below detection; default: cells equal to zero.
    total : float, optional
        Closure constant ``c``. Default: each row's own total, which for closed
        data is the closure constant of the published formula.

    Returns
    -------
    Same form as ``X``.

    See Also
    --------
    multiplicative_replacement_rows : the same, with the factor of each row, and rows
        where the replacement is impossible left out instead of refused.
    """
    if _lazy.is_lazy(X):
        return _lazy.rowwise(
            multiplicative_replacement,
            X,
            detection_limits,
            fraction=fraction,
            below=below,
            total=total,
        )
    t, values, factors = _replace_rows(X, detection_limits, fraction, below, total)
    if np.isnan(factors).any():
        rows = np.flatnonzero(np.isnan(factors))
        raise CompositionError(
            f"rows {_listing(t.row_labels(rows), len(rows))}: the replacement values add up to "
            "the whole row total; too few observed parts for multiplicative replacement"
        )
    return t.wrap(values)


def _replacement_by_position(X, detection_limits, below, fraction, total):
    """:func:`multiplicative_replacement` with the per-cell inputs first (for partitions)."""
    return multiplicative_replacement(X, detection_limits, fraction, below, total)
