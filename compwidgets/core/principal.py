"""Suggested partitions: principal balances and Ward clustering of the parts.

Principal balances (Pawlowsky-Glahn, Egozcue & Tolosana-Delgado 2011) are the
balances of an SBP chosen one after another so that each explains as much of
the remaining variance as possible (from memory; Martin-Fernandez et al. 2018
review exact and approximate ways to find them). This module builds them top
down: each group of parts, starting from all parts, is split by the
bipartition whose balance has maximal sample variance (ddof = 1): an exact
search over all ``2**(m-1) - 1`` bipartitions of a group of ``m`` parts when
``m <= max_exhaustive``, a local-search heuristic above that.

What the search guarantees, precisely:

* each balance is the best split *of its own group*: no other bipartition of
  the parts it splits has a larger variance (exactly when the group has at
  most ``max_exhaustive`` parts; above that, no single part moved to the other
  side gives a larger one, a local maximum);
* the groups are those made by the splits above (a tree, so the result is an
  SBP), and with ``order="variance"`` the balances are taken in order of their
  variance, the largest first;
* the first balance has the largest variance among the balances that split
  *all* the parts.

It does *not* guarantee that the first balance is the largest-variance
balance of any SBP: a balance between two smaller groups can vary more than
every split of all parts, so a whole SBP holding a single balance of larger
variance can exist (e.g. two strongly and independently varying parts among
near-constant ones: their own balance beats every split of all parts; see the
tests). Nor is the sum of the variances of the first k balances the largest
possible over all SBPs.

The variance of a balance with contrast vector ``v`` (Egozcue &
Pawlowsky-Glahn 2005) is ``var(b) = v' C v`` with ``C`` the clr covariance
matrix, so all candidates of a group are scored with matrix products, one
chunk of candidates at a time.

References
----------
Egozcue, J.J., Pawlowsky-Glahn, V. (2005) Groups of parts and their balances
in compositional data analysis. Mathematical Geology 37(7), 795-828 (from memory).
Pawlowsky-Glahn, V., Egozcue, J.J., Tolosana-Delgado, R. (2011) Principal
balances. Proceedings of CoDaWork 2011, the 4th International Workshop on
Compositional Data Analysis, Sant Feliu de Guixols (from memory).
Martin-Fernandez, J.A., Pawlowsky-Glahn, V., Egozcue, J.J., Tolosana-Delgado, R.
(2018) Advances in principal balances for compositional data. Mathematical
Geosciences 50, 273-298 (from memory): exact search is exponential in the
number of parts; approximations start from the principal components of the
clr covariance.
Ward, J.H. (1963) Hierarchical grouping to optimize an objective function.
Journal of the American Statistical Association 58, 236-244 (from memory).
"""

from __future__ import annotations

from collections.abc import Callable, Sequence

import numpy as np
from scipy.cluster.hierarchy import linkage, to_tree

from ._arrays import CompositionError, as_table
from .sbp import SBPError, validate_sbp
from .stats import DDOF
from .transforms import clr_values

#: Candidates scored per matrix product (bounds memory to a few tens of MB).
CHUNK = 1 << 15

ProgressCallback = Callable[[float, int], None]


def _complete(t, skip_incomplete: bool, what: str):
    """The rows of ``t`` without NaN or inf; raises naming them unless ``skip_incomplete``."""
    incomplete = ~np.all(np.isfinite(t.values), axis=1)
    if not incomplete.any():
        return t
    if not skip_incomplete:
        rows = t.row_labels(np.flatnonzero(incomplete))
        raise CompositionError(
            f"{what}: NaN or inf in {len(rows)} row(s) (first: {rows[:5]}); "
            "pass the complete rows only, or skip_incomplete=True"
        )
    keep = ~incomplete
    return type(t)(t.values[keep], None if t.index is None else t.index[keep], t.columns, False)


def _clr_input(X, kind: str, skip_incomplete: bool) -> tuple[np.ndarray, list[str]]:
    """clr matrix (n, D) and part names from compositions or clr coordinates."""
    if kind not in ("auto", "composition", "clr"):
        raise CompositionError(f"kind must be 'auto', 'composition' or 'clr', got {kind!r}")
    t = as_table(X, min_parts=2)
    names = [n[4:-1] if n.startswith("clr(") and n.endswith(")") else n for n in t.part_names()]
    t = _complete(t, skip_incomplete, t.name)
    values = t.values
    if values.shape[0] <= DDOF:
        raise CompositionError(
            f"{t.name}: {values.shape[0]} complete row(s); a variance needs at least {DDOF + 1}"
        )
    if kind == "auto":
        kind = "composition" if np.all(values > 0) else "clr"
    if kind == "composition":
        return clr_values(t), names
    scale = np.maximum(np.abs(values).max(axis=1), 1.0)
    off = np.abs(values.sum(axis=1)) > 1e-8 * scale * values.shape[1]
    if off.any():
        rows = t.row_labels(np.flatnonzero(off))
        raise CompositionError(
            f"{t.name}: not compositions (zero or negative cells) and not clr coordinates "
            f"(rows {rows[:5]} do not sum to zero)"
        )
    return values, names


def _bipartition_masks(m: int, start: int, stop: int) -> np.ndarray:
    """0/1 matrix (stop - start, m): row i marks the numerator of bipartition ``start + i``.

    Bipartition number ``c`` (1 <= c < 2**(m-1)) puts part ``j < m - 1`` in
    the numerator when bit ``j`` of ``c`` is set; the last part is always in the
    denominator, so each unordered bipartition appears exactly once.
    """
    codes = np.arange(start, stop, dtype=np.int64)
    bits = (codes[:, None] >> np.arange(m - 1, dtype=np.int64)[None, :]) & 1
    return np.hstack([bits, np.zeros((len(codes), 1), dtype=np.int64)]).astype(float)


def _contrasts(M: np.ndarray) -> np.ndarray:
    """Balance contrasts (rows) of numerator masks ``M`` over a group of m parts."""
    m = M.shape[1]
    r = M.sum(axis=1, keepdims=True)
    s = m - r
    return np.where(M > 0, np.sqrt(s / (r * m)), -np.sqrt(r / (s * m)))


def _scores(M: np.ndarray, C: np.ndarray) -> np.ndarray:
    """Balance variances ``v' C v`` for every row of masks ``M``."""
    V = _contrasts(M)
    return np.einsum("ij,ij->i", V @ C, V)


def _exhaustive(C: np.ndarray, report: Callable[[float], None]) -> tuple[np.ndarray, float]:
    m = C.shape[0]
    total = (1 << (m - 1)) - 1
    best_mask, best = None, -np.inf
    for start in range(1, total + 1, CHUNK):
        stop = min(start + CHUNK, total + 1)
        M = _bipartition_masks(m, start, stop)
        scores = _scores(M, C)
        i = int(np.argmax(scores))
        if scores[i] > best:
            best, best_mask = float(scores[i]), M[i]
        report((stop - 1) / total)
    return best_mask.astype(bool), best


def _local_search(C: np.ndarray, report: Callable[[float], None]) -> tuple[np.ndarray, float]:
    """Heuristic best bipartition of a large group.

    Start candidates (Martin-Fernandez et al. 2018, from memory): the sign
    pattern of the first principal component of the group's clr covariance and
    every cut of its parts sorted by their loading. The best start is then
    improved by single-part moves (steepest ascent) until no move increases
    the balance variance: a local maximum, not necessarily the global one.
    """
    m = C.shape[0]
    H = np.eye(m) - 1.0 / m  # centring: clr covariance of the subcomposition
    _, vecs = np.linalg.eigh(H @ C @ H)
    pc1 = vecs[:, -1]
    order = np.argsort(pc1)
    starts = np.zeros((m, m))
    for cut in range(1, m):
        starts[cut - 1, order[cut:]] = 1.0
    signs = (pc1 > 0).astype(float)
    starts[m - 1] = signs if 0 < signs.sum() < m else starts[0]
    scores = _scores(starts, C)
    mask = starts[int(np.argmax(scores))].copy()
    best = float(scores.max())
    moves = np.eye(m)
    for step in range(m * m):  # every accepted move strictly increases the variance
        candidates = np.abs(mask[None, :] - moves)  # flip one part to the other side
        sizes = candidates.sum(axis=1)
        candidates = candidates[(sizes > 0) & (sizes < m)]
        scores = _scores(candidates, C)
        i = int(np.argmax(scores))
        if scores[i] <= best * (1 + 1e-12) + 1e-300:
            break
        best, mask = float(scores[i]), candidates[i]
        report(min(0.99, (step + 1) / m))
    report(1.0)
    return mask.astype(bool), best


def _best_split(
    C: np.ndarray, group: list[int], max_exhaustive: int, report: Callable[[float], None]
) -> tuple[list[int], list[int], float]:
    """Numerator, denominator (positions) and variance of the best split of ``group``."""
    sub = C[np.ix_(group, group)]
    if len(group) <= max_exhaustive:
        mask, var = _exhaustive(sub, report)
    else:
        mask, var = _local_search(sub, report)
    plus = [g for g, in_plus in zip(group, mask, strict=True) if in_plus]
    minus = [g for g, in_plus in zip(group, mask, strict=True) if not in_plus]
    if group[0] not in plus:  # orientation: the group's first part is in the numerator
        plus, minus = minus, plus
    return plus, minus, var


def principal_balances(
    X,
    max_exhaustive: int = 16,
    progress: ProgressCallback | None = None,
    kind: str = "auto",
    order: str = "preorder",
    skip_incomplete: bool = False,
) -> np.ndarray:
    """SBP of principal balances: each group split by its balance of largest variance.

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, D)
        Compositions (all cells > 0) or their clr coordinates (rows summing
        to zero); see ``kind``.
    max_exhaustive : int, default 16
        Groups of up to this many parts are searched exhaustively over all
        ``2**(m-1) - 1`` bipartitions (16 parts: 32,767 candidates); larger
        groups use the local-search heuristic (a local maximum only).
    progress : callable ``progress(done, total)``, optional
        Called as the search advances, with ``total = D - 1`` balances and
        ``done`` from 0 to ``total`` (fractional while a group is searched).
    kind : {"auto", "composition", "clr"}, default "auto"
        "auto" reads ``X`` as compositions when every cell is positive, else
        as clr coordinates.
    order : {"preorder", "variance"}, default "preorder"
        Row order. "preorder": depth first, numerator group before denominator
        (the order of the tree form, :mod:`compwidgets.core.tree`).
        "variance": the sequential order of Pawlowsky-Glahn et al. (2011): at
        each step the group whose best split has the largest variance. Both
        orders hold the same balances.
    skip_incomplete : bool, default False
        Leave out rows holding NaN or inf (e.g. the incomplete rows of a
        model's clr matrix). With False (the default) such rows raise an
        error naming them, so no row is left out unless asked.

    Returns
    -------
    ndarray of int8, shape (D-1, D)
        The SBP; in each row the numerator (+1) side holds the first part of
        the split group.

    Notes
    -----
    Balance variances use ddof = 1. The best split of one group does not
    depend on how the other groups are split, so the order of the search does
    not change the balances. Each row is the best split of its own group, and
    the first row the best split of all parts when ``D <= max_exhaustive``; a
    whole SBP holding a single balance of larger variance than the first row
    can exist (see the module notes for exactly what is and is not guaranteed).
    """
    if int(max_exhaustive) != max_exhaustive or max_exhaustive < 2:
        raise CompositionError(f"max_exhaustive must be an integer >= 2, got {max_exhaustive!r}")
    if max_exhaustive > 30:
        raise CompositionError(
            f"max_exhaustive={max_exhaustive}: 2**{max_exhaustive - 1} candidates per group is "
            "too many; use at most 30 (the heuristic handles larger groups)"
        )
    if order not in ("preorder", "variance"):
        raise CompositionError(f"order must be 'preorder' or 'variance', got {order!r}")
    Z, names = _clr_input(X, kind, skip_incomplete)
    D = Z.shape[1]
    C = np.cov(Z, rowvar=False, ddof=DDOF)
    total = D - 1
    found = 0

    def reporter(fraction: float) -> None:
        if progress is not None:
            progress(min(found + fraction, total), total)

    if progress is not None:
        progress(0, total)
    splits: dict[tuple[int, ...], tuple[list[int], list[int], float]] = {}

    def split(group: list[int]):
        nonlocal found
        key = tuple(group)
        if key not in splits:
            splits[key] = _best_split(C, group, int(max_exhaustive), reporter)
            found += 1
            reporter(0.0)
        return splits[key]

    rows: list[np.ndarray] = []

    def add_row(plus: list[int], minus: list[int]) -> None:
        row = np.zeros(D, dtype=np.int8)
        row[plus], row[minus] = 1, -1
        rows.append(row)

    if order == "preorder":
        stack = [list(range(D))]
        while stack:
            group = stack.pop()
            plus, minus, _ = split(group)
            add_row(plus, minus)
            stack.extend(g for g in (minus, plus) if len(g) > 1)
    else:
        open_groups = [list(range(D))]
        while open_groups:
            best = max(range(len(open_groups)), key=lambda i: split(open_groups[i])[2])
            group = open_groups.pop(best)
            plus, minus, _ = split(group)
            add_row(plus, minus)
            open_groups.extend(g for g in (plus, minus) if len(g) > 1)
    return validate_sbp(np.array(rows), names)


def ward_sbp(
    clr_matrix,
    parts: Sequence[str] | None = None,
    centred: bool = True,
    skip_incomplete: bool = False,
) -> np.ndarray:
    """SBP from Ward clustering of the parts (the clr columns as observations).

    Parameters
    ----------
    clr_matrix : array-like or DataFrame of shape (n, D)
        clr coordinates of n compositions (complete rows only).
    parts : sequence of str, optional
        Part names, used in error messages.
    centred : bool, default True
        Remove each clr column's mean first. Then the squared Euclidean
        distance between parts i and j is ``sum_n (ln(x_i/x_j) - mean)^2
        = (n - 1) T_ij``, with ``T`` the variation matrix (Aitchison 1986):
        parts in near-constant proportion are close. With False the plain
        Euclidean distance of the clr columns is used.
    skip_incomplete : bool, default False
        Leave out rows holding NaN or inf; with False they raise, naming them.

    Returns
    -------
    ndarray of int8, shape (D-1, D)
        One row per merge of the dendrogram, in pre-order from the root
        (the last merge); the left branch of scipy's tree is the numerator.

    Notes
    -----
    Agglomerative clustering with Ward's criterion (Ward 1963) as implemented
    by ``scipy.cluster.hierarchy.linkage(method="ward")`` on the D columns,
    i.e. on ``clr_matrix.T``; the dendrogram (``to_tree``) gives the SBP
    (Pawlowsky-Glahn, Egozcue & Tolosana-Delgado 2015, Modeling and Analysis
    of Compositional Data, suggest clustering the parts to build an SBP;
    from memory).
    """
    t = as_table(clr_matrix, "clr_matrix", min_parts=2)
    D = t.values.shape[1]
    names = list(parts) if parts is not None else t.part_names()
    if len(names) != D:
        raise SBPError(f"ward_sbp: {len(names)} part names for {D} clr columns")
    values = _complete(t, skip_incomplete, "ward_sbp").values
    if values.shape[0] < 2:
        raise CompositionError(f"ward_sbp: {values.shape[0]} complete row(s); needs at least 2")
    Z = values - values.mean(axis=0) if centred else values
    root = to_tree(linkage(Z.T, method="ward"))
    rows = []
    stack = [root]
    while stack:
        node = stack.pop()
        if node.is_leaf():
            continue
        row = np.zeros(D, dtype=np.int8)
        row[node.get_left().pre_order()] = 1
        row[node.get_right().pre_order()] = -1
        rows.append(row)
        stack.extend([node.get_right(), node.get_left()])
    return validate_sbp(np.array(rows).reshape(D - 1, D), names)
