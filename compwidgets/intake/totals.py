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


def total_applies(st: IntakeState) -> bool:
    """Whether the analytical total is checked (options and the parts' units decide)."""
    return (
        st.options.check_total
        and st.unit != "count"
        and any(unit_factor(p.unit, "wt%") == 1.0 for p in st.parts)
    )


def observed_values(st: IntakeState) -> np.ndarray:
    """The observed numbers as read (0 where a cell is not observed); kept while the state's
    raw numbers and status are the same arrays (the totals' steps read it several times)."""
    kept = getattr(st, "_observed", None)
    # by identity, holding the arrays: an id alone could be reused by a later array
    if kept is None or kept[0] is not st.raw or kept[1] is not st.status:
        kept = (st.raw, st.status, np.where(st.status == OBS, st.raw, 0.0))
        st._observed = kept
    return kept[2]


def analytical_total(st: IntakeState) -> None:
    """The analytical total in wt% (sum of the observed parts as reported), when it applies.

    A total means something for an analysis reported in percent (majors), not
    for a table of traces in ppm only or for point counts.
    """
    n = len(st.index)
    st.total_checked = total_applies(st)
    if st.total_checked:
        st.totals = observed_values(st).sum(axis=1) * unit_factor(st.unit, "wt%")
    else:
        st.totals = np.full(n, np.nan)


def _total_unit(st: IntakeState, unit_text: str) -> str | None:
    if unit_text:
        return normalize_unit(unit_text)
    reported = {p.unit for p in st.parts}
    if len(reported) == 1:
        return reported.pop()
    return "count" if st.unit == "count" else "wt%"


def total_comparisons(st: IntakeState) -> list[tuple]:
    """(column, unit, to_unit, tolerance) of each stated total compared with the parts.

    Columns that are not compared get the reason appended to their detail.
    """
    tolerance = st.options.total_tolerance
    out = []
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
        to_unit = unit_factor(st.unit, unit)
        tol = tolerance if counts else tolerance * unit_factor("wt%", unit)
        out.append((column, unit, to_unit, tol))
    return out


def stated_values(column) -> np.ndarray:
    """The stated totals of a total column (NaN where the cell is not a number)."""
    parsed = column.parsed
    return np.where(parsed.kind == NUMBER, parsed.number, np.nan)


def compare_rows(st: IntakeState, chosen, stated, to_unit: float, tol: float):
    """(differs, compared, computed sum, observed-any) of each row against the stated total."""
    observed = st.status[:, chosen] == OBS
    computed = np.where(observed, st.raw[:, chosen], 0.0).sum(axis=1) * to_unit
    compared = np.isfinite(stated) & observed.any(axis=1)
    diff = stated - computed
    # a hair of slack so that a difference of exactly the tolerance passes after rounding
    off = compared & (np.abs(diff) > tol * (1 + 1e-9) + 1e-12)
    return off, compared, computed, diff


def compared_detail(why: str, unit: str, n_off: int, n_compared: int, tol: float) -> str:
    return (
        f"; compared with the sum of {why} in {unit}: {n_off:,} of "
        f"{n_compared:,} row(s) differ by more than {tol:g} {unit}"
    )


def compare_total_columns(st: IntakeState) -> None:
    """Flag rows whose stated total differs from the sum of their parts beyond the tolerance."""
    n = len(st.index)
    st.stated_total = np.full(n, np.nan)
    first = True
    for column, unit, to_unit, tol in total_comparisons(st):
        counts = unit == "count"
        stated = stated_values(column)
        chosen, why = st.summed.get(column.name) or _summed_parts(
            st, column.total_kind, stated, to_unit, tol
        )
        off, compared, computed, diff = compare_rows(st, chosen, stated, to_unit, tol)
        if first:
            st.stated_total = stated * (1.0 if counts else unit_factor(unit, "wt%"))
            first = False
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
        _not_compared(st, column, column.parsed)
        column.detail += compared_detail(why, unit, int(off.sum()), int(compared.sum()), tol)


def part_groups(st: IntakeState) -> tuple[list[int], list[int]]:
    """Positions of every part, and of the parts reported in percent (the majors)."""
    every = list(range(len(st.parts)))
    return every, [j for j, p in enumerate(st.parts) if p.unit == "wt%"]


def needs_median(st: IntakeState, kind: str) -> bool:
    """Whether the parts a stated total sums depend on the data (see :func:`_summed_parts`)."""
    every, percent = part_groups(st)
    return bool(percent) and len(percent) != len(every) and kind != "majors"


def total_differences(st: IntakeState, stated: np.ndarray, to_unit: float):
    """|stated - sum of all parts| and |stated - sum of the percent parts| where stated."""
    every, percent = part_groups(st)
    observed = observed_values(st) * to_unit
    rows = np.isfinite(stated)
    if not rows.all():  # (every row stated: no copy of the rows)
        observed, stated = observed[rows], stated[rows]
    return (
        np.abs(stated - observed.sum(axis=1)),
        np.abs(stated - observed[:, percent].sum(axis=1)),
    )


def choose_summed(st: IntakeState, kind: str, d_all, d_pct, tol: float):
    """The parts a stated total sums, from the median differences (None: no stated row)."""
    every, percent = part_groups(st)
    if not needs_median(st, kind):
        if percent and len(percent) != len(every):
            return percent, f"the {len(percent)} parts reported in percent"
        return every, f"the {len(every)} parts"
    if d_all is None:
        return every, f"the {len(every)} parts"
    if d_all > tol / 2 and d_pct < d_all:
        return percent, (
            f"the {len(percent)} parts reported in percent (they fit the stated totals "
            f"better than all {len(every)} parts: median difference {d_pct:.3g} against "
            f"{d_all:.3g})"
        )
    return every, f"the {len(every)} parts"


def _summed_parts(st: IntakeState, kind: str, stated: np.ndarray, to_unit: float, tol: float):
    """The parts a stated total sums: all, or those reported in percent (the majors).

    A total of the oxides or majors sums the parts reported in percent. A
    plain total sums all parts, unless that sum typically misses the stated
    total by more than half the tolerance while the parts reported in percent
    fit it better (many laboratories total the major-element package only):
    the median absolute difference decides, and the column's report entry
    says which.
    """
    if not needs_median(st, kind):
        return choose_summed(st, kind, None, None, tol)
    a, b = total_differences(st, stated, to_unit)
    if not a.size:
        return choose_summed(st, kind, None, None, tol)
    return choose_summed(st, kind, float(np.median(a)), float(np.median(b)), tol)


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
