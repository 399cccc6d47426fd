"""The clean composition that intake hands to the rest of the package."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from .core import CompositionError

#: The values of :attr:`Composition.status`.
OBSERVED, BELOW_DL, MISSING = "observed", "below_dl", "missing"

#: The actions of :attr:`Composition.report`, in the order they happen.
ACTIONS = (
    "renamed",
    "column",
    "setting",
    "parsed_text",
    "missing",
    "below_detection",
    "negative_as_below_detection",
    "unit_converted",
    "formula_converted",
    "replaced",
    "scaled",
    "total_not_compared",
    "flagged",
)

REPORT_COLUMNS = ("row", "column", "action", "code", "original", "value", "detail")

#: Separator of the codes of a flagged row with several reasons.
CODE_SEPARATOR = ";"


def _empty_account() -> pd.DataFrame:
    return pd.DataFrame(
        {c: pd.Series(dtype=object) for c in ("role", "code", "detail", "part", "unit")},
        index=pd.Index([], name="column", dtype=object),
    )


def _same_axis(a: pd.Index, b: pd.Index) -> bool:
    return a is b or a.is_(b) or a.equals(b)


@dataclass(frozen=True, eq=False, repr=False)
class Composition:
    """Parts of a table in one unit, with per-cell provenance and a report.

    Built by :func:`compwidgets.read_composition`; nothing in it is ever
    dropped: every row of the input is in :attr:`values` under its original
    index label, and every cell that was not read as an observed number is in
    :attr:`report`.

    Attributes
    ----------
    values : DataFrame
        Parts in :attr:`unit` after unit/formula conversion and replacement of
        values below detection; NaN = missing (or below detection when not
        replaced). Index = the input's labels, columns = part names.
    raw : DataFrame
        The numbers read, in :attr:`unit`, before replacement (NaN for cells
        below detection and missing cells).
    status : DataFrame
        ``"observed"``, ``"below_dl"`` or ``"missing"`` per cell.
    detection_limits : DataFrame
        Detection limit per cell in :attr:`unit` (NaN where none is known).
    metadata : DataFrame
        The columns that are not parts, values untouched, same index.
    units : dict
        Part -> the unit as given or read from the column name.
    unit : str
        The common unit of :attr:`values`.
    report : DataFrame
        One row per thing done: ``row, column, action, code, original, value,
        detail``; ``code`` is a reason code of :mod:`compwidgets.intake.codes`
        (for a flagged row the codes of its reasons joined by ";").
    flags : DataFrame
        Flagged rows (they stay in :attr:`values`): ``reason`` (text),
        ``code`` (the reason codes, joined by ";" in the order of the
        reasons), ``total`` (analytical total in wt% when checked, else NaN)
        and ``stated_total`` (the table's total column in wt%, NaN when none).
    settings : dict
        JSON-serialisable record of the options used.
    column_account : DataFrame
        One row per input column (index: the column name as text):
        ``role`` ("part", "metadata" or "index"), ``code``, ``detail`` (why),
        ``part`` (the part name, for parts) and ``unit`` (as read).
    """

    values: pd.DataFrame
    raw: pd.DataFrame
    status: pd.DataFrame
    detection_limits: pd.DataFrame
    metadata: pd.DataFrame
    units: dict
    unit: str
    report: pd.DataFrame
    flags: pd.DataFrame
    settings: dict
    column_account: pd.DataFrame = field(default_factory=_empty_account)

    def __post_init__(self) -> None:
        for name in ("raw", "status", "detection_limits"):
            other = getattr(self, name)
            if not (
                _same_axis(other.index, self.values.index)
                and _same_axis(other.columns, self.values.columns)
            ):
                raise CompositionError(
                    f"Composition: {name} must have the index and columns of values"
                )
        if not _same_axis(self.metadata.index, self.values.index):
            raise CompositionError("Composition: metadata must have the index of values")

    @property
    def parts(self) -> list[str]:
        """The part names, in column order."""
        return list(self.values.columns)

    @property
    def n_rows(self) -> int:
        return len(self.values)

    @property
    def replaced(self) -> pd.DataFrame:
        """Cells that were below detection and now hold a replacement value."""
        return (self.status == BELOW_DL) & self.values.notna()

    def flagged_rows(self, code: str) -> pd.Index:
        """Labels of the rows flagged with reason ``code`` (:mod:`compwidgets.intake.codes`)."""
        if not len(self.flags) or "code" not in self.flags.columns:
            return self.flags.index[:0]
        sep = CODE_SEPARATOR
        joined = sep + self.flags["code"].astype(str) + sep
        has = joined.str.contains(sep + code + sep, regex=False)
        return self.flags.index[has.to_numpy(dtype=bool)]

    def in_reported_unit(self, part: str, values) -> tuple[np.ndarray, str]:
        """Values of ``part`` (given in :attr:`unit`) in the unit the table reported it in.

        Traces reported in ppm read back in ppm even when the common unit is wt%.
        """
        from .units import unit_factor

        values = np.asarray(values, dtype=float)
        reported = self.units.get(part, self.unit)
        if reported == self.unit or self.unit == "count" or reported == "count":
            return values, self.unit
        return values * unit_factor(self.unit, reported), reported

    def complete_rows(self, parts: Sequence[str] | None = None) -> np.ndarray:
        """Rows with a finite, positive value in every part of ``parts`` (default: all)."""
        if parts is None:
            parts = self.parts
        elif isinstance(parts, str):
            parts = [parts]
        unknown = [p for p in parts if p not in self.values.columns]
        if unknown:
            raise CompositionError(
                f"complete_rows: unknown part(s) {unknown!r}; parts are {self.parts!r}"
            )
        v = self.values[list(parts)].to_numpy(dtype=float)
        return np.all(np.isfinite(v) & (v > 0), axis=1)

    def summary(self) -> str:
        """A short human-readable account of the intake."""
        counts = self.report["action"].value_counts()
        s = self.settings
        lines = [
            f"{self.n_rows} rows x {len(self.parts)} parts in {self.unit} "
            f"({', '.join(str(p) for p in self.parts)})"
        ]
        account = self.column_account
        if len(account):
            meta = account.index[account["role"] == "metadata"].tolist()
            index = account.index[account["role"] == "index"].tolist()
            lines.append(
                f"columns: {int((account['role'] == 'part').sum())} parts, "
                f"{len(meta)} metadata"
                + (
                    f" ({', '.join(map(str, meta[:8]))}{', ...' if len(meta) > 8 else ''})"
                    if meta
                    else ""
                )
                + (f", row labels from {index[0]!r}" if index else "")
            )
        status_counts = {k: int((self.status == k).to_numpy().sum()) for k in (BELOW_DL, MISSING)}
        n_repl = int(self.replaced.to_numpy().sum())
        lines.append(
            f"cells below detection: {status_counts[BELOW_DL]} "
            f"(replaced: {n_repl}, strategy {s.get('replacement')!r}"
            + (f", fraction {s.get('fraction')}" if s.get("replacement") != "none" else "")
            + ")"
        )
        lines.append(f"missing cells: {status_counts[MISSING]}")
        done = [f"{a}: {int(counts[a])}" for a in ACTIONS if a in counts.index and a != "column"]
        lines.append("report: " + (", ".join(done) if done else "nothing to report"))
        conv = self.report[self.report["action"].isin(["unit_converted", "formula_converted"])]
        lines.extend(
            f"  {col}: {detail}"
            for col, detail in zip(conv["column"], conv["detail"], strict=True)
        )
        n_flag = len(self.flags)
        lines.append(f"flagged rows: {n_flag}")
        for label, reason in list(self.flags["reason"].items())[:5]:
            lines.append(f"  {label!r}: {reason}")
        if n_flag > 5:
            lines.append(f"  ... and {n_flag - 5} more (see .flags)")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return (
            f"<Composition: {self.n_rows} rows x {len(self.parts)} parts in {self.unit}, "
            f"{int(self.replaced.to_numpy().sum())} replaced, {len(self.flags)} flagged>"
        )
