"""Tables larger than memory, on dask: intake, the composition, statistics and exports.

Needs the ``scale`` extra (``pip install "compwidgets[scale]"``: dask[dataframe],
distributed, pyarrow). Nothing here starts a cluster: work runs on dask's
default local scheduler, or on the ``distributed.Client`` you made (a client
once made is dask's default for every computation that follows).

- :func:`compwidgets.read_composition` of a dask DataFrame, a Parquet file or
  folder, or a glob of Parquet / CSV files gives a :class:`LazyComposition`
  (:mod:`.intake`, :mod:`.composition`);
- the core log-ratio functions and statistics accept dask arrays and
  DataFrames (:mod:`compwidgets.core._lazy`);
- :func:`compwidgets.explore` on a LazyComposition opens the workbench on a
  seeded sample of rows with density pictures of all rows (:mod:`.workbench`);
- :mod:`.export` writes the ilr coordinates and a selection shape applied to
  all rows, lazily.
"""

from . import export, workbench
from .composition import DEFAULT_SAMPLE, LazyComposition

__all__ = ["DEFAULT_SAMPLE", "LazyComposition", "export", "workbench"]
