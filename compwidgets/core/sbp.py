"""Sequential binary partitions (SBP) and balances.

An SBP of D parts is a signed matrix of D-1 rows over the D parts: row k splits
one group of parts into a ``+1`` side (numerator, r parts) and a ``-1`` side
(denominator, s parts); ``0`` marks parts outside that group. The first row
splits all parts; every later row splits exactly one group made by an earlier
row (Egozcue & Pawlowsky-Glahn 2005, Groups of parts and their balances in
compositional data analysis, Mathematical Geology 37(7), 795-828; from memory).

The balance of row k is

    b_k = sqrt(r s / (r + s)) * ln( g(x_+) / g(x_-) ),

with g the geometric mean; its contrast vector has ``+sqrt(s / (r (r + s)))``
on the numerator parts and ``-sqrt(r / (s (r + s)))`` on the denominator parts.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from . import _lazy
from ._arrays import CompositionError, as_table, is_unlabelled, match_columns
from .transforms import clr_values


class SBPError(CompositionError):
    """An SBP matrix that is not a valid sequential binary partition."""


def pivot_sbp(D: int) -> np.ndarray:
    """The pivot SBP of D parts: row i opposes part i to the parts after it.

    Its contrast matrix (:func:`sbp_basis`) is
    :func:`compwidgets.core.transforms.default_basis` ``(D)``.

    >>> pivot_sbp(3)
    array([[ 1, -1, -1],
           [ 0,  1, -1]], dtype=int8)
    """
    if isinstance(D, bool) or int(D) != D or D < 2:
        raise SBPError(f"pivot_sbp: need at least 2 parts, got {D!r}")
    D = int(D)
    cols = np.arange(D)[None, :]
    rows = np.arange(D - 1)[:, None]
    return np.where(cols == rows, 1, np.where(cols > rows, -1, 0)).astype(np.int8)


def _as_sbp_array(sbp, parts: Sequence[str] | None = None) -> tuple[np.ndarray, list | None]:
    """The SBP as a float matrix and the part names its labels give (None when unlabelled).

    A DataFrame (or a Series, one balance) is matched to ``parts`` by its column
    labels when both are given, and its columns are reordered to ``parts``.
    """
    labels = None
    if isinstance(sbp, pd.Series):
        sbp = sbp.to_frame().T
    if isinstance(sbp, pd.DataFrame):
        if parts is not None:
            labels = [str(p) for p in parts]
            sbp = match_columns(sbp, labels, "SBP", SBPError)
        elif not is_unlabelled(sbp.columns):
            labels = [str(c) for c in sbp.columns]
            sbp = sbp.to_numpy()
        else:
            sbp = sbp.to_numpy()
    try:
        S = np.asarray(sbp, dtype=float)
    except (TypeError, ValueError) as err:
        raise SBPError(f"SBP: cannot read as a matrix of -1/0/+1 ({err})") from None
    return S, labels


def validate_sbp(sbp, parts: Sequence[str] | None = None, complete: bool = True) -> np.ndarray:
    """Check an SBP and return it as an int8 array of shape (D-1, D).

    Parameters
    ----------
    sbp : array-like or DataFrame
        Signed matrix (balances as rows, parts as columns). A DataFrame is
        matched to ``parts`` by its column labels and reordered to them; columns
        it has that are not in ``parts``, or parts it has no column for, are
        refused by name. (Columns ``0..D-1``, as pandas names a frame built
        without labels, are taken in order.)
    parts : sequence of str, optional
        The parts, in the order of the result's columns (also named in the
        messages). Without them a DataFrame keeps its own column order.
    complete : bool, default True
        Require all D-1 rows. With False, a partition still being built
        (its first k rows, 1 <= k <= D-1) is accepted; its balances are
        orthonormal too, but do not span the whole simplex.

    Raises
    ------
    SBPError
        With the (1-based) row that is wrong and why.
    """
    S, frame_parts = _as_sbp_array(sbp, parts)
    names = [str(p) for p in parts] if parts is not None else frame_parts
    if S.ndim != 2:
        raise SBPError(f"SBP: expected a 2-D matrix (balances x parts), got {S.ndim}-D")
    n_rows, D = S.shape
    if D < 2:
        raise SBPError(f"SBP: {D} part(s); a partition needs at least 2 parts")
    if names is None:
        names = [f"part {j + 1}" for j in range(D)]
    elif len(names) != D:
        raise SBPError(f"SBP: {len(names)} part names for {D} columns")
    if not complete and 1 <= n_rows < D - 1:
        pass
    elif n_rows != D - 1:
        raise SBPError(
            f"SBP: {n_rows} rows for {D} parts; an SBP of D parts has exactly D-1 = {D - 1} rows"
        )
    if not np.all(np.isfinite(S)) or not np.all(np.isin(S, (-1, 0, 1))):
        r, c = np.argwhere(~np.isin(np.nan_to_num(S, nan=9), (-1, 0, 1)))[0]
        raise SBPError(
            f"SBP row {r + 1}: value {float(S[r, c])!r} for {names[c]!r}; "
            "only +1, -1 and 0 are allowed"
        )

    def label(cols) -> str:
        return "{" + ", ".join(names[j] for j in sorted(cols)) + "}"

    open_groups: list[frozenset] = [frozenset(range(D))]
    for k, row in enumerate(S):
        plus = frozenset(np.flatnonzero(row > 0).tolist())
        minus = frozenset(np.flatnonzero(row < 0).tolist())
        if not plus or not minus:
            side = "+1" if not plus else "-1"
            raise SBPError(f"SBP row {k + 1}: no part on the {side} side; each row needs both")
        support = plus | minus
        if support not in open_groups:
            if k == 0:
                left = sorted(set(range(D)) - support)
                raise SBPError(
                    f"SBP row 1: parts {label(left)} are in no group; the first row must put "
                    "every part on the +1 or -1 side"
                )
            still = ", ".join(label(g) for g in open_groups) or "none"
            raise SBPError(
                f"SBP row {k + 1}: splits {label(support)}, which is not one group made by the "
                f"rows above (groups still to split: {still})"
            )
        open_groups.remove(support)
        open_groups.extend(g for g in (plus, minus) if len(g) > 1)
    return S.astype(np.int8)


def sbp_basis(sbp, complete: bool = True) -> np.ndarray:
    """Orthonormal contrast matrix (D-1, D) of an SBP (Egozcue & Pawlowsky-Glahn 2005).

    With ``complete=False`` a partial SBP of k rows gives its k contrast rows.
    """
    S = validate_sbp(sbp, complete=complete).astype(float)
    r = (S > 0).sum(axis=1, keepdims=True)
    s = (S < 0).sum(axis=1, keepdims=True)
    return np.where(S > 0, np.sqrt(s / (r * (r + s))), 0.0) - np.where(
        S < 0, np.sqrt(r / (s * (r + s))), 0.0
    )


def balance_names(sbp, parts: Sequence[str], complete: bool = True) -> list[str]:
    """Default balance names ``"num1,num2 | den1,den2"`` (numerator | denominator)."""
    S = validate_sbp(sbp, parts, complete)
    parts = [str(p) for p in parts]
    return [
        ",".join(parts[j] for j in np.flatnonzero(row > 0))
        + " | "
        + ",".join(parts[j] for j in np.flatnonzero(row < 0))
        for row in S
    ]


def balances(X, sbp, names: Sequence[str] | None = None, complete: bool = True):
    """Balances (ilr coordinates) of ``X`` for the SBP ``sbp``.

    Parameters
    ----------
    X : array-like or DataFrame of shape (n, D)
    sbp : array-like or DataFrame of shape (D-1, D)
        A DataFrame is matched to ``X``'s columns by label (reordered; unknown or
        missing labels refused by name); with an unlabelled ``X`` its labels name
        the parts of ``X``'s columns in order.
    names : list of str, optional
        Column names of the result; default :func:`balance_names`.
    complete : bool, default True
        With False, a partial SBP (its first k rows) gives its k balances.
    """
    if _lazy.is_lazy(X):
        return _lazy.rowwise(balances, X, sbp, names=names, complete=complete)
    t = as_table(X, min_parts=2)
    D = t.values.shape[1]
    parts = t.part_names()
    matrix, own = _as_sbp_array(sbp)
    if not t.labelled and own is not None:  # unlabelled data: the SBP's labels name the parts
        parts = own
    if (own is None or not t.labelled) and matrix.shape[-1:] != (D,):
        raise SBPError(f"SBP has {matrix.shape[-1]} parts but the data have {D}")
    S = validate_sbp(sbp, parts, complete)
    if names is None:
        names = balance_names(S, parts, complete)
    elif len(names) != S.shape[0]:
        raise SBPError(f"{len(names)} balance names given for {S.shape[0]} balances")
    return t.wrap(clr_values(t) @ sbp_basis(S, complete).T, list(names))
