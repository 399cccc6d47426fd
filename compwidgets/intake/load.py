"""Loading the table: a DataFrame as given, or a CSV/TSV/TXT or Excel file read as text.

Headers of files are read here, not left to pandas: a duplicated header is
refused (pandas would rename the second ``La (ppm).1`` and read it as one more
part), and a header that is not text (a number, a date) is converted to text
and reported. Excel ``.xlsx`` sheets are read with openpyxl: a formula cell is
read from its stored result (reported), a formula without one is named in the
error of its column.
"""

from __future__ import annotations

import datetime as _dt
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from ..core import CompositionError
from .names import name_text
from .options import Options

#: Extensions read as delimited text / as spreadsheets.
TEXT_EXTENSIONS = (".csv", ".tsv", ".txt")
EXCEL_EXTENSIONS = (".xlsx", ".xlsm", ".xls")


class MissingFileError(CompositionError, FileNotFoundError):
    """The path given to read a table from names no file (both error kinds catch it)."""


@dataclass
class Loaded:
    """The table with text column names, where it came from, and notes on its cells."""

    frame: pd.DataFrame
    note: dict
    where: str
    from_file: bool
    renamed: list = field(default_factory=list)  # (new name, name as given)
    formulas: dict = field(default_factory=dict)  # column -> {row position: formula}
    notes: dict = field(default_factory=dict)  # column -> {row position: hint}


def _ordinal_list(positions: list[int]) -> str:
    shown = [str(p + 1) for p in positions]
    return " and ".join([", ".join(shown[:-1]), shown[-1]]) if len(shown) > 1 else shown[0]


def refuse_duplicate_names(names: list[str], where: str, what: str = "column names") -> None:
    """Raise naming every duplicated name and the positions (counting from 1) it holds."""
    seen: dict[str, list[int]] = {}
    for i, name in enumerate(names):
        seen.setdefault(name, []).append(i)
    dup = {name: pos for name, pos in seen.items() if len(pos) > 1}
    if not dup:
        return
    listed = "; ".join(
        f"{name!r} at columns {_ordinal_list(pos)}" for name, pos in list(dup.items())[:5]
    )
    raise CompositionError(
        f"{where}: duplicate {what} {list(dup)[:5]!r} ({listed}, counting from 1); every "
        "column needs its own name (a second copy would be read as a part of its own, "
        "losing its unit): rename or drop one"
    )


def _text_names(columns, where: str) -> tuple[list[str], list]:
    names, renamed = [], []
    for c in columns:
        text = name_text(c)
        if not isinstance(c, str):
            renamed.append((text, c))
        names.append(text)
    refuse_duplicate_names(names, where)
    return names, renamed


def _guess_sep(path: Path, encoding: str) -> str:
    """The delimiter most frequent in the header line (',' when none is found)."""
    with open(path, encoding=encoding, errors="replace") as fh:
        header = fh.readline()
    counts = {sep: header.count(sep) for sep in ("\t", ";", ",", "|")}
    best = max(counts, key=counts.get)
    return best if counts[best] > 0 else ","


def _header_and_body(
    raw: pd.DataFrame, where: str, header_cells: list | None = None
) -> tuple[pd.DataFrame, list]:
    """First row as the header (blank -> 'Unnamed: i', stripped), the rest as the body.

    ``header_cells`` are the header cells as the file holds them (numbers, dates),
    when ``raw`` has them as text already.
    """
    if raw.shape[0] == 0:
        raise CompositionError(f"{where}: the file is empty")
    header = []
    renamed = []
    cells = header_cells if header_cells is not None else raw.iloc[0].tolist()
    for i, h in enumerate(cells):
        if h is None or (isinstance(h, float) and np.isnan(h)) or not str(h).strip():
            header.append(f"Unnamed: {i}")
        elif isinstance(h, str):
            header.append(h.strip())
        else:
            header.append(name_text(h))
            renamed.append((header[-1], h))
    refuse_duplicate_names(header, where, "headers")
    body = raw.iloc[1:].reset_index(drop=True)
    body.columns = header
    return body, renamed


def _excel_text(v) -> str:
    """A cell as pandas' ``read_excel(dtype=str)`` writes it ('12' for 12.0, '' for empty)."""
    if v is None:
        return ""
    if isinstance(v, str):
        return v
    if isinstance(v, bool):
        return str(v)
    if isinstance(v, float) and v.is_integer():
        return str(int(v))
    return str(v)


def _is_formula(v) -> bool:
    return (isinstance(v, str) and v.startswith("=") and len(v) > 1) or (
        type(v).__name__ == "ArrayFormula"
    )


def _read_xlsx(path: Path, sheet_name, where: str) -> tuple[pd.DataFrame, list, dict, dict]:
    import openpyxl

    def rows_of(data_only: bool) -> list[tuple]:
        book = openpyxl.load_workbook(path, read_only=True, data_only=data_only)
        try:
            if isinstance(sheet_name, int):
                try:
                    sheet = book.worksheets[sheet_name]
                except IndexError:
                    raise CompositionError(
                        f"{where}: no sheet number {sheet_name} (the file has "
                        f"{len(book.worksheets)}: {book.sheetnames!r})"
                    ) from None
            else:
                if sheet_name not in book.sheetnames:
                    raise CompositionError(
                        f"{where}: no sheet named {sheet_name!r}; sheets: {book.sheetnames!r}"
                    )
                sheet = book[sheet_name]
            return [tuple(r) for r in sheet.iter_rows(values_only=True)]
        finally:
            book.close()

    rows = rows_of(data_only=False)
    while rows and all(v is None for v in rows[-1]):
        rows.pop()
    if not rows:
        raise CompositionError(f"{where}: the sheet is empty")
    width = max(
        (max((i + 1 for i, v in enumerate(r) if v is not None), default=0) for r in rows),
        default=0,
    )
    rows = [tuple(r[:width]) + (None,) * (width - len(r)) for r in rows]
    formula_cells = [
        (i, j) for i, r in enumerate(rows[1:], start=1) for j, v in enumerate(r) if _is_formula(v)
    ]
    stored = {}
    if formula_cells:
        cached = rows_of(data_only=True)
        for i, j in formula_cells:
            value = cached[i][j] if i < len(cached) and j < len(cached[i]) else None
            stored[(i, j)] = value
    formulas: dict = {}
    notes: dict = {}
    table = [[_excel_text(v) for v in r] for r in rows]
    for (i, j), value in stored.items():
        formula = rows[i][j] if isinstance(rows[i][j], str) else str(rows[i][j].text)
        if value is None:
            table[i][j] = formula
        else:
            table[i][j] = _excel_text(value)
            formulas.setdefault(j, {})[i - 1] = formula
    for i, r in enumerate(rows[1:]):
        for j, v in enumerate(r):
            if isinstance(v, (_dt.date, _dt.time, _dt.timedelta)):
                notes.setdefault(j, {})[i] = "a date or time cell of the spreadsheet"
    raw = pd.DataFrame(table, dtype="str")
    body, renamed = _header_and_body(raw, where, list(rows[0]))
    names = list(body.columns)
    return (
        body,
        renamed,
        {names[j]: v for j, v in formulas.items()},
        {names[j]: v for j, v in notes.items()},
    )


#: Extensions of Parquet files (read through dask, as a table larger than memory).
PARQUET_EXTENSIONS = (".parquet", ".pq")


def is_lazy_source(source) -> bool:
    """A dask DataFrame, a Parquet file or folder, or a glob of files (read through dask)."""
    from ..core._lazy import is_lazy

    if is_lazy(source):
        return True
    if not isinstance(source, (str, os.PathLike)):
        return False
    text = os.fspath(source)
    path = Path(text)
    if path.suffix.lower() in PARQUET_EXTENSIONS:
        return True
    if path.is_dir():
        return any(path.glob("*.parquet"))
    # a glob of files; a file whose own name holds '*', '?' or '[' is read as that file
    return any(ch in text for ch in "*?[") and not path.is_file()


def load(source, options: Options) -> Loaded:
    """The table as given (DataFrame) or read as text (files)."""
    if isinstance(source, pd.DataFrame):
        if options.sep is not None:
            raise CompositionError("sep applies to text files only, not to a DataFrame")
        where = "DataFrame"
        names, renamed = _text_names(list(source.columns), where)
        frame = source
        if renamed or isinstance(source.columns, pd.MultiIndex):
            frame = source.set_axis(pd.Index(names, dtype=object), axis=1)
        return Loaded(frame, {"source": "DataFrame"}, where, False, renamed)
    if not isinstance(source, (str, os.PathLike)):
        raise CompositionError(
            f"source must be a DataFrame or a path to a .csv/.tsv/.txt/.xlsx/.xls file, "
            f"got {type(source).__name__}"
        )
    path = Path(source)
    where = repr(str(path))
    ext = path.suffix.lower()
    if ext not in TEXT_EXTENSIONS + EXCEL_EXTENSIONS:
        raise CompositionError(
            f"{str(path)!r}: unknown file extension {path.suffix or '(none)'!r}; read "
            f"{', '.join(TEXT_EXTENSIONS + EXCEL_EXTENSIONS)} files, or pass a DataFrame"
        )
    if not path.is_file():
        raise MissingFileError(f"no such file: {str(path)!r}")
    note = {"source": str(path), "sheet_name": None, "sep": None, "encoding": None}
    formulas: dict = {}
    notes: dict = {}
    try:
        if ext in TEXT_EXTENSIONS:
            raw = None
            for encoding in ("utf-8-sig", "latin-1"):
                use_sep = options.sep or ("\t" if ext == ".tsv" else _guess_sep(path, encoding))
                try:
                    raw = pd.read_csv(
                        path,
                        sep=use_sep,
                        dtype=str,
                        keep_default_na=False,
                        header=None,
                        encoding=encoding,
                    )
                    break
                except UnicodeDecodeError:
                    continue
            note.update(sep=use_sep, encoding=encoding)
            frame, renamed = _header_and_body(raw, where)
        else:
            sheet_name = options.sheet_name
            if sheet_name is None:
                raise CompositionError(
                    f"{str(path)!r}: sheet_name=None would read every sheet; name one sheet"
                )
            if not isinstance(sheet_name, (int, str)) or isinstance(sheet_name, bool):
                raise CompositionError(
                    f"{str(path)!r}: sheet_name must be a sheet number or name, got {sheet_name!r}"
                )
            if ext == ".xls":
                raw = pd.read_excel(
                    path, sheet_name=sheet_name, dtype=str, keep_default_na=False, header=None
                )
                frame, renamed = _header_and_body(raw, where)
            else:
                frame, renamed, formulas, notes = _read_xlsx(path, sheet_name, where)
            note["sheet_name"] = sheet_name
    except pd.errors.EmptyDataError:
        raise CompositionError(f"{str(path)!r}: the file is empty") from None
    except ImportError as err:
        raise ImportError(
            f"{str(path)!r}: reading {ext} files needs an extra package ({err}); "
            "save the sheet as .xlsx (read with openpyxl) or .csv"
        ) from None
    except (ValueError, KeyError, IndexError, OSError) as err:
        if isinstance(err, CompositionError):
            raise
        raise CompositionError(f"{str(path)!r}: cannot read the table ({err})") from None
    return Loaded(frame, note, where, True, renamed, formulas, notes)
