"""The workbench on wide and long tables: explore(), a change of parts, a selection, memory.

Run:  .venv/bin/python benchmarks/bench_workbench.py [--sizes 2000x50,2000x200,...] [--survey]

For each table size (rows x parts) a fresh Python process (so that its peak
memory is that size's alone) builds an invented table, then measures:

* ``explore()`` on the DataFrame (intake included), kernel side, no browser; the
  widget and scikit-learn modules are imported before (a fresh kernel pays that
  once; the time is printed apart);
* a change of the active parts to the first half of the parts, then back to
  all of them (answered from the cache);
* a 10 % selection (``model.select`` of random rows, median of several) with
  both ternary views, the biplot and the balance builder attached, without and
  with an SBP set (the builder then summarises every balance of the selection);
* the peak resident memory of the process (``ru_maxrss``) after ``explore()``
  and at the end (the table itself, Python and the libraries included).

Each time is printed with its ratio to a baseline measured in the same process:
one ``numpy.log`` over the same table's values (median of 5). Memory is printed
with its ratio to the bytes of those values (float64). Figures only; nothing
passes or fails. The outlier screening is not part of ``explore()`` (it runs
when its panel is shown); ``--screen`` times it too.

Tables (invented): "lognormal" parts ``P000, P001, ...`` of a lognormal model
with part-specific means; with ``--survey`` also a laboratory-style export of
300,000 rows: 11 majors in wt%, 40 traces in ppm (a few below detection as
``<DL`` text), a sample-id column, a total column and a grouping column.
"""

from __future__ import annotations

import argparse
import functools
import json
import resource
import subprocess
import sys
import time

import numpy as np
import pandas as pd
from bench_selection import median_time  # the same timing helper (this folder)

DEFAULT_SIZES = "2000x50,2000x200,200000x10,1000000x10"
REPEAT = 5


def lognormal_table(n: int, D: int, seed: int = 0) -> pd.DataFrame:
    """Invented table: D lognormal parts (means spread over 3 orders of magnitude)."""
    rng = np.random.default_rng(seed)
    mu = rng.normal(0.0, 1.5, D)
    values = np.exp(mu + rng.normal(0.0, 0.5, (n, D)))
    return pd.DataFrame(values, columns=[f"P{j:03d}" for j in range(D)])


SURVEY_MAJORS = ("SiO2", "TiO2", "Al2O3", "Fe2O3", "MnO", "MgO", "CaO", "Na2O", "K2O", "P2O5")


def survey_table(n: int, seed: int = 1) -> tuple[pd.DataFrame, dict]:
    """Invented export: majors (wt%) + LOI, 40 traces (ppm), sample id, total, group."""
    rng = np.random.default_rng(seed)
    traces = [f"T{k:02d}" for k in range(40)]
    logs = np.concatenate(
        [np.log([60, 0.8, 14, 6, 0.1, 3, 4, 3, 2.5, 0.2, 4]), np.log(rng.uniform(1, 800, 40))]
    )
    group = rng.integers(0, 6, n)
    shift = rng.normal(0, 0.3, (6, logs.size))[group]
    x = np.exp(logs + shift + rng.normal(0, 0.25, (n, logs.size)))
    majors = x[:, :11] / x[:, :11].sum(axis=1, keepdims=True) * rng.uniform(98.8, 101.2, (n, 1))
    frame = {"sample_id": [f"S{k:07d}" for k in range(n)], "unit": np.array(list("ABCDEF"))[group]}
    for j, name in enumerate([*SURVEY_MAJORS, "LOI"]):
        frame[f"{name} (wt%)"] = np.round(majors[:, j], 2)
    limits = {}
    for k, name in enumerate(traces):
        ppm = np.round(x[:, 11 + k], 1)
        dl = float(np.quantile(ppm, 0.02))
        limits[name] = dl
        cells = ppm.astype(object)
        cells[ppm < dl] = f"<{dl:g}"
        frame[f"{name} (ppm)"] = cells
    frame["Total (wt%)"] = np.round(majors.sum(axis=1), 2)
    return pd.DataFrame(frame), limits


def peak_bytes() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss * 1024  # kB on Linux


def measure(kind: str, n: int, D: int, screen: bool) -> dict:
    """One table, measured in this process."""
    t0 = time.perf_counter()
    import sklearn.covariance  # noqa: F401  (the libraries a fresh kernel loads once)
    import sklearn.discriminant_analysis  # noqa: F401

    import compwidgets as cw
    from compwidgets.views import biplot, builder, discriminant, picker, ternary  # noqa: F401

    imports = time.perf_counter() - t0

    if kind == "survey":
        table, limits = survey_table(n)
        options = {"detection_limits": limits}
        label = f"survey {n:,} x {len(limits) + 11} parts"
    else:
        table, options = lognormal_table(n, D), {"check_total": False}
        label = f"{n:,} x {D}"
    numbers = table.select_dtypes("number").to_numpy(dtype=float)
    numbers = np.abs(numbers) + 1.0
    base = median_time(functools.partial(np.log, numbers), REPEAT)
    out = {"label": label, "baseline_s": base, "values_bytes": int(numbers.nbytes)}
    out["imports_s"] = imports
    del numbers  # only the table itself stays for explore()

    t0 = time.perf_counter()
    bench = cw.explore(table, **options)
    out["explore_s"] = time.perf_counter() - t0
    out["peak_explore_bytes"] = peak_bytes()  # the high-water mark so far: explore's
    model = bench.model
    modes = {v.active_mode for v in bench.views if v.rows.size}
    out["mode"] = "/".join(sorted(modes))
    full = list(model.active_parts)
    half = full[: max(3, len(full) // 2)]
    t0 = time.perf_counter()
    model.active_parts = half
    out["parts_s"] = time.perf_counter() - t0
    out["parts_to"] = len(half)
    t0 = time.perf_counter()
    model.active_parts = full
    out["parts_back_s"] = time.perf_counter() - t0

    rng = np.random.default_rng(3)
    k = max(1, model.n_rows // 10)
    picks = [np.sort(rng.choice(model.n_rows, k, replace=False)) for _ in range(2)]
    state = {"i": 0}

    def select():
        state["i"] ^= 1
        model.select(picks[state["i"]])

    select()  # warm-up
    out["select_s"] = median_time(select, REPEAT)
    D_active = len(full)
    sbp = np.zeros((D_active - 1, D_active), dtype=int)  # a pivot-like SBP: part k vs the rest
    for r in range(D_active - 1):
        sbp[r, r] = 1
        sbp[r, r + 1 :] = -1
    model.set_sbp(sbp)
    select()
    out["select_sbp_s"] = median_time(select, REPEAT)
    if screen:
        t0 = time.perf_counter()
        bench.triage.show()
        out["screen_s"] = time.perf_counter() - t0
        out["screen_method"] = next(iter(bench.triage.fits.values()))[1].method
    out["peak_bytes"] = peak_bytes()
    return out


def run_child(kind: str, n: int, D: int, screen: bool) -> dict:
    cmd = [sys.executable, __file__, "--child", kind, str(n), str(D)]
    if screen:
        cmd.append("--screen")
    done = subprocess.run(cmd, capture_output=True, text=True, check=False)
    if done.returncode != 0:
        raise RuntimeError(f"{kind} {n}x{D} failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout.strip().splitlines()[-1])


def report(r: dict) -> None:
    base = r["baseline_s"]

    def t(key: str) -> str:
        return f"{r[key]:8.3f} s ({r[key] / base:9.0f} x)"

    def ms(key: str) -> str:
        return f"{1e3 * r[key]:7.1f} ms ({r[key] / base:7.1f} x)"

    print(f"== {r['label']} (views in {r['mode']} mode); baseline np.log: {1e3 * base:.2f} ms")
    print(f"   explore()                  {t('explore_s')}")
    print(f"   (imports, once per kernel  {r['imports_s']:8.3f} s, not in explore)")
    print(f"   active parts -> {r['parts_to']:<4}       {t('parts_s')}")
    print(f"   active parts back (cached) {t('parts_back_s')}")
    print(f"   10 % selection             {ms('select_s')}")
    print(f"   10 % selection, SBP set    {ms('select_sbp_s')}")
    if "screen_s" in r:
        print(f"   outlier screening          {t('screen_s')}  [{r['screen_method']}]")
    values = r["values_bytes"]
    for what, key in (
        ("peak memory, explore()", "peak_explore_bytes"),
        ("peak memory, all", "peak_bytes"),
    ):
        peak = r[key]
        print(
            f"   {what:26s} {peak / 2**20:8.0f} MB ({peak / values:.1f} x the table's values, "
            f"{values / 2**20:.0f} MB)"
        )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default=DEFAULT_SIZES, help="rows x parts, comma separated")
    parser.add_argument("--survey", action="store_true", help="also the 300,000-row export")
    parser.add_argument("--screen", action="store_true", help="also time the outlier screening")
    parser.add_argument("--child", nargs=3, metavar=("KIND", "N", "D"), help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        kind, n, D = args.child[0], int(args.child[1]), int(args.child[2])
        print(json.dumps(measure(kind, n, D, args.screen)))
        return
    print(
        "Kernel side, no browser; each table in its own process. Ratios: to one np.log over "
        "the same table's values (times), to those values' bytes (memory)."
    )
    jobs = [("lognormal", *map(int, s.lower().split("x"))) for s in args.sizes.split(",") if s]
    if args.survey:
        jobs.append(("survey", 300_000, 51))
    for kind, n, D in jobs:
        report(run_child(kind, n, D, args.screen))


if __name__ == "__main__":
    main()
