"""Tables larger than memory: the lazy (dask) path against the in-memory path.

The reference of every check is the in-memory intake and core on the same
rows (themselves checked against numpy, scipy and published examples in the
other test files), plus numpy's own variance for the variation matrix.
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import numpy as np
import pandas as pd
import pytest

dask = pytest.importorskip("dask")
dd = pytest.importorskip("dask.dataframe")

import compwidgets as cw  # noqa: E402
from compwidgets import core  # noqa: E402
from compwidgets.core import geometry  # noqa: E402
from compwidgets.core import ternary as core_ternary  # noqa: E402
from compwidgets.lazy import export as lazy_export  # noqa: E402
from compwidgets.lazy.workbench import selection_shape  # noqa: E402

N_ROWS, N_PARTS = 200_000, 8
MAJORS = ["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO"]
TRACES = ["Cu", "Zn", "Ba", "Zr"]


def survey(n: int, seed: int = 3) -> pd.DataFrame:
    """An invented export: ids, majors in wt%, traces in ppm with messy cells, a total."""
    rng = np.random.default_rng(seed)
    majors = np.exp(rng.normal(size=(n, 5)) * 0.3 + np.log([60, 15, 6, 3, 5]))
    majors *= 99.5 / majors.sum(axis=1, keepdims=True)
    traces = np.exp(rng.normal(size=(n, 4)) * 0.6 + np.log([5, 50, 300, 150]))
    frame = pd.DataFrame({"Sample ID": np.char.add("RK-", np.arange(n).astype(str))})
    for j, p in enumerate(MAJORS):
        frame[f"{p} (wt%)"] = np.round(majors[:, j], 3)
    part = np.arange(n) * N_PARTS // n  # the partition each row will be in
    for j, p in enumerate(TRACES):
        cells = np.round(traces[:, j], 1).astype(str).astype(object)
        cells[traces[:, j] < 3] = "<3"
        if j == 0:  # messy cells in some partitions only
            cells[(part == 2) & (rng.random(n) < 0.02)] = "n.d."
            cells[(part == 5) & (rng.random(n) < 0.02)] = ""
            cells[(part == 6) & (rng.random(n) < 0.01)] = "12 ppm"
            cells[(part == 7) & (rng.random(n) < 0.01)] = " 7,5 ".replace(",", ".")
        frame[f"{p} (ppm)"] = cells
    total = majors.sum(axis=1) + traces.sum(axis=1) / 1e4
    total[rng.random(n) < 0.001] += 2.0  # a few stated totals that disagree
    frame["Total (wt%)"] = np.round(total, 2)
    frame["Depth (m)"] = np.round(rng.random(n) * 50, 2)
    frame["Unit"] = np.where(part % 2 == 0, "upper", "lower")
    return frame


@pytest.fixture(scope="module")
def table(tmp_path_factory):
    path = tmp_path_factory.mktemp("survey") / "survey.parquet"
    frame = survey(N_ROWS)
    dd.from_pandas(frame, npartitions=N_PARTS, sort=False).to_parquet(path, write_index=False)
    return path, frame


OPTIONS = {"detection_limits": {"Cu": 2.0}}


@pytest.fixture(scope="module")
def both(table):
    path, frame = table
    return cw.read_composition(path, **OPTIONS), cw.read_composition(frame, **OPTIONS)


class LargestTask(dask.callbacks.Callback):
    """Records the most rows any single task of a computation produced."""

    def __init__(self):
        super().__init__()
        self.rows = 0

    def _posttask(self, key, result, dsk, state, worker_id):
        if isinstance(result, (pd.DataFrame, pd.Series, np.ndarray)):
            self.rows = max(self.rows, len(result))


def test_lazy_intake_gives_the_in_memory_composition(both):
    lazy, mem = both
    assert type(lazy).__name__ == "LazyComposition" and lazy.npartitions == N_PARTS
    assert lazy.n_rows == mem.n_rows == N_ROWS
    names = ("values", "raw", "detection_limits", "metadata", "status", "flags", "report")
    computed = dict(zip(names, dask.compute(*(getattr(lazy, n) for n in names)), strict=True))
    for name in names[:-1]:
        got = computed[name]
        pd.testing.assert_frame_equal(got, getattr(mem, name), check_dtype=False, obj=name)
    assert lazy.values.index.name == "Sample ID"  # the sample-id column labels the rows
    pd.testing.assert_frame_equal(lazy.column_account, mem.column_account)
    key = ["row", "column", "action", "code"]
    got = computed["report"].sort_values(key).reset_index(drop=True)
    want = mem.report.sort_values(key).reset_index(drop=True)
    pd.testing.assert_frame_equal(got, want, check_dtype=False)
    counts = mem.report.groupby(["action", "code"]).size().sort_index()
    pd.testing.assert_series_equal(lazy.report_counts(), counts, check_names=False)
    # the messy partitions left their marks, traceable by label
    assert set(mem.report["code"]) >= {"below_token", "missing_blank", "unit_in_cell"}
    assert lazy.settings["parts"] == mem.settings["parts"]


def test_the_input_is_never_loaded_whole(table, both):
    path, _ = table
    lazy, _ = both
    largest = int(np.ceil(N_ROWS / N_PARTS))
    with LargestTask() as guard:
        again = cw.read_composition(path, **OPTIONS)
        again.report_counts()
        core.variation_matrix(again.values[MAJORS])
        lazy.sample(500, seed=2)
    assert 0 < guard.rows <= largest
    graph = dict(core.ilr(lazy.values[MAJORS]).__dask_graph__())
    assert len(graph) > N_PARTS  # one task chain per partition, no single whole-table task


def test_core_on_dask_equals_in_memory(both):
    lazy, mem = both
    cols = MAJORS + ["Zn", "Ba", "Zr"]
    complete = mem.values[cols]
    lazy_values = lazy.values[cols].persist()  # read once here; the functions stay lazy
    for f in (core.clr, core.closure, core.ilr, core.alr):
        got = f(lazy_values)
        assert isinstance(got, dd.DataFrame) and got.npartitions == lazy_values.npartitions
        pd.testing.assert_frame_equal(got.compute(), f(complete), rtol=1e-12)
    inv = core.ilr_inv(core.ilr(lazy_values), parts=cols).compute()
    np.testing.assert_allclose(inv.to_numpy(), core.closure(complete).to_numpy(), rtol=1e-12)
    for stat in (core.variation_matrix, core.clr_covariance):
        pd.testing.assert_frame_equal(stat(lazy_values), stat(complete), rtol=1e-12)
    pd.testing.assert_series_equal(core.center(lazy_values), core.center(complete), rtol=1e-12)
    assert core.total_variance(lazy_values) == pytest.approx(
        core.total_variance(complete), rel=1e-12
    )


def test_dask_frames_keep_index_and_divisions_and_arrays_their_chunks():
    import dask.array as da

    rng = np.random.default_rng(0)
    frame = pd.DataFrame(np.exp(rng.normal(size=(1000, 4))), columns=list("abcd"))
    lazy = dd.from_pandas(frame, npartitions=5)
    out = core.ilr(lazy)
    assert out.divisions == lazy.divisions
    pd.testing.assert_index_equal(out.compute().index, frame.index)
    arr = da.from_array(frame.to_numpy(), chunks=(250, 2))
    got = core.clr(arr)
    assert isinstance(got, da.Array) and got.chunks[0] == arr.chunks[0]
    np.testing.assert_allclose(got.compute(), core.clr(frame.to_numpy()), rtol=1e-12)
    replaced = core.multiplicative_replacement(
        dd.from_pandas(frame.mask(frame < 0.2, 0.0), 3), 0.2
    )
    np.testing.assert_allclose(
        replaced.compute().to_numpy(),
        core.multiplicative_replacement(frame.mask(frame < 0.2, 0.0), 0.2).to_numpy(),
        rtol=1e-12,
    )
    bad = dd.from_pandas(frame.assign(b=frame["b"].where(frame.index != 613, 0.0)), 4)
    with pytest.raises(core.CompositionError, match="613"):
        core.clr(bad).compute()  # the partition names its row


def test_lazy_variation_matrix_keeps_tiny_entries_precise():
    # a ratio that barely varies between two strongly varying parts: the Gram formula
    # loses digits there; the reference is numpy.var of the log-ratio itself
    rng = np.random.default_rng(5)
    n = 40_000
    a = np.exp(rng.normal(size=n) * 3)
    frame = pd.DataFrame(
        {"a": a, "b": a * np.exp(rng.normal(size=n) * 1e-6), "c": np.exp(rng.normal(size=n))}
    )
    T = core.variation_matrix(dd.from_pandas(frame, npartitions=7))
    direct = np.var(np.log(frame["a"] / frame["b"]), ddof=1)  # numpy reference
    assert T.loc["a", "b"] == pytest.approx(direct, rel=1e-12)
    assert T.loc["a", "c"] == pytest.approx(np.var(np.log(frame.a / frame.c), ddof=1), rel=1e-12)


def test_selection_shape_applied_to_all_rows(table, tmp_path):
    path, _ = table
    bench = cw.explore(
        path, sample_size=6000, seed=4, ternary_parts=[MAJORS[:3], MAJORS[2:5]], **OPTIONS
    )
    model, view = bench.model, bench.ternaries[0]
    assert model.n_rows == 6000 and bench.all_rows.lazy.n_rows == N_ROWS
    assert "6,000 of 200,000" in view.notes.value  # which layer is which is said
    xr = tuple(np.quantile(view._x, [0.3, 0.6]))
    yr = tuple(np.quantile(view._y, [0.2, 0.7]))
    view.select_rectangle(xr, yr)
    assert 0 < len(model.selection) < 6000
    assert selection_shape(view)["kind"] == "rectangle"
    # independent route: project every row in memory and test the same rectangle
    mem = cw.read_composition(pd.read_parquet(path), **OPTIONS)
    v = mem.values[list(view.parts)].to_numpy()
    ok = np.all(v > 0, axis=1)
    x, y = core_ternary.ternary_to_xy(core.closure(v[ok]))
    inside = np.zeros(len(v), bool)
    inside[ok] = geometry.points_in_rectangle(x, y, xr, yr)
    want = mem.values.index[inside]
    out = tmp_path / "selected"
    lazy_export.write_selected(bench.all_rows, view, out)
    back = pd.read_parquet(out)
    assert back.index.sort_values().equals(want.sort_values())
    pd.testing.assert_frame_equal(back.sort_index(), mem.values.loc[want].sort_index())
    # the sampled rows the view selected are among them (the sample is uniform over all)
    assert set(model.index[model.selection]) <= set(want)


def test_bad_cell_in_one_partition_is_refused_at_read_time(tmp_path):
    frame = survey(8000)
    frame.loc[6123, "Zn (ppm)"] = "twelve"
    path = tmp_path / "bad.parquet"
    dd.from_pandas(frame, npartitions=4).to_parquet(path, write_index=False)
    with pytest.raises(core.CompositionError) as lazy_err:
        cw.read_composition(path, **OPTIONS)
    with pytest.raises(core.CompositionError) as mem_err:
        cw.read_composition(frame, **OPTIONS)
    assert "RK-6123" in str(lazy_err.value) and "'twelve'" in str(lazy_err.value)
    assert str(mem_err.value).split(";")[0] == str(lazy_err.value).split(";")[0]


def test_csv_glob_equals_the_one_file(tmp_path):
    frame = survey(3000)
    for k in range(3):
        frame.iloc[k * 1000 : (k + 1) * 1000].to_csv(tmp_path / f"part{k}.csv", index=False)
    frame.to_csv(tmp_path / "whole.csv", index=False)
    lazy = cw.read_composition(str(tmp_path / "part*.csv"), **OPTIONS)
    mem = cw.read_composition(tmp_path / "whole.csv", **OPTIONS)
    pd.testing.assert_frame_equal(lazy.values.compute(), mem.values, check_dtype=False)
    pd.testing.assert_frame_equal(lazy.flags.compute(), mem.flags, check_dtype=False)
    pd.testing.assert_frame_equal(lazy.column_account, mem.column_account)


def test_balance_statistics_and_ilr_export_over_all_rows(table, both, tmp_path):
    path, _ = table
    lazy, mem = both
    bench = cw.explore(lazy, sample_size=3000, active_parts=MAJORS)
    sbp = [[1, 1, -1, -1, -1], [1, -1, 0, 0, 0], [0, 0, 1, -1, -1], [0, 0, 0, 1, -1]]
    bench.model.set_sbp(sbp)
    summary = bench.all_rows.balance_summary()
    balances = core.balances(mem.values[MAJORS], sbp)  # in memory, all rows
    np.testing.assert_allclose(summary["variance"], balances.var(ddof=1), rtol=1e-12)
    np.testing.assert_allclose(summary["mean"], balances.mean(), rtol=1e-12)
    ilr = lazy_export.ilr_frame(bench.all_rows)
    lazy_export.write_parquet(ilr, tmp_path / "ilr")
    back = pd.read_parquet(tmp_path / "ilr")
    np.testing.assert_allclose(back.to_numpy(), balances.to_numpy(), rtol=1e-12)
    assert back.index.equals(mem.values.index)


def test_runs_on_a_distributed_local_cluster(both):
    distributed = pytest.importorskip("distributed")
    lazy, mem = both
    with (
        distributed.LocalCluster(
            n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        assert len(client.scheduler_info()["workers"]) == 2
        cols = MAJORS
        T = core.variation_matrix(lazy.values[cols])
        pd.testing.assert_frame_equal(T, core.variation_matrix(mem.values[cols]), rtol=1e-12)
        counts = lazy.report_counts()
        assert counts.sum() == len(mem.report)


def test_import_and_in_memory_path_without_dask(tmp_path):
    script = textwrap.dedent(
        """
        import sys
        class Block:
            def find_spec(self, name, path=None, target=None):
                if name.split(".")[0] in ("dask", "distributed", "pyarrow"):
                    raise ImportError(f"{name} blocked")
        sys.meta_path.insert(0, Block())
        import pandas as pd
        import compwidgets as cw
        comp = cw.read_composition(pd.DataFrame({"a": [1.0, 2.0], "b": [3.0, 4.0]}))
        print(cw.core.clr(comp.values).shape, "dask" in sys.modules)
        """
    )
    env = {**os.environ, "PYTHONPATH": os.getcwd()}
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, env=env)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["(2,", "2)", "False"]


def test_long_partitions_are_read_in_pieces_with_the_same_result(tmp_path, monkeypatch):
    from compwidgets.lazy import intake as lazy_intake

    monkeypatch.setattr(lazy_intake, "CHUNK_ROWS", 3000)  # 3 partitions of 8,000 rows
    frame = survey(24_000)
    path = tmp_path / "long.parquet"
    dd.from_pandas(frame, npartitions=3, sort=False).to_parquet(path, write_index=False)
    lazy, mem = cw.read_composition(path, **OPTIONS), cw.read_composition(frame, **OPTIONS)
    names = ("values", "status", "flags", "metadata")
    for name, got in zip(names, dask.compute(*(getattr(lazy, n) for n in names)), strict=True):
        pd.testing.assert_frame_equal(got, getattr(mem, name), check_dtype=False, obj=name)
    pd.testing.assert_frame_equal(lazy.column_account, mem.column_account)
    assert lazy.report_counts().sum() == len(mem.report)
