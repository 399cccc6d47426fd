"""Per-balance summaries (JSON-friendly) for the balance builder.

Every number is a plain Python float (or int), and a value that cannot be
computed (no rows, one row for a variance) is None, so the result can be sent
to the browser as JSON as it is.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from ._arrays import CompositionError
from .stats import DDOF

#: Quantile levels of the summary, in percent (linear interpolation, numpy's default).
QUANTILES = (5, 25, 50, 75, 95)


def _float(x) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None


def _rows_mask(selected, n: int) -> np.ndarray:
    arr = np.asarray(selected)
    if arr.dtype == bool:
        if arr.shape != (n,):
            raise CompositionError(
                f"summarize_balances: a selection mask needs {n} values, got shape {arr.shape}"
            )
        return arr.copy()
    if arr.size == 0:
        return np.zeros(n, dtype=bool)
    if arr.ndim != 1 or not np.issubdtype(arr.dtype, np.integer):
        raise CompositionError(
            "summarize_balances: selected must be a boolean mask or integer row positions, "
            f"got dtype {arr.dtype}, shape {arr.shape}"
        )
    if arr.min() < 0 or arr.max() >= n:
        bad = int(arr.min()) if arr.min() < 0 else int(arr.max())
        raise CompositionError(f"summarize_balances: row position {bad} outside 0..{n - 1}")
    mask = np.zeros(n, dtype=bool)
    mask[arr] = True
    return mask


def balance_table(B, what: str, names=None) -> np.ndarray:
    """``B`` as a float matrix (n, k) of balances, or an error naming ``what``.

    A float array is returned as it is, not copied: the callers only read it.
    """
    try:
        values = np.asarray(B, dtype=float)
    except (TypeError, ValueError) as err:
        raise CompositionError(f"{what}: cannot read B as numbers ({err})") from None
    if values.ndim != 2:
        raise CompositionError(f"{what}: B must be 2-D (n, k), got {values.ndim}-D")
    if names is not None and len(names) != values.shape[1]:
        raise CompositionError(f"{what}: {len(names)} names for {values.shape[1]} balances")
    return values


def group_codes(codes, n: int, n_groups: int, what: str) -> np.ndarray:
    """``codes`` checked as n integer group codes in ``-1 .. n_groups - 1`` (-1 = none)."""
    codes = np.asarray(codes)
    if codes.shape != (n,) or not np.issubdtype(codes.dtype, np.integer):
        raise CompositionError(
            f"{what}: codes must be {n} integers, got dtype {codes.dtype}, shape {codes.shape}"
        )
    if n_groups < 0 or codes.max(initial=-1) >= n_groups or codes.min(initial=-1) < -1:
        raise CompositionError(
            f"{what}: codes must lie in -1 .. {n_groups - 1} (n_groups={n_groups})"
        )
    return codes


def summarize_balances(
    B,
    selected=None,
    codes=None,
    n_groups: int = 0,
    total: float | None = None,
    names: Sequence[str] | None = None,
) -> list[dict]:
    """Summary statistics of each balance (column of ``B``).

    Parameters
    ----------
    B : array-like of shape (n, k)
        Balance values; NaN marks a row without a value (an incomplete row),
        left out of every statistic and counted in ``"n_missing"``.
    selected : bool mask of shape (n,) or integer row positions, optional
        The selection; gives the ``"selection"`` entry.
    codes : int array of shape (n,), optional
        Group code per row, ``0 .. n_groups - 1``; ``-1`` = no group.
    n_groups : int, default 0
        Number of groups: the ``"groups"`` entry lists that many groups.
    total : float, optional
        Total variance of the same rows (``core.total_variance``); gives each
        balance's ``"share"``. None gives ``"share": None``.
    names : sequence of str, optional
        Balance names, copied to ``"name"``.

    Returns
    -------
    list of dict, one per balance, with keys
        ``index``, ``name``, ``n``, ``n_missing``, ``variance`` (ddof = 1),
        ``share`` (variance / total), ``mean``, ``q5``, ``q25``, ``q50``,
        ``q75``, ``q95`` (``numpy.quantile``, linear interpolation),
        ``selection`` (``{"n", "mean", "q25", "q75"}``) and ``groups``
        (list of ``{"code", "n", "mean"}``). Unavailable values are None.

    Notes
    -----
    For a complete SBP the balance variances add up to the total variance
    (Egozcue & Pawlowsky-Glahn 2005), so the shares add up to 1.
    """
    values = balance_table(B, "summarize_balances", names)
    n, k = values.shape
    if np.isinf(values).any():
        r, c = np.argwhere(np.isinf(values))[0]
        raise CompositionError(f"summarize_balances: infinite value in row {r}, balance {c + 1}")
    if total is not None and not (np.isfinite(total) and total >= 0):
        raise CompositionError(f"summarize_balances: total must be finite and >= 0, got {total}")
    chosen = _rows_mask(selected, n) if selected is not None else None
    if codes is not None:
        codes = group_codes(codes, n, n_groups, "summarize_balances")
    out = []
    for j in range(k):
        col = values[:, j]
        ok = ~np.isnan(col)
        x = col[ok]
        var = float(np.var(x, ddof=DDOF)) if x.size > DDOF else None
        entry: dict = {
            "index": j,
            "name": None if names is None else str(names[j]),
            "n": int(x.size),
            "n_missing": int(n - x.size),
            "variance": var,
            "share": var / total if var is not None and total else None,
            "mean": _float(x.mean()) if x.size else None,
        }
        qs = np.quantile(x, np.array(QUANTILES) / 100) if x.size else [None] * len(QUANTILES)
        for level, q in zip(QUANTILES, qs, strict=True):
            entry[f"q{level}"] = None if q is None else _float(q)
        if chosen is not None:
            xs = col[chosen & ok]
            q25, q75 = np.quantile(xs, [0.25, 0.75]) if xs.size else (None, None)
            entry["selection"] = {
                "n": int(xs.size),
                "mean": _float(xs.mean()) if xs.size else None,
                "q25": None if q25 is None else _float(q25),
                "q75": None if q75 is None else _float(q75),
            }
        else:
            entry["selection"] = None
        groups = []
        if codes is not None:
            for g in range(n_groups):
                xg = col[(codes == g) & ok]
                groups.append(
                    {"code": g, "n": int(xg.size), "mean": _float(xg.mean()) if xg.size else None}
                )
        entry["groups"] = groups
        out.append(entry)
    return out


def quartile_summary(B) -> list[dict]:
    """``n``, ``mean``, ``q25`` and ``q75`` of each column of ``B`` (no NaN), vectorised.

    The selection part of :func:`summarize_balances` for complete rows, in one
    pass over the matrix (the builder sends it on every selection change).

    Parameters
    ----------
    B : array-like of shape (n, k)
        Balance values of the selected rows, all finite.

    Returns
    -------
    list of dict, one per column: ``{"n", "mean", "q25", "q75"}`` (None when n = 0).
    """
    values = np.asarray(B, dtype=float)
    if values.ndim != 2:
        raise CompositionError(f"quartile_summary: B must be 2-D (n, k), got {values.ndim}-D")
    n, k = values.shape
    if n and not np.isfinite(values).all():
        raise CompositionError("quartile_summary: B holds NaN or inf; pass complete rows only")
    if n == 0:
        return [{"n": 0, "mean": None, "q25": None, "q75": None} for _ in range(k)]
    mean = values.mean(axis=0)
    q25, q75 = np.quantile(values, [0.25, 0.75], axis=0)
    return [
        {"n": int(n), "mean": _float(mean[j]), "q25": _float(q25[j]), "q75": _float(q75[j])}
        for j in range(k)
    ]
