"""The one state object that the steps of :func:`read_composition` fill in turn."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .cells import Parsed
from .load import Loaded
from .options import Options

PART, METADATA, INDEX = "part", "metadata", "index"


@dataclass
class Column:
    """What became of one input column, and why (a row of the column account)."""

    name: str
    role: str  # PART, METADATA or INDEX
    code: str
    detail: str
    parsed: Parsed | None = None
    part: str = ""  # part name (for parts)
    unit: str = ""  # unit as given or read (for parts and totals)
    total_kind: str | None = None  # "total", "majors" (for total columns)


@dataclass
class Part:
    """One part column on its way to the composition."""

    column: str  # the input column
    name: str  # part name (unit stripped); a formula conversion renames it later
    unit_given: str  # as given or read from the header or the cells
    unit: str  # canonical
    parsed: Parsed


@dataclass
class CellRecord:
    """Row positions of each kind of cell in one part column, for the report."""

    text_read: np.ndarray
    missing: np.ndarray
    below: np.ndarray  # token or '<x' or zero
    below_code: np.ndarray  # object: reason code per position in ``below``
    negative: np.ndarray
    limit_given: np.ndarray  # float: limit in the column's own unit, per ``below`` position
    limit_negative: np.ndarray


@dataclass
class IntakeState:
    """Everything intake knows so far; each step reads some fields and fills others."""

    options: Options
    loaded: Loaded
    frame: pd.DataFrame | None = None  # the table, row labels set
    index: pd.Index | None = None
    index_source: str = "positions"  # "frame", "index_col", "detected" or "positions"
    index_column: str | None = None
    refused_ids: dict = field(default_factory=dict)  # id-like column -> why it cannot label
    columns: dict[str, Column] = field(default_factory=dict)  # input order
    part_columns: list[str] = field(default_factory=list)  # in the order of the parts
    parts: list[Part] = field(default_factory=list)
    unit: str = ""
    column_limits: np.ndarray | None = None  # per part, in the part's own unit
    limits_source: str | None = None  # None, "argument" or "attrs"
    limits_used: list = field(default_factory=list)  # parts given a limit from attrs
    conversions: dict = field(default_factory=dict)  # part position -> (target, factor)
    status: np.ndarray | None = None  # (n, D) int8
    raw: np.ndarray | None = None  # (n, D) in the common unit, NaN unless observed
    limits: np.ndarray | None = None  # (n, D) in the common unit
    records: list[CellRecord] = field(default_factory=list)
    unit_factors: np.ndarray | None = None
    names: list[str] = field(default_factory=list)  # final part names
    totals: np.ndarray | None = None  # analytical total in wt% (NaN when not checked)
    total_checked: bool = False
    stated_total: np.ndarray | None = None  # first total column, wt% (or counts)
    total_flags: list = field(default_factory=list)  # (mask, reason texts) per total column
    total_notes: list = field(default_factory=list)  # report pieces of rows not compared
    values: np.ndarray | None = None
    scale: np.ndarray | None = None
    not_replaced: np.ndarray | None = None  # 0 ok, 1 no observed part, 2 overload
    report: list = field(default_factory=list)  # report pieces, in order
    summed: dict = field(default_factory=dict)  # total column -> (parts, why) decided already

    @property
    def where(self) -> str:
        return self.loaded.where

    def metadata_columns(self) -> list[str]:
        return [c.name for c in self.columns.values() if c.role == METADATA]
