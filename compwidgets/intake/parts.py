"""Part columns: units, detection limits, formula conversions and the status of each cell."""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np
import pandas as pd

from ..core import CompositionError
from ..units import canonical_unit, conversion_factor, is_mass_unit, unit_factor
from . import codes
from .cells import LESS_THAN, MISSING, NUMBER, PLAIN, TOKEN_BELOW, place
from .names import header_unit
from .state import CellRecord, IntakeState, Part

# status codes of the (n, D) status array
OBS, BDL, MISS = 0, 1, 2


def _key_lookup(pairs: list[tuple[str, str]]) -> dict:
    """Option keys may name a column as given or as the part name without unit."""
    lookup = {}
    for column, stem in pairs:
        lookup.setdefault(stem, column)
    for column, _ in pairs:
        lookup[column] = column
    return lookup


def _lookup(lookup: dict, key):
    if key in lookup:
        return lookup[key]
    text = key if isinstance(key, str) else str(key)
    return lookup.get(text)


def _cell_unit(p: Part, header_canon: str | None, index: pd.Index) -> tuple[str, str] | None:
    """The unit the cells carry, checked against the header (None when no cell has one)."""
    summary = p.parsed.unit_summary(index)
    if not summary:
        return None
    first, _, first_label, first_text = summary[0]
    expected = header_canon if header_canon is not None else first
    off = [u for u in summary if u[0] != expected]
    if off:
        unit, _, at, shown = off[0]
        if header_canon is not None:
            said = f"the header (or units=) says {header_canon!r}"
        else:
            said = f"{first_text!r} at row {first_label!r} says {first!r}"
        raise CompositionError(
            f"column {p.column!r}: the cell {shown!r} at row {at!r} carries the "
            f"unit {unit!r} but {said} ({sum(u[1] for u in off):,} cell(s) disagree); units in "
            "cells must agree with the header and with each other"
        )
    return expected, expected


def make_parts(st: IntakeState) -> None:
    """The parts in column order, each with its unit (units=, header, cells or default)."""
    options = st.options
    columns = [st.columns[name] for name in st.part_columns]
    stems = {c.name: header_unit(c.name) for c in columns}
    lookup = _key_lookup([(c.name, stems[c.name][0]) for c in columns])
    given: dict = {}
    for key, unit_text in (options.units or {}).items():
        col = _lookup(lookup, key)
        if col is None:
            raise CompositionError(
                f"units: {key!r} is not a part column; part columns are "
                f"{[c.name for c in columns]!r}"
            )
        given[col] = unit_text
    parts = []
    for c in columns:
        stem, name_unit, known_in_name = stems[c.name]
        name = stem
        header_canon = None
        if c.name in given:
            unit_text = given[c.name]
            unit = canonical_unit(unit_text, where=f"units[{c.name!r}]")
            if known_in_name is not None and known_in_name != unit:
                raise CompositionError(
                    f"column {c.name!r}: the name says {name_unit!r} but units gives {unit_text!r}"
                )
            if name_unit is not None and known_in_name is None:
                name = c.name  # brackets that are no unit stay in the name
            header_canon = unit
        elif name_unit is not None:
            unit_text = name_unit
            unit = canonical_unit(
                name_unit,
                where=f"column {c.name!r}",
                hint=f"; or give the unit with units={{{c.name!r}: ...}}",
            )
            header_canon = unit
        else:
            unit_text, unit = options.default_unit, options.default_canonical
        p = Part(c.name, name, str(unit_text).strip(), unit, c.parsed)
        from_cells = _cell_unit(p, header_canon, st.index)
        if from_cells is not None:
            n_cells = p.parsed.n_unit_cells
            if header_canon is None:
                p.unit_given, p.unit = from_cells
                c.code = codes.PART_UNIT_IN_CELLS if c.code != codes.PART_NAMED else c.code
                c.detail += f"; unit {p.unit!r} read from {n_cells:,} cell(s)"
            else:
                c.detail += f"; the unit in {n_cells:,} cell(s) agrees"
        c.part, c.unit = str(p.name), p.unit_given
        parts.append(p)
    names = [p.name for p in parts]
    dup = sorted({str(n) for n in names if names.count(n) > 1})
    if dup:
        raise CompositionError(
            f"part name(s) {dup!r} come from more than one column once units are stripped "
            f"(columns {[p.column for p in parts if str(p.name) in dup]!r})"
        )
    st.parts = parts


def choose_common_unit(st: IntakeState) -> None:
    parts, wanted = st.parts, st.options.common_unit
    counts = [p for p in parts if not is_mass_unit(p.unit)]
    masses = [p for p in parts if is_mass_unit(p.unit)]
    if counts and masses:
        raise CompositionError(
            f"point counts {[p.name for p in counts]!r} cannot be mixed with mass units "
            f"({', '.join(f'{p.name!r} in {p.unit_given}' for p in masses[:3])}); "
            "read them as separate compositions"
        )
    if wanted is not None:
        unit = canonical_unit(wanted, where="common_unit")
        if is_mass_unit(unit) != bool(masses):
            raise CompositionError(
                f"common_unit {wanted!r} does not fit parts in "
                f"{'point counts' if counts else 'mass units'}"
            )
    elif counts:
        unit = "count"
    else:
        unit = "wt%" if any(p.unit == "wt%" for p in parts) else "ppm"
    st.unit = unit


def per_part_option(
    option, parts: list[Part], what: str, strict: bool = True
) -> dict[int, object]:
    """Resolve the keys of a dict option to part positions (unknown keys refused if strict)."""
    if not isinstance(option, Mapping):
        raise CompositionError(f"{what} must be a dict part -> value, got {type(option).__name__}")
    lookup = _key_lookup([(p.column, str(p.name)) for p in parts])
    pos = {p.column: j for j, p in enumerate(parts)}
    out = {}
    for key, value in option.items():
        col = _lookup(lookup, key)
        if col is None:
            if not strict:
                continue
            raise CompositionError(
                f"{what}: {key!r} is not a part; parts are {[p.name for p in parts]!r}"
            )
        out[pos[col]] = value
    return out


def _positive_limit(value, where: str) -> float:
    ok = not isinstance(value, bool) and isinstance(value, (int, float, np.number))
    if not ok or not (math.isfinite(float(value)) and float(value) > 0):
        raise CompositionError(
            f"{where}: a detection limit must be a positive number, got {value!r}"
        )
    return float(value)


def column_limits(st: IntakeState) -> None:
    """Detection limit of each part in its own unit (NaN: none given).

    When no limits are passed, a DataFrame may carry them in
    ``attrs["detection_limits"]`` (part -> limit in the part's own unit, as the
    demo tables do); limits of parts the table does not hold are ignored there.
    """
    parts = st.parts
    limits = st.options.detection_limits
    strict = True
    if limits is None:
        attrs = getattr(st.loaded.frame, "attrs", {}) or {}
        carried = attrs.get("detection_limits") if not st.loaded.from_file else None
        if isinstance(carried, (Mapping, pd.Series)) and len(carried):
            limits, strict = carried, False
            st.limits_source = "attrs"
    else:
        st.limits_source = "argument"
    D = len(parts)
    out = np.full(D, np.nan)
    if limits is None:
        pass
    elif isinstance(limits, (Mapping, pd.Series)):
        if isinstance(limits, pd.Series):
            limits = limits.to_dict()
        where = "DataFrame.attrs['detection_limits']" if not strict else "detection_limits"
        for j, value in per_part_option(limits, parts, where, strict=strict).items():
            out[j] = _positive_limit(value, f"{where}[{parts[j].name!r}]")
    else:
        out[:] = _positive_limit(limits, "detection_limits")
    st.column_limits = out
    if st.limits_source == "attrs":
        st.limits_used = [str(parts[j].name) for j in np.flatnonzero(np.isfinite(out))]


def settings_limits(st: IntakeState):
    limits = st.options.detection_limits
    if st.limits_source == "attrs":
        return {
            str(p.name): float(v)
            for p, v in zip(st.parts, st.column_limits, strict=True)
            if np.isfinite(v)
        }
    if limits is None:
        return None
    if isinstance(limits, (Mapping, pd.Series)):
        return {str(k): float(v) for k, v in dict(limits).items()}
    return float(limits)


def resolve_conversions(st: IntakeState) -> None:
    convert, parts = st.options.convert, st.parts
    out: dict[int, tuple[str, float]] = {}
    if convert:
        resolved = per_part_option(convert, parts, "convert")
        names = [p.name for p in parts]
        targets: dict[str, object] = {}
        for j, target in resolved.items():
            p = parts[j]
            if not isinstance(target, str) or not target.strip():
                raise CompositionError(
                    f"convert[{p.name!r}]: the target must be a formula, got {target!r}"
                )
            target = target.strip()
            if not is_mass_unit(p.unit):
                raise CompositionError(
                    f"convert[{p.name!r}]: point counts cannot be converted between formulas"
                )
            if target != p.name and target in names:
                raise CompositionError(
                    f"convert {p.name!r} -> {target!r}: {target!r} is already a part; "
                    "converting would give two parts of that name"
                )
            if target in targets:
                raise CompositionError(
                    f"convert: {targets[target]!r} and {p.name!r} are both converted to {target!r}"
                )
            targets[target] = p.name
            try:
                factor = conversion_factor(str(p.name), target)
            except CompositionError as err:
                raise CompositionError(f"convert[{p.name!r}]: {err}") from None
            out[j] = (target, factor)
    st.conversions = out
    st.names = [str(p.name) for p in parts]
    for j, (target, _) in out.items():
        st.names[j] = target


def _first(mask: np.ndarray) -> int:
    return int(np.flatnonzero(mask)[0])


def _inferred_limits(p: Part) -> str:
    """The limits the column's own '<x' entries give, for the error of a bare token."""
    lt = p.parsed.limit[p.parsed.kind == LESS_THAN]
    if not lt.size:
        return ""
    values, counts = np.unique(lt, return_counts=True)
    order = np.argsort(-counts, kind="stable")
    listed = ", ".join(
        f"{values[k]:g} {p.unit_given} ({counts[k]:,} cell{'s' if counts[k] > 1 else ''})"
        for k in order[:5]
    )
    best = values[order[0]]
    return (
        f"; the column's '<x' entries give {listed}: e.g. detection_limits="
        f"{{{str(p.name)!r}: {best:g}}}"
    )


def read_part(p: Part, limit: float, index: pd.Index, replacement: str, negative_is_below: bool):
    """Status, raw number and limit (in the part's own unit) for each cell of one part."""
    parsed = p.parsed
    kind, number = parsed.kind, parsed.number
    n = len(kind)
    status = np.full(n, OBS, dtype=np.int8)
    raw = number.copy()
    lim = np.full(n, limit, dtype=float)
    is_num = kind == NUMBER
    negative = is_num & (number < 0)
    zero = is_num & (number == 0)
    if negative.any() and not negative_is_below:
        i = _first(negative)
        more = (
            f" ({int(negative.sum())} negative cells in this column)" if negative.sum() > 1 else ""
        )
        raise CompositionError(
            f"negative value {parsed.originals([i])[0]!r} at {place(index, i, p.column)}{more}; "
            "if negative numbers mean 'below a detection limit of that size', pass "
            "negative_is_below_detection=True"
        )
    if zero.any() and not np.isfinite(limit):
        i = _first(zero)
        raise CompositionError(
            f"zero at {place(index, i, p.column)}: a zero is read as below detection, "
            f"which needs the limit; pass detection_limits={{{str(p.name)!r}: ...}} "
            f"(in {p.unit_given}){_inferred_limits(p)}"
        )
    token = kind == TOKEN_BELOW
    if token.any() and not np.isfinite(limit) and replacement != "none":
        i = _first(token)
        raise CompositionError(
            f"below-detection entry {parsed.originals([i])[0]!r} at {place(index, i, p.column)} "
            f"has no detection limit; pass detection_limits={{{str(p.name)!r}: ...}} "
            f"(in {p.unit_given}) or replacement='none'{_inferred_limits(p)}"
        )
    less = kind == LESS_THAN
    below = token | less | zero
    missing = kind == MISSING
    lim[less] = parsed.limit[less]
    lim[negative] = -number[negative]
    status[below | negative] = BDL
    status[missing] = MISS
    raw[below | negative | missing] = np.nan
    below_pos = np.flatnonzero(below)
    code = np.where(
        less[below_pos],
        codes.BELOW_LESS_THAN,
        np.where(zero[below_pos], codes.BELOW_ZERO, codes.BELOW_TOKEN),
    ).astype(object)
    rec = CellRecord(
        text_read=np.flatnonzero((parsed.how != PLAIN) & is_num & ~negative & ~zero),
        missing=np.flatnonzero(missing),
        below=below_pos,
        below_code=code,
        negative=np.flatnonzero(negative),
        limit_given=lim[below_pos],
        limit_negative=lim[negative],
    )
    return status, raw, lim, rec


def read_parts(st: IntakeState) -> None:
    """Status, numbers and limits of every part cell, in the common unit, then formulas."""
    n, D = len(st.index), len(st.parts)
    # column-major: each part is written as one contiguous column
    status = np.empty((n, D), dtype=np.int8, order="F")
    raw = np.empty((n, D), order="F")
    lim = np.empty((n, D), order="F")
    options = st.options
    for j, p in enumerate(st.parts):
        s, r, d, rec = read_part(
            p,
            st.column_limits[j],
            st.index,
            options.replacement,
            options.negative_is_below_detection,
        )
        status[:, j], raw[:, j], lim[:, j] = s, r, d
        st.records.append(rec)
    factors = np.array([unit_factor(p.unit, st.unit) for p in st.parts])
    raw *= factors
    lim *= factors
    st.status, st.raw, st.limits, st.unit_factors = status, raw, lim, factors


def apply_conversions(st: IntakeState) -> None:
    """Formula conversions (after the analytical total, which is the one as reported)."""
    for j, (_, factor) in st.conversions.items():
        st.raw[:, j] *= factor
        st.limits[:, j] *= factor
