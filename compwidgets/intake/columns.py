"""Every input column ends as a part, metadata or the row labels, with a reason code.

Rules (automatic detection, ``parts=None``), in this order:

1. the row labels: ``index_col=`` names a column, or a sample-id column is
   detected (a header such as ``Sample ID`` or the first column, holding
   unique text in every row); ``index_col=False`` keeps the labels given;
2. totals and sums (``Total``, ``Sum``, ``Total oxides``, ``Sum REE (ppm)``,
   ``ΣREE``) are metadata; a total is compared with the sum of the parts;
   analytes such as ``Total S``, ``Fe2O3T`` and ``LOI`` are parts;
3. coordinates, headers with a length/angle/temperature unit or another unit
   that is no composition unit, and sample properties (``pH``, ``Year``) are
   metadata;
4. a column whose header names a composition unit, an element, an oxide or an
   analyte is a part: every cell must be readable, else the error names the
   column and its first unreadable cells; an all-empty one is refused too;
5. any other column is a part when all its cells are readable with at least
   one number, else metadata (text, or numbers mixed with text when fewer
   than half are numbers; mostly numbers with unreadable cells is an error).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..core import CompositionError
from . import codes
from .cells import Parsed, bad_cell_error, label, parse_column
from .facts import ColumnFacts, SummaryFrame
from .names import (
    header_unit,
    is_analyte,
    is_coordinate,
    is_id_header,
    is_metadata_name,
    is_non_part_unit,
    total_kind,
)
from .state import INDEX, METADATA, PART, Column, IntakeState


def _default_labels(index: pd.Index) -> bool:
    """True for the labels pandas makes up: 0, 1, ..., n-1 without a name."""
    return (
        isinstance(index, pd.RangeIndex)
        and index.start == 0
        and index.step == 1
        and index.name is None
    )


def _column_by_option(names: list[str], key, what: str, where: str) -> str:
    if isinstance(key, str) and key in names:
        return key
    if isinstance(key, (int, np.integer)) and not isinstance(key, bool):
        if 0 <= int(key) < len(names):
            return names[int(key)]
        raise CompositionError(
            f"{where}: {what}={key!r} is not a column position (the table has "
            f"{len(names)} columns, counted from 0)"
        )
    raise CompositionError(f"{where}: {what}={key!r} is not a column; columns are {names!r}")


def _blank(col: pd.Series) -> np.ndarray:
    """NaN/None cells and text cells that are empty after stripping."""
    blank = np.array(col.isna().to_numpy(), dtype=bool)
    if pd.api.types.is_string_dtype(col.dtype) and not pd.api.types.is_object_dtype(col.dtype):
        blank |= (col.str.strip() == "").to_numpy(dtype=bool, na_value=False)
    elif pd.api.types.is_object_dtype(col.dtype):
        text = col[~blank]
        is_str = text.map(lambda v: isinstance(v, str), na_action="ignore").to_numpy(dtype=bool)
        if is_str.any():
            empty = text[is_str].astype(str).str.strip() == ""
            pos = np.flatnonzero(~blank)[is_str]
            blank[pos[empty.to_numpy(dtype=bool)]] = True
    return blank


def _id_problem(col: pd.Series) -> str:
    """'' when ``col`` can label the rows, else why not."""
    if isinstance(col, ColumnFacts):
        return col.id_problem()
    blank = _blank(col)
    if blank.any():
        return f"{int(blank.sum())} row(s) without a value (first at position {_first(blank)})"
    if not col.is_unique:
        dup = col[col.duplicated(keep=False)].unique()[:3].tolist()
        return f"repeated values such as {dup!r}"
    return ""


def _first(mask: np.ndarray) -> int:
    return int(np.flatnonzero(mask)[0])


def _textual(col: pd.Series) -> bool:
    if isinstance(col, ColumnFacts):
        return col.textual
    dtype = col.dtype
    if pd.api.types.is_string_dtype(dtype):
        return True
    if pd.api.types.is_object_dtype(dtype):
        return bool(col.map(lambda v: isinstance(v, str)).all())
    return False


def _mostly_numbers(col: pd.Series) -> bool:
    if isinstance(col, ColumnFacts):
        return col.mostly_numbers
    numbers = pd.to_numeric(col, errors="coerce")
    return bool(numbers.notna().mean() >= 0.5)


def id_candidate(pos: int, name: str, names: list[str]) -> bool:
    """Whether the header (and position) of a column let it hold the sample ids."""
    stem, unit_text, _ = header_unit(name)
    if unit_text is not None or total_kind(stem) is not None:
        return False
    if is_id_header(stem):
        return True
    return pos == 0 and not is_analyte(stem) and not is_coordinate(stem, names)


def _detect_id(frame: pd.DataFrame, names: list[str]) -> tuple[str | None, str, dict]:
    """The sample-id column (or None), why, and id-like columns that could not serve."""
    refused: dict[str, str] = {}
    for pos, name in enumerate(names):
        if not id_candidate(pos, name, names):
            continue
        by_header = is_id_header(header_unit(name)[0])
        col = frame[name]
        dtype = col.dtype
        integer = pd.api.types.is_integer_dtype(dtype) and not pd.api.types.is_bool_dtype(dtype)
        categorical = isinstance(dtype, pd.CategoricalDtype)
        if not (_textual(col) or (by_header and (integer or categorical))):
            continue
        if not by_header and _mostly_numbers(col):
            continue  # numbers without an id header may be a part
        problem = _id_problem(col)
        if problem:
            if by_header:
                refused[name] = problem
            continue
        why = (
            "the header names a sample id" if by_header else "the first column"
        ) + f", a unique value in each of the {len(col):,} rows"
        return name, why, refused
    return None, "", refused


def choose_index(st: IntakeState) -> None:
    """Set the row labels: the frame's own, a named column, a detected sample id, or positions."""
    frame = st.loaded.frame
    names = [str(c) for c in frame.columns]
    option = st.options.index_col
    where = st.where
    refused: dict[str, str] = {}
    column, why = None, ""
    if option is False:
        st.index_source = "frame" if not _default_labels(frame.index) else "positions"
    elif option is not None:
        column = _column_by_option(names, option, "index_col", where)
        if not _default_labels(frame.index) and frame.index.name is not None:
            raise CompositionError(
                f"{where}: index_col={option!r} would replace the DataFrame's own index "
                f"{frame.index.name!r}; reset_index() first (its labels then become a column) "
                "or leave index_col unset"
            )
        problem = _id_problem(frame[column])
        if problem:
            raise CompositionError(
                f"{where}: index_col column {column!r} cannot label the rows: {problem}; "
                "every row needs its own label so that each value stays traceable"
            )
        st.index_source, why = "index_col", "named by index_col="
    elif _default_labels(frame.index):
        column, why, refused = _detect_id(frame, names)
        st.index_source = "detected" if column is not None else "positions"
    else:
        st.index_source = "frame"
    if column is not None:
        index = pd.Index(frame[column].to_numpy(), name=column)
        st.frame = frame.drop(columns=[column]).set_axis(index, axis=0)
        st.index_column = column
        code = codes.INDEX_NAMED if st.index_source == "index_col" else codes.INDEX_DETECTED
        st.columns[column] = Column(column, INDEX, code, f"row labels: {why}")
    else:
        st.frame = frame
    st.index = st.frame.index
    st.refused_ids = refused
    _check_labels(st)


def _check_labels(st: IntakeState) -> None:
    frame, where = st.frame, st.where
    if frame.shape[0] == 0 or frame.shape[1] == 0:
        raise CompositionError(
            f"{where}: empty table ({frame.shape[0]} rows x {frame.shape[1]} columns)"
        )
    dup_rows = (
        frame.duplicate_labels()
        if isinstance(frame, SummaryFrame)
        else frame.index[frame.index.duplicated()].unique()
    )
    if len(dup_rows):
        shown = dup_rows[:5].tolist()
        more = f" and {len(dup_rows) - 5} more" if len(dup_rows) > 5 else ""
        raise CompositionError(
            f"{where}: duplicate index labels {shown!r}{more}; every row needs its own label "
            "so that each value stays traceable (e.g. use a sample-id column as the index)"
        )


def _parse(st: IntakeState, name: str) -> Parsed:
    if isinstance(st.frame, SummaryFrame):  # partition-wise summaries stand for the cells
        return st.frame[name]
    loaded = st.loaded
    formulas = loaded.formulas.get(name, {})
    return parse_column(
        st.frame[name],
        name,
        st.options,
        formula_pos=np.fromiter(formulas, dtype=np.intp, count=len(formulas)),
        notes=loaded.notes.get(name),
    )


def _unit_option_columns(st: IntakeState) -> set[str]:
    units = st.options.units or {}
    names = [str(c) for c in st.frame.columns]
    found = set()
    for key in units:
        for name in names:
            if key == name or key == header_unit(name)[0]:
                found.add(name)
    return found


def _total_column(name: str, stem: str, kind: str, st: IntakeState, unit_text) -> Column:
    if kind in ("total", "majors"):
        parsed = _parse(st, name)
        if parsed.n_numbers == 0:
            return Column(
                name,
                METADATA,
                codes.TOTAL_COLUMN,
                "a total column without numbers: not compared",
            )
        what = "the parts reported in percent (the majors)" if kind == "majors" else "the parts"
        return Column(
            name,
            METADATA,
            codes.TOTAL_COLUMN,
            f"stated total: kept out of the parts and compared per row with the sum of {what}",
            parsed=parsed,
            unit=unit_text or "",
            total_kind=kind,
        )
    what = "a group of parts" if kind == "sum" else "something other than the parts"
    return Column(
        name,
        METADATA,
        codes.SUM_COLUMN,
        f"a sum of {what}: kept out of the parts, not compared",
    )


def _by_header(st: IntakeState, name: str, names: list[str]) -> Column | None:
    """The role a header alone decides (metadata), or None when the cells must tell."""
    stem, unit_text, canon = header_unit(name)
    kind = total_kind(stem)
    if kind is not None:
        return _total_column(name, stem, kind, st, unit_text)
    if name in st.refused_ids:
        return Column(
            name,
            METADATA,
            codes.ID_NOT_UNIQUE,
            f"looks like a sample id but cannot label the rows: {st.refused_ids[name]}",
        )
    if is_non_part_unit(unit_text):
        return Column(
            name, METADATA, codes.NON_PART_UNIT, f"unit {unit_text!r} is no composition unit"
        )
    if canon is None and is_coordinate(stem, names):
        return Column(name, METADATA, codes.COORDINATE_COLUMN, "a coordinate")
    if is_id_header(stem) and unit_text is None:
        return Column(name, METADATA, codes.TEXT_COLUMN, "an id or label column")
    if canon is None and is_metadata_name(stem):
        return Column(
            name, METADATA, codes.METADATA_NAME, f"{stem!r} is a sample property, not a part"
        )
    return None


def _decide(st: IntakeState, name: str, names: list[str], unit_given: set[str]) -> Column:
    """Role of one column under automatic detection."""
    fixed = _by_header(st, name, names)
    if fixed is not None:
        return fixed
    stem, unit_text, canon = header_unit(name)
    if unit_text is not None and canon is None and not is_analyte(stem) and name not in unit_given:
        return Column(
            name, METADATA, codes.NON_PART_UNIT, f"unit {unit_text!r} is no composition unit"
        )
    part_like = canon is not None or is_analyte(stem) or name in unit_given
    parsed = _parse(st, name)
    if parsed.n_bad == 0:
        if parsed.n_values == 0:
            if part_like:
                raise _no_value_error(st, name, parsed)
            return Column(name, METADATA, codes.EMPTY_COLUMN, "every cell is empty or missing")
        if canon is not None:
            code, detail = codes.PART_UNIT_HEADER, f"the header names the unit {unit_text!r}"
        elif parsed.n_unit_cells:
            code, detail = codes.PART_UNIT_IN_CELLS, "the cells carry the unit"
        elif is_analyte(stem):
            code, detail = codes.PART_ANALYTE_HEADER, f"{stem!r} names an element or analyte"
        elif name in unit_given:
            code, detail = codes.PART_UNIT_HEADER, "its unit is given in units="
        else:
            code, detail = codes.PART_NUMERIC, "numbers only"
        return Column(name, PART, code, detail, parsed=parsed)
    readable = parsed.n_readable
    looks_numeric = readable and parsed.n_numbers >= 0.5 * readable
    if part_like or looks_numeric or parsed.n_unit_cells:
        why = (
            "its header names a part"
            if part_like
            else "its cells are mostly numbers"
            if looks_numeric
            else "its cells carry a composition unit"
        )
        raise bad_cell_error(name, parsed, st.index, st.options, auto=True, why=why)
    if parsed.n_values:
        n_bad = parsed.n_bad
        first = parsed.first_bad_texts(2)
        return Column(
            name,
            METADATA,
            codes.MIXED_COLUMN,
            f"{parsed.n_values:,} numbers mixed with {n_bad:,} text cells such as {first!r}",
        )
    return Column(name, METADATA, codes.TEXT_COLUMN, "text")


def _no_value_error(st: IntakeState, name: str, parsed: Parsed) -> CompositionError:
    index = st.index
    if isinstance(parsed, ColumnFacts):
        parsed, index = parsed.source("values")
    first = range(min(3, len(parsed.kind)))
    shown = ", ".join(
        f"{v!r} (row {label(index, i)!r})"
        for i, v in zip(first, parsed.originals(first), strict=True)
    )
    return CompositionError(
        f"column {name!r} names a part but holds no value: all {len(parsed.kind):,} cells are "
        f"empty or missing ({shown}, ...); drop the column or choose the parts with parts=[...]"
    )


def _named_parts(st: IntakeState, names: list[str]) -> list[str]:
    parts = st.options.parts
    by_stem: dict = {}
    for c in names:
        by_stem.setdefault(header_unit(c)[0], []).append(c)
    chosen, unknown = [], []
    for p in parts:
        key = p if isinstance(p, str) else str(p)
        if key in names:
            chosen.append(key)
        elif len(by_stem.get(key, [])) == 1:
            chosen.append(by_stem[key][0])
        else:
            unknown.append(p)
    if unknown:
        if st.index_column is not None and any(str(p) == st.index_column for p in unknown):
            raise CompositionError(
                f"parts: {st.index_column!r} holds the row labels (a sample-id column); "
                "pass index_col=False to read it otherwise"
            )
        raise CompositionError(
            f"parts: unknown column name(s) {unknown!r}; the table's columns are "
            f"{list(st.loaded.frame.columns)!r}"
        )
    dup = sorted({c for c in chosen if chosen.count(c) > 1})
    if dup:
        raise CompositionError(f"parts: column(s) {dup!r} named more than once")
    return chosen


def classify_columns(st: IntakeState) -> None:
    """Decide the role of every column (see the module docstring) and parse the parts."""
    names = [str(c) for c in st.frame.columns]
    account: dict[str, Column] = {}
    if st.options.parts is not None:
        ordered = _named_parts(st, names)
        chosen = set(ordered)
        for name in names:
            if name in chosen:
                parsed = _parse(st, name)
                if parsed.n_bad:
                    raise bad_cell_error(name, parsed, st.index, st.options, auto=False)
                account[name] = Column(name, PART, codes.PART_NAMED, "named in parts=", parsed)
                continue
            fixed = _by_header(st, name, names)
            if fixed is None:
                fixed = Column(name, METADATA, codes.NOT_IN_PARTS, "not named in parts=")
            account[name] = fixed
    else:
        unit_given = _unit_option_columns(st)
        for name in names:
            account[name] = _decide(st, name, names, unit_given)
        ordered = [name for name in names if account[name].role == PART]
    # input order, the index column in its place
    order = [str(c) for c in st.loaded.frame.columns]
    merged = {**st.columns, **account}
    st.columns = {name: merged[name] for name in order}
    st.part_columns = ordered
    if len(ordered) < 2:
        found, n_parts = ordered, len(ordered)
        raise CompositionError(
            f"{n_parts} part column(s) found ({found!r}); a composition needs at least 2; the "
            f"table's columns are {order!r} (choose with parts=[...])"
        )
