"""Closure and the vector-space operations of the simplex (Aitchison geometry).

Perturbation and powering make the simplex a vector space; the Aitchison inner
product, norm and distance make it Euclidean. They are computed through clr
coordinates, where they become the ordinary operations of R^D.
"""

from __future__ import annotations

import numpy as np

from . import _lazy
from ._arrays import (
    CompositionError,
    as_table,
    close_rows,
    require_non_negative,
    require_positive,
)
from .transforms import clr_values


def closure(X, total: float = 1.0):
    """Rescale each row to sum to ``total``.

    Parameters
    ----------
    X : array-like of shape (n, D) or (D,)
        Non-negative parts; each row must have a positive sum.
    total : float, default 1.0
        The closure constant (1, 100 for percent, 1e6 for ppm).

    Returns
    -------
    Same form as ``X`` (DataFrame in, DataFrame out with the same index).
    """
    if _lazy.is_lazy(X):
        return _lazy.rowwise(closure, X, total=total)
    try:
        bad_total = not np.isfinite(total) or total <= 0
    except (TypeError, ValueError):
        raise TypeError(f"closure: total must be a number, got {total!r}") from None
    if bad_total:
        raise CompositionError(f"closure: total must be a positive number, got {total!r}")
    t = as_table(X)
    require_non_negative(t)
    return t.wrap(close_rows(t.values, total))


def perturb(X, Y):
    """Perturbation ``X (+) Y = C[x1*y1, ..., xD*yD]`` (Aitchison 1986).

    ``Y`` may be one composition (D,) applied to every row of ``X``.
    """
    tx, ty = as_table(X, "X"), as_table(Y, "Y")
    require_positive(tx)
    require_positive(ty)
    _same_parts(tx, ty)
    # in logarithms, so that products beyond the float range still close correctly
    logv = np.log(tx.values) + np.log(ty.values)
    v = np.exp(logv - logv.max(axis=1, keepdims=True))
    return _result_table(tx, ty).wrap(v / v.sum(axis=1, keepdims=True))


def power(X, a):
    """Powering ``a (.) X = C[x1**a, ..., xD**a]``; ``a`` is a scalar or one per row."""
    t = as_table(X)
    require_positive(t)
    try:
        a = np.asarray(a, dtype=float)
    except (TypeError, ValueError):
        raise TypeError(f"power: the exponent must be numbers, got {a!r}") from None
    if a.ndim == 1:
        if a.shape[0] != t.values.shape[0]:
            raise CompositionError(
                f"power: {a.shape[0]} exponents given for {t.values.shape[0]} rows"
            )
        a = a[:, None]
    elif a.ndim > 1:
        raise CompositionError("power: the exponent must be a scalar or one value per row")
    if not np.all(np.isfinite(a)):
        raise CompositionError("power: the exponent must be finite")
    logv = np.log(t.values) * a
    v = np.exp(logv - logv.max(axis=1, keepdims=True))
    return t.wrap(v / v.sum(axis=1, keepdims=True))


def aitchison_inner(X, Y):
    """Aitchison inner product <x, y>_a = sum_i clr(x)_i clr(y)_i, one value per row."""
    tx, ty = as_table(X, "X", 2), as_table(Y, "Y", 2)
    _same_parts(tx, ty)
    value = np.sum(clr_values(tx) * clr_values(ty), axis=1)
    return _result_table(tx, ty).wrap(value)


def aitchison_norm(X):
    """Aitchison norm ||x||_a = sqrt(<x, x>_a), one value per row."""
    t = as_table(X, "X", 2)
    return t.wrap(np.sqrt(np.sum(clr_values(t) ** 2, axis=1)))


def aitchison_distance(X, Y):
    """Aitchison distance d_a(x, y) = ||clr(x) - clr(y)||, row by row."""
    tx, ty = as_table(X, "X", 2), as_table(Y, "Y", 2)
    _same_parts(tx, ty)
    diff = clr_values(tx) - clr_values(ty)
    return _result_table(tx, ty).wrap(np.sqrt(np.sum(diff**2, axis=1)))


def _result_table(tx, ty):
    """The table whose rows (and labels) a row-by-row result of X and Y takes."""
    nx, ny = tx.values.shape[0], ty.values.shape[0]
    if nx != ny:
        return tx if nx > ny else ty
    return ty if tx.single and not ty.single else tx


def _same_parts(tx, ty) -> None:
    if tx.values.shape[1] != ty.values.shape[1]:
        raise CompositionError(f"X has {tx.values.shape[1]} parts but Y has {ty.values.shape[1]}")
    if tx.labelled and ty.labelled and list(tx.columns) != list(ty.columns):
        raise CompositionError(
            f"X and Y name different parts: {list(tx.columns)} vs {list(ty.columns)}"
        )
    nx, ny = tx.values.shape[0], ty.values.shape[0]
    if nx != ny and 1 not in (nx, ny):
        raise CompositionError(f"X has {nx} rows but Y has {ny}; give equal rows or one row")
