"""How well each balance separates groups of rows: one-way tests and the between share.

For one balance (a column of ``B``) and a grouping of its rows:

* the one-way analysis of variance: ``F = (SS_between / (k - 1)) /
  (SS_within / (N - k))`` and its p-value (``scipy.stats.f_oneway``);
* the Kruskal-Wallis rank test: ``H`` (corrected for ties) and its p-value
  from the chi-square law with ``k - 1`` degrees of freedom
  (``scipy.stats.kruskal``), which needs no normality;
* the share of the balance's variation that lies between the groups,
  ``SS_between / SS_total`` (eta squared; 0 = the group means coincide,
  1 = every group is constant).

``k`` counts the groups that have at least one row, ``N`` the rows used (a
finite value and a group). Ranking is the costly step (about 0.25 s per
balance at 10^6 rows), so ``max_rank_rows`` can bound the rows the
Kruskal-Wallis test ranks: above it, H is computed on a seeded random subset
of that many rows (``kruskal_n`` says how many were ranked); F and the between
share always use every row. The p-values test "all groups have the same mean"
(ANOVA) or "the same distribution" (Kruskal-Wallis); with thousands of rows
almost any difference is significant, so the between share says more about
how *well* a balance separates the groups. Rows are taken as independent
samples: repeated or spatially clustered samples make the p-values too small.

Every value is a plain float or None (JSON-friendly, like
:mod:`compwidgets.core.summary`).
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence

import numpy as np
from scipy import stats

from ._arrays import CompositionError
from .summary import balance_table, group_codes

__all__ = ["SEPARATION_KEYS", "STATISTIC_KEYS", "balance_separation"]

#: The statistics of each entry of :func:`balance_separation`.
STATISTIC_KEYS = (
    "n",
    "n_groups",
    "anova_f",
    "anova_p",
    "kruskal_h",
    "kruskal_p",
    "kruskal_n",
    "between_share",
)
#: Keys of each entry of :func:`balance_separation`.
SEPARATION_KEYS = ("index", "name", *STATISTIC_KEYS)


def _finite(x) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


def balance_separation(
    B,
    codes,
    n_groups: int,
    names: Sequence[str] | None = None,
    max_rank_rows: int | None = None,
    seed: int = 0,
) -> list[dict]:
    """Group separation along each balance (column of ``B``).

    Parameters
    ----------
    B : array-like of shape (n, k)
        Balance values; NaN marks a row without a value, left out.
    codes : int array of shape (n,)
        Group code per row, ``0 .. n_groups - 1``; ``-1`` = no group (left out).
    n_groups : int
        Number of groups the codes refer to.
    names : sequence of str, optional
        Balance names, copied to ``"name"``.
    max_rank_rows : int, optional
        Rank at most this many rows for the Kruskal-Wallis test: the rows
        ``numpy.random.default_rng(seed).choice(N, max_rank_rows, replace=False)``
        (sorted) of the N rows used. Default: every row.
    seed : int, default 0
        Seed of that subset.

    Returns
    -------
    list of dict, one per balance, with the keys of :data:`SEPARATION_KEYS`:
        ``index``, ``name``, ``n`` (rows used), ``n_groups`` (groups with rows),
        ``anova_f``, ``anova_p`` (``scipy.stats.f_oneway``), ``kruskal_h``,
        ``kruskal_p`` (``scipy.stats.kruskal``), ``kruskal_n`` (rows ranked) and
        ``between_share``
        (``SS_between / SS_total``). A value that cannot be computed (fewer
        than two groups with rows, no spread within or at all) is None.
    """
    values = balance_table(B, "balance_separation", names)
    if int(n_groups) != n_groups:
        raise CompositionError(
            f"balance_separation: n_groups must be an integer, got {n_groups!r}"
        )
    codes = group_codes(codes, values.shape[0], int(n_groups), "balance_separation")
    if max_rank_rows is not None and (int(max_rank_rows) != max_rank_rows or max_rank_rows < 2):
        raise CompositionError(
            f"balance_separation: max_rank_rows must be an integer >= 2, got {max_rank_rows!r}"
        )
    out = []
    layout = None
    for j in range(values.shape[1]):
        col = values[:, j]
        ok = np.isfinite(col) & (codes >= 0)
        if layout is None or not np.array_equal(ok, layout[0]):
            layout = (ok, *_groups_layout(codes[ok], int(n_groups), max_rank_rows, seed))
        _, order, bounds, pick = layout
        x = col[ok][order]  # rows sorted by group
        samples = [s for s in np.split(x, bounds) if s.size]
        entry = dict.fromkeys(SEPARATION_KEYS)
        entry.update(
            index=j,
            name=None if names is None else str(names[j]),
            n=int(x.size),
            n_groups=len(samples),
        )
        if len(samples) >= 2 and x.size > len(samples):
            ranked = None
            if pick is not None:
                ranked = [s for s in np.split(x[pick[0]], pick[1]) if s.size]
            entry.update(_tests(x, samples, ranked))
        out.append(entry)
    return out


def _groups_layout(g: np.ndarray, n_groups: int, max_rank_rows: int | None, seed: int):
    """Row order by group, the group boundaries in it, and the ranked subset (or None).

    The subset is ``(positions in the sorted order, boundaries)`` of the rows
    ``default_rng(seed).choice(N, max_rank_rows, replace=False)``.
    """
    order = np.argsort(g, kind="stable")
    sorted_codes = g[order]
    bounds = np.searchsorted(sorted_codes, np.arange(1, n_groups))
    if max_rank_rows is None or g.size <= max_rank_rows:
        return order, bounds, None
    chosen = np.zeros(g.size, dtype=bool)
    chosen[np.random.default_rng(seed).choice(g.size, int(max_rank_rows), replace=False)] = True
    in_order = np.flatnonzero(chosen[order])  # chosen rows, still sorted by group
    return (
        order,
        bounds,
        (in_order, np.searchsorted(sorted_codes[in_order], np.arange(1, n_groups))),
    )


def _tests(x: np.ndarray, samples: list[np.ndarray], ranked: list | None) -> dict:
    """F, H, their p-values and the between share of one balance (None where undefined).

    ``ranked``: the samples the rank test uses (None: ``samples``).
    """
    ranked = samples if ranked is None else ranked
    result: dict = {"kruskal_n": int(sum(s.size for s in ranked))}
    centred_total = float(np.sum((x - x.mean()) ** 2))
    between = float(sum(s.size * (s.mean() - x.mean()) ** 2 for s in samples))
    result["between_share"] = _finite(between / centred_total) if centred_total > 0 else None
    with warnings.catch_warnings():
        # constant or degenerate input: scipy warns and returns NaN, reported as None here
        warnings.simplefilter("ignore")
        f = stats.f_oneway(*samples)
        result["anova_f"], result["anova_p"] = _finite(f.statistic), _finite(f.pvalue)
        try:
            if len(ranked) < 2:
                raise ValueError("fewer than two groups among the ranked rows")
            h = stats.kruskal(*ranked)
        except ValueError:  # every value identical, or one group only
            result["kruskal_h"] = result["kruskal_p"] = None
        else:
            result["kruskal_h"], result["kruskal_p"] = _finite(h.statistic), _finite(h.pvalue)
    return result
