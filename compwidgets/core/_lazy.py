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
    """The delayed pandas/numpy blocks of rows of ``X`` (a DataFrame, Series or array)."""
    if hasattr(X, "divisions"):
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


# ------------------------------------------------------------------ balances
def _complete_block(block) -> tuple[np.ndarray, np.ndarray]:
    """(mask of the rows positive and finite in every part, their values) of one block."""
    a = np.asarray(block, dtype=float)
    with np.errstate(invalid="ignore"):
        ok = np.all(np.isfinite(a) & (a > 0), axis=1)
    return ok, a[ok]


def _balance_block(block, labels, categories, basis, direct: np.ndarray | None):
    """(rows, Moments of all complete rows, Moments per group) of one partition.

    The moments are of the clr coordinates (``direct`` None) or of the balances
    ``direct`` (rows of ``basis``) computed row by row.
    """
    from ._arrays import as_table
    from .discriminant import _group_codes
    from .transforms import clr_values

    ok, a = _complete_block(block)
    D = a.shape[1]
    if a.shape[0]:
        Z = clr_values(as_table(a, min_parts=2))
        if direct is not None:
            Z = Z @ basis[direct].T
    else:
        Z = np.empty((0, D if direct is None else len(direct)))
    # each row's position in ``categories`` by its label as text (-1: none or another)
    codes = _group_codes(labels, len(ok), categories)[0][ok] if categories else None
    per_group = (
        [] if codes is None else [Moments.of(Z[codes == g]) for g in range(len(categories))]
    )
    return len(ok), Moments.of(Z), per_group


def _balance_pass(X, groups, categories, basis, direct):
    import dask

    label_blocks = _blocks(groups) if groups is not None else [None] * X.npartitions
    tasks = [
        dask.delayed(_balance_block)(b, g, categories, basis, direct)
        for b, g in zip(_blocks(X), label_blocks, strict=True)
    ]
    (pieces,) = dask.compute(tasks)
    n_rows = sum(p[0] for p in pieces)
    total = _combine([p[1] for p in pieces])
    per_group = [_combine([p[2][g] for p in pieces]) for g in range(len(categories))]
    return n_rows, total, per_group


@dataclass
class BalanceMoments:
    """Moments of the clr coordinates of all complete rows, overall and per group.

    What :func:`summarize_balances` needs of a table for any SBP over its parts:
    one pass gives it, and every balance's mean and variance follow from it
    (``psi @ mean``, ``psi @ G @ psi / (n - 1)``, ``psi`` the balance's contrast).
    """

    n_rows: int
    total: Moments
    groups: list
    categories: list


def balance_moments(X, groups=None, categories: list[str] | None = None) -> BalanceMoments:
    """One pass over a dask DataFrame of parts (NaN, zero: incomplete rows): clr moments.

    Parameters
    ----------
    X : dask DataFrame (n, D)
        Part values; a row counts when every part is positive and finite.
    groups : dask Series, optional
        Group label of each row, partitioned like ``X``.
    categories : list of str, optional
        The groups (a row whose label, as text, is not one of them is in none).
    """
    X = _as_rows(X)
    if not _is_frame(X):
        raise CompositionError("balance_moments: needs a dask DataFrame of parts")
    categories = list(categories or [])
    if groups is not None and groups.npartitions != X.npartitions:
        raise CompositionError(
            f"balance_moments: groups has {groups.npartitions} partitions, X {X.npartitions}"
        )
    n_rows, total, per_group = _balance_pass(X, groups, categories, None, None)
    return BalanceMoments(n_rows, total, per_group, categories)


def summarize_balances(
    X,
    sbp,
    groups=None,
    categories: list[str] | None = None,
    names=None,
    moments: BalanceMoments | None = None,
) -> tuple[list[dict], float | None]:
    """Per-balance summaries over all complete rows of a dask table, and the total variance.

    The entries of :func:`compwidgets.core.summary.summarize_balances` that add up
    partition by partition, with the same keys and meaning: ``index``, ``name``,
    ``n``, ``n_missing``, ``variance`` (ddof = 1), ``share`` (of the total
    variance of the same rows), ``mean`` and ``groups`` (``{"code", "n",
    "mean"}`` per category), and with groups ``separation``: the ANOVA F, its
    p-value and the between share from the groups' moments (the keys of
    :func:`compwidgets.core.separation.balance_separation`). Quantiles and the
    Kruskal-Wallis test need the rows in order and are not given here (the
    keys are absent).

    One pass (:func:`balance_moments`, reusable through ``moments`` for another
    SBP over the same parts) gives every balance; a balance whose variance or
    mean is small next to the size of the clr terms it is made of (below
    :data:`LAZY_DIRECT_SHARE`, where ``psi @ G @ psi`` would lose digits) is
    recomputed from its values row by row in a second pass, as
    :func:`variation_matrix` does; every entry then agrees with the in-memory
    summary of the same rows to about 1e-12 relative.
    """
    from .sbp import sbp_basis
    from .stats import DDOF

    if moments is None:
        moments = balance_moments(X, groups, categories)
    categories = moments.categories
    m = moments.total
    sbp = np.asarray(sbp)
    # no balance yet (one group of parts): the total variance alone
    basis = sbp_basis(sbp, complete=False) if sbp.size else np.zeros((0, m.mean.shape[0]))
    if basis.shape[1] != m.mean.shape[0]:
        raise CompositionError(
            f"summarize_balances: the SBP has {basis.shape[1]} parts, the table {m.mean.shape[0]}"
        )
    k = basis.shape[0]
    if names is not None and len(names) != k:
        raise CompositionError(f"summarize_balances: {len(names)} names for {k} balances")
    enough = m.n > DDOF
    total = float(np.trace(m.gram) / (m.n - DDOF)) if enough else None
    mean = basis @ m.mean if m.n else np.full(k, np.nan)
    variance = np.einsum("ij,jk,ik->i", basis, m.gram, basis) / (m.n - DDOF) if enough else None
    group_n = [g.n for g in moments.groups]
    group_mean = [basis @ g.mean if g.n else np.full(k, np.nan) for g in moments.groups]
    # each group's sum of squares about its own mean along each balance
    group_ss = [
        np.einsum("ij,jk,ik->i", basis, g.gram, basis) if g.n else np.zeros(k)
        for g in moments.groups
    ]
    if m.n:
        spread = np.sqrt(np.maximum(np.diag(m.gram), 0.0) / max(m.n - DDOF, 1))
        var_scale = (np.abs(basis) @ spread) ** 2
        mean_scale = np.abs(basis) @ np.abs(m.mean)
        small = np.abs(mean) < LAZY_DIRECT_SHARE * mean_scale
        for gm, g in zip(group_mean, moments.groups, strict=True):
            if g.n:
                small |= np.abs(gm) < LAZY_DIRECT_SHARE * (np.abs(basis) @ np.abs(g.mean))
        if variance is not None:
            small |= variance < LAZY_DIRECT_SHARE * var_scale
        direct = np.flatnonzero(small)
        if direct.size:
            Xr = _as_rows(X)
            _, dm, dg = _balance_pass(Xr, groups, categories, basis, direct)
            mean[direct] = dm.mean
            if variance is not None:
                variance[direct] = np.diag(dm.gram) / (dm.n - DDOF)
            for gm, g in zip(group_mean, dg, strict=True):
                if g.n:
                    gm[direct] = g.mean
            for ss, g in zip(group_ss, dg, strict=True):
                if g.n:
                    ss[direct] = np.diag(g.gram)

    def num(x) -> float | None:
        x = float(x)
        return x if np.isfinite(x) else None

    out = []
    for j in range(k):
        var = None if variance is None else num(variance[j])
        out.append(
            {
                "index": j,
                "name": None if names is None else str(names[j]),
                "n": int(m.n),
                "n_missing": int(moments.n_rows - m.n),
                "variance": var,
                "share": var / total if var is not None and total else None,
                "mean": num(mean[j]) if m.n else None,
                "groups": [
                    {
                        "code": g,
                        "n": int(group_n[g]),
                        "mean": num(group_mean[g][j]) if group_n[g] else None,
                    }
                    for g in range(len(categories))
                ],
            }
        )
        if categories:
            out[-1]["separation"] = _one_way_anova(
                np.array(group_n), np.array([gm[j] for gm in group_mean]),
                np.array([ss[j] for ss in group_ss]),
            )  # fmt: skip
    return out, total


def _one_way_anova(n: np.ndarray, means: np.ndarray, ss: np.ndarray) -> dict:
    """ANOVA F, its p-value and the between share of one balance from group moments.

    ``n``, ``means``, ``ss``: rows, mean and sum of squares about that mean of
    each group. The keys and meaning of :func:`compwidgets.core.separation.balance_separation`
    (``n``, ``n_groups``, ``anova_f``, ``anova_p``, ``between_share``; None where
    undefined): ``F = (SS_between / (k - 1)) / (SS_within / (N - k))`` over the
    groups with rows.
    """
    from scipy import stats

    present = n > 0
    n, means, ss = n[present], means[present], ss[present]
    N, k = int(n.sum()), int(present.sum())
    out: dict = {"n": N, "n_groups": k, "anova_f": None, "anova_p": None, "between_share": None}
    if k < 2 or N <= k:
        return out
    grand = float(np.sum(n * means) / N)
    between = float(np.sum(n * (means - grand) ** 2))
    within = float(np.sum(ss))
    if between + within > 0:
        out["between_share"] = between / (between + within)
    if within > 0:
        f = (between / (k - 1)) / (within / (N - k))
        out["anova_f"], out["anova_p"] = f, float(stats.f.sf(f, k - 1, N - k))
    return out


def biplot_row_coords(fit, values: np.ndarray, components) -> np.ndarray:
    """Row coordinates of further rows in a fitted biplot's components (rows, k).

    A row with clr coordinates ``z`` lies at ``(z - clr_mean) @ V[:, c] / s[c]``
    times the row factor of the scaling (``s[c]`` for the form biplot,
    ``sqrt(n - 1)`` for the covariance biplot): for a row that entered the fit
    this is its own row coordinate, as ``U = Zc V / s``. ``values`` are positive
    part values in the order of ``fit.parts``.
    """
    from ._arrays import as_table
    from .stats import DDOF
    from .transforms import clr_values

    components = [int(c) for c in components]
    V = fit.right_vectors[:, components]
    s = fit.singular_values[components]
    Z = clr_values(as_table(values, min_parts=2))
    Z -= fit.clr_mean
    coords = Z @ V
    if fit.scaling != "form":
        coords *= np.sqrt(fit.n_rows_used - DDOF) / s
    return coords
