"""Replacement of the values below detection (the arithmetic is core.zeros')."""

from __future__ import annotations

import numpy as np

from ..core import multiplicative_replacement_rows
from .parts import BDL, MISS, OBS
from .state import IntakeState


def replace_below(st: IntakeState) -> None:
    """Values after replacement, the row scale factors, and the rows left unreplaced.

    Multiplicative replacement (Martin-Fernandez et al. 2003) is impossible in
    a row without an observed part or whose replacements would reach its
    observed total (:func:`compwidgets.core.multiplicative_replacement_rows`
    gives a NaN factor): such rows keep NaN below detection and are flagged;
    the others are replaced.
    """
    raw, status, dl = st.raw, st.status, st.limits
    options = st.options
    n = raw.shape[0]
    below = status == BDL
    values = raw.copy()
    scale = np.ones(n)
    not_replaced = np.zeros(n, dtype=np.int8)  # 0 ok, 1 no observed part, 2 overload
    st.values, st.scale, st.not_replaced = values, scale, not_replaced
    if options.replacement == "none" or not below.any():
        return
    fraction = options.fraction
    if options.replacement == "simple":
        values[below] = fraction * dl[below]
        return
    rows = np.flatnonzero(below.any(axis=1))
    every = rows.size == n  # a value below detection in every row: no copies of the rows
    sub_status, sub_below = (status, below) if every else (status[rows], below[rows])
    is_observed = sub_status == OBS
    observed = np.where(is_observed, raw if every else raw[rows], 0.0)
    limits = np.where(sub_below, dl if every else dl[rows], np.nan)
    replaced, factors = multiplicative_replacement_rows(
        observed, limits, fraction=fraction, below=sub_below
    )
    feasible = np.isfinite(factors)
    if not feasible.all():
        no_observed = ~is_observed.any(axis=1)
        not_replaced[rows[~feasible & no_observed]] = 1
        not_replaced[rows[~feasible & ~no_observed]] = 2
        ok = rows[feasible]
        values[ok] = np.where(sub_status[feasible] == MISS, np.nan, replaced[feasible])
        scale[ok] = factors[feasible]
    elif every:
        values[:] = np.where(sub_status == MISS, np.nan, replaced)
        scale[:] = factors
    else:
        values[rows] = np.where(sub_status == MISS, np.nan, replaced)
        scale[rows] = factors
