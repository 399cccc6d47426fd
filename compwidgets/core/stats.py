"""Descriptive statistics of compositions.

Convention: every variance and covariance in compwidgets uses ``ddof = 1``
(the unbiased sample estimator, divisor n - 1), see :data:`DDOF`.
"""

from __future__ import annotations

import numpy as np

from . import _lazy
from ._arrays import CompositionError, as_table, require_positive
from .transforms import clr_values

#: Delta degrees of freedom used by every variance in the package (divisor n - 1).
DDOF = 1


def _check_rows(n: int, what: str) -> None:
    if n <= DDOF:
        raise CompositionError(f"{what}: needs at least {DDOF + 1} rows, got {n}")


def center(X):
    """Centre (closed geometric mean of each part) of a data set (Aitchison 1986)."""
    if _lazy.is_lazy(X):
        return _lazy.center(X)
    t = as_table(X, min_parts=2)
    require_positive(t)
    logv = np.log(t.values).mean(axis=0)
    g = np.exp(logv - logv.max())
    g = g / g.sum()
    if t.labelled:
        import pandas as pd

        return pd.Series(g, index=t.columns.copy(), name="center")
    return g


def clr_covariance(X):
    """Covariance matrix (D, D) of the clr coordinates, ddof = 1."""
    if _lazy.is_lazy(X):
        return _lazy.clr_covariance(X)
    t = as_table(X, min_parts=2)
    _check_rows(t.values.shape[0], "clr_covariance")
    Z = clr_values(t)
    C = np.cov(Z, rowvar=False, ddof=DDOF)
    return _square(t, C, "clr")


#: A variation-matrix entry smaller than this share of ``var ln x_i + var ln x_j`` is
#: computed directly as the variance of ``ln(x_i / x_j)`` (see :func:`variation_matrix`).
DIRECT_SHARE = 1e-3
#: Rows of the log matrix formed at a time by :func:`variation_matrix` (bounds memory).
_CHUNK_CELLS = 1 << 21


def variation_matrix(X):
    """Variation matrix ``T_ij = var(ln(x_i / x_j))`` (Aitchison 1986), ddof = 1.

    Each entry is the sample variance of the log-ratio itself. Computed in two
    passes over the rows (a block of rows at a time, so memory stays small for
    10^6 rows): the column means of ``ln x``, then the Gram matrix ``G`` of the
    *centred* logs, which gives ``T_ij = (G_ii + G_jj - 2 G_ij) / (n - 1)``.
    That difference loses precision when the log-ratio varies far less than its
    parts (a nearly constant ratio of two strongly varying parts): the rounding
    error of ``G`` is a small multiple of ``eps * (G_ii + G_jj)``. Every entry
    below :data:`DIRECT_SHARE` times ``(G_ii + G_jj) / (n - 1)`` is therefore
    recomputed directly, as ``numpy.var(log(x_i / x_j), ddof=1)``; the others
    keep a relative rounding error of a few times ``eps / DIRECT_SHARE``: about
    1e-12 next to the switch and less away from it (checked against the direct
    variance in the tests, and printed by ``benchmarks/variation_matrix.py``).
    No entry is clamped: each is a variance, never negative. The diagonal is 0.
    Cost: two passes of logs and one Gram matrix (``n D^2`` products), plus
    ``n`` logs per pair in nearly constant proportion.
    """
    if _lazy.is_lazy(X):
        return _lazy.variation_matrix(X)
    t = as_table(X, min_parts=2)
    require_positive(t)
    n = t.values.shape[0]
    _check_rows(n, "variation_matrix")
    return _square(t, _variation(t.values), None)


def _variation(V: np.ndarray) -> np.ndarray:
    """The variation matrix of a positive (n, D) matrix (see :func:`variation_matrix`)."""
    n, D = V.shape
    step = max(1, _CHUNK_CELLS // D)
    mean = np.zeros(D)
    for start in range(0, n, step):
        mean += np.log(V[start : start + step]).sum(axis=0)
    mean /= n
    G = np.zeros((D, D))
    for start in range(0, n, step):
        L = np.log(V[start : start + step])
        L -= mean
        G += L.T @ L
    g = np.diag(G)
    scale = (g[:, None] + g[None, :]) / (n - DDOF)
    T = scale - 2.0 * G / (n - DDOF)
    i, j = np.nonzero(np.triu(T <= DIRECT_SHARE * scale, k=1))
    for a, b in zip(i, j, strict=True):
        T[a, b] = np.var(_log_ratio(V[:, a], V[:, b]), ddof=DDOF)
    T = np.triu(T, k=1)
    return T + T.T


def _log_ratio(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """``ln(a / b)``, rounded once in the ratio (differences of logs where it overflows)."""
    with np.errstate(over="ignore", under="ignore"):
        r = a / b
    if np.all(np.isfinite(r) & (r > 0)):
        return np.log(r)
    return np.log(a) - np.log(b)


def total_variance(X) -> float:
    """Total variance: trace of the clr covariance, ``sum_ij T_ij / (2 D)``."""
    if _lazy.is_lazy(X):
        return _lazy.total_variance(X)
    t = as_table(X, min_parts=2)
    _check_rows(t.values.shape[0], "total_variance")
    return float(np.var(clr_values(t), axis=0, ddof=DDOF).sum())


def total_variance_from_variation(T) -> float:
    """Total variance from a variation matrix: ``sum_ij T_ij / (2 D)`` (Aitchison 1986).

    The same number as :func:`total_variance` of the data the matrix was computed
    on, without going over the data again.
    """
    M = np.asarray(T, dtype=float)
    if M.ndim != 2 or M.shape[0] != M.shape[1] or M.shape[0] < 2:
        raise CompositionError(
            f"total_variance_from_variation: needs a square matrix of at least 2 parts, "
            f"got shape {M.shape}"
        )
    return float(M.sum() / (2 * M.shape[0]))


def _square(t, M, prefix):
    if not t.labelled:
        return M
    import pandas as pd

    names = [f"{prefix}({p})" if prefix else p for p in t.part_names()]
    return pd.DataFrame(M, index=names, columns=names)
