"""LazyComposition: the Composition of a table larger than memory, as dask DataFrames."""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..composition import ACTIONS, BELOW_DL, MISSING, Composition
from ..core import CompositionError

#: Rows drawn for the views by default (a seeded uniform sample of all rows).
DEFAULT_SAMPLE = 200_000


@dataclass(frozen=True, eq=False, repr=False)
class LazyComposition:
    """Parts of a table read partition by partition, each attribute a lazy dask DataFrame.

    The same attributes as :class:`~compwidgets.composition.Composition`, with
    the same meaning and the same rules (each partition goes through the
    in-memory intake with every decision fixed over all rows):
    :attr:`values`, :attr:`raw`, :attr:`status`, :attr:`detection_limits`,
    :attr:`metadata`, :attr:`report` and :attr:`flags` are dask DataFrames
    (one partition per input partition; index = the row labels), while
    :attr:`column_account`, :attr:`settings`, :attr:`units` and :attr:`unit`
    are decided once and held in memory. Nothing is computed before it is
    asked for; :meth:`report_counts` counts the report's entries exactly over
    all rows, and :meth:`sample` draws the rows the views show.
    """

    values: object
    raw: object
    status: object
    detection_limits: object
    metadata: object
    report: object
    flags: object
    settings: dict
    column_account: pd.DataFrame
    units: dict
    unit: str
    n_rows: int
    offsets: np.ndarray = field(repr=False)
    partitions: list = field(repr=False)  # delayed Composition of each partition
    spill: object = field(default=None, repr=False)  # lazy.spill.Spill, or None

    @classmethod
    def from_plan(
        cls, blocks, plan, n, settings, head, account, meta_frame, spill=None
    ) -> LazyComposition:
        import dask
        import dask.dataframe as dd

        from .intake import partition_composition
        from .spill import Unread, frame_of, partition_task

        # the input block goes in unread: a task reads it only when no kept copy exists
        task = dask.delayed(partition_task)
        parts = [task(Unread(b), plan, k, spill) for k, b in enumerate(blocks)]
        meta = _with_label_dtype(
            partition_composition(meta_frame.iloc[:0], plan, 0), plan, meta_frame
        )
        offsets = plan.offsets
        divisions = None
        if plan.index_source == "positions" and n and all(np.diff(offsets) > 0):
            divisions = tuple(int(o) for o in offsets[:-1]) + (int(offsets[-1]) - 1,)

        def lazy(name: str):
            pieces = [dask.delayed(frame_of)(p, name) for p in parts]
            keyed = divisions if name not in ("report", "flags") else None
            if name == "flags" and divisions is not None:
                keyed = None
            return dd.from_delayed(
                pieces, meta=getattr(meta, name), divisions=keyed, verify_meta=False
            )

        # the frames keep the dtypes the in-memory intake gives (no conversion of text
        # columns to arrow strings: row labels in the report stay numbers where they are)
        with dask.config.set({"dataframe.convert-string": False}):
            report = dd.concat([dd.from_pandas(head, npartitions=1), lazy("report")])
            frames = {
                name: lazy(name)
                for name in ("values", "raw", "status", "detection_limits", "metadata", "flags")
            }
        return cls(
            **frames,
            report=report,
            settings=settings,
            column_account=account,
            units={
                name: given for (_, _, given, _), name in zip(plan.parts, plan.names, strict=True)
            },
            unit=plan.unit,
            n_rows=n,
            offsets=offsets,
            partitions=parts,
            spill=spill,
        )

    # ----------------------------------------------------------------- basics
    @property
    def parts(self) -> list[str]:
        return [str(c) for c in self.values.columns]

    @property
    def npartitions(self) -> int:
        return len(self.partitions)

    def report_counts(self) -> pd.Series:
        """Entries of the report per action and code, exact over all rows (one pass)."""
        return self.report.groupby(["action", "code"]).size().compute().sort_index()

    def cell_counts(self) -> dict:
        """Cells below detection, replaced and missing, exact over all rows (one pass)."""
        import dask

        below = (self.status == BELOW_DL).sum().sum()
        missing = (self.status == MISSING).sum().sum()
        replaced = ((self.status == BELOW_DL) & self.values.notnull()).sum().sum()
        b, m, r = dask.compute(below, missing, replaced)
        return {"below_dl": int(b), "missing": int(m), "replaced": int(r)}

    def summary(self) -> str:
        """A short account of the intake, counts exact over all rows."""
        import dask

        counts_, n_flag = dask.compute(self.report["action"].value_counts(), self.flags.shape[0])
        cells = self.cell_counts()
        done = [f"{a}: {int(counts_[a])}" for a in ACTIONS if a in counts_.index and a != "column"]
        return "\n".join(
            [
                f"{self.n_rows:,} rows x {len(self.parts)} parts in {self.unit} in "
                f"{self.npartitions} partitions ({', '.join(self.parts)})",
                f"cells below detection: {cells['below_dl']:,} (replaced: {cells['replaced']:,},"
                f" strategy {self.settings.get('replacement')!r})",
                f"missing cells: {cells['missing']:,}",
                "report: " + (", ".join(done) if done else "nothing to report"),
                f"flagged rows: {int(n_flag):,} (see .flags, a dask DataFrame)",
            ]
        )

    def __repr__(self) -> str:
        return (
            f"<LazyComposition: {self.n_rows:,} rows x {len(self.parts)} parts in {self.unit}, "
            f"{self.npartitions} partitions>"
        )

    # ----------------------------------------------------------------- sample
    def sample_positions(self, size: int = DEFAULT_SAMPLE, seed: int = 0) -> np.ndarray:
        """Sorted row positions of a seeded uniform sample without replacement."""
        if int(size) != size or size < 1:
            raise CompositionError(f"sample size must be a positive whole number, got {size!r}")
        size = min(int(size), self.n_rows)
        rng = np.random.default_rng(seed)
        if size == self.n_rows:
            return np.arange(self.n_rows)
        return np.sort(rng.choice(self.n_rows, size=size, replace=False))

    def sample(self, size: int = DEFAULT_SAMPLE, seed: int = 0) -> tuple[Composition, np.ndarray]:
        """(in-memory Composition of a seeded uniform sample of rows, their row positions).

        Every partition is read once; only the sampled rows are kept. The
        sample's report holds the entries of its rows (and the column entries).
        """
        import dask

        positions = self.sample_positions(size, seed)
        k_of = np.searchsorted(self.offsets, positions, side="right") - 1
        tasks = []
        for k, part in enumerate(self.partitions):
            local = positions[k_of == k] - self.offsets[k]
            tasks.append(dask.delayed(_take)(part, local))
        (pieces,) = dask.compute(tasks)
        head = self.report.partitions[0].compute()
        comp = _concat(pieces, head, self)
        return comp, positions


def _take(part, local: np.ndarray) -> Composition:
    """The rows at ``local`` positions of one partition's Composition."""
    from .spill import composition_of

    comp = composition_of(part)
    labels = comp.values.index[local]
    report = comp.report[comp.report["row"].isin(labels)]
    flags = comp.flags[comp.flags.index.isin(labels)]
    return dataclasses.replace(
        comp,
        values=comp.values.iloc[local],
        raw=comp.raw.iloc[local],
        status=comp.status.iloc[local],
        detection_limits=comp.detection_limits.iloc[local],
        metadata=comp.metadata.iloc[local],
        report=report,
        flags=flags,
    )


def _concat(pieces: list[Composition], head: pd.DataFrame, lazy: LazyComposition) -> Composition:
    def cat(name):
        frames = [getattr(p, name) for p in pieces]
        return pd.concat(frames) if frames else None

    values = cat("values")
    index = values.index

    def aligned(name):
        frame = cat(name)
        return frame.set_axis(index, axis=0)

    return Composition(
        values=values,
        raw=aligned("raw"),
        status=aligned("status"),
        detection_limits=aligned("detection_limits"),
        metadata=aligned("metadata"),
        units=dict(lazy.units),
        unit=lazy.unit,
        report=pd.concat([head, cat("report")], ignore_index=True),
        flags=cat("flags"),
        settings={**lazy.settings, "sample_of": lazy.n_rows},
        column_account=lazy.column_account,
    )


def _with_label_dtype(meta: Composition, plan, meta_frame) -> Composition:
    """The empty frames with the index dtype the partitions' labels get (from values)."""
    if plan.index_column is None:
        return meta
    import dask.dataframe as dd

    sample = dd.utils.meta_nonempty(meta_frame)[plan.index_column]
    dtype = pd.Index(sample.to_numpy()).dtype
    frames = {}
    for f in dataclasses.fields(meta):
        value = getattr(meta, f.name)
        if isinstance(value, pd.DataFrame) and value.index.name == plan.index_column:
            value = value.set_axis(value.index.astype(dtype), axis=0)
        frames[f.name] = value
    return dataclasses.replace(meta, **{k: v for k, v in frames.items() if k != "report"})
