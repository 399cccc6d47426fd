"""Intake of a table larger than memory: the in-memory rules, partition by partition.

Three steps, so that a table read in partitions gives exactly what it gives
read whole (:func:`compwidgets.read_composition` on the same rows):

1. **Facts** (one pass): every partition is parsed by the in-memory cell
   rules into :class:`~compwidgets.intake.facts.ColumnFacts` (counts of
   numbers, unreadable cells, units in cells, blanks, hashes of the candidate
   id columns), which add up exactly. The column rules, the sample-id choice,
   the units, limits and conversions are then decided on the combined facts
   by the very functions of the in-memory intake; bad input is refused here,
   with the error of the in-memory rules (the partition holding the first
   offending cell is parsed again to name it).
2. **Totals** (a second pass, only when a stated total column is compared):
   which parts a plain total sums is decided from the median difference over
   all rows, and the counts of the column's report entry are exact.
3. **Per partition, lazily**: the in-memory steps run on each partition with
   every decision fixed (:class:`Plan`), giving the partition's values, raw
   numbers, status, limits, metadata, report entries and flags.
"""

from __future__ import annotations

import dataclasses
import glob as _glob
import os
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import pandas as pd

from ..composition import REPORT_COLUMNS, Composition
from ..core import CompositionError
from ..intake import columns as _columns
from ..intake import report as _report
from ..intake import totals as _totals
from ..intake.cells import NUMBER, TOKEN_BELOW, parse_column
from ..intake.facts import ColumnFacts, SummaryFrame, repeated_values
from ..intake.load import (
    PARQUET_EXTENSIONS,
    Loaded,
    MissingFileError,
    is_lazy_source,
    refuse_duplicate_names,
)
from ..intake.names import name_text
from ..intake.options import Options
from ..intake.parts import (
    choose_common_unit,
    column_limits,
    make_parts,
    read_part,
    read_parts,
    resolve_conversions,
)
from ..intake.replace import replace_below
from ..intake.state import IntakeState, Part
from ..units import unit_factor

#: Report actions that name a row (written partition by partition); the others
#: (columns, settings, conversions) are written once.
#: Rows of a partition put through the in-memory steps at a time (bounds the memory of a
#: task whatever the size of the partitions).
CHUNK_ROWS = 131_072
ROW_ACTIONS = (
    "parsed_text",
    "missing",
    "below_detection",
    "negative_as_below_detection",
    "replaced",
    "scaled",
    "total_not_compared",
    "flagged",
)


# ------------------------------------------------------------------ loading
def load_lazy(source, options: Options):
    """(dask DataFrame with text column names, note, where, from_file, renamed)."""
    import dask.dataframe as dd

    from ..core._lazy import is_lazy

    if is_lazy(source):
        if not isinstance(source, dd.DataFrame):
            raise CompositionError("read_composition needs a dask DataFrame, not a Series")
        if options.sep is not None:
            raise CompositionError("sep applies to text files only, not to a DataFrame")
        where = "dask DataFrame"
        names, renamed = [], []
        for c in source.columns:
            text = name_text(c)
            if not isinstance(c, str):
                renamed.append((text, c))
            names.append(text)
        refuse_duplicate_names(names, where)
        frame = source
        if renamed:
            frame = source.rename(columns=dict(zip(source.columns, names, strict=True)))
        return frame, {"source": "dask DataFrame"}, where, False, renamed
    text = os.fspath(source)
    where = repr(text)
    files = sorted(_glob.glob(text)) if any(ch in text for ch in "*?[") else [text]
    if not files or not all(os.path.exists(f) for f in files):
        raise MissingFileError(f"no such file: {text!r}")
    suffixes = {Path(f).suffix.lower() for f in files if not os.path.isdir(f)}
    note = {"source": text, "sheet_name": None, "sep": None, "encoding": None}
    if suffixes <= set(PARQUET_EXTENSIONS):
        src = files if len(files) > 1 else files[0]
        stored = _stored_index(files)
        frame = dd.read_parquet(src, index=None if stored else False)  # None: the stored one
        if stored and frame._meta.index.name in _PLACEHOLDER_INDEX_NAMES:
            frame = frame.rename_axis(None)  # stored unnamed: read back unnamed
        names = [str(c) for c in frame.columns]
        refuse_duplicate_names(names, where)
        # row labels stored as the files' index are the table's own (as a DataFrame's)
        return frame, note, where, not stored, []
    if suffixes <= {".csv", ".tsv", ".txt"}:
        ext = suffixes.pop()
        sep = options.sep or ("\t" if ext == ".tsv" else _guess(files[0]))
        header = _header(files, sep, where)
        frame = dd.read_csv(
            files,
            sep=sep,
            dtype=str,
            keep_default_na=False,
            header=0,
            names=header,
            encoding="utf-8-sig",
            blocksize="64MB",
        )
        note.update(sep=sep, encoding="utf-8-sig")
        return frame, note, where, True, []
    raise CompositionError(
        f"{where}: the files must all be Parquet ({', '.join(PARQUET_EXTENSIONS)}) or all "
        f"CSV/TSV/TXT; found {sorted(suffixes)!r}"
    )


#: Names pandas and dask give an unnamed index stored in a Parquet file.
_PLACEHOLDER_INDEX_NAMES = ("__index_level_0__", "__null_dask_index__")


def _stored_index(files: list[str]) -> str | None:
    """The column holding the row labels stored as the index of the Parquet files, if any.

    Read from the pandas metadata of the first file (a RangeIndex is stored as
    metadata only: those labels are positions, None is returned).
    """
    import json

    import pyarrow.parquet as pq

    first = files[0]
    if os.path.isdir(first):
        inside = sorted(str(p) for p in Path(first).rglob("*") if p.suffix in PARQUET_EXTENSIONS)
        if not inside:
            return None
        first = inside[0]
    meta = pq.read_schema(first).metadata or {}
    if b"pandas" not in meta:
        return None
    columns = json.loads(meta[b"pandas"]).get("index_columns", [])
    named = [c for c in columns if isinstance(c, str)]
    return named[0] if len(named) == 1 else None


def _guess(path: str) -> str:
    from ..intake.load import _guess_sep

    return _guess_sep(Path(path), "utf-8-sig")


def _header(files: list[str], sep: str, where: str) -> list[str]:
    """The header of the files (the same in each, duplicates refused), stripped."""
    import csv

    header = None
    for f in files:
        with open(f, encoding="utf-8-sig", newline="") as fh:
            row = next(csv.reader(fh, delimiter=sep), None)
        if row is None:
            raise CompositionError(f"{f!r}: the file is empty")
        row = [h.strip() or f"Unnamed: {i}" for i, h in enumerate(row)]
        if header is None:
            header = row
            refuse_duplicate_names(header, where, "headers")
        elif row != header:
            raise CompositionError(
                f"{where}: {f!r} has other headers than {files[0]!r}; every file of one "
                "table needs the same columns"
            )
    return header


# ------------------------------------------------------------------ pass 1
def _partition_facts(pdf: pd.DataFrame, k: int, options: Options, candidates, own_index):
    """Facts of every column of one partition, its length and its index."""
    out = {}
    for name in pdf.columns:
        col = pdf[name]
        parsed = parse_column(col, name, options)
        kind, number = parsed.kind, parsed.number
        f = ColumnFacts(name, col.dtype, n=len(col))
        f.n_bad = parsed.n_bad
        f.n_numbers = parsed.n_numbers
        f.n_values = parsed.n_values
        f.n_readable = parsed.n_readable
        is_num = kind == NUMBER
        f.n_negative = int((is_num & (number < 0)).sum())
        f.n_zero = int((is_num & (number == 0)).sum())
        f.n_token = int((kind == TOKEN_BELOW).sum())
        f.bad_texts = parsed.first_bad_texts(3)
        for problem, count in (
            ("bad", f.n_bad),
            ("negative", f.n_negative),
            ("zero", f.n_zero),
            ("token", f.n_token),
        ):
            if count:
                f.first_partition[problem] = k
        f.first_partition["values"] = k
        if parsed.unit_pos.size:
            units, first, counts = np.unique(parsed.unit_of, return_index=True, return_counts=True)
            for j in np.argsort(first, kind="stable"):
                pos = int(parsed.unit_pos[first[j]])
                f.units[units[j]] = [int(counts[j]), (k, pos), parsed.originals([pos])[0]]
        if name in candidates:
            blank = _columns._blank(col)
            f.n_blank = int(blank.sum())
            f.first_blank = int(np.flatnonzero(blank)[0]) if f.n_blank else -1
            f.textual = _columns._textual(col)
            f.n_numeric = int(pd.to_numeric(col, errors="coerce").notna().sum())
            f.hashes = [pd.util.hash_pandas_object(col, index=False).to_numpy()]
        out[name] = f
    index = pdf.index
    info = (
        isinstance(index, pd.RangeIndex) and index.step == 1,
        int(index.start) if isinstance(index, pd.RangeIndex) else 0,
        index.name,
    )
    hashes = pd.util.hash_pandas_object(index).to_numpy() if own_index else None
    return out, len(pdf), info, hashes


@dataclass
class Plan:
    """Every decision of intake, fixed, for the partitions (small; sent with each task)."""

    options: Options
    note: dict
    where: str
    from_file: bool
    index_source: str
    index_column: str | None
    columns: dict
    parsed_columns: frozenset
    part_columns: list
    parts: list  # (column, name, unit_given, unit)
    unit: str
    column_limits: np.ndarray
    limits_source: str | None
    limits_used: list
    conversions: dict
    names: list
    offsets: np.ndarray
    summed: dict = field(default_factory=dict)


def partition_state(
    pdf: pd.DataFrame, plan: Plan, k: int, stop: str = "", start: int = 0
) -> IntakeState:
    """The in-memory steps on one partition (from its row ``start``) with ``plan``'s decisions."""
    st = IntakeState(plan.options, Loaded(pdf, dict(plan.note), plan.where, plan.from_file))
    if plan.index_column is not None:
        col = plan.index_column
        index = pd.Index(pdf[col].to_numpy(), name=col)
        st.frame = pdf.drop(columns=[col]).set_axis(index, axis=0)
    elif plan.index_source == "positions":
        first = int(plan.offsets[k]) + start
        st.frame = pdf.set_axis(pd.RangeIndex(first, first + len(pdf)), axis=0)
    else:
        st.frame = pdf
    st.index = st.frame.index
    st.index_source, st.index_column = plan.index_source, plan.index_column
    for name, c in plan.columns.items():
        c = dataclasses.replace(c)
        if name in plan.parsed_columns:
            c.parsed = _columns._parse(st, name)
        st.columns[name] = c
    st.part_columns = list(plan.part_columns)
    st.parts = [
        Part(col, name, given, unit, st.columns[col].parsed)
        for col, name, given, unit in plan.parts
    ]
    st.unit = plan.unit
    st.column_limits = plan.column_limits
    st.limits_source, st.limits_used = plan.limits_source, list(plan.limits_used)
    st.conversions = dict(plan.conversions)
    st.names = list(plan.names)
    st.summed = dict(plan.summed)
    if stop == "columns":
        return st
    read_parts(st)
    if stop == "parts":
        return st
    _totals.analytical_total(st)
    _totals.compare_total_columns(st)
    from ..intake.parts import apply_conversions

    apply_conversions(st)
    replace_below(st)
    return st


def _chunks(pdf: pd.DataFrame):
    """(start, rows) of a partition in pieces of at most :data:`CHUNK_ROWS` rows."""
    if len(pdf) <= CHUNK_ROWS:
        yield 0, pdf
        return
    for start in range(0, len(pdf), CHUNK_ROWS):
        yield start, pdf.iloc[start : start + CHUNK_ROWS]


def partition_composition(pdf: pd.DataFrame, plan: Plan, k: int) -> Composition:
    """The Composition of one partition (its report: the entries that name a row).

    Every step is row by row once the plan is fixed, so a long partition is
    read in pieces of :data:`CHUNK_ROWS` rows (the temporaries of one piece at
    a time) and the pieces are put together.
    """
    pieces = []
    for start, rows in _chunks(pdf):
        comp = _report.build(partition_state(rows, plan, k, start=start), {})
        report = comp.report[comp.report["action"].isin(ROW_ACTIONS)].reset_index(drop=True)
        pieces.append(dataclasses.replace(comp, report=report))
    if len(pieces) == 1:
        return pieces[0]
    return _joined(pieces)


def _joined(pieces: list[Composition]) -> Composition:
    def cat(name, **kw):
        return pd.concat([getattr(p, name) for p in pieces], **kw)

    values = cat("values")
    return dataclasses.replace(
        pieces[0],
        values=values,
        raw=cat("raw").set_axis(values.index, axis=0),
        status=cat("status").set_axis(values.index, axis=0),
        detection_limits=cat("detection_limits").set_axis(values.index, axis=0),
        metadata=cat("metadata").set_axis(values.index, axis=0),
        report=cat("report", ignore_index=True),
        flags=cat("flags"),
    )


# ------------------------------------------------------------------ pass 2
def _total_facts(pdf: pd.DataFrame, plan: Plan, k: int, comparisons, groups):
    """Per compared total column: differences for the median and counts of both sums."""
    parts = [_chunk_totals(rows, plan, k, comparisons, groups, s) for s, rows in _chunks(pdf)]
    out = []
    for i in range(len(comparisons)):
        diffs = None
        if parts[0][i][0] is not None:
            diffs = tuple(np.concatenate([p[i][0][d] for p in parts]) for d in (0, 1))
        counts = [
            (sum(p[i][1][g][0] for p in parts), sum(p[i][1][g][1] for p in parts))
            for g in range(len(groups))
        ]
        out.append((diffs, counts))
    return out


def _chunk_totals(pdf: pd.DataFrame, plan: Plan, k: int, comparisons, groups, start: int):
    st = partition_state(pdf, plan, k, stop="parts", start=start)
    out = []
    for name, _unit, to_unit, tol, median in comparisons:
        stated = _totals.stated_values(st.columns[name])
        diffs = _totals.total_differences(st, stated, to_unit) if median else None
        counts = []
        for chosen in groups:
            off, compared, _, _ = _totals.compare_rows(st, chosen, stated, to_unit, tol)
            counts.append((int(off.sum()), int(compared.sum())))
        out.append((diffs, counts))
    return out


# ------------------------------------------------------------------ driver
def read_lazy(source, options: Options, spill=None):
    """:func:`compwidgets.read_composition` of a dask DataFrame or Parquet/CSV files.

    ``spill``: where the parsed partitions are kept (see :mod:`.spill`).
    """
    import dask

    from .composition import LazyComposition

    ddf, note, where, from_file, renamed = load_lazy(source, options)
    names = [str(c) for c in ddf.columns]
    option = options.index_col
    candidates = {n for i, n in enumerate(names) if _columns.id_candidate(i, n, names)}
    if option is not None and option is not False:
        candidates.add(_columns._column_by_option(names, option, "index_col", where))
    blocks = ddf.to_delayed()
    meta_index = ddf._meta.index
    own_index = not from_file
    (pieces,) = dask.compute(
        [
            dask.delayed(_partition_facts)(b, k, options, candidates, own_index)
            for k, b in enumerate(blocks)
        ]
    )
    lengths = np.array([p[1] for p in pieces], dtype=np.int64)
    offsets = np.concatenate([[0], np.cumsum(lengths)])
    n = int(offsets[-1])
    facts = {name: _sum_facts([p[0][name] for p in pieces], offsets) for name in names}
    index_hashes = [p[3] for p in pieces]
    lengths_only = [(None, p[1], p[2], None) for p in pieces]
    del pieces  # the partitions' facts (and their hashes) live on only in the sums
    pieces = lengths_only
    default = from_file or _default_labels(pieces, offsets, meta_index)
    if not default and isinstance(meta_index, pd.RangeIndex):
        meta_index = blocks[0].compute().index  # dask's empty frame may not know the kind
    index = pd.RangeIndex(n) if default else meta_index[:0]

    state: dict = {}

    def labels_of(k: int) -> pd.Index:
        pdf = blocks[k].compute()
        col = state.get("index_column")
        if col is not None:
            return pd.Index(pdf[col].to_numpy(), name=col)
        if state.get("index_source") == "positions":
            return pd.RangeIndex(offsets[k], offsets[k + 1])
        return pdf.index

    def resolve(k: int, name: str):
        pdf = blocks[k].compute()
        return parse_column(pdf[name], name, options), labels_of(k)

    for f in facts.values():
        f.resolve = resolve
        if f.hashes:
            f.repeated = _repeated(f, blocks, offsets)
        for entry in f.units.values():
            entry[1] = ("position", entry[1])  # resolved to a label once the index is known

    def duplicates():
        if state["st"].index_source != "frame":
            return []  # a sample-id column was checked by its facts, positions are unique
        hashes = np.concatenate(index_hashes) if index_hashes[0] is not None else None
        if hashes is None:
            return []
        first = repeated_values(hashes)
        return [_value_at(blocks, offsets, int(i), None) for i in first]

    summary = SummaryFrame(facts, n, index, duplicates)
    summary.attrs = dict(getattr(ddf._meta, "attrs", {}) or {})
    st = IntakeState(options, Loaded(summary, note, where, from_file, renamed))
    state["st"] = st
    _columns.choose_index(st)
    state["index_column"], state["index_source"] = st.index_column, st.index_source
    for f in facts.values():
        for entry in f.units.values():
            k, pos = entry[1][1]
            entry[1] = _label_at(labels_of, k, pos)
    _columns.classify_columns(st)
    make_parts(st)
    choose_common_unit(st)
    column_limits(st)
    resolve_conversions(st)
    _refuse_cells_without_limits(st)
    st.unit_factors = np.array([unit_factor(p.unit, st.unit) for p in st.parts])
    st.total_checked = _totals.total_applies(st)
    plan = Plan(
        options=options,
        note=note,
        where=where,
        from_file=from_file,
        index_source=st.index_source,
        index_column=st.index_column,
        columns={k: dataclasses.replace(c, parsed=None) for k, c in st.columns.items()},
        parsed_columns=frozenset(k for k, c in st.columns.items() if c.parsed is not None),
        part_columns=list(st.part_columns),
        parts=[(p.column, p.name, p.unit_given, p.unit) for p in st.parts],
        unit=st.unit,
        column_limits=st.column_limits,
        limits_source=st.limits_source,
        limits_used=list(st.limits_used),
        conversions=dict(st.conversions),
        names=list(st.names),
        offsets=offsets,
    )
    _decide_totals(st, plan, blocks)
    plan.columns = {k: dataclasses.replace(c, parsed=None) for k, c in st.columns.items()}
    from ..intake.reader import _settings

    settings = {**_settings(st), "partitions": len(blocks), "lazy": True}
    head = pd.concat(
        _report._column_entries(st) + _report._conversion_entries(st), ignore_index=True
    )[list(REPORT_COLUMNS)]
    from .spill import make_spill, remove_when_unused

    store, temporary = make_spill(spill)
    lazy = LazyComposition.from_plan(
        blocks, plan, n, settings, head, _report._account(st), ddf._meta, spill=store
    )
    if temporary:
        remove_when_unused(store)
    return lazy


def _sum_facts(items: list[ColumnFacts], offsets) -> ColumnFacts:
    total = items[0]
    for f in items[1:]:
        total = total + f
    return total


def _default_labels(pieces, offsets, meta_index) -> bool:
    """True when the partitions' labels are pandas' default 0..n-1 without a name."""
    if meta_index.name is not None:
        return False
    for k, p in enumerate(pieces):
        is_range, start, name = p[2]
        if p[1] and (not is_range or start != offsets[k] or name is not None):
            return False
    return True


def _locate(offsets, i: int) -> tuple[int, int]:
    k = int(np.searchsorted(offsets, i, side="right") - 1)
    return k, int(i - offsets[k])


def _value_at(blocks, offsets, i: int, name: str | None):
    k, pos = _locate(offsets, i)
    pdf = blocks[k].compute()
    return (pdf.index if name is None else pdf[name]).to_numpy()[pos : pos + 1].tolist()[0]


def _label_at(labels_of, k: int, pos: int):
    return labels_of(k)[pos : pos + 1].tolist()[0]


def _repeated(f: ColumnFacts, blocks, offsets) -> list:
    hashes, f.hashes = f.hashes, []
    joined = np.concatenate(hashes)
    del hashes[:]  # the pieces go as soon as they are joined
    first = repeated_values(joined)
    return [_value_at(blocks, offsets, int(i), f.name) for i in first]


def _refuse_cells_without_limits(st: IntakeState) -> None:
    """Negative, zero and below-detection cells that the options cannot read: the error
    of the in-memory rules, from the partition holding the first such cell."""
    options = st.options
    for j, p in enumerate(st.parts):
        f = p.parsed
        limit = st.column_limits[j]
        for problem, hit in (
            ("negative", f.n_negative and not options.negative_is_below_detection),
            ("zero", f.n_zero and not np.isfinite(limit)),
            ("token", f.n_token and not np.isfinite(limit) and options.replacement != "none"),
        ):
            if hit:
                parsed, index = f.source(problem)
                part = dataclasses.replace(p, parsed=parsed)
                read_part(
                    part, limit, index, options.replacement, options.negative_is_below_detection
                )
                raise AssertionError("the partition should have been refused")  # pragma: no cover


def _decide_totals(st: IntakeState, plan: Plan, blocks) -> None:
    """Which parts each stated total sums, and the exact counts of its report entry."""
    import dask

    comparisons = []
    for column, unit, to_unit, tol in _totals.total_comparisons(st):
        median = _totals.needs_median(st, column.total_kind)
        comparisons.append((column, unit, to_unit, tol, median))
    if not comparisons:
        return
    every, percent = _totals.part_groups(st)
    groups = [every, percent]
    light = [(c.name, u, t, tol, m) for c, u, t, tol, m in comparisons]
    (pieces,) = dask.compute(
        [dask.delayed(_total_facts)(b, plan, k, light, groups) for k, b in enumerate(blocks)]
    )
    for i, (column, unit, _to_unit, tol, median) in enumerate(comparisons):
        d_all = d_pct = None
        if median:
            a = np.concatenate([p[i][0][0] for p in pieces])
            b = np.concatenate([p[i][0][1] for p in pieces])
            if a.size:
                d_all, d_pct = float(np.median(a)), float(np.median(b))
        chosen, why = _totals.choose_summed(st, column.total_kind, d_all, d_pct, tol)
        which = 0 if list(chosen) == every else 1
        n_off = sum(p[i][1][which][0] for p in pieces)
        n_compared = sum(p[i][1][which][1] for p in pieces)
        column.detail += _totals.compared_detail(why, unit, n_off, n_compared, tol)
        plan.summed[column.name] = (list(chosen), why)
    st.summed = dict(plan.summed)


__all__ = ["Plan", "is_lazy_source", "partition_composition", "read_lazy"]
