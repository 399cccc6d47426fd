"""A table larger than memory on dask: 20,000,000 invented rows x 10 parts as Parquet.

Writes the invented table (a sample-id column, 10 parts in wt%, about 1 % of
the cells written as 0 = below a detection limit of 0.01 wt%, a site column)
as partitioned Parquet in a child process, then, in a fresh process (the
"notebook"), times:

- a baseline: ``dask.dataframe.read_parquet(...).sum().compute()`` (reading
  every row once, the least any out-of-core pass costs);
- intake + ilr export: ``read_composition(folder)`` and
  ``core.ilr(lazy.values).to_parquet(...)`` (partitioned Parquet out), with
  rows per second and the ratio to the baseline;
- opening the workbench: ``explore(lazy)`` (a seeded sample of 200,000 rows,
  the density of all rows in both ternaries and the biplot, the builder's
  statistics over all rows), then a second time on the same composition (the
  parsed partitions kept by the first use: nothing is parsed again);
- the peak resident memory of that process, against the size of the parts as
  float64 in memory.

Run: ``.venv/bin/python benchmarks/bench_dask.py [rows] [partition_rows]``
(default 20,000,000 and 250,000: files of 250,000 rows; the files go to a temporary folder).
"""

from __future__ import annotations

import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

PARTS = ["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO", "Na2O", "K2O", "TiO2", "MnO", "P2O5"]


def write(folder: str, n: int, step: int) -> None:
    """The invented table, one Parquet file per ``step`` rows (run in a child process)."""
    import numpy as np
    import pandas as pd

    means = np.log([60, 15, 6, 3, 5, 3, 3, 1, 0.1, 0.2])
    Path(folder).mkdir(parents=True, exist_ok=True)
    for k, start in enumerate(range(0, n, step)):
        m = min(step, n - start)
        rng = np.random.default_rng(k)
        values = np.exp(rng.normal(size=(m, len(PARTS))) * 0.3 + means)
        values *= 100 / values.sum(axis=1, keepdims=True)
        values = np.round(values, 3)
        values[rng.random(values.shape) < 0.01] = 0.0
        frame = pd.DataFrame(values, columns=[f"{p} (wt%)" for p in PARTS])
        frame.insert(0, "Sample ID", np.char.add("GS-", np.arange(start, start + m).astype(str)))
        frame["Site"] = np.where(rng.random(m) < 0.5, "north", "south")
        frame.to_parquet(Path(folder) / f"part-{k:04d}.parquet", index=False)


def measure(folder: str, out: str, n: int) -> None:
    """The timings, in a fresh process (the notebook's)."""
    import dask
    import dask.dataframe as dd

    import compwidgets as cw
    from compwidgets import core

    dask.config.set(scheduler="threads", num_workers=2)

    def timed(fn):
        start = time.perf_counter()
        result = fn()
        return time.perf_counter() - start, result

    base, _ = timed(lambda: dd.read_parquet(folder).select_dtypes("number").sum().compute())
    t_read, lazy = timed(lambda: cw.read_composition(folder, detection_limits=0.01))
    t_export, _ = timed(lambda: core.ilr(lazy.values).to_parquet(out, write_index=True))
    total = t_read + t_export
    t_bench, bench = timed(lambda: cw.explore(lazy))
    del bench
    t_again, bench = timed(lambda: cw.explore(lazy))  # a second use of the same composition
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20  # GiB (kB on Linux)
    data = n * len(PARTS) * 8 / 2**30
    print(f"{n:,} rows x {len(PARTS)} parts in {lazy.npartitions} partitions")
    print(f"baseline read_parquet(...).sum():       {base:7.1f} s ({n / base:,.0f} rows/s)")
    print(f"read_composition (facts pass + plan):   {t_read:7.1f} s")
    print(f"ilr export to partitioned Parquet:      {t_export:7.1f} s")
    print(
        f"intake + ilr export:                    {total:7.1f} s ({n / total:,.0f} rows/s, "
        f"{total / base:.1f} x the baseline)"
    )
    print(
        f"explore() (sample of {bench.model.n_rows:,} rows, density of all rows): {t_bench:.1f} s"
    )
    print(f"explore() again on the same composition:  {t_again:.1f} s")
    print(
        f"peak memory of this process: {peak:.2f} GiB; the parts as float64: {data:.2f} GiB "
        f"({peak / data:.2f} x)"
    )


def main() -> None:
    n = int(sys.argv[1]) if len(sys.argv) > 1 else 20_000_000
    step = int(sys.argv[2]) if len(sys.argv) > 2 else 250_000
    with tempfile.TemporaryDirectory() as tmp:
        folder, out = f"{tmp}/table", f"{tmp}/ilr"
        start = time.perf_counter()
        subprocess.run(
            [sys.executable, __file__, "--write", folder, str(n), str(step)], check=True
        )
        print(f"(writing the invented table took {time.perf_counter() - start:.0f} s)")
        subprocess.run([sys.executable, __file__, "--measure", folder, out, str(n)], check=True)


if __name__ == "__main__":
    if sys.argv[1:2] == ["--write"]:
        write(sys.argv[2], int(sys.argv[3]), int(sys.argv[4]))
    elif sys.argv[1:2] == ["--measure"]:
        measure(sys.argv[2], sys.argv[3], int(sys.argv[4]))
    else:
        main()
