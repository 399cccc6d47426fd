"""Discriminant view and group statistics on a wide table: majors + 40 traces, 200,000 rows.

Times, in one process, against a baseline measured in the same run (one plain
scikit-learn ``LinearDiscriminantAnalysis().fit`` on the ilr coordinates of every
row): the model-level rule (fit on a stratified sample, 5-fold cross-validation on
a smaller one), the discriminant view (fit, cross-validation, drawing in density
mode), a refit after a new grouping, the quadratic rule, the builder's per-balance
statistics with group separation for a whole SBP, and assigning a new batch
(whose first call also fits the robust group distances).

The table is invented (log-normal groups sharing a factor structure), laid out like
a laboratory sheet of 11 majors in wt% and 40 traces in ppm with a group column.

Run: ``.venv/bin/python benchmarks/bench_discriminant.py [rows]`` (default 200,000).
"""

from __future__ import annotations

import sys
import time

import numpy as np
import pandas as pd

import compwidgets as cw
from compwidgets import core
from compwidgets.discriminant import GroupDiscriminant
from compwidgets.model import CompositionModel
from compwidgets.transformer import pivot_sbp
from compwidgets.views.builder import BalanceBuilder
from compwidgets.views.discriminant import DiscriminantView

MAJORS = ["SiO2", "TiO2", "Al2O3", "Fe2O3", "MnO", "MgO", "CaO", "Na2O", "K2O", "P2O5", "LOI"]
TRACES = [f"T{k:02d}" for k in range(40)]  # invented trace elements, ppm
GROUPS = ["unit A", "unit B", "unit C", "unit D", "unit E", "unit F"]


def invented_table(n: int, seed: int = 0, population: int = 0) -> pd.DataFrame:
    """``n`` rows of the invented groups: ``population`` fixes the centres, ``seed`` the rows."""
    rng = np.random.default_rng(population)
    D = len(MAJORS) + len(TRACES)
    base = np.concatenate(
        [np.log([60, 0.8, 14, 6, 0.1, 3, 5, 3, 3, 0.2, 4]), np.log(rng.uniform(1e-4, 5e-2, 40))]
    )
    centres = base + rng.normal(scale=0.35, size=(len(GROUPS), D))
    loadings = rng.normal(scale=0.25, size=(4, D))
    rng = np.random.default_rng([population, seed])
    code = rng.integers(0, len(GROUPS), n)
    logx = centres[code] + rng.normal(size=(n, 4)) @ loadings + rng.normal(scale=0.15, size=(n, D))
    x = np.exp(logx)
    x *= 100.0 / x.sum(axis=1, keepdims=True)
    data = {f"{p} (wt%)": np.round(x[:, j], 3) for j, p in enumerate(MAJORS)}
    data.update(
        {f"{p} (ppm)": np.round(x[:, len(MAJORS) + j] * 1e4, 2) for j, p in enumerate(TRACES)}
    )
    frame = pd.DataFrame(data)
    frame.insert(0, "unit", pd.Categorical.from_codes(code, categories=GROUPS))
    frame.insert(0, "sample", [f"W-{i:07d}" for i in range(n)])
    return frame


def timed(label: str, func, baseline: float | None = None):
    start = time.perf_counter()
    out = func()
    seconds = time.perf_counter() - start
    ratio = f"  ({seconds / baseline:.1f} x baseline)" if baseline else ""
    print(f"{label:<58} {seconds:7.2f} s{ratio}")
    return out, seconds


def main(n: int = 200_000) -> None:
    table, _ = timed(f"invent {n:,} rows x 51 parts", lambda: invented_table(n))
    comp, _ = timed("read_composition", lambda: cw.read_composition(table, check_total=False))
    model = CompositionModel(comp, group_column="unit")
    Y = np.asarray(model.ilr())
    y = model.group_codes()[1]

    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

    _, base = timed(
        "baseline: sklearn LDA().fit on every row", lambda: LinearDiscriminantAnalysis().fit(Y, y)
    )
    rule, _ = timed(
        "GroupDiscriminant (fit on <= 20,000 rows)", lambda: GroupDiscriminant(model), base
    )
    timed("  cross-validation (5-fold, <= 10,000 rows)", lambda: rule.cross_validation, base)
    timed("  posteriors of every row", lambda: rule.posteriors, base)
    view, _ = timed(
        "DiscriminantView (fit, CV, density drawing)", lambda: DiscriminantView(model), base
    )
    print(f"  mode {view.active_mode}; {view.notes.value}")
    model.select(np.flatnonzero(y == 0)[: n // 10])

    def regroup():
        model.selection_to_group("picked")

    timed("  refit after a new grouping (a group from a selection)", regroup, base)
    model.group_column = "unit"
    timed("  quadratic rule", lambda: setattr(view, "kind", "quadratic"), base)
    timed("  cell click (select a cell's rows)", lambda: view.select_cell(0, 0), base)
    view.kind = "linear"

    builder = BalanceBuilder(model)
    D = len(model.active_parts)
    timed(
        f"builder: a whole SBP of {D - 1} balances with group separation",
        lambda: builder._propose(core.tree.sbp_to_tree(pivot_sbp(D), list(model.active_parts))),
        base,
    )
    batch = invented_table(1000, seed=9)
    out, _ = timed(
        "classify 1,000 new rows (first call: robust distances)",
        lambda: rule.classify(batch),
        base,
    )
    timed("classify 1,000 new rows again", lambda: rule.classify(batch), base)
    home = np.mean(out["group"].to_numpy() == batch["unit"].astype(str).to_numpy())
    print(
        f"  assigned to their own unit: {home:.3f}; flagged far from every unit: "
        f"{int(out['far'].sum())} of 1,000 members (nominal 1 under normality: the MCD of "
        f"{rule.far_rows_per_group} rows per unit for {D - 1} coordinates flags more)"
    )
    view.close()
    builder.close()


if __name__ == "__main__":
    main(*[int(a) for a in sys.argv[1:2]])
