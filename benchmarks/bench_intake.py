"""Intake of a realistic laboratory export: majors + 40 traces, ~300,000 rows.

Invented table: a sample-id column, 11 majors in wt%, 40 traces in ppm (about
8 % of the trace cells written "<3", 0.2 % empty), a total column in wt%, units
in the headers. Read as a DataFrame (the shape ``pandas.read_csv`` gives) and
as a CSV file. Prints the seconds and the ratio to a baseline measured in the
same run: ``pandas.to_numeric`` over every part cell (the least any reader has
to do) and, for the file, ``pandas.read_csv`` of the same file.

Run: ``.venv/bin/python benchmarks/bench_intake.py [rows]``
"""

from __future__ import annotations

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

from compwidgets.intake import read_composition

MAJORS = ["SiO2", "TiO2", "Al2O3", "Fe2O3", "MnO", "MgO", "CaO", "Na2O", "K2O", "P2O5", "LOI"]
TRACES = (
    "Ba Ce Co Cr Cs Cu Dy Er Eu Ga Gd Hf Ho La Lu Nb Nd Ni Pb Pr "
    "Rb Sc Sm Sn Sr Ta Tb Th Tm U V W Y Yb Zn Zr Mo As Sb Bi"
).split()


def export(n: int, seed: int = 0) -> pd.DataFrame:
    """An invented laboratory export of ``n`` rows (see the module docstring)."""
    rng = np.random.default_rng(seed)
    means = np.log([60, 1, 15, 6, 0.1, 3, 5, 3, 3, 0.2, 2])
    majors = np.exp(rng.normal(size=(n, len(MAJORS))) * 0.2 + means)
    majors *= 100 / majors.sum(axis=1, keepdims=True)
    traces = np.exp(rng.normal(size=(n, len(TRACES))) * 0.5 + np.log(np.linspace(2, 400, 40)))
    width = len(str(n))
    data = {"Sample ID": np.char.add("RK-", np.char.zfill(np.arange(n).astype(str), width))}
    for j, part in enumerate(MAJORS):
        data[f"{part} (wt%)"] = np.round(majors[:, j], 2)
    for j, part in enumerate(TRACES):
        cells = np.round(traces[:, j], 1).astype(object)
        cells[traces[:, j] < 3] = "<3"
        cells[rng.random(n) < 0.002] = ""
        data[f"{part} (ppm)"] = cells
    data["Total (wt%)"] = np.round(majors.sum(axis=1), 2)
    return pd.DataFrame(data)


def timed(fn) -> tuple[float, object]:
    start = time.perf_counter()
    out = fn()
    return time.perf_counter() - start, out


def main(n: int) -> None:
    table = export(n)
    part_cols = [c for c in table.columns if c.endswith(("(wt%)", "(ppm)")) and "Total" not in c]
    cells = table[part_cols].size
    print(f"{n:,} rows x {table.shape[1]} columns ({cells:,} part cells)")

    base, _ = timed(lambda: [pd.to_numeric(table[c], errors="coerce") for c in part_cols])
    took, comp = timed(lambda: read_composition(table))
    print(f"baseline pandas.to_numeric over the part columns: {base:.2f} s")
    print(f"read_composition(DataFrame):                      {took:.2f} s ({took / base:.1f} x)")
    print(
        f"  {len(comp.parts)} parts, index {comp.values.index.name!r}, "
        f"{len(comp.report):,} report rows, {len(comp.flags):,} flagged rows"
    )

    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "export.csv"
        table.to_csv(path, index=False)
        base_csv, _ = timed(lambda: pd.read_csv(path, dtype=str, keep_default_na=False))
        took_csv, _ = timed(lambda: read_composition(path))
    print(f"baseline pandas.read_csv(dtype=str):               {base_csv:.2f} s")
    print(
        f"read_composition(CSV file):                       {took_csv:.2f} s "
        f"({took_csv / base_csv:.1f} x)"
    )


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 300_000)
