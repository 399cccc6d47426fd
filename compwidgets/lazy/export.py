"""Exports over all rows of a table larger than memory: lazy frames, partitioned files.

Each function returns a dask DataFrame (nothing is computed) or writes one
file per partition (Parquet or CSV), so the table is never held whole.
"""

from __future__ import annotations

import os

from ..core import CompositionError
from .workbench import AllRows, ilr_frame

__all__ = ["ilr_frame", "selected_frame", "write_parquet", "write_csv", "write_selected"]


def selected_frame(all_rows: AllRows, view, what: str = "values", shape: dict | None = None):
    """Lazy DataFrame of all rows inside the selection shape drawn in ``view``.

    ``what``: ``"values"``, ``"raw"``, ``"status"``, ``"detection_limits"``,
    ``"metadata"`` or ``"ilr"`` (balances of the model's SBP).
    """
    if what not in ("values", "raw", "status", "detection_limits", "metadata", "ilr"):
        raise CompositionError(f"what={what!r}: not a frame of the composition, nor 'ilr'")
    return all_rows.selected_rows(view, shape, what)


def write_parquet(frame, path: str | os.PathLike) -> str:
    """Write a dask DataFrame as partitioned Parquet (one file per partition, index kept)."""
    frame.to_parquet(os.fspath(path), write_index=True)
    return os.fspath(path)


def write_csv(frame, path: str | os.PathLike) -> list[str]:
    """Write a dask DataFrame as one CSV file per partition in the folder ``path``."""
    os.makedirs(path, exist_ok=True)
    return frame.to_csv(os.path.join(os.fspath(path), "part-*.csv"))


def write_selected(
    all_rows: AllRows, view, path, fmt: str = "parquet", what: str = "values", shape=None
):
    """Write all rows inside ``view``'s selection shape, partition by partition."""
    frame = selected_frame(all_rows, view, what, shape)
    if fmt == "parquet":
        return write_parquet(frame, path)
    if fmt == "csv":
        return write_csv(frame, path)
    raise CompositionError(f"fmt={fmt!r}: write 'parquet' or 'csv'")
