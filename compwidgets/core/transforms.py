"""Log-ratio transforms: clr, alr and ilr with their inverses.

References
----------
Aitchison, J. (1986) The Statistical Analysis of Compositional Data (clr, alr).
Egozcue, J.J., Pawlowsky-Glahn, V., Mateu-Figueras, G., Barcelo-Vidal, C. (2003)
Isometric logratio transformations for compositional data analysis (ilr).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from . import _lazy
from ._arrays import (
    CompositionError,
    Table,
    as_table,
    is_unlabelled,
    match_columns,
    require_finite,
    require_positive,
)


def clr_values(t: Table) -> np.ndarray:
    """clr of a checked table (raises on non-positive cells)."""
    require_positive(t)
    logv = np.log(t.values)
    logv -= logv.mean(axis=1, keepdims=True)  # in place: one matrix less at the peak
    return logv


def _inverse_clr_values(z: np.ndarray) -> np.ndarray:
    v = np.exp(z - z.max(axis=1, keepdims=True))
    return v / v.sum(axis=1, keepdims=True)


def _strip(names, prefix: str) -> list[str]:
    out = []
    for n in names:
        s = str(n)
        out.append(
            s[len(prefix) + 1 : -1] if s.startswith(prefix + "(") and s.endswith(")") else s
        )
    return out


def clr(X):
    """Centred log-ratio ``clr(x) = ln(x / g(x))`` with g the geometric mean.

    Returns columns named ``clr(part)``; each row sums to zero.
    """
    if _lazy.is_lazy(X):
        return _lazy.rowwise(clr, X)
    t = as_table(X, min_parts=2)
    return t.wrap(clr_values(t), [f"clr({p})" for p in t.part_names()])


def clr_inv(Z, parts=None):
    """Inverse clr: closed ``exp(z)``. Column names ``clr(part)`` give back ``part``."""
    if _lazy.is_lazy(Z):
        return _lazy.rowwise(clr_inv, Z, parts=parts)
    t = as_table(Z, "Z", 2)
    require_finite(t)
    names = parts if parts is not None else (_strip(t.columns, "clr") if t.labelled else None)
    return t.wrap(_inverse_clr_values(t.values), names)


def _denominator_position(denominator, names: list, D: int) -> int:
    if isinstance(denominator, (int, np.integer)):
        if not -D <= denominator < D:
            raise CompositionError(
                f"alr: denominator position {denominator} out of range for {D} parts"
            )
        return int(denominator) % D
    if denominator in names:
        return names.index(denominator)
    raise CompositionError(f"alr: unknown denominator part {denominator!r}; parts are {names}")


def alr(X, denominator=-1):
    """Additive log-ratio ``ln(x_i / x_den)`` for every part but the denominator.

    Parameters
    ----------
    denominator : int or part name, default -1 (the last part)
    """
    if _lazy.is_lazy(X):
        return _lazy.rowwise(alr, X, denominator=denominator)
    t = as_table(X, min_parts=2)
    require_positive(t)
    names = t.part_names()
    k = _denominator_position(denominator, names, len(names))
    logv = np.log(t.values)
    keep = [j for j in range(len(names)) if j != k]
    return t.wrap(logv[:, keep] - logv[:, [k]], [f"ln({names[j]}/{names[k]})" for j in keep])


def alr_inv(Y, denominator=-1, parts=None):
    """Inverse alr: put a zero log-ratio back at ``denominator`` and close.

    ``denominator`` is a position in the D-part result (default -1, the last).
    ``parts`` names the D parts of the result.
    """
    if _lazy.is_lazy(Y):
        return _lazy.rowwise(alr_inv, Y, denominator=denominator, parts=parts)
    t = as_table(Y, "Y", 1)
    require_finite(t)
    n, d1 = t.values.shape
    D = d1 + 1
    if parts is not None and len(parts) != D:
        raise CompositionError(f"alr_inv: {len(parts)} part names given for {D} parts")
    if not isinstance(denominator, (int, np.integer)):
        if parts is None or denominator not in list(parts):
            raise CompositionError(
                f"alr_inv: denominator {denominator!r} must be a position, or a name in parts"
            )
        denominator = list(parts).index(denominator)
    if not -D <= denominator < D:
        raise CompositionError(f"alr_inv: denominator position {denominator} out of range")
    k = int(denominator) % D
    z = np.insert(t.values, k, 0.0, axis=1)
    if parts is None:
        parts = [f"x{j + 1}" for j in range(D)]
    return t.wrap(_inverse_clr_values(z), list(parts))


def default_basis(D: int) -> np.ndarray:
    """Pivot (Helmert-type) orthonormal contrast basis of shape (D-1, D).

    Row i (0-based) opposes part i to the parts after it::

        v_i = [0]*i + [sqrt((D-i-1)/(D-i))] + [-1/sqrt((D-i-1)(D-i))]*(D-i-1)

    so the first ilr coordinate is the balance of part 1 against all others.
    It equals ``-scipy.linalg.helmert(D)`` with rows and columns both reversed.
    """
    if int(D) != D or D < 2:
        raise CompositionError(f"default_basis: need at least 2 parts, got {D!r}")
    D = int(D)
    k = np.arange(D - 1, 0, -1, dtype=float)[:, None]  # parts after the pivot: D-1 .. 1
    cols = np.arange(D)[None, :]
    rows = np.arange(D - 1)[:, None]
    V = np.where(cols == rows, np.sqrt(k / (k + 1)), 0.0)
    V = np.where(cols > rows, -1.0 / np.sqrt(k * (k + 1)), V)
    return V


def _basis_frame(basis, parts) -> tuple[object, list[str] | None]:
    """A contrast matrix given as a DataFrame, matched by label to ``parts`` (if any).

    Returns the matrix (reordered to ``parts``) and the part names its labels give.
    """
    if not isinstance(basis, pd.DataFrame) or is_unlabelled(basis.columns):
        return (basis.to_numpy() if isinstance(basis, pd.DataFrame) else basis), None
    if parts is None:
        return basis.to_numpy(), [str(c) for c in basis.columns]
    return match_columns(basis, parts, "ilr basis"), [str(p) for p in parts]


def check_basis(basis, D: int, parts=None) -> np.ndarray:
    """Return ``basis`` as a float (D-1, D) array or raise if it is not orthonormal contrasts.

    A DataFrame basis is matched to ``parts`` by its column labels (reordered).
    """
    basis = _basis_frame(basis, parts)[0]
    try:
        V = np.asarray(basis, dtype=float)
    except (TypeError, ValueError) as err:
        raise CompositionError(f"ilr basis: cannot read as a matrix of numbers ({err})") from None
    if V.shape != (D - 1, D):
        raise CompositionError(
            f"ilr basis: expected shape ({D - 1}, {D}) for {D} parts, got {V.shape}"
        )
    if not np.all(np.isfinite(V)):
        raise CompositionError("ilr basis: contains NaN or inf")
    sums = np.abs(V.sum(axis=1))
    if np.any(sums > 1e-8):
        raise CompositionError(
            f"ilr basis: row {int(np.argmax(sums)) + 1} does not sum to zero (a contrast must)"
        )
    gram = V @ V.T
    dev = np.abs(gram - np.eye(D - 1))
    if np.any(dev > 1e-8):
        i, j = np.unravel_index(np.argmax(dev), dev.shape)
        raise CompositionError(
            f"ilr basis: rows {i + 1} and {j + 1} are not orthonormal "
            f"(inner product {gram[i, j]:.3g})"
        )
    return V


def ilr(X, basis=None, names=None):
    """Isometric log-ratio coordinates ``clr(x) @ V.T`` (Egozcue et al. 2003).

    Parameters
    ----------
    basis : array-like or DataFrame of shape (D-1, D), optional
        Orthonormal contrast matrix (rows sum to zero); default :func:`default_basis`.
        A DataFrame (e.g. ``export.contrast_frame``) is matched to ``X``'s columns
        by label when ``X`` is labelled.
    names : list of str, optional
        Output column names (default ``ilr1 .. ilr{D-1}``).
    """
    if _lazy.is_lazy(X):
        return _lazy.rowwise(ilr, X, basis=basis, names=names)
    t = as_table(X, min_parts=2)
    D = t.values.shape[1]
    parts = t.part_names() if t.labelled else None
    V = default_basis(D) if basis is None else check_basis(basis, D, parts)
    if names is None:
        names = [f"ilr{i + 1}" for i in range(D - 1)]
    return t.wrap(clr_values(t) @ V.T, list(names))


def ilr_inv(Y, basis=None, parts=None):
    """Inverse ilr: ``C[exp(y @ V)]``; ``parts`` names the D parts of the result.

    A DataFrame ``basis`` is matched to ``parts`` by its column labels; without
    ``parts`` its labels name the parts of the result.
    """
    if _lazy.is_lazy(Y):
        return _lazy.rowwise(ilr_inv, Y, basis=basis, parts=parts)
    t = as_table(Y, "Y", 1)
    require_finite(t)
    D = t.values.shape[1] + 1
    if parts is not None and len(parts) != D:
        raise CompositionError(f"ilr_inv: {len(parts)} part names given for {D} parts")
    if basis is not None:
        basis, own = _basis_frame(basis, parts)
        parts = own if parts is None else parts
    V = default_basis(D) if basis is None else check_basis(basis, D)
    if parts is None:
        parts = [f"x{j + 1}" for j in range(D)]
    return t.wrap(_inverse_clr_values(t.values @ V), list(parts))
