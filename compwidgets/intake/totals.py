"""Totals: the analytical total window, and stated total columns against the sum of the parts.

Both use the parts as reported (after unit conversion, before formula
conversion and replacement): the sum of the observed values. A stated total
column (``Total``, ``Total (wt%)``, ``Sum``) is compared per row with the sum
of all parts in its unit; a total of the majors (``Total oxides``, ``Major
total``) with the sum of the parts reported in percent. Rows differing by more
than the tolerance (default 0.5 wt% absolute; for point counts, counts) are
flagged with both numbers. Screening aids only: an accepted total follows the
laboratory's own quality control.
"""

from __future__ import annotations

import numpy as np

from ..units import normalize_unit, unit_factor
from . import codes
from .cells import BAD, LESS_THAN, MISSING, NUMBER, TOKEN_BELOW
from .parts import OBS
from .report import chunk, number_text
from .state import IntakeState


def analytical_total(st: IntakeState) -> None:
    """The analytical total in wt% (sum of the observed parts as reported), when it applies.

    A total means something for an analysis reported in percent (majors), not
    for a table of traces in ppm only or for point counts.
    """
    n = len(st.index)
    st.total_checked = (
        st.options.check_total
        and st.unit != "count"
        and any(unit_factor(p.unit, "wt%") == 1.0 for p in st.parts)
    )
    if st.total_checked:
        observed = np.where(st.status == OBS, st.raw, 0.0)
        st.totals = observed.sum(axis=1) * unit_factor(st.unit, "wt%")
    else:
        st.totals = np.full(n, np.nan)


def _total_unit(st: IntakeState, unit_text: str) -> str | None:
    if unit_text:
        return normalize_unit(unit_text)
    reported = {p.unit for p in st.parts}
    if len(reported) == 1:
        return reported.pop()
    return "count" if st.unit == "count" else "wt%"


def compare_total_columns(st: IntakeState) -> None:
    """Flag rows whose stated total differs from the sum of their parts beyond the tolerance."""
    n = len(st.index)
    st.stated_total = np.full(n, np.nan)
    tolerance = st.options.total_tolerance
    first = True
    for column in st.columns.values():
        if column.code != codes.TOTAL_COLUMN or column.parsed is None:
            continue
        if tolerance is None:
            column.detail += "; not compared (total_tolerance=None)"
            continue
        unit = _total_unit(st, column.unit)
        if unit is None:
            column.detail += f"; unit {column.unit!r} unknown: not compared"
            continue
        counts = unit == "count"
        if counts != (st.unit == "count"):
            column.detail += f"; in {unit}, the parts are not: not compared"
            continue
        parsed = column.parsed
        stated = np.where(parsed.kind == NUMBER, parsed.number, np.nan)
        to_unit = unit_factor(st.unit, unit)
        tol = tolerance if counts else tolerance * unit_factor("wt%", unit)
        chosen, why = _summed_parts(st, column.total_kind, stated, to_unit, tol)
        observed = st.status[:, chosen] == OBS
        computed = np.where(observed, st.raw[:, chosen], 0.0).sum(axis=1) * to_unit
        if first:
            st.stated_total = stated * (1.0 if counts else unit_factor(unit, "wt%"))
            first = False
        compared = np.isfinite(stated) & observed.any(axis=1)
        diff = stated - computed
        # a hair of slack so that a difference of exactly the tolerance passes after rounding
        off = compared & (np.abs(diff) > tol * (1 + 1e-9) + 1e-12)
        text = np.full(n, "", dtype=object)
        at = np.flatnonzero(off)
        text[at] = (
            f"stated total {column.name!r} "
            + number_text(stated[at])
            + f" {unit} differs from the sum of the parts "
            + number_text(computed[at])
            + f" {unit} by "
            + number_text(diff[at])
            + f" (tolerance {tol:g} {unit})"
        )
        st.total_flags.append((off, text))
        _not_compared(st, column, parsed)
        column.detail += (
            f"; compared with the sum of {why} in {unit}: {int(off.sum()):,} of "
            f"{int(compared.sum()):,} row(s) differ by more than {tol:g} {unit}"
        )


def _summed_parts(st: IntakeState, kind: str, stated: np.ndarray, to_unit: float, tol: float):
    """The parts a stated total sums: all, or those reported in percent (the majors).

    A total of the oxides or majors sums the parts reported in percent. A
    plain total sums all parts, unless that sum typically misses the stated
    total by more than half the tolerance while the parts reported in percent
    fit it better (many laboratories total the major-element package only):
    the median absolute difference decides, and the column's report entry
    says which.
    """
    every = list(range(len(st.parts)))
    percent = [j for j, p in enumerate(st.parts) if p.unit == "wt%"]
    if not percent or len(percent) == len(every):
        return every, f"the {len(every)} parts"
    if kind == "majors":
        return percent, f"the {len(percent)} parts reported in percent"
    observed = np.where(st.status == OBS, st.raw, 0.0) * to_unit
    rows = np.isfinite(stated)
    if not rows.any():
        return every, f"the {len(every)} parts"
    d_all = float(np.median(np.abs(stated[rows] - observed[rows].sum(axis=1))))
    d_pct = float(np.median(np.abs(stated[rows] - observed[rows][:, percent].sum(axis=1))))
    if d_all > tol / 2 and d_pct < d_all:
        return percent, (
            f"the {len(percent)} parts reported in percent (they fit the stated totals "
            f"better than all {len(every)} parts: median difference {d_pct:.3g} against "
            f"{d_all:.3g})"
        )
    return every, f"the {len(every)} parts"


def _not_compared(st: IntakeState, column, parsed) -> None:
    kind = parsed.kind
    for code, mask, text in (
        (codes.TOTAL_CELL_MISSING, kind == MISSING, "stated total empty: row not compared"),
        (
            codes.TOTAL_CELL_UNREADABLE,
            (kind == BAD) | (kind == TOKEN_BELOW) | (kind == LESS_THAN),
            "stated total not a number: row not compared",
        ),
    ):
        pos = np.flatnonzero(mask)
        if pos.size:
            st.total_notes.append(
                chunk(
                    st.index,
                    pos,
                    column.name,
                    "total_not_compared",
                    code,
                    parsed.originals(pos),
                    np.full(pos.size, np.nan),
                    np.full(pos.size, text, dtype=object),
                )
            )
