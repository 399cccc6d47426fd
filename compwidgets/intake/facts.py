"""Partition-wise summaries of the columns: what the column rules need, combined exactly.

Some decisions of intake need a whole column: its role (how many cells are
numbers, unreadable, carry a unit), whether it can hold the row labels (text,
no blank, every value once), the unit in its cells, whether a part has cells
that need a detection limit. For a table read partition by partition
(:mod:`compwidgets.lazy`), each partition is parsed once by the same cell
rules (:func:`.cells.parse_column`) into a :class:`ColumnFacts`; facts of
partitions add up (counts add, the first cells stay the first), and the
column rules of :mod:`.columns` and :mod:`.parts` read the combined facts
where they would read a parsed column. So a table gives the same decisions
whether it is read whole or by partitions.

Errors name cells: facts remember the partition holding the first cell of
each kind of problem, and :meth:`ColumnFacts.source` parses that partition
again so that the error is the one of the in-memory rules (naming the row
label, the column and the value).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

#: How many unreadable cells (text, label) the facts keep for messages.
KEEP_FIRST = 3


@dataclass
class ColumnFacts:
    """What the column rules ask of one column, over the rows summarised so far."""

    name: str
    dtype: object
    n: int = 0
    n_bad: int = 0
    n_numbers: int = 0
    n_values: int = 0
    n_readable: int = 0
    n_negative: int = 0
    n_zero: int = 0
    n_token: int = 0
    n_numeric: int = 0  # cells pandas.to_numeric reads
    textual: bool = True
    n_blank: int = 0
    first_blank: int = -1  # row position (over all rows)
    bad_texts: list = field(default_factory=list)
    units: dict = field(default_factory=dict)  # unit -> [cells, first label, first text]
    first_partition: dict = field(default_factory=dict)  # problem -> partition number
    hashes: list = field(default_factory=list)  # uint64 arrays of the values (id candidates)
    repeated: list = field(default_factory=list)  # first repeated values (set once combined)
    resolve: Callable | None = field(default=None, repr=False)  # (partition, name) -> parsed

    # --------------------------------------------------- the Parsed interface
    @property
    def n_unit_cells(self) -> int:
        return sum(u[0] for u in self.units.values())

    def first_bad_texts(self, k: int) -> list:
        return list(self.bad_texts[:k])

    def unit_summary(self, index=None) -> list[tuple]:
        return [(unit, c, at, text) for unit, (c, at, text) in self.units.items()]

    def __len__(self) -> int:
        return self.n

    def to_numpy(self) -> np.ndarray:
        """No cells: the labels stay in the partitions (see :class:`SummaryFrame`)."""
        return np.empty(0, dtype=object)

    @property
    def mostly_numbers(self) -> bool:
        return bool(self.n and self.n_numeric / self.n >= 0.5)

    def source(self, problem: str):
        """(Parsed, index) of the partition holding the first cell of ``problem``."""
        if self.resolve is None or problem not in self.first_partition:
            raise RuntimeError(f"no partition recorded for {problem!r} in {self.name!r}")
        return self.resolve(self.first_partition[problem], self.name)

    def id_problem(self) -> str:
        """'' when the column can label the rows, else why not (as ``columns._id_problem``)."""
        if self.n_blank:
            return f"{self.n_blank} row(s) without a value (first at position {self.first_blank})"
        if self.repeated:
            return f"repeated values such as {self.repeated!r}"
        return ""

    # ------------------------------------------------------------- combining
    def __add__(self, other: ColumnFacts) -> ColumnFacts:
        """The facts of this block of rows followed by ``other``'s."""
        units = {k: list(v) for k, v in self.units.items()}
        for unit, (c, at, text) in other.units.items():
            if unit in units:
                units[unit][0] += c
            else:
                units[unit] = [c, at, text]
        first_blank = self.first_blank
        if first_blank < 0 and other.first_blank >= 0:
            first_blank = self.n + other.first_blank
        return ColumnFacts(
            self.name,
            self.dtype,
            n=self.n + other.n,
            n_bad=self.n_bad + other.n_bad,
            n_numbers=self.n_numbers + other.n_numbers,
            n_values=self.n_values + other.n_values,
            n_readable=self.n_readable + other.n_readable,
            n_negative=self.n_negative + other.n_negative,
            n_zero=self.n_zero + other.n_zero,
            n_token=self.n_token + other.n_token,
            n_numeric=self.n_numeric + other.n_numeric,
            textual=self.textual and other.textual,
            n_blank=self.n_blank + other.n_blank,
            first_blank=first_blank,
            bad_texts=(self.bad_texts + other.bad_texts)[:KEEP_FIRST],
            units=units,
            first_partition={**other.first_partition, **self.first_partition},
            hashes=self.hashes + other.hashes,
            resolve=self.resolve or other.resolve,
        )


class SummaryFrame:
    """Stands for the table in the column rules when only its facts are known.

    ``frame[name]`` gives the :class:`ColumnFacts` of a column; ``index`` is
    the table's own labels when they are pandas' default (a ``RangeIndex``),
    else an empty index of the right name and kind (the labels themselves stay
    in the partitions).
    """

    def __init__(
        self,
        facts: dict[str, ColumnFacts],
        n_rows: int,
        index: pd.Index,
        duplicates: Callable[[], list] | None = None,
    ):
        self.facts = facts
        self.n_rows = n_rows
        self.index = index
        self.columns = pd.Index(list(facts), dtype=object)
        self._duplicates = duplicates
        self.attrs: dict = {}

    def __getitem__(self, name: str) -> ColumnFacts:
        return self.facts[name]

    @property
    def shape(self) -> tuple[int, int]:
        return (self.n_rows, len(self.facts))

    def drop(self, columns) -> SummaryFrame:
        keep = {k: v for k, v in self.facts.items() if k not in set(columns)}
        return SummaryFrame(keep, self.n_rows, self.index, self._duplicates)

    def set_axis(self, index, axis=0) -> SummaryFrame:
        # the labels come from a column: only their uniqueness is checked (by the facts)
        return SummaryFrame(self.facts, self.n_rows, index, self._duplicates)

    def duplicate_labels(self) -> pd.Index:
        return pd.Index(self._duplicates() if self._duplicates else [])


def repeated_values(hashes: np.ndarray) -> np.ndarray:
    """Row positions of the first 3 distinct repeated values, in the order they first appear.

    A sorted copy answers "all distinct?" first (one array more); the positions
    are looked for only when some hash repeats.
    """
    ordered = np.sort(hashes)
    if not (ordered[1:] == ordered[:-1]).any():
        return np.empty(0, dtype=np.intp)
    del ordered
    order = np.argsort(hashes, kind="stable")
    sorted_h = hashes[order]
    same = np.flatnonzero(sorted_h[1:] == sorted_h[:-1])
    if not same.size:
        return np.empty(0, dtype=np.intp)
    dup_hashes = np.unique(sorted_h[same])
    first = order[np.searchsorted(sorted_h, dup_hashes)]  # stable sort: first occurrence
    return np.sort(first)[:3]
