"""Reading the cells of one column: numbers, tokens, ``<limit`` entries, units in cells.

Vectorised: plain numbers are read in one pass by ``pandas.to_numeric``; only
the cells it cannot read (usually few) go through the token, ``<limit``,
separator and unit rules, as string operations on that subset.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..core import CompositionError
from ..units import normalize_unit
from . import codes
from .options import Options

# cell kinds
NUMBER, TOKEN_BELOW, LESS_THAN, MISSING, BAD = 0, 1, 2, 3, 4
# how a number was read from text (report codes of "parsed_text")
PLAIN, DECIMAL, MINUS, THOUSANDS, UNIT, FORMULA = 0, 1, 2, 3, 4, 5
HOW_CODES = {
    DECIMAL: codes.DECIMAL_COMMA,
    MINUS: codes.MINUS_SIGN,
    THOUSANDS: codes.THOUSANDS_SEPARATOR,
    UNIT: codes.UNIT_IN_CELL,
    FORMULA: codes.FORMULA_VALUE,
}
HOW_TEXT = {
    DECIMAL: "decimal comma",
    MINUS: "minus sign",
    THOUSANDS: "thousands separators",
    UNIT: "unit in the cell",
    FORMULA: "stored result of a formula",
}

_MINUS = "[\u2212\u2013]"  # minus sign, en dash
_DECIMAL_COMMA = re.compile(r"^\s*[+\-\u2212]?\d*,\d+\s*$")
_COMMA_GROUPS = re.compile(r"^\s*[+\-\u2212]?\d{1,3}(?:,\d{3})+(?:\.\d+)?\s*$")
_DOT_GROUPS = r"[+\-]?\d{1,3}(?:\.\d{3})+"
_UNIT_CELL = (
    r"(?P<num>[+\-]?(?:\d[\d.,'\u00a0\u202f ]*)?\d(?:[eE][+\-]?\d+)?|[+\-]?\.\d+)"
    r"\s*(?P<unit>[^\d\s<>=].*)"
)
_DATE_TEXT = re.compile(r"^\d{4}-\d{2}-\d{2}([ T]\d{2}:\d{2}(:\d{2}(\.\d+)?)?)?")
#: First characters of text that may be read as a number (digits are tested apart).
_NUMBER_STARTS = ("+", "-", "\u2212", "\u2013", ".", ",")
_DATE_NOTE = "a date, not a number (a spreadsheet may have turned the value into a date)"
_MAX_FLOAT_INT = 2**1024  # Python ints at or above this do not fit a float


def _place(index: pd.Index, i: int, column) -> str:
    return f"row {label(index, i)!r}, column {column!r}"


def label(index: pd.Index, i: int):
    """Row label at position ``i`` as a plain Python value (for messages)."""
    return index[i : i + 1].tolist()[0]


def place(index: pd.Index, i: int, column) -> str:
    """``"row 'RK-0018', column 'Cu (ppm)'"``."""
    return _place(index, i, column)


@dataclass
class Parsed:
    """What the parser found in one column (arrays of the column's length)."""

    number: np.ndarray  # float: the number read (NaN where none)
    kind: np.ndarray  # int8: NUMBER, TOKEN_BELOW, LESS_THAN, MISSING, BAD
    limit: np.ndarray  # float: limit of '<x' cells (NaN elsewhere)
    how: np.ndarray  # int8: PLAIN or how the number was read from text
    blank: np.ndarray  # bool: missing because empty (NaN, None, "")
    cells: np.ndarray = field(repr=False)  # the column's cells as given
    na: np.ndarray = field(repr=False)  # bool: NaN/None cells
    unit_pos: np.ndarray = field(default_factory=lambda: np.empty(0, np.intp))
    unit_of: np.ndarray = field(default_factory=lambda: np.empty(0, object))  # canonical
    notes: dict = field(default_factory=dict)  # row position -> hint for messages

    @property
    def n_bad(self) -> int:
        return int((self.kind == BAD).sum())

    @property
    def n_numbers(self) -> int:
        return int((self.kind == NUMBER).sum())

    @property
    def n_readable(self) -> int:
        """Cells that are not missing."""
        return int((self.kind != MISSING).sum())

    @property
    def n_unit_cells(self) -> int:
        """Cells (numbers or '<x' entries) that carry a unit."""
        return int(self.unit_pos.size)

    def first_bad_texts(self, k: int) -> list:
        """The first ``k`` unreadable cells as text."""
        return self.originals(np.flatnonzero(self.kind == BAD)[:k]).tolist()

    def unit_summary(self, index: pd.Index) -> list[tuple]:
        """(unit, cells, first row label, first cell text) per unit in cells, by first row."""
        if not self.unit_pos.size:
            return []
        units, first, counts = np.unique(self.unit_of, return_index=True, return_counts=True)
        order = np.argsort(first, kind="stable")
        return [
            (
                units[k],
                int(counts[k]),
                label(index, int(self.unit_pos[first[k]])),
                self.originals([self.unit_pos[first[k]]])[0],
            )
            for k in order
        ]

    @property
    def n_values(self) -> int:
        """Cells that are a number or below detection."""
        return int(
            ((self.kind == NUMBER) | (self.kind == TOKEN_BELOW) | (self.kind == LESS_THAN)).sum()
        )

    def originals(self, pos) -> np.ndarray:
        """The cells at ``pos`` as text ('NaN' for NaN/None), for messages and the report."""
        pos = np.asarray(pos, dtype=np.intp)
        text = np.asarray(self.cells[pos]).astype(str).astype(object)
        return np.where(self.na[pos], "NaN", text).astype(object)


def _as_float(values) -> np.ndarray:
    """A writable float copy (pandas may hand out read-only views)."""
    if isinstance(values, pd.Series):
        values = values.to_numpy(dtype=float, na_value=np.nan)
    return np.array(values, dtype=float)


def _readable_dtype(dtype) -> bool:
    if pd.api.types.is_bool_dtype(dtype):
        return False
    return (
        pd.api.types.is_numeric_dtype(dtype)
        or pd.api.types.is_string_dtype(dtype)
        or pd.api.types.is_object_dtype(dtype)
    )


def _refuse_complex(cells: np.ndarray, index, column) -> None:
    """Refuse complex numbers, naming the first with an imaginary part (else the first)."""
    is_complex = np.frompyfunc(lambda v: isinstance(v, (complex, np.complexfloating)), 1, 1)
    hit = np.flatnonzero(is_complex(cells).astype(bool))
    if hit.size:
        imaginary = np.frompyfunc(lambda v: v.imag != 0, 1, 1)(cells[hit]).astype(bool)
        i = int(hit[imaginary][0] if imaginary.any() else hit[0])
        raise CompositionError(
            f"complex number {complex(cells[i])!r} at {_place(index, i, column)}: a part must be "
            "a real number (the imaginary part is never dropped silently); pass the real "
            "values yourself if that is what the table means"
        )


def _refuse_huge_int(cells: np.ndarray, index, column) -> None:
    huge = np.frompyfunc(
        lambda v: isinstance(v, int) and not isinstance(v, bool) and abs(v) >= _MAX_FLOAT_INT,
        1,
        1,
    )
    hit = np.flatnonzero(huge(cells).astype(bool))
    i = int(hit[0]) if hit.size else 0
    digits = len(str(abs(int(cells[i])))) if hit.size else 0
    raise CompositionError(
        f"integer with {digits} digits at {_place(index, i, column)} is too large for a "
        "floating-point number (at most about 1.8e308); such a cell is no concentration"
    )


def _refuse_containers(cells: np.ndarray, pos: np.ndarray, index, column) -> None:
    kinds = (list, tuple, dict, set, frozenset, np.ndarray, pd.Series, pd.DataFrame)
    is_container = np.frompyfunc(lambda v: isinstance(v, kinds), 1, 1)
    hit = np.flatnonzero(is_container(cells[pos]).astype(bool)) if pos.size else pos
    if hit.size:
        i = int(pos[hit[0]])
        value = cells[i]
        raise CompositionError(
            f"a {type(value).__name__} cell at {_place(index, i, column)} ({value!r:.60}): a "
            "cell must hold one number or one text entry"
        )
    _refuse_complex(cells[pos], index[pos] if pos.size else index[:0], column)


def _first_true(mask: np.ndarray) -> int:
    return int(np.flatnonzero(mask)[0])


def read_numbers(text: pd.Series, decimal: str, thousands: str | None):
    """Numbers from stripped text cells, and how each was read (``PLAIN``, ``DECIMAL``, ...)."""
    n = len(text)
    how = np.zeros(n, dtype=np.int8)
    bad = np.zeros(n, dtype=bool)
    t = text
    minus = t.str.contains(_MINUS, regex=True).to_numpy(dtype=bool, na_value=False)
    if minus.any():
        t = t.str.replace(_MINUS, "-", regex=True)
    if thousands is not None:
        sep, dec = re.escape(thousands), re.escape(decimal)
        groups = rf"[+\-]?\d{{1,3}}(?:{sep}\d{{3}})+(?:{dec}\d+)?(?:[eE][+\-]?\d+)?"
        has = t.str.contains(thousands, regex=False).to_numpy(dtype=bool, na_value=False)
        if has.any():
            ok = t.str.fullmatch(groups).to_numpy(dtype=bool, na_value=False)
            bad |= has & ~ok
            how[has & ok] = THOUSANDS
            t = t.str.replace(thousands, "", regex=False)
    if decimal == ",":
        if thousands is None:
            bad |= t.str.fullmatch(_DOT_GROUPS).to_numpy(dtype=bool, na_value=False)
        comma = t.str.contains(",", regex=False).to_numpy(dtype=bool, na_value=False)
        if comma.any():
            how[comma & (how == PLAIN)] = DECIMAL
            t = t.str.replace(",", ".", regex=False)
    values = _as_float(pd.to_numeric(t, errors="coerce"))
    how[minus & (how == PLAIN)] = MINUS
    bad |= ~np.isfinite(values)
    values[bad] = np.nan
    how[bad] = PLAIN
    return values, how


def _units_in_cells(stripped: pd.Series, decimal: str, thousands: str | None):
    """(number, canonical unit) of cells such as '150 ppm' or '0,5 %' (NaN/None elsewhere)."""
    parts = stripped.str.extract(f"^{_UNIT_CELL}$")
    number = np.full(len(stripped), np.nan)
    unit = np.full(len(stripped), None, dtype=object)
    has = parts["num"].notna().to_numpy()
    if not has.any():
        return number, unit
    unit_text = parts["unit"][has].str.strip()
    canon = {u: normalize_unit(u) for u in unit_text.unique()}
    unit[has] = unit_text.map(canon).to_numpy(dtype=object)
    values, _ = read_numbers(parts["num"][has].astype(str), decimal, thousands)
    number[has] = values
    known = has.copy()
    known[has] = pd.notna(unit[has]) & np.isfinite(values)
    number[~known] = np.nan
    unit[~known] = None
    return number, unit


def parse_column(
    col: pd.Series,
    column: str,
    options: Options,
    formula_pos: np.ndarray | None = None,
    notes: dict | None = None,
) -> Parsed:
    """Classify every cell of ``col`` (vectorised; no loop over rows in Python)."""
    tokens, decimal, thousands = options.tokens, options.decimal, options.thousands
    index = col.index
    n = len(col)
    kind = np.full(n, NUMBER, dtype=np.int8)
    limit = np.full(n, np.nan)
    how = np.zeros(n, dtype=np.int8)
    if isinstance(col.dtype, pd.CategoricalDtype):
        col = col.astype(object)
    na = np.array(col.isna().to_numpy(), dtype=bool)
    blank = na.copy()
    dtype = col.dtype
    cells = col.to_numpy()
    unit_pos, unit_of = np.empty(0, np.intp), np.empty(0, object)
    notes = dict(notes or {})
    if pd.api.types.is_complex_dtype(dtype):
        _refuse_complex(cells.astype(object), index, column)
    if not _readable_dtype(dtype):
        kind[:] = BAD
        kind[na] = MISSING
        if (~na).any():
            first = _first_true(~na)
            if pd.api.types.is_datetime64_any_dtype(dtype):
                notes.setdefault(first, _DATE_NOTE)
            elif pd.api.types.is_bool_dtype(dtype):
                notes.setdefault(first, "a boolean, no concentration")
        return Parsed(np.full(n, np.nan), kind, limit, how, blank, cells, na, notes=notes)
    if pd.api.types.is_numeric_dtype(dtype):
        number = _as_float(col)
        kind[na] = MISSING
        kind[~na & ~np.isfinite(number)] = BAD
    else:
        try:  # on the bare object array: faster than on a Series of strings
            converted = pd.Series(pd.to_numeric(cells.astype(object, copy=False), errors="coerce"))
        except OverflowError:
            _refuse_huge_int(cells, index, column)
        except (TypeError, ValueError):  # exotic objects: read them as text
            converted = None
        if converted is not None and pd.api.types.is_complex_dtype(converted.dtype):
            _refuse_complex(cells, index, column)
        number = _as_float(converted) if converted is not None else np.full(n, np.nan)
        if pd.api.types.is_object_dtype(dtype):
            # to_numeric reads True/False as 1/0: booleans are no numbers
            cand = np.flatnonzero((number == 0) | (number == 1))
            if len(cand):
                is_bool = np.isin(np.asarray(cells[cand]).astype(str), ["True", "False"])
                number[cand[is_bool]] = np.inf  # sent to the text rules below, then bad
        if decimal == "," or thousands is not None:
            # a '.' (or the separator) in text may not be a decimal point: read as text
            text_cells = ~na & np.isfinite(number)
            if text_cells.any():
                is_text = np.frompyfunc(lambda v: isinstance(v, str), 1, 1)
                sub = np.flatnonzero(text_cells)
                sub = sub[is_text(cells[sub]).astype(bool)]
                if sub.size:
                    s = pd.Series(cells[sub], dtype=object)
                    marks = [m for m in {".", thousands} if m is not None and m != decimal]
                    hit = np.zeros(sub.size, dtype=bool)
                    for m in marks:
                        hit |= s.str.contains(m, regex=False).to_numpy(dtype=bool)
                    number[sub[hit]] = np.nan
        kind[na] = MISSING
        pos = np.flatnonzero(~np.isfinite(number) & ~na)
        number[~np.isfinite(number)] = np.nan
        if len(pos):
            if pd.api.types.is_object_dtype(dtype):
                _refuse_containers(cells, pos, index, column)
            sub = pd.Series(np.asarray(cells[pos]).astype(str), dtype=object)
            stripped = sub.str.strip()
            lower = stripped.str.lower()
            is_missing = lower.isin(tokens.missing).to_numpy()
            is_below = lower.isin(tokens.below).to_numpy() & ~is_missing
            is_lt = stripped.str.startswith("<").to_numpy() & ~is_missing & ~is_below
            other = ~(is_missing | is_below | is_lt)
            sub_kind = np.full(len(pos), BAD, dtype=np.int8)
            sub_kind[is_missing] = MISSING
            blank[pos[is_missing & (stripped == "").to_numpy()]] = True
            sub_kind[is_below] = TOKEN_BELOW
            sub_how = np.zeros(len(pos), dtype=np.int8)
            sub_unit = np.full(len(pos), None, dtype=object)
            if is_lt.any():
                idx = np.flatnonzero(is_lt)
                rest = stripped[is_lt].str[1:].str.strip()
                lt, lt_how = read_numbers(rest, decimal, thousands)
                no = ~np.isfinite(lt)
                if no.any():  # '<5 ppm'
                    u_num, u_unit = _units_in_cells(rest[no], decimal, thousands)
                    lt[no] = u_num
                    lt_how[no] = np.where(np.isfinite(u_num), UNIT, PLAIN)
                    sub_unit[idx[no]] = u_unit
                ok = np.isfinite(lt) & (lt > 0)
                sub_kind[idx[ok]] = LESS_THAN
                sub_how[idx[ok]] = lt_how[ok]
                limit[pos[idx[ok]]] = lt[ok]
                sub_unit[idx[~ok]] = None
            if other.any():
                # only text that starts like a number can be one (or '150 ppm'): the
                # number rules run on those cells alone, so text columns cost little
                first = stripped[other].str[:1]
                can = (first.isin(_NUMBER_STARTS) | first.str.isdecimal()).to_numpy(
                    dtype=bool, na_value=False
                )
                other = other.copy()
                other[np.flatnonzero(other)[~can]] = False
            if other.any():
                idx = np.flatnonzero(other)
                val, val_how = read_numbers(stripped[other], decimal, thousands)
                val[np.isin(lower[other].to_numpy(), ["true", "false"])] = np.nan
                no = ~np.isfinite(val)
                if no.any():  # '150 ppm'
                    u_num, u_unit = _units_in_cells(stripped[other][no], decimal, thousands)
                    val[no] = u_num
                    val_how[no] = np.where(np.isfinite(u_num), UNIT, PLAIN)
                    sub_unit[idx[no]] = u_unit
                ok = np.isfinite(val)
                sub_kind[idx[ok]] = NUMBER
                number[pos[idx[ok]]] = val[ok]
                sub_how[idx[ok]] = val_how[ok]
                bad_text = stripped[other][~ok]
                dates = bad_text.str.match(_DATE_TEXT).to_numpy(dtype=bool, na_value=False)
                for i in pos[idx[~ok][dates]][:10]:
                    notes.setdefault(int(i), _DATE_NOTE)
            kind[pos] = sub_kind
            how[pos] = sub_how
            has_unit = pd.notna(sub_unit) & ((sub_kind == NUMBER) | (sub_kind == LESS_THAN))
            unit_pos = pos[has_unit]
            unit_of = sub_unit[has_unit]
    if tokens.missing_numbers:
        hit = (kind == NUMBER) & np.isin(number, tokens.missing_numbers)
        kind[hit] = MISSING
    if tokens.below_numbers:
        hit = (kind == NUMBER) & np.isin(number, tokens.below_numbers)
        kind[hit] = TOKEN_BELOW
    if formula_pos is not None and len(formula_pos):
        fp = np.asarray(formula_pos, dtype=np.intp)
        how[fp[kind[fp] == NUMBER]] = FORMULA
    how[(kind != NUMBER) & (kind != LESS_THAN)] = PLAIN
    number[kind != NUMBER] = np.nan
    keep = np.isin(unit_pos, np.flatnonzero((kind == NUMBER) | (kind == LESS_THAN)))
    return Parsed(number, kind, limit, how, blank, cells, na, unit_pos[keep], unit_of[keep], notes)


def _hint(value, parsed: Parsed, i: int, options: Options) -> str:
    decimal, thousands = options.decimal, options.thousands
    if i in parsed.notes:
        return f"; it is {parsed.notes[i]}"
    if not isinstance(value, str):
        return ""
    v = value.strip()
    if thousands is not None and thousands in v:
        return f"; with thousands={thousands!r} the separator must part groups of three digits"
    if decimal == "." and thousands is None and _COMMA_GROUPS.match(v):
        if "." in v:
            return "; if ',' separates thousands (1,234.5 = 1234.5) pass thousands=','"
        return (
            f"; {v!r} may use ',' as a thousands separator ({v.replace(',', '')}): pass "
            "thousands=','; or as a decimal comma: pass decimal=','"
        )
    if decimal == "." and _DECIMAL_COMMA.match(v):
        return "; for decimal commas pass decimal=','"
    if decimal == "," and thousands is None and re.fullmatch(_DOT_GROUPS, v):
        return (
            f"; with decimal=',' the value {v!r} may mean {v.replace('.', '')} (dots "
            "separating thousands: pass thousands='.') or a decimal point (pass decimal='.')"
        )
    if v.startswith("<"):
        return "; a '<' entry needs a positive limit, e.g. '<0.05'"
    if v.startswith("="):
        return (
            "; it is a spreadsheet formula without a stored result: open and save the file "
            "in a spreadsheet program, or paste the values"
        )
    if v.lower() in ("true", "false"):
        return "; a boolean is no concentration"
    if v and len(v) <= 24 and not any(ch.isdigit() for ch in v):
        return (
            f"; if {v!r} means 'not analysed' add it to missing_tokens, if 'below "
            "detection' to below_tokens"
        )
    return ""


def bad_cell_error(
    column, parsed: Parsed, index: pd.Index, options: Options, auto: bool, why: str = ""
) -> CompositionError:
    """The error for the unreadable cells of a column that must be a part."""
    tokens = options.tokens
    if not isinstance(parsed, Parsed):  # partition-wise summaries: the partition it is in
        parsed, index = parsed.source("bad")
    bad = np.flatnonzero(parsed.kind == BAD)
    first = int(bad[0])
    value = parsed.originals([first])[0]
    hint = _hint(parsed.cells[first], parsed, first, options)
    if auto:
        hint += "; if this column is not a part, choose the parts with parts=[...]"
    more = ""
    if len(bad) > 1:
        shown = ", ".join(
            f"{v!r} (row {label(index, int(i))!r})"
            for i, v in zip(bad[1:4], parsed.originals(bad[1:4]), strict=True)
        )
        more = f" ({len(bad)} unreadable cells in this column; next: {shown})"
    reason = f"; the column is read as a part because {why}" if why else ""
    return CompositionError(
        f"cannot read the cell at {_place(index, first, column)}: value {value!r} "
        f"is not a finite number, a '<limit' entry, a below-detection token "
        f"{list(tokens.below_given)!r} or a missing-value token {list(tokens.missing_given)!r}"
        f"{hint}{more}{reason}"
    )
