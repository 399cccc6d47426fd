"""Fits behind the workbench on long tables: biplot, triage intake items, discriminant rule.

Run:  .venv/bin/python benchmarks/bench_fits.py [--rows 300000]

On the invented laboratory export of ``bench_workbench.py`` (11 majors in wt%,
40 traces in ppm with "<DL" cells, a sample id, a total, six groups), in one
process, each figure with its ratio to a baseline measured in the same run:

* the clr biplot of every part (``core.composition_biplot``, blocked TSQR on the
  part values, one BLAS thread) against ``numpy.linalg.svd`` of the centred clr
  matrix (a direct SVD, what a plain implementation does), with the largest
  difference of their singular values;
* the triage panel's intake items (counts from the reason codes) and all their
  row positions, against one ``status == "below_dl"`` comparison of the whole
  status frame (what reading the items cell by cell costs at least);
* the discriminant rule (``GroupDiscriminant``) on 1,000,000 grouped rows of 10
  parts, against one ``numpy.log`` of those values.

Figures only; nothing passes or fails.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
import pandas as pd
from bench_selection import median_time  # the same timing helper (this folder)
from bench_workbench import survey_table


def timed(fn) -> tuple[float, object]:
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=300_000)
    args = parser.parse_args()

    import compwidgets as cw
    from compwidgets.core import biplot as core_biplot
    from compwidgets.discriminant import GroupDiscriminant
    from compwidgets.model import CompositionModel
    from compwidgets.views._threads import one_blas_thread
    from compwidgets.views.triage import intake_items

    table, limits = survey_table(args.rows)
    comp = cw.read_composition(table, detection_limits=limits)
    model = CompositionModel(comp)
    parts = list(model.active_parts)
    values = model.part_values(parts)
    n, D = values.shape
    print(f"survey export: {n:,} rows x {D} parts")

    # --- biplot
    logs = np.log(values)
    Z = logs - logs.mean(axis=1, keepdims=True)
    ok = np.isfinite(Z).all(axis=1)
    Zc = Z[ok] - Z[ok].mean(axis=0)
    del logs, Z
    t0 = time.perf_counter()
    s_ref = np.linalg.svd(Zc, full_matrices=False)[1]
    base = time.perf_counter() - t0
    del Zc

    def fit():
        with one_blas_thread():
            return core_biplot.composition_biplot(
                values, parts=parts, n_components=3, missing="omit"
            )

    fit()  # warm-up
    t_fit = median_time(fit, 3)
    s = fit().singular_values
    print(f"  baseline numpy.linalg.svd of the centred clr   {base:7.3f} s")
    print(f"  biplot fit (blocked TSQR, from the parts)     {t_fit:7.3f} s ({t_fit / base:.2f} x)")
    gap = np.abs(s - s_ref[: s.size]).max() / s_ref[0]
    print(f"    largest |singular value difference| / s[0]  {gap:.1e}")

    # --- triage intake items
    base = median_time(lambda: comp.status == "below_dl", 3)
    t_items = median_time(lambda: intake_items(comp), 3)
    t_all, _ = timed(lambda: [item.positions for item in intake_items(comp)])
    print(f"  baseline status == 'below_dl' (whole frame)   {base:7.3f} s")
    print(
        f"  triage intake items (counts)                  {t_items:7.3f} s ({t_items / base:.2f}x)"
    )
    print(f"  ... and every item's rows                     {t_all:7.3f} s ({t_all / base:.2f} x)")

    # --- discriminant rule, 10**6 grouped rows
    rng = np.random.default_rng(0)
    m, k = 1_000_000, 10
    code = rng.integers(0, 6, m)
    centres = rng.normal(0, 1, (6, k))
    frame = pd.DataFrame(
        np.exp(centres[code] + rng.normal(0, 0.5, (m, k))), columns=[f"P{j}" for j in range(k)]
    )
    frame["unit"] = pd.Categorical.from_codes(code, categories=list("ABCDEF"))
    grouped = CompositionModel(cw.read_composition(frame, check_total=False))
    grouped.group_column = "unit"
    raw = grouped.part_values()
    base = median_time(lambda: np.log(raw), 3)
    GroupDiscriminant(grouped)  # warm-up (scikit-learn import)
    t_rule = median_time(lambda: GroupDiscriminant(grouped), 3)
    print(f"discriminant: {m:,} grouped rows x {k} parts")
    print(f"  baseline numpy.log of the values              {base:7.3f} s")
    print(
        f"  GroupDiscriminant (rule and coordinates)      {t_rule:7.3f} s ({t_rule / base:.1f} x)"
    )


if __name__ == "__main__":
    main()
