"""Descriptive statistics of compositions.

Convention: every variance and covariance in compwidgets uses ``ddof = 1``
(the unbiased sample estimator, divisor n - 1), see :data:`DDOF`.
"""

from __future__ import annotations

import numpy as np

from ._arrays import CompositionError, as_table, require_positive
from .transforms import clr_values

#: Delta degrees of freedom used by every variance in the package (divisor n - 1).
DDOF = 1


def _check_rows(n: int, what: str) -> None:
    if n <= DDOF:
        raise CompositionError(f"{what}: needs at least {DDOF + 1} rows, got {n}")


def center(X):
    """Centre (closed geometric mean of each part) of a data set (Aitchison 1986)."""
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
    t = as_table(X, min_parts=2)
    _check_rows(t.values.shape[0], "clr_covariance")
    Z = clr_values(t)
    C = np.cov(Z, rowvar=False, ddof=DDOF)
    return _square(t, C, "clr")


def variation_matrix(X):
    """Variation matrix ``T_ij = var(ln(x_i / x_j))`` (Aitchison 1986), ddof = 1."""
    t = as_table(X, min_parts=2)
    require_positive(t)
    _check_rows(t.values.shape[0], "variation_matrix")
    C = np.cov(np.log(t.values), rowvar=False, ddof=DDOF)
    d = np.diag(C)
    T = d[:, None] + d[None, :] - 2 * C
    np.fill_diagonal(T, 0.0)
    return _square(t, np.maximum(T, 0.0), None)


def total_variance(X) -> float:
    """Total variance: trace of the clr covariance, ``sum_ij T_ij / (2 D)``."""
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
