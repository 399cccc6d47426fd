"""Intake: a messy table (DataFrame, CSV/TSV/TXT, Excel) -> :class:`Composition`.

Every cell of every part column ends up with a status ("observed",
"below_dl", "missing"), a number in the common unit (or NaN) and, when known,
a detection limit; everything that was not a plain number is written to the
report under the row's original index label. Rows are never dropped: rows
that look wrong are flagged and kept.

The analytical total window and the below-detection replacement change
numbers that may feed a decision (an ore-grade or a contamination call).
They are screening aids: such decisions follow accredited laboratory
practice and the laboratory's own quality control, not this module.
"""

from __future__ import annotations

import math
import os
import re
from collections.abc import Hashable, Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from .composition import BELOW_DL, MISSING, OBSERVED, REPORT_COLUMNS, Composition
from .core import DEFAULT_FRACTION, CompositionError, multiplicative_replacement
from .units import (
    NON_PART_UNITS,
    _unit_key,
    canonical_unit,
    conversion_factor,
    is_mass_unit,
    normalize_unit,
    split_unit,
    unit_factor,
)

__all__ = [
    "DEFAULT_BELOW_TOKENS",
    "DEFAULT_MISSING_TOKENS",
    "REPLACEMENTS",
    "read_composition",
]

#: Text read as "below the detection limit" (case-insensitive, stripped).
#: "n.d." and "nd" are read as "not detected" (not as "no data").
DEFAULT_BELOW_TOKENS = ("bdl", "b.d.l.", "<dl", "<lod", "nd", "n.d.", "not detected")
#: Text read as a missing value (case-insensitive, stripped).
DEFAULT_MISSING_TOKENS = ("", "-", "--", "na", "n.a.", "nan", "null", "none", "not analysed")
#: Replacement strategies for values below detection.
REPLACEMENTS = ("multiplicative", "simple", "none")
#: Column names that hold a sum of the parts, never a part (automatic detection).
TOTAL_NAMES = frozenset({"total", "totals", "sum"})
#: Extensions read as delimited text / as spreadsheets.
TEXT_EXTENSIONS = (".csv", ".tsv", ".txt")
EXCEL_EXTENSIONS = (".xlsx", ".xls")

# cell kinds found by the parser
_NUMBER, _TOKEN_BELOW, _LESS_THAN, _MISSING, _BAD = 0, 1, 2, 3, 4
_STATUS_NAMES = np.array([OBSERVED, BELOW_DL, MISSING], dtype=object)
_ST_OBS, _ST_BDL, _ST_MISS = 0, 1, 2
_MINUS_SIGNS = ("\u2212", "\u2013")  # minus sign, en dash
_DECIMAL_COMMA = re.compile(r"^\s*[+\-\u2212]?\d*,\d+\s*$")


# ----------------------------------------------------------------------------- options


@dataclass(frozen=True)
class _Tokens:
    below: frozenset
    missing: frozenset
    below_numbers: tuple
    missing_numbers: tuple
    below_given: tuple
    missing_given: tuple


def _token_set(tokens, name: str) -> tuple[tuple[str, ...], frozenset]:
    if isinstance(tokens, str):
        tokens = (tokens,)
    try:
        given = tuple(tokens)
    except TypeError:
        raise CompositionError(f"{name} must be a list of strings, got {tokens!r}") from None
    bad = [t for t in given if not isinstance(t, str)]
    if bad:
        raise CompositionError(f"{name} must hold strings; got {bad[0]!r}")
    return given, frozenset(t.strip().lower() for t in given)


def _numeric_tokens(tokens: frozenset) -> tuple[float, ...]:
    """Tokens that are numbers (e.g. '-999'): they match cells by value."""
    values = pd.to_numeric(pd.Series(sorted(tokens), dtype=object), errors="coerce")
    values = values.to_numpy(dtype=float)
    return tuple(float(v) for v in values[np.isfinite(values)])


def _make_tokens(below_tokens, missing_tokens) -> _Tokens:
    below_given, below = _token_set(below_tokens, "below_tokens")
    missing_given, missing = _token_set(missing_tokens, "missing_tokens")
    both = sorted(below & missing)
    if both:
        raise CompositionError(
            f"token(s) {both!r} are in both below_tokens and missing_tokens; "
            "each token must mean one thing"
        )
    return _Tokens(
        below,
        missing,
        _numeric_tokens(below),
        _numeric_tokens(missing),
        below_given,
        missing_given,
    )


def _check_fraction(fraction) -> float:
    if isinstance(fraction, bool) or not isinstance(fraction, (int, float, np.number)):
        raise CompositionError(
            f"fraction must be a number strictly between 0 and 1, got {fraction!r}"
        )
    if not 0 < float(fraction) < 1:
        raise CompositionError(f"fraction must lie strictly between 0 and 1, got {fraction!r}")
    return float(fraction)


def _check_window(total_window) -> tuple[float, float]:
    try:
        lo, hi = (float(x) for x in total_window)
    except (TypeError, ValueError):
        raise CompositionError(
            f"total_window must be two numbers (low, high) in wt%, got {total_window!r}"
        ) from None
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo >= hi:
        raise CompositionError(
            f"total_window must satisfy low < high (finite, in wt%), got {total_window!r}"
        )
    return lo, hi


# ----------------------------------------------------------------------------- loading


def _guess_sep(path: Path, encoding: str) -> str:
    """The delimiter most frequent in the header line (',' when none is found)."""
    with open(path, encoding=encoding, errors="replace") as fh:
        header = fh.readline()
    counts = {sep: header.count(sep) for sep in ("\t", ";", ",", "|")}
    best = max(counts, key=counts.get)
    return best if counts[best] > 0 else ","


def _load(source, *, sheet_name, index_col, sep) -> tuple[pd.DataFrame, dict]:
    """The table as given (DataFrame) or read as text (files), and a note for settings."""
    if isinstance(source, pd.DataFrame):
        if index_col is not None or sep is not None:
            raise CompositionError("index_col and sep apply to files only, not to a DataFrame")
        return source, {"source": "DataFrame"}
    if not isinstance(source, (str, os.PathLike)):
        raise CompositionError(
            f"source must be a DataFrame or a path to a .csv/.tsv/.txt/.xlsx/.xls file, "
            f"got {type(source).__name__}"
        )
    path = Path(source)
    ext = path.suffix.lower()
    if ext not in TEXT_EXTENSIONS + EXCEL_EXTENSIONS:
        raise CompositionError(
            f"{str(path)!r}: unknown file extension {path.suffix or '(none)'!r}; read "
            f"{', '.join(TEXT_EXTENSIONS + EXCEL_EXTENSIONS)} files, or pass a DataFrame"
        )
    if not path.is_file():
        raise FileNotFoundError(f"no such file: {str(path)!r}")
    note = {"source": str(path), "sheet_name": None, "sep": None, "encoding": None}
    try:
        if ext in TEXT_EXTENSIONS:
            frame = None
            for encoding in ("utf-8-sig", "latin-1"):
                use_sep = sep or ("\t" if ext == ".tsv" else _guess_sep(path, encoding))
                try:
                    frame = pd.read_csv(
                        path,
                        sep=use_sep,
                        dtype=str,
                        keep_default_na=False,
                        index_col=index_col,
                        encoding=encoding,
                    )
                    break
                except UnicodeDecodeError:
                    continue
            note.update(sep=use_sep, encoding=encoding)
        else:
            if sheet_name is None:
                raise CompositionError(
                    f"{str(path)!r}: sheet_name=None would read every sheet; name one sheet"
                )
            frame = pd.read_excel(
                path,
                sheet_name=sheet_name,
                dtype=str,
                keep_default_na=False,
                index_col=index_col,
            )
            note["sheet_name"] = (
                sheet_name if isinstance(sheet_name, (int, str)) else str(sheet_name)
            )
    except pd.errors.EmptyDataError:
        raise CompositionError(f"{str(path)!r}: the file is empty") from None
    except ImportError as err:
        raise ImportError(
            f"{str(path)!r}: reading {ext} files needs an extra package ({err}); "
            "save the sheet as .xlsx (read with openpyxl) or .csv"
        ) from None
    except (ValueError, KeyError, IndexError) as err:
        if isinstance(err, CompositionError):
            raise
        raise CompositionError(f"{str(path)!r}: cannot read the table ({err})") from None
    return frame, note


def _label(index: pd.Index, i: int):
    """Row label at position ``i`` as a plain Python value (for messages)."""
    return index[i : i + 1].tolist()[0]


def _place(index: pd.Index, i: int, column) -> str:
    return f"row {_label(index, i)!r}, column {column!r}"


def _check_frame(frame: pd.DataFrame, where: str) -> None:
    if frame.shape[0] == 0 or frame.shape[1] == 0:
        raise CompositionError(
            f"{where}: empty table ({frame.shape[0]} rows x {frame.shape[1]} columns)"
        )
    dup = frame.columns[frame.columns.duplicated()].unique()
    if len(dup):
        raise CompositionError(
            f"{where}: duplicate column names {dup.tolist()!r}; every column needs its own name"
        )
    dup_rows = frame.index[frame.index.duplicated()].unique()
    if len(dup_rows):
        shown = dup_rows[:5].tolist()
        more = f" and {len(dup_rows) - 5} more" if len(dup_rows) > 5 else ""
        raise CompositionError(
            f"{where}: duplicate index labels {shown!r}{more}; every row needs its own label "
            "so that each value stays traceable (e.g. use a sample-id column as the index)"
        )


# ----------------------------------------------------------------------------- cell parsing


@dataclass
class _Parsed:
    """What the parser found in one column (arrays of the column's length)."""

    number: np.ndarray  # float: the number read (NaN where none)
    kind: np.ndarray  # int8: _NUMBER, _TOKEN_BELOW, _LESS_THAN, _MISSING, _BAD
    limit: np.ndarray  # float: limit of '<x' cells (NaN elsewhere)
    text_read: np.ndarray  # bool: a number read from text that needed normalising
    cells: np.ndarray = field(repr=False)  # the column's cells as given
    na: np.ndarray = field(repr=False)  # bool: NaN/None cells

    @property
    def n_bad(self) -> int:
        return int((self.kind == _BAD).sum())

    @property
    def n_numbers(self) -> int:
        return int((self.kind == _NUMBER).sum())

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


def _normalised_number(text: pd.Series, decimal: str) -> np.ndarray:
    """Numbers from text after trimming, unicode minus and the decimal comma."""
    t = text.str.strip()
    for sign in _MINUS_SIGNS:
        t = t.str.replace(sign, "-", regex=False)
    if decimal == ",":
        t = t.str.replace(",", ".", regex=False)
    return _as_float(pd.to_numeric(t, errors="coerce"))


def _readable_dtype(dtype) -> bool:
    if pd.api.types.is_bool_dtype(dtype):
        return False
    return (
        pd.api.types.is_numeric_dtype(dtype)
        or pd.api.types.is_string_dtype(dtype)
        or pd.api.types.is_object_dtype(dtype)
        or isinstance(dtype, pd.CategoricalDtype)
    )


def _parse_column(col: pd.Series, tokens: _Tokens, decimal: str) -> _Parsed:
    """Classify every cell of ``col`` (vectorised; no loop over rows).

    Plain numbers (also with surrounding spaces) are read in one pass by
    ``pandas.to_numeric``; only the cells it cannot read (usually few) go
    through the token and ``<limit`` rules.
    """
    n = len(col)
    kind = np.full(n, _NUMBER, dtype=np.int8)
    limit = np.full(n, np.nan)
    text_read = np.zeros(n, dtype=bool)
    na = np.array(col.isna().to_numpy(), dtype=bool)
    dtype = col.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        col = col.astype(object)
        dtype = col.dtype
    cells = col.to_numpy()
    if not _readable_dtype(dtype):
        kind[:] = _BAD
        return _Parsed(np.full(n, np.nan), kind, limit, text_read, cells, na)
    if pd.api.types.is_numeric_dtype(dtype):
        number = _as_float(col)
        kind[na] = _MISSING
        kind[~na & ~np.isfinite(number)] = _BAD
    else:
        try:
            number = _as_float(pd.to_numeric(col, errors="coerce"))
        except (TypeError, ValueError):  # exotic objects: read them as text
            number = np.full(n, np.nan)
        if pd.api.types.is_object_dtype(dtype):
            # to_numeric reads True/False as 1/0: booleans are no numbers
            cand = np.flatnonzero((number == 0) | (number == 1))
            if len(cand):
                is_bool = np.isin(np.asarray(cells[cand]).astype(str), ["True", "False"])
                number[cand[is_bool]] = np.inf  # sent to the text rules below, then bad
        kind[na] = _MISSING
        pos = np.flatnonzero(~np.isfinite(number) & ~na)
        number[~np.isfinite(number)] = np.nan
        if len(pos):
            sub = pd.Series(np.asarray(cells[pos]).astype(str), dtype=object)
            stripped = sub.str.strip()
            lower = stripped.str.lower()
            is_missing = lower.isin(tokens.missing).to_numpy()
            is_below = lower.isin(tokens.below).to_numpy() & ~is_missing
            is_lt = stripped.str.startswith("<").to_numpy() & ~is_missing & ~is_below
            other = ~(is_missing | is_below | is_lt)
            sub_kind = np.full(len(pos), _BAD, dtype=np.int8)
            sub_kind[is_missing] = _MISSING
            sub_kind[is_below] = _TOKEN_BELOW
            if is_lt.any():
                lt = _normalised_number(stripped[is_lt].str[1:], decimal)
                ok = np.isfinite(lt) & (lt > 0)
                idx = np.flatnonzero(is_lt)
                sub_kind[idx[ok]] = _LESS_THAN
                limit[pos[idx[ok]]] = lt[ok]
            if other.any():
                val = _normalised_number(stripped[other], decimal)
                idx = np.flatnonzero(other)
                ok = np.isfinite(val) & ~np.isin(lower[other].to_numpy(), ["true", "false"])
                sub_kind[idx[ok]] = _NUMBER
                number[pos[idx[ok]]] = val[ok]
                text_read[pos[idx[ok]]] = True
            kind[pos] = sub_kind
    if tokens.missing_numbers:
        hit = (kind == _NUMBER) & np.isin(number, tokens.missing_numbers)
        kind[hit] = _MISSING
    if tokens.below_numbers:
        hit = (kind == _NUMBER) & np.isin(number, tokens.below_numbers)
        kind[hit] = _TOKEN_BELOW
    text_read &= kind == _NUMBER
    number[kind != _NUMBER] = np.nan
    return _Parsed(number, kind, limit, text_read, cells, na)


def _bad_cell_error(
    col_name, parsed: _Parsed, index: pd.Index, tokens: _Tokens, decimal: str, auto: bool
) -> CompositionError:
    bad = np.flatnonzero(parsed.kind == _BAD)
    first = bad[0]
    value = parsed.originals([first])[0]
    hint = ""
    if decimal == "." and isinstance(value, str) and _DECIMAL_COMMA.match(value):
        hint = "; for decimal commas pass decimal=','"
    elif isinstance(value, str) and value.strip().startswith("<"):
        hint = "; a '<' entry needs a positive limit, e.g. '<0.05'"
    if auto:
        hint += "; if this column is not a part, choose the parts with parts=[...]"
    more = f" ({len(bad)} unreadable cells in this column)" if len(bad) > 1 else ""
    return CompositionError(
        f"cannot read the cell at {_place(index, first, col_name)}: value {value!r} "
        f"is not a finite number, a '<limit' entry, a below-detection token "
        f"{list(tokens.below_given)!r} or a missing-value token {list(tokens.missing_given)!r}"
        f"{hint}{more}"
    )


# ----------------------------------------------------------------------------- parts & units


@dataclass
class _Part:
    column: Hashable  # the input column
    name: Hashable  # part name (unit stripped), renamed by a formula conversion later
    unit_given: str  # as given or read from the name
    unit: str  # canonical
    parsed: _Parsed


#: Column names read as coordinates (metadata) when parts are chosen automatically.
COORDINATE_NAMES = frozenset(
    {
        "x",
        "y",
        "z",
        "east",
        "north",
        "easting",
        "northing",
        "lat",
        "latitude",
        "lon",
        "long",
        "longitude",
        "depth",
        "elevation",
        "altitude",
    }
)


def _choose_columns(frame, parts, parsed_all, tokens, decimal) -> list[Hashable]:
    columns = list(frame.columns)
    if parts is not None:
        if isinstance(parts, (str, bytes)) or not isinstance(parts, Iterable):
            parts = [parts]
        parts = list(parts)
        by_stripped: dict = {}
        for c in columns:
            by_stripped.setdefault(split_unit(c)[0], []).append(c)
        chosen, unknown = [], []
        for p in parts:
            if p in frame.columns:
                chosen.append(p)
            elif len(by_stripped.get(p, [])) == 1:
                chosen.append(by_stripped[p][0])
            else:
                unknown.append(p)
        if unknown:
            raise CompositionError(
                f"parts: unknown column name(s) {unknown!r}; the table's columns are {columns!r}"
            )
        dup = sorted({str(c) for c in chosen if chosen.count(c) > 1})
        if dup:
            raise CompositionError(f"parts: column(s) {dup!r} named more than once")
        return chosen
    chosen = []
    for c in columns:
        parsed = parsed_all[c]
        name, unit_text, bracketed = split_unit(c)
        if isinstance(name, str) and name.strip().lower() in TOTAL_NAMES | COORDINATE_NAMES:
            continue
        if unit_text is not None and _unit_key(unit_text) in NON_PART_UNITS:
            continue
        if parsed.n_bad == 0:
            if parsed.n_numbers > 0:
                chosen.append(c)
            continue
        # Not numeric-like. Refuse to hide a part with a typo in the metadata:
        # a name with a composition unit, or mostly numbers, means a part.
        readable = int((parsed.kind != _MISSING).sum())
        looks_numeric = readable and parsed.n_numbers >= 0.5 * readable
        if (unit_text is not None and normalize_unit(unit_text) is not None) or looks_numeric:
            raise _bad_cell_error(c, parsed, frame.index, tokens, decimal, auto=True)
    return chosen


def _make_parts(columns, parsed_all, units, default_unit: str) -> list[_Part]:
    units = {} if units is None else units
    if not isinstance(units, Mapping):
        raise CompositionError(f"units must be a dict column -> unit, got {type(units).__name__}")
    stripped = {c: split_unit(c) for c in columns}
    lookup = _key_lookup(columns, stripped)
    given: dict = {}
    for key, unit_text in units.items():
        col = lookup.get(key)
        if col is None:
            raise CompositionError(
                f"units: {key!r} is not a part column; part columns are {list(columns)!r}"
            )
        given[col] = unit_text
    out = []
    for c in columns:
        name, name_unit, bracketed = stripped[c]
        if c in given:
            unit_text = given[c]
            unit = canonical_unit(unit_text, where=f"units[{c!r}]")
            known_in_name = normalize_unit(name_unit) if name_unit is not None else None
            if known_in_name is not None and known_in_name != unit:
                raise CompositionError(
                    f"column {c!r}: the name says {name_unit!r} but units gives {unit_text!r}"
                )
            if name_unit is not None and known_in_name is None:
                name = c  # brackets that are no unit stay in the name
        elif name_unit is not None:
            unit_text = name_unit
            unit = canonical_unit(
                name_unit,
                where=f"column {c!r}",
                hint=f"; or give the unit with units={{{c!r}: ...}}",
            )
        else:
            unit_text, unit = default_unit, canonical_unit(default_unit, where="default_unit")
        out.append(_Part(c, name, str(unit_text).strip(), unit, parsed_all[c]))
    names = [p.name for p in out]
    dup = sorted({str(n) for n in names if names.count(n) > 1})
    if dup:
        raise CompositionError(
            f"part name(s) {dup!r} come from more than one column once units are stripped "
            f"(columns {[p.column for p in out if str(p.name) in dup]!r})"
        )
    return out


def _key_lookup(columns, stripped) -> dict:
    """Option keys may name a column as given or as the part name without unit."""
    lookup = {}
    for c in columns:
        lookup.setdefault(stripped[c][0], c)
    for c in columns:
        lookup[c] = c
    return lookup


def _common_unit(parts: list[_Part], common_unit) -> str:
    counts = [p for p in parts if not is_mass_unit(p.unit)]
    masses = [p for p in parts if is_mass_unit(p.unit)]
    if counts and masses:
        raise CompositionError(
            f"point counts {[p.name for p in counts]!r} cannot be mixed with mass units "
            f"({', '.join(f'{p.name!r} in {p.unit_given}' for p in masses[:3])}); "
            "read them as separate compositions"
        )
    if common_unit is not None:
        unit = canonical_unit(common_unit, where="common_unit")
        if is_mass_unit(unit) != bool(masses):
            raise CompositionError(
                f"common_unit {common_unit!r} does not fit parts in "
                f"{'point counts' if counts else 'mass units'}"
            )
        return unit
    if counts:
        return "count"
    return "wt%" if any(p.unit == "wt%" for p in parts) else "ppm"


def _per_part_option(option, parts: list[_Part], what: str) -> dict[int, object]:
    """Resolve the keys of a dict option to part positions."""
    if not isinstance(option, Mapping):
        raise CompositionError(f"{what} must be a dict part -> value, got {type(option).__name__}")
    columns = [p.column for p in parts]
    lookup = _key_lookup(columns, {p.column: (p.name,) for p in parts})
    pos = {c: j for j, c in enumerate(columns)}
    out = {}
    for key, value in option.items():
        col = lookup.get(key)
        if col is None:
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


def _column_limits(detection_limits, parts: list[_Part]) -> np.ndarray:
    """Detection limit of each part in its own unit (NaN: none given)."""
    D = len(parts)
    if detection_limits is None:
        return np.full(D, np.nan)
    if isinstance(detection_limits, pd.Series):
        detection_limits = detection_limits.to_dict()
    if isinstance(detection_limits, Mapping):
        out = np.full(D, np.nan)
        for j, value in _per_part_option(detection_limits, parts, "detection_limits").items():
            out[j] = _positive_limit(value, f"detection_limits[{parts[j].name!r}]")
        return out
    return np.full(D, _positive_limit(detection_limits, "detection_limits"))


def _settings_limits(detection_limits):
    if detection_limits is None:
        return None
    if isinstance(detection_limits, (Mapping, pd.Series)):
        return {str(k): float(v) for k, v in dict(detection_limits).items()}
    return float(detection_limits)


# ----------------------------------------------------------------------------- the entry point


def read_composition(
    source,
    *,
    parts: Sequence[Hashable] | None = None,
    units: Mapping[Hashable, str] | None = None,
    default_unit: str = "wt%",
    common_unit: str | None = None,
    convert: Mapping[Hashable, str] | None = None,
    detection_limits=None,
    replacement: str = "multiplicative",
    fraction: float = DEFAULT_FRACTION,
    negative_is_below_detection: bool = False,
    total_window: tuple[float, float] = (98.5, 101.5),
    check_total: bool = True,
    decimal: str = ".",
    sheet_name: int | str = 0,
    below_tokens: Iterable[str] = DEFAULT_BELOW_TOKENS,
    missing_tokens: Iterable[str] = DEFAULT_MISSING_TOKENS,
    index_col: int | str | None = None,
    sep: str | None = None,
) -> Composition:
    """Read a table of compositions into a :class:`~compwidgets.composition.Composition`.

    Parameters
    ----------
    source : DataFrame or path
        A DataFrame (never modified) or a ``.csv``, ``.tsv``, ``.txt`` (read
        with ``pandas.read_csv``) or ``.xlsx``/``.xls`` file (``pandas.read_excel``;
        ``.xls`` needs the ``xlrd`` package). Files are read as text, so
        metadata from files stays text (sample ids such as ``"007"`` keep
        their zeros).
    parts : list of column names, optional
        The part columns (names as in the table, or without their unit).
        Default: every *numeric-like* column, i.e. all of whose non-empty
        cells are numbers, ``<limit`` entries or tokens, with at least one
        number. Excluded from the default: columns named total/totals/sum,
        coordinate names (x, y, easting, northing, latitude, longitude, depth,
        elevation, ...), columns whose bracketed unit is a length, angle or
        temperature (e.g. ``"Depth (m)"``). Other numeric metadata (years,
        sample numbers, ...) would be taken for parts: name the parts then.
        A column with a composition unit in its name, or whose non-empty
        cells are at least half numbers, that holds an unreadable cell
        raises instead of silently becoming metadata.
    units : dict column -> unit, optional
        Units of the parts. Otherwise read from the name (``"SiO2 (wt%)"``,
        ``"Zr [ppm]"``, ``"Ba_ppm"``; the part is then called ``SiO2``, ...)
        or ``default_unit``. Known: wt% (also "%"), ppm, ppb, mg/kg, g/t,
        ug/g (µg/g), mg/g, g/kg, and "count" for point counts.
    default_unit : str, default "wt%"
        Unit of parts whose unit is given nowhere else.
    common_unit : str, optional
        Unit of the result. Default: wt% when any part is in wt%, else ppm
        (counts stay counts; counts cannot be mixed with mass units).
        1 wt% = 10,000 ppm; mg/kg = g/t = ug/g = ppm.
    convert : dict part -> formula, optional
        Formula conversions, e.g. ``{"Fe2O3": "FeO", "SiO2": "Si", "Zr": "ZrO2"}``,
        with factors from :func:`compwidgets.units.conversion_factor`. Values and
        detection limits are multiplied and the part is renamed to the target.
    detection_limits : dict part -> limit, or a number, optional
        Limits in each part's original unit, for cells given as a token
        (``"bdl"``, ...) or as zero. A ``<0.05`` cell carries its own limit,
        which wins. A number applies to every part, in each part's own unit.
    replacement : {"multiplicative", "simple", "none"}, default "multiplicative"
        What values below detection become: multiplicative replacement
        (Martin-Fernandez et al. 2003; ``fraction * DL`` with the observed
        parts of the row rescaled so that the row keeps the total of its
        observed parts and all their ratios), ``"simple"`` (``fraction * DL``,
        nothing else changes) or ``"none"`` (left NaN). Rows where
        multiplicative replacement is impossible (no observed part, or the
        replacements would reach the observed total) are not replaced and
        are flagged. Missing cells are never filled.
    fraction : float, default 0.65
        Share of the detection limit used as the replacement, in (0, 1).
    negative_is_below_detection : bool, default False
        Read ``-0.05`` as "below a detection limit of 0.05" (a laboratory
        convention); otherwise a negative number is an error.
    total_window : (low, high), default (98.5, 101.5)
        Acceptable analytical total in wt% (a common acceptance window for
        major-element analyses, quoted from memory: common practice, not a
        standard; use your laboratory's). Checked only when every part is a
        mass unit and at least one is reported in percent (a table of traces
        in ppm alone is not a full analysis); the total is the sum of the
        observed values in wt% as reported (before formula conversion and
        replacement). Set ``check_total=False`` for other partial analyses.
    check_total : bool, default True
    decimal : {".", ","}, default "."
        Decimal mark of text cells (with "," a cell " 1,5 " reads as 1.5).
        Thousands separators are not read.
    sheet_name : int or str, default 0
        Sheet of a spreadsheet.
    below_tokens : list of str
        Text meaning "below detection", compared stripped and
        case-insensitively. Default: ``bdl, b.d.l., <dl, <lod, nd, n.d.,
        not detected``; note that "n.d." and "nd" are read as "not detected"
        (remove them here and add them to ``missing_tokens`` if your table
        uses them for "no data"). A token that is a number (e.g. "-999")
        matches cells of that value.
    missing_tokens : list of str
        Text meaning "missing". Default: ``"", -, --, na, n.a., nan, null,
        none, not analysed``. NaN/None cells of a DataFrame are always missing.
    index_col : int or str, optional
        Files only: the column holding the row labels (passed to pandas).
    sep : str, optional
        Text files only: the delimiter; default tab for .tsv, else the most
        frequent of tab ; , | in the header line.

    Returns
    -------
    Composition
        See :class:`~compwidgets.composition.Composition`. The report holds
        one row per action: ``parsed_text`` (a number read from text that
        needed more than trimming: decimal comma, unicode minus),
        ``missing``, ``below_detection`` (``value`` = the limit in the common
        unit, NaN when unknown), ``negative_as_below_detection``,
        ``unit_converted`` and ``formula_converted`` (one per column, ``value``
        = factor), ``replaced`` (``value`` = the new value) and ``flagged``
        (``value`` = the analytical total when checked). Cells are named by
        their original row label and their part name.

    Raises
    ------
    CompositionError
        For any cell or option that cannot be read, naming the row label, the
        column and the value.
    """
    # options first: no file is read for a bad call
    if replacement not in REPLACEMENTS:
        raise CompositionError(
            f"replacement must be one of {', '.join(map(repr, REPLACEMENTS))}, got {replacement!r}"
        )
    fraction = _check_fraction(fraction)
    lo, hi = _check_window(total_window)
    if decimal not in (".", ","):
        raise CompositionError(f"decimal must be '.' or ',', got {decimal!r}")
    tokens = _make_tokens(below_tokens, missing_tokens)
    default_canonical = canonical_unit(default_unit, where="default_unit")
    if convert is not None and not isinstance(convert, Mapping):
        raise CompositionError(f"convert must be a dict part -> formula, got {convert!r}")

    frame, note = _load(source, sheet_name=sheet_name, index_col=index_col, sep=sep)
    where = "DataFrame" if note["source"] == "DataFrame" else repr(note["source"])
    _check_frame(frame, where)
    index = frame.index

    # parse (all columns when the parts are detected, else only the parts)
    if parts is None:
        parsed_all = {c: _parse_column(frame[c], tokens, decimal) for c in frame.columns}
    else:
        parsed_all = {}
    columns = _choose_columns(frame, parts, parsed_all, tokens, decimal)
    for c in columns:
        if c not in parsed_all:
            parsed_all[c] = _parse_column(frame[c], tokens, decimal)
        if parsed_all[c].n_bad:
            raise _bad_cell_error(c, parsed_all[c], index, tokens, decimal, auto=False)
    if len(columns) < 2:
        raise CompositionError(
            f"{len(columns)} part column(s) found ({list(columns)!r}); a composition needs at "
            f"least 2; the table's columns are {list(frame.columns)!r} (choose with parts=[...])"
        )
    plist = _make_parts(columns, parsed_all, units, default_unit)
    unit = _common_unit(plist, common_unit)
    col_dl = _column_limits(detection_limits, plist)
    conversions = _conversions(convert, plist)

    n, D = len(index), len(plist)
    status = np.empty((n, D), dtype=np.int8)
    raw = np.empty((n, D))
    dl = np.empty((n, D))
    cells = []  # per-column records for the report
    for j, p in enumerate(plist):
        st, r, lim, rec = _classify(p, col_dl[j], index, replacement, negative_is_below_detection)
        status[:, j], raw[:, j], dl[:, j] = st, r, lim
        cells.append(rec)

    # unit conversion, then the analytical total (as reported), then formulas
    ufac = np.array([unit_factor(p.unit, unit) for p in plist])
    raw *= ufac
    dl *= ufac
    # A total means something for an analysis reported in percent (majors), not
    # for a table of traces in ppm only or for point counts.
    total_checked = (
        bool(check_total)
        and unit != "count"
        and any(unit_factor(p.unit, "wt%") == 1.0 for p in plist)
    )
    if total_checked:
        to_wt = unit_factor(unit, "wt%")
        totals = np.where(status == _ST_OBS, raw, 0.0).sum(axis=1) * to_wt
    else:
        totals = np.full(n, np.nan)
    ffac = np.ones(D)
    final_names = [p.name for p in plist]
    for j, (target, factor) in conversions.items():
        ffac[j] = factor
        final_names[j] = target
    raw *= ffac
    dl *= ffac

    values, scale, not_replaced = _replace(
        raw, dl, status, replacement, fraction, index, final_names
    )

    flags, flag_mask, flag_reason = _flags(
        status, totals, total_checked, (lo, hi), not_replaced, index, final_names
    )

    cols = pd.Index(final_names)

    def frame_of(a):
        # the arrays are this function's own: no copy (pandas copies by default, which
        # at 10**6 rows held a second copy of every matrix at the peak)
        return pd.DataFrame(a, index=index, columns=cols, copy=False)

    report = _report(
        plist,
        cells,
        final_names,
        index,
        raw,
        dl,
        values,
        status,
        ufac,
        unit,
        conversions,
        replacement,
        fraction,
        scale,
        flag_mask,
        flag_reason,
        totals,
    )
    meta_cols = [c for c in frame.columns if c not in set(columns)]
    metadata = frame[meta_cols].copy() if meta_cols else pd.DataFrame(index=index)
    settings = {
        **note,
        "parts": [str(x) for x in final_names],
        "columns": {str(final_names[j]): str(p.column) for j, p in enumerate(plist)},
        "units_given": None if units is None else {str(k): str(v) for k, v in units.items()},
        "default_unit": default_canonical,
        "unit": unit,
        "conversions": {
            str(plist[j].name): {"to": str(t), "factor": float(f)}
            for j, (t, f) in conversions.items()
        },
        "detection_limits": _settings_limits(detection_limits),
        "replacement": replacement,
        "fraction": fraction,
        "negative_is_below_detection": bool(negative_is_below_detection),
        "check_total": bool(check_total),
        "total_checked": total_checked,
        "total_window": [lo, hi],
        "decimal": decimal,
        "below_tokens": list(tokens.below_given),
        "missing_tokens": list(tokens.missing_given),
        "index_col": index_col if index_col is None else str(index_col),
    }
    return Composition(
        values=frame_of(values),
        raw=frame_of(raw),
        status=_status_frame(status, index, cols),
        detection_limits=frame_of(dl),
        metadata=metadata,
        units={final_names[j]: p.unit_given for j, p in enumerate(plist)},
        unit=unit,
        report=report,
        flags=flags,
        settings=settings,
    )


# ----------------------------------------------------------------------------- steps


def _conversions(convert, plist: list[_Part]) -> dict[int, tuple[str, float]]:
    if not convert:
        return {}
    resolved = _per_part_option(convert, plist, "convert")
    names = [p.name for p in plist]
    out: dict[int, tuple[str, float]] = {}
    targets: dict[str, object] = {}
    for j, target in resolved.items():
        p = plist[j]
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
                f"convert {p.name!r} -> {target!r}: {target!r} is already a part; converting "
                "would give two parts of that name"
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
    return out


@dataclass
class _Cells:
    """Row positions of each kind of cell in one column, for the report."""

    text_read: np.ndarray
    missing: np.ndarray
    below: np.ndarray  # token or '<x' or zero
    below_how: np.ndarray  # object: how the limit was found, per position in ``below``
    negative: np.ndarray
    limit_given: np.ndarray  # float: limit in the column's own unit, per ``below`` position
    limit_negative: np.ndarray


def _first(mask: np.ndarray) -> int:
    return int(np.flatnonzero(mask)[0])


def _classify(p: _Part, col_dl: float, index, replacement, negative_is_below):
    """Status, raw number and limit (in the part's own unit) for each cell of one part."""
    parsed = p.parsed
    kind, number = parsed.kind, parsed.number
    n = len(kind)
    status = np.full(n, _ST_OBS, dtype=np.int8)
    raw = number.copy()
    lim = np.full(n, col_dl, dtype=float)
    is_num = kind == _NUMBER
    negative = is_num & (number < 0)
    zero = is_num & (number == 0)
    if negative.any() and not negative_is_below:
        i = _first(negative)
        more = (
            f" ({int(negative.sum())} negative cells in this column)" if negative.sum() > 1 else ""
        )
        raise CompositionError(
            f"negative value {parsed.originals([i])[0]!r} at {_place(index, i, p.column)}{more}; "
            "if negative numbers mean 'below a detection limit of that size', pass "
            "negative_is_below_detection=True"
        )
    if zero.any() and not np.isfinite(col_dl):
        i = _first(zero)
        raise CompositionError(
            f"zero at {_place(index, i, p.column)}: a zero is read as below detection, "
            f"which needs the limit; pass detection_limits={{{p.name!r}: ...}} "
            f"(in {p.unit_given})"
        )
    token = kind == _TOKEN_BELOW
    if token.any() and not np.isfinite(col_dl) and replacement != "none":
        i = _first(token)
        raise CompositionError(
            f"below-detection entry {parsed.originals([i])[0]!r} at {_place(index, i, p.column)} "
            f"has no detection limit; pass detection_limits={{{p.name!r}: ...}} "
            f"(in {p.unit_given}) or replacement='none'"
        )
    less = kind == _LESS_THAN
    below = token | less | zero
    missing = kind == _MISSING
    lim[less] = parsed.limit[less]
    lim[negative] = -number[negative]
    status[below | negative] = _ST_BDL
    status[missing] = _ST_MISS
    raw[below | negative | missing] = np.nan
    below_pos = np.flatnonzero(below)
    how = np.where(
        less[below_pos],
        "'<' entry",
        np.where(
            zero[below_pos],
            "zero, limit from detection_limits",
            "token, limit from detection_limits",
        ),
    ).astype(object)
    rec = _Cells(
        text_read=np.flatnonzero(parsed.text_read & ~negative & ~zero),
        missing=np.flatnonzero(missing),
        below=below_pos,
        below_how=how,
        negative=np.flatnonzero(negative),
        limit_given=lim[below_pos],
        limit_negative=lim[negative],
    )
    return status, raw, lim, rec


def _replace(raw, dl, status, replacement, fraction, index, names):
    """Values after replacement, the row scale factors, and rows left unreplaced."""
    n = raw.shape[0]
    below = status == _ST_BDL
    values = raw.copy()
    scale = np.ones(n)
    not_replaced = np.zeros(n, dtype=np.int8)  # 0 ok, 1 no observed part, 2 overload
    if replacement == "none" or not below.any():
        return values, scale, not_replaced
    if replacement == "simple":
        values[below] = fraction * dl[below]
        return values, scale, not_replaced
    observed = np.where(status == _ST_OBS, raw, 0.0)
    c = observed.sum(axis=1)
    load = fraction * np.where(below, dl, 0.0).sum(axis=1)
    has_below = below.any(axis=1)
    not_replaced[has_below & ~(c > 0)] = 1
    not_replaced[has_below & (c > 0) & (load >= c)] = 2
    rows = has_below & (not_replaced == 0)
    if rows.any():
        X = pd.DataFrame(observed[rows], index=index[rows], columns=pd.Index(names))
        out = multiplicative_replacement(
            X, np.where(below[rows], dl[rows], np.nan), fraction=fraction, below=below[rows]
        )
        values[rows] = out.to_numpy()
        scale[rows] = 1.0 - load[rows] / c[rows]
        values[status == _ST_MISS] = np.nan
    return values, scale, not_replaced


def _status_frame(codes: np.ndarray, index: pd.Index, cols: pd.Index) -> pd.DataFrame:
    """Status names from codes, column by column (pandas' string dtype where available)."""
    frame = pd.DataFrame(
        {
            j: pd.Series(_STATUS_NAMES[codes[:, j]], index=index, dtype="str", copy=False)
            for j in range(codes.shape[1])
        },
        index=index,
    )
    frame.columns = cols
    return frame


def _append(reason: np.ndarray, mask: np.ndarray, text) -> np.ndarray:
    text = np.asarray(text, dtype=object)
    joined = np.where(reason == "", text, reason + "; " + text)
    return np.where(mask, joined, reason)


def _number_text(x: np.ndarray, lo: float, hi: float) -> np.ndarray:
    """Totals with 2 decimals, more where rounding would hide that they are outside."""
    short = np.round(x, 2)
    inside = (short >= lo) & (short <= hi)
    return np.where(inside, np.round(x, 6), short).astype(str).astype(object)


def _flags(status, totals, total_checked, window, not_replaced, index, names):
    lo, hi = window
    observed_any = (status == _ST_OBS).any(axis=1)
    missing = status == _ST_MISS
    missing_any = missing.any(axis=1)
    out = np.zeros(len(index), dtype=bool)
    if total_checked:
        out = observed_any & ((totals < lo) | (totals > hi))
    flagged = ~observed_any | missing_any | out | (not_replaced > 0)
    pos = np.flatnonzero(flagged)
    reason = np.full(len(pos), "", dtype=object)
    reason = _append(reason, ~observed_any[pos], "no part observed")
    if missing_any[pos].any():
        listed = np.full(len(pos), "", dtype=object)
        for j, name in enumerate(names):
            m = missing[pos, j]
            listed = np.where(
                m, np.where(listed == "", str(name), listed + ", " + str(name)), listed
            )
        reason = _append(reason, missing_any[pos], "missing part(s): " + listed)
    if total_checked and out[pos].any():
        text = (
            "analytical total " + _number_text(totals[pos], lo, hi) + f" wt% outside {lo:g}-{hi:g}"
        )
        reason = _append(reason, out[pos], text)
    nr = not_replaced[pos]
    reason = _append(reason, nr == 1, "below-detection values not replaced (no observed part)")
    reason = _append(
        reason,
        nr == 2,
        "below-detection values not replaced (the replacements would reach the observed total)",
    )
    total_col = (
        np.where(observed_any[pos], totals[pos], np.nan)
        if total_checked
        else np.full(len(pos), np.nan)
    )
    flags = pd.DataFrame({"reason": reason, "total": total_col}, index=index[pos])
    if len(pos) == 0:
        flags = flags.astype({"reason": object, "total": float})
    return flags, flagged, reason


def _chunk(index, pos, column, action, original, value, detail) -> pd.DataFrame:
    m = len(pos)
    rows = np.empty(m, dtype=object)
    rows[:] = (
        list(index.take(pos))
        if isinstance(index, pd.MultiIndex)
        else index.take(pos).to_numpy(dtype=object)
    )
    return pd.DataFrame(
        {
            "row": rows,
            "column": np.full(m, column, dtype=object) if m else np.empty(0, dtype=object),
            "action": np.full(m, action, dtype=object),
            "original": np.asarray(original, dtype=object) if m else np.empty(0, dtype=object),
            "value": np.asarray(value, dtype=float) if m else np.empty(0),
            "detail": np.asarray(detail, dtype=object) if m else np.empty(0, dtype=object),
        }
    )


def _one(column, action, original, value, detail) -> pd.DataFrame:
    return pd.DataFrame(
        {
            "row": np.array([None], dtype=object),
            "column": np.array([column], dtype=object),
            "action": np.array([action], dtype=object),
            "original": np.array([original], dtype=object),
            "value": np.array([value], dtype=float),
            "detail": np.array([detail], dtype=object),
        }
    )


def _text(x) -> np.ndarray:
    """Numbers as short text with 6 significant digits ('5', '0.0003', '1.5e-07')."""
    values = np.asarray(x, dtype=float)
    return np.char.mod("%.6g", values).astype(object) if values.size else values.astype(object)


def _report(
    plist,
    cells,
    names,
    index,
    raw,
    dl,
    values,
    status,
    ufac,
    unit,
    conversions,
    replacement,
    fraction,
    scale,
    flag_mask,
    flag_reason,
    totals,
) -> pd.DataFrame:
    pieces = []
    for j, (p, rec) in enumerate(zip(plist, cells, strict=True)):
        name, u = names[j], p.unit_given
        orig = p.parsed.originals
        pos = rec.text_read
        if len(pos):
            pieces.append(
                _chunk(
                    index,
                    pos,
                    name,
                    "parsed_text",
                    orig(pos),
                    raw[pos, j],
                    "read as " + _text(p.parsed.number[pos]) + f" {u}",
                )
            )
        pos = rec.missing
        if len(pos):
            pieces.append(
                _chunk(
                    index,
                    pos,
                    name,
                    "missing",
                    orig(pos),
                    np.nan,
                    np.full(len(pos), "missing value", dtype=object),
                )
            )
        pos = rec.below
        if len(pos):
            known = np.isfinite(rec.limit_given)
            detail = np.where(
                known,
                "limit " + _text(rec.limit_given) + f" {u} (" + rec.below_how + ")",
                "limit unknown (" + rec.below_how + ")",
            )
            pieces.append(
                _chunk(index, pos, name, "below_detection", orig(pos), dl[pos, j], detail)
            )
        pos = rec.negative
        if len(pos):
            pieces.append(
                _chunk(
                    index,
                    pos,
                    name,
                    "negative_as_below_detection",
                    orig(pos),
                    dl[pos, j],
                    "negative value read as below detection, limit "
                    + _text(rec.limit_negative)
                    + f" {u}",
                )
            )
    for j, p in enumerate(plist):
        if p.unit != unit:
            pieces.append(
                _one(
                    names[j],
                    "unit_converted",
                    p.unit_given,
                    ufac[j],
                    f"{p.unit_given} -> {unit}, factor {ufac[j]:g}",
                )
            )
    for j, (target, factor) in conversions.items():
        pieces.append(
            _one(
                target,
                "formula_converted",
                str(plist[j].name),
                factor,
                f"{plist[j].name} -> {target}, factor {factor:.4f}",
            )
        )
    if replacement != "none":
        repl = (status == _ST_BDL) & np.isfinite(values)
        for j in range(len(plist)):
            pos = np.flatnonzero(repl[:, j])
            if not len(pos):
                continue
            detail = (
                f"{replacement}: {fraction:g} x detection limit " + _text(dl[pos, j]) + f" {unit}"
            )
            if replacement == "multiplicative":
                detail = detail + "; observed parts of the row scaled by " + _text(scale[pos])
            pieces.append(
                _chunk(
                    index,
                    pos,
                    names[j],
                    "replaced",
                    plist[j].parsed.originals(pos),
                    values[pos, j],
                    detail,
                )
            )
    fpos = np.flatnonzero(flag_mask)
    if len(fpos):
        pieces.append(
            _chunk(
                index,
                fpos,
                None,
                "flagged",
                np.full(len(fpos), None, dtype=object),
                totals[fpos],
                flag_reason,
            )
        )
    if not pieces:
        return pd.DataFrame(
            {c: pd.Series(dtype=float if c == "value" else object) for c in REPORT_COLUMNS}
        )
    return pd.concat(pieces, ignore_index=True)[list(REPORT_COLUMNS)]
