"""The core functions on dask arrays and dask DataFrames (tables larger than memory).

Row-by-row functions (closure, clr, ilr, balances, multiplicative replacement,
...) are applied partition by partition (``map_partitions`` / ``map_blocks``):
the result is the same kind of dask object, lazy, with the input's index and
divisions (DataFrames) or row chunks (arrays). Each partition goes through the
in-memory function itself, so the rules and the error messages are the same;
a problem in a partition is raised when that partition is computed, naming its
row labels.

Statistics (centre, clr covariance, total variance, variation matrix) are
exact over all rows from one pass of partition-wise sums: each partition gives
its row count, the column means of its clr coordinates and the Gram matrix of
its clr coordinates centred on its own means; partitions are combined with the
pairwise update of Chan, Golub & LeVeque (1979), which keeps the sums centred
(no large sums of squares that cancel). Entries of the variation matrix that
are small next to the variances of their parts are recomputed from the
log-ratio itself in a second pass over those pairs only (see
:func:`variation_matrix`).

dask is imported only when a dask object is handed in (``is_lazy`` looks at
``sys.modules``), so the in-memory path never needs it.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ._arrays import CompositionError

#: Share of ``T_ii + T_jj``-scale below which a lazy variation-matrix entry is
#: recomputed from the log-ratio itself (stricter than the in-memory switch, as
#: the partition-wise sums add one more rounding per partition).
LAZY_DIRECT_SHARE = 1e-2


def is_lazy(X) -> bool:
    """True for a dask array, DataFrame or Series (without importing dask)."""
    if "dask" not in sys.modules:
        return False
    module = type(X).__module__ or ""
    if not module.startswith("dask"):
        return False
    import dask.array as da

    if isinstance(X, da.Array):
        return True
    try:
        import dask.dataframe as dd
    except ImportError:  # dask without its dataframe extra
        return False
    return isinstance(X, (dd.DataFrame, dd.Series))


def _is_frame(X) -> bool:
    import dask.dataframe as dd

    return isinstance(X, dd.DataFrame)


def _as_rows(X):
    """A dask DataFrame as is; a dask array with one chunk across the columns."""
    if _is_frame(X):
        return X
    import dask.array as da
    import dask.dataframe as dd

    if isinstance(X, dd.Series):
        raise CompositionError(
            "a dask Series is one column, not a table of compositions; pass a dask DataFrame"
        )
    if not isinstance(X, da.Array) or X.ndim != 2:
        raise CompositionError(
            f"expected a 2-D dask array or a dask DataFrame, got {type(X).__name__} "
            f"of {getattr(X, 'ndim', '?')} dimensions"
        )
    if np.isnan(X.shape[1]):
        raise CompositionError("a dask array with an unknown number of columns cannot be read")
    return X.rechunk({1: -1}) if len(X.chunks[1]) > 1 else X


def _sample_input(X, fill: float = 1.0):
    """One row shaped like ``X``: ones are a valid input of every row-by-row function,
    zeros a valid mask or per-cell limit beside them (no cell below detection)."""
    if _is_frame(X):
        return pd.DataFrame(np.full((1, X._meta.shape[1]), fill), columns=X._meta.columns)
    return np.full((1, int(X.shape[1])), fill)


def rowwise(func, X, *others, **kwargs):
    """``func(X, *others, **kwargs)`` partition by partition, lazily, the same kind out.

    ``others`` are further dask objects aligned with ``X`` row by row (a mask,
    per-cell detection limits) or plain values. The result's columns (names
    and count) come from ``func`` applied to one row of ones, so options are
    checked at once, before any partition is read.
    """
    X = _as_rows(X)
    others = tuple(_as_rows(o) if is_lazy(o) else o for o in others)
    samples = (_sample_input(o, 0.0) if is_lazy(o) else o for o in others)
    sample = func(_sample_input(X), *samples, **kwargs)
    if _is_frame(X):
        if not isinstance(sample, pd.DataFrame):
            raise CompositionError(f"{func.__name__}: gives no table per row on a DataFrame")
        meta = sample.iloc[:0].copy()
        meta.index = X._meta.index[:0]

        def on_partition(part, *rest):
            if len(part) == 0:
                return meta.copy()
            return func(part, *rest, **kwargs)

        return X.map_partitions(on_partition, *others, meta=meta, align_dataframes=False)
    width = int(np.asarray(sample).shape[1])

    def on_block(block, *rest):
        if block.shape[0] == 0:
            return np.empty((0, width))
        return np.asarray(func(block, *rest, **kwargs), dtype=float)

    return X.map_blocks(
        on_block, *others, dtype=float, chunks=(X.chunks[0], (width,)), meta=np.empty((0, 0))
    )


# ------------------------------------------------------------------ statistics
@dataclass
class Moments:
    """Row count, column means and centred Gram matrix of a block of rows."""

    n: int
    mean: np.ndarray  # (D,)
    gram: np.ndarray  # (D, D): sum over rows of (z - mean)(z - mean)^T

    @staticmethod
    def of(Z: np.ndarray) -> Moments:
        n = Z.shape[0]
        if n == 0:
            D = Z.shape[1]
            return Moments(0, np.zeros(D), np.zeros((D, D)))
        mean = Z.mean(axis=0)
        C = Z - mean
        return Moments(n, mean, C.T @ C)

    def __add__(self, other: Moments) -> Moments:
        """Chan, Golub & LeVeque (1979): the moments of two blocks together."""
        if other.n == 0:
            return self
        if self.n == 0:
            return other
        n = self.n + other.n
        delta = other.mean - self.mean
        mean = self.mean + delta * (other.n / n)
        gram = self.gram + other.gram + np.outer(delta, delta) * (self.n * other.n / n)
        return Moments(n, mean, gram)


def _combine(items: list):
    """Pairwise sum of a list of Moments (a balanced tree keeps the rounding small)."""
    while len(items) > 1:
        items = [
            items[k] + items[k + 1] if k + 1 < len(items) else items[k]
            for k in range(0, len(items), 2)
        ]
    return items[0]


def _blocks(X) -> list:
    """The delayed pandas/numpy blocks of rows of ``X``."""
    if _is_frame(X):
        return list(X.to_delayed())
    return list(X.to_delayed().ravel())


def _clr_block(block) -> np.ndarray:
    from ._arrays import as_table
    from .transforms import clr_values

    if len(block) == 0:
        return np.empty((0, block.shape[1]))
    return clr_values(as_table(block, min_parts=2))


def _clr_moments(block) -> Moments:
    return Moments.of(_clr_block(block))


def clr_moments(X) -> Moments:
    """Exact moments of the clr coordinates of all rows of ``X`` (one pass)."""
    import dask

    X = _as_rows(X)
    if X.shape[1] is not None and not np.isnan(X.shape[1]) and int(X.shape[1]) < 2:
        raise CompositionError(f"X: {int(X.shape[1])} part(s) given; at least 2 are needed")
    partial = [dask.delayed(_clr_moments)(b) for b in _blocks(X)]
    (parts,) = dask.compute(partial)
    return _combine(list(parts))


def _columns(X) -> list[str] | None:
    return [str(c) for c in X.columns] if _is_frame(X) else None


def _need_rows(m: Moments, what: str) -> None:
    from .stats import DDOF

    if m.n <= DDOF:
        raise CompositionError(f"{what}: needs at least {DDOF + 1} rows, got {m.n}")


def center(X):
    """Centre of all rows of a dask table (closed geometric means), computed in one pass."""
    m = clr_moments(X)
    if m.n == 0:
        raise CompositionError("center: empty input; nothing to compute")
    g = np.exp(m.mean - m.mean.max())
    g = g / g.sum()
    names = _columns(X)
    return pd.Series(g, index=pd.Index(names), name="center") if names is not None else g


def _square(X, M: np.ndarray, prefix: str | None):
    names = _columns(X)
    if names is None:
        return M
    labels = [f"{prefix}({p})" if prefix else p for p in names]
    return pd.DataFrame(M, index=labels, columns=labels)


def clr_covariance(X):
    """Covariance (D, D) of the clr coordinates of all rows, ddof = 1, in one pass."""
    from .stats import DDOF

    m = clr_moments(X)
    _need_rows(m, "clr_covariance")
    return _square(X, m.gram / (m.n - DDOF), "clr")


def total_variance(X) -> float:
    """Total variance (trace of the clr covariance) of all rows, in one pass."""
    from .stats import DDOF

    m = clr_moments(X)
    _need_rows(m, "total_variance")
    return float(np.trace(m.gram) / (m.n - DDOF))


def _pair_moments(block, pairs: np.ndarray) -> Moments:
    from ._arrays import as_table, require_positive
    from .stats import _log_ratio

    if len(block) == 0:
        return Moments(0, np.zeros(len(pairs)), np.zeros((len(pairs), len(pairs))))
    t = as_table(block, min_parts=2)
    require_positive(t)
    V = t.values
    R = np.column_stack([_log_ratio(V[:, a], V[:, b]) for a, b in pairs])
    n = R.shape[0]
    mean = R.mean(axis=0)
    C = R - mean
    # only the variances are needed: keep them on the diagonal of a diagonal "Gram"
    return Moments(n, mean, np.diag((C * C).sum(axis=0)))


def variation_matrix(X):
    """Variation matrix ``T_ij = var(ln(x_i / x_j))`` of all rows of a dask table, ddof = 1.

    One pass of partition-wise sums gives the centred Gram matrix ``G`` of the
    clr coordinates (Chan et al.'s pairwise update across partitions), and
    ``T_ij = (G_ii + G_jj - 2 G_ij) / (n - 1)``. Its rounding error is a small
    multiple of ``eps * (G_ii + G_jj)``, so every entry below
    :data:`LAZY_DIRECT_SHARE` times ``(G_ii + G_jj) / (n - 1)`` is recomputed
    in a second lazy pass over those pairs only, as the variance of
    ``ln(x_i / x_j)`` itself (per-partition two-pass moments, combined the same
    way). Guarantee: every entry has a relative rounding error of at most a
    few times ``eps / LAZY_DIRECT_SHARE`` (about 1e-13) plus the error of
    combining the partitions' centred sums (a few ``eps`` per level of the
    tree), so it agrees with :func:`compwidgets.core.variation_matrix` on the
    same rows to about 1e-12 relative.
    """
    import dask

    from .stats import DDOF

    Xr = _as_rows(X)
    m = clr_moments(Xr)
    _need_rows(m, "variation_matrix")
    G = m.gram
    g = np.diag(G)
    scale = (g[:, None] + g[None, :]) / (m.n - DDOF)
    T = scale - 2.0 * G / (m.n - DDOF)
    i, j = np.nonzero(np.triu(T <= LAZY_DIRECT_SHARE * scale, k=1))
    if i.size:
        pairs = np.column_stack([i, j])
        partial = [dask.delayed(_pair_moments)(b, pairs) for b in _blocks(Xr)]
        (parts,) = dask.compute(partial)
        direct = _combine(list(parts))
        T[i, j] = np.diag(direct.gram) / (direct.n - DDOF)
    T = np.triu(T, k=1)
    return _square(X, T + T.T, None)
