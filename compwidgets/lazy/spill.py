"""Parsed partitions kept once read: a second use of a lazy composition does not parse again.

The per-partition intake (parsing cells, units, limits, replacement, report)
is the costly part of every pass over a table larger than memory. A
:class:`Spill` keeps each partition's :class:`~compwidgets.composition.Composition`
in a file of its own the first time any computation reads that partition;
every later task of the same partition loads that file and neither reads the
source nor parses it again.

- Disk: about the size of the composition's frames in memory (values, raw
  numbers and detection limits as float64, the status text, metadata, report
  entries and flags of every row), i.e. a few times the parts as float64.
- Memory: unchanged, one partition per task as before (nothing is held
  beyond the running tasks).
- Where: a folder you name (``read_composition(..., spill="/scratch/survey")``,
  kept afterwards; each composition writes into a fresh sub-folder of it) or,
  by default, a temporary folder (``tempfile.mkdtemp``) removed when the
  composition and every frame made from it are garbage-collected, or the
  interpreter exits.
  ``spill=False`` keeps no copy (every use parses again).
- On a cluster, each worker writes and looks in the folder on its own machine:
  give a folder that every worker sees (a shared file system) for a kept copy
  to serve every worker; elsewhere a partition is parsed again where none is
  found (the results are the same either way).

Files are Python pickles written by this process under a random folder name,
read only by tasks of the composition that wrote them; a spill folder must
not be writable by others.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
import pickle
import shutil
import tempfile
import uuid
import weakref
from dataclasses import dataclass

from ..core import CompositionError

__all__ = ["Kept", "Spill", "make_spill"]


#: The frames of a partition's Composition kept one file each (a pass loads only its own).
FRAMES = ("values", "raw", "status", "detection_limits", "metadata", "report", "flags")


@dataclass(frozen=True)
class Spill:
    """The folder holding the parsed partitions of one lazy composition."""

    folder: str

    def path(self, k: int, name: str) -> str:
        return os.path.join(self.folder, f"partition-{k:06d}", f"{name}.pickle")

    def has(self, k: int) -> bool:
        """True once every frame of partition ``k`` is kept (its "rest" file is written last)."""
        return os.path.exists(self.path(k, "rest"))

    def load(self, k: int, name: str):
        """One kept frame (or ``"rest"``: the Composition's other fields) of partition ``k``."""
        with open(self.path(k, name), "rb") as fh:
            return pickle.load(fh)

    def composition(self, k: int):
        """The whole kept Composition of partition ``k``."""
        kind, rest = self.load(k, "rest")
        return kind(**rest, **{name: self.load(k, name) for name in FRAMES})

    def keep(self, k: int, comp) -> None:
        """Write partition ``k``, frame by frame (each to a temporary name first, the "rest"
        last: a reader never sees half a partition)."""
        folder = os.path.dirname(self.path(k, "rest"))
        rest = {
            f.name: getattr(comp, f.name)
            for f in dataclasses.fields(comp)
            if f.init and f.name not in FRAMES
        }
        try:
            os.makedirs(folder, exist_ok=True)
            for name in FRAMES:
                self._write(self.path(k, name), getattr(comp, name))
            self._write(self.path(k, "rest"), (type(comp), rest))
        except OSError:  # folder gone or disk full: the partition is parsed again next time
            pass

    @staticmethod
    def _write(final: str, value) -> None:
        part = f"{final}.{uuid.uuid4().hex}.tmp"
        try:
            with open(part, "wb") as fh:
                pickle.dump(value, fh, protocol=pickle.HIGHEST_PROTOCOL)
            os.replace(part, final)
        finally:
            with contextlib.suppress(OSError):
                os.remove(part)


@dataclass(frozen=True)
class Kept:
    """Stands for partition ``k`` already kept: each frame is loaded by the task that needs it."""

    spill: Spill
    k: int

    def frame(self, name: str):
        return self.spill.load(self.k, name)

    def composition(self):
        return self.spill.composition(self.k)


def make_spill(spill) -> tuple[Spill | None, bool]:
    """(Spill or None, whether its folder is temporary) for ``read_composition(spill=...)``."""
    if spill is False:
        return None, False
    if spill is None or spill is True:
        return Spill(tempfile.mkdtemp(prefix="compwidgets-spill-")), True
    try:
        base = os.fspath(spill)
    except TypeError:
        raise CompositionError(
            f"spill={spill!r}: give a folder (str or path), None (a temporary one) or False"
        ) from None
    os.makedirs(base, exist_ok=True)
    folder = os.path.join(base, f"composition-{uuid.uuid4().hex}")
    os.makedirs(folder, mode=0o700)
    return Spill(folder), False


def remove_when_unused(spill: Spill) -> None:
    """Remove a temporary spill folder once nothing refers to ``spill`` (or at exit).

    Every task of the composition's frames holds ``spill``: the folder stays as
    long as the composition or any frame made from it does.
    """
    weakref.finalize(spill, shutil.rmtree, spill.folder, True)


class Unread:
    """A delayed input partition handed to a task as it is (dask does not look inside)."""

    __slots__ = ("block",)

    def __init__(self, block):
        self.block = block

    def read(self):
        return self.block.compute(scheduler="sync")


def partition_task(source: Unread, plan, k: int, spill: Spill | None):
    """Partition ``k``: :class:`Kept` when it was kept before, else its Composition (kept).

    ``source`` holds the delayed partition of the input, computed here
    (synchronously, inside this task) only when no kept copy exists.
    """
    from .intake import partition_composition

    if spill is not None and spill.has(k):
        return Kept(spill, k)
    comp = partition_composition(source.read(), plan, k)
    if spill is not None:
        spill.keep(k, comp)
    return comp


def frame_of(part, name: str):
    """One frame of a partition: loaded from the spill, or from the Composition in hand."""
    return part.frame(name) if isinstance(part, Kept) else getattr(part, name)


def composition_of(part):
    """The whole Composition of a partition (loaded from the spill when kept)."""
    return part.composition() if isinstance(part, Kept) else part
