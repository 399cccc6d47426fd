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
from scipy import stats

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


def nearly_constant_ratio(n: int, seed: int) -> pd.DataFrame:
    """Parts a, b varying strongly (log sd 3) with a ratio a/b that barely varies (log sd
    1e-6), and a third part c."""
    rng = np.random.default_rng(seed)
    a = np.exp(rng.normal(size=n) * 3)
    return pd.DataFrame(
        {"a": a, "b": a * np.exp(rng.normal(size=n) * 1e-6), "c": np.exp(rng.normal(size=n))}
    )


def test_lazy_variation_matrix_keeps_tiny_entries_precise():
    # a ratio that barely varies between two strongly varying parts: the Gram formula
    # loses digits there; the reference is numpy.var of the log-ratio itself
    frame = nearly_constant_ratio(40_000, seed=5)
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


# ------------------------------------------------------------ all rows in the workbench
@pytest.fixture(scope="module")
def small(tmp_path_factory):
    """A smaller partitioned survey, its lazy and in-memory compositions."""
    frame = survey(24_000, seed=11)
    path = tmp_path_factory.mktemp("small") / "small.parquet"
    dd.from_pandas(frame, npartitions=4, sort=False).to_parquet(path, write_index=False)
    return cw.read_composition(path, **OPTIONS), cw.read_composition(frame, **OPTIONS)


def _histogram(x, y, image) -> np.ndarray:
    """numpy.histogram2d of the points on a density image's grid (rows = y bins)."""
    x0, x1, y0, y1 = image.extent
    nx, ny = np.broadcast_to(np.asarray(image.bins), (2,))
    ok = np.isfinite(x) & np.isfinite(y)
    counts, _, _ = np.histogram2d(y[ok], x[ok], bins=(ny, nx), range=[[y0, y1], [x0, x1]])
    return counts.astype(np.int64)


def assert_counts_match(counts, x, y, image) -> None:
    """``counts`` equal numpy.histogram2d of (x, y), up to points on a bin edge (a point
    within 1e-9 of an edge may fall on either side, by rounding of the bin arithmetic)."""
    want = _histogram(x, y, image)
    x0, x1, y0, y1 = image.extent
    nx, ny = np.broadcast_to(np.asarray(image.bins), (2,))
    fx, fy = (x - x0) * nx / (x1 - x0), (y - y0) * ny / (y1 - y0)
    on_edge = int(np.sum((np.abs(fx - np.round(fx)) < 1e-9) | (np.abs(fy - np.round(fy)) < 1e-9)))
    assert counts.sum() == want.sum()
    assert np.abs(counts - want).sum() <= 2 * on_edge


def _ternary_all_rows(mem, parts) -> tuple[np.ndarray, np.ndarray]:
    v = mem.values[list(parts)].to_numpy()
    ok = np.all(v > 0, axis=1)
    return core_ternary.ternary_to_xy(core.closure(v[ok]))


def test_builder_shows_balance_statistics_over_all_rows(small):
    from compwidgets.core.summary import summarize_balances

    lazy, mem = small
    bench = cw.explore(lazy, sample_size=2000, active_parts=MAJORS, group="Unit")
    builder = bench.builder
    assert builder.n_rows == 24_000 and "24,000 rows" in bench.statistics_note.value
    sbp = [[1, 1, -1, -1, -1], [1, -1, 0, 0, 0], [0, 0, 1, -1, -1], [0, 0, 0, 1, -1]]
    bench.model.set_sbp(sbp)

    def reference(parts, rows):
        # in memory over all rows: core.summary on the balances of every row (the
        # in-memory functions are checked against numpy elsewhere)
        values = mem.values[parts]
        ok = np.all(values.to_numpy() > 0, axis=1)
        B = core.balances(values[ok], rows).to_numpy()
        cat = pd.Categorical(mem.metadata["Unit"][ok])
        total = core.total_variance(values[ok])
        return (
            summarize_balances(
                B, codes=cat.codes.astype(int), n_groups=len(cat.categories), total=total
            ),
            total,
            int(ok.sum()),
        )

    def check(parts, rows):
        want, total, n = reference(parts, rows)
        assert builder.n_samples == n and builder.total_variance == pytest.approx(total, 1e-12)
        for got, ref in zip(builder.stats, want, strict=True):
            for key in ("variance", "share", "mean"):
                assert got[key] == pytest.approx(ref[key], rel=1e-12), key
            assert got["n"] == ref["n"]
            for g, r in zip(got["groups"], ref["groups"], strict=True):
                assert g["n"] == r["n"] and g["mean"] == pytest.approx(r["mean"], rel=1e-12)
        # group separation over all rows: scipy.stats.f_oneway on every row's balances
        values = mem.values[parts]
        ok = np.all(values.to_numpy() > 0, axis=1)
        B = core.balances(values[ok], rows).to_numpy()
        unit = mem.metadata["Unit"][ok].astype(str).to_numpy()
        samples = [[B[unit == u, j] for u in np.unique(unit)] for j in range(B.shape[1])]
        for got, groups in zip(builder.stats, samples, strict=True):
            sep = got["separation"]
            f = stats.f_oneway(*groups)
            assert sep["anova_f"] == pytest.approx(f.statistic, rel=1e-9)
            assert sep["anova_p"] == pytest.approx(f.pvalue, rel=1e-6, abs=1e-300)
            assert sep["n"] == n and sep["n_groups"] == len(groups)
            x = np.concatenate(groups)  # eta squared, from its definition
            between = sum(len(g) * (g.mean() - x.mean()) ** 2 for g in groups)
            assert sep["between_share"] == pytest.approx(between / np.sum((x - x.mean()) ** 2))
            assert sep["kruskal_n"] is not None and sep["kruskal_n"] <= 2000  # rank test: sample

    check(MAJORS, sbp)
    # the sample's own variance differs: the table does show all rows
    sample_B = core.balances(bench.model.composition.values[MAJORS], sbp)
    assert builder.stats[0]["variance"] != pytest.approx(sample_B.iloc[:, 0].var(), rel=1e-6)
    # another SBP over the same parts: no new pass over the moments; another set of parts
    other = [[1, -1, -1, -1, -1], [0, 1, -1, -1, -1], [0, 0, 1, -1, -1], [0, 0, 0, 1, -1]]
    bench.model.set_sbp(other)
    check(MAJORS, other)
    assert len(bench.all_rows._moments) == 1
    parts = MAJORS[:4]
    bench.model.active_parts = parts
    four = [[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]]
    bench.model.set_sbp(four)
    check(parts, four)


def test_lazy_balance_summary_keeps_small_balances_precise():
    # a balance of two parts that barely differ: psi G psi loses digits; the second pass
    # recomputes it from the balance itself. Reference: numpy var / mean of that balance.
    from compwidgets.core import _lazy

    frame = nearly_constant_ratio(30_000, seed=8)
    entries, _ = _lazy.summarize_balances(
        dd.from_pandas(frame, npartitions=5), [[1, 1, -1], [1, -1, 0]]
    )
    ratio = np.log(frame["a"] / frame["b"]) / np.sqrt(2)  # the balance of a and b
    assert entries[1]["variance"] == pytest.approx(np.var(ratio, ddof=1), rel=1e-12)
    assert entries[1]["mean"] == pytest.approx(np.mean(ratio), rel=1e-9)


def test_all_row_density_follows_parts_changes_and_equals_histogram2d(small):
    lazy, mem = small
    bench = cw.explore(
        lazy, sample_size=2000, mode="density", ternary_parts=[MAJORS[:3], MAJORS[2:5]]
    )
    view = bench.ternaries[0]
    image = view._density_image
    x, y = _ternary_all_rows(mem, MAJORS[:3])
    assert_counts_match(image.all_counts, x, y, image)
    assert image.all_counts.sum() == 24_000
    view.parts = ["SiO2", "MgO", "CaO"]  # a ternary's parts
    x, y = _ternary_all_rows(mem, ["SiO2", "MgO", "CaO"])
    assert_counts_match(view._density_image.all_counts, x, y, image)
    # a change of the active parts redraws every view (from the sample): all rows again
    bench.model.active_parts = ["Al2O3", "Fe2O3", "MgO", "CaO", "Zn"]
    view.follow_active_parts()
    assert list(view.parts) == ["Al2O3", "Fe2O3", "MgO"]
    for v in bench.ternaries:
        x, y = _ternary_all_rows(mem, v.parts)
        assert_counts_match(v._density_image.all_counts, x, y, v._density_image)
        assert "all 24,000 rows" in v.notes.value


def test_biplot_density_counts_all_rows_in_the_sample_fit(small):
    from compwidgets.core import _lazy

    lazy, mem = small
    bench = cw.explore(lazy, sample_size=2000, mode="density", active_parts=MAJORS)
    view = bench.biplot
    fit = view.biplot
    # the projection of the sampled rows is the fit's own row coordinates
    sample = bench.model.composition.values[MAJORS].to_numpy()
    coords = _lazy.biplot_row_coords(fit, sample, [0, 1])
    np.testing.assert_allclose(coords[:, 0], fit.row_column(0), rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(coords[:, 1], fit.row_column(1), rtol=1e-9, atol=1e-12)
    # all rows: clr, centred on the fit's centre, on its axes (numpy only)
    Z = np.log(mem.values[MAJORS].to_numpy())
    Z -= Z.mean(axis=1, keepdims=True)
    scale = np.sqrt(fit.n_rows_used - 1) / fit.singular_values[:2]
    xy = (Z - fit.clr_mean) @ fit.right_vectors[:, :2] * scale
    image = view._density_image
    assert_counts_match(image.all_counts, xy[:, 0], xy[:, 1], image)
    assert "axes fitted on the sample" in view.notes.value
    view.scaling = "form"  # the plane moves: counted again in the new coordinates
    xy = (Z - fit.clr_mean) @ fit.right_vectors[:, :2]
    image = view._density_image
    assert_counts_match(image.all_counts, xy[:, 0], xy[:, 1], image)


def test_a_biplot_shape_applies_to_all_rows_in_the_sample_fit(small):
    lazy, mem = small
    bench = cw.explore(lazy, sample_size=2000, mode="points", active_parts=MAJORS)
    view, model = bench.biplot, bench.model
    fit = view.biplot
    xr = tuple(np.quantile(view._x, [0.2, 0.6]))
    yr = tuple(np.quantile(view._y, [0.3, 0.8]))
    view.select_rectangle(xr, yr)
    assert 0 < len(model.selection) < model.n_rows
    # independent route: every row's clr, centred on the fit's centre, on its axes (numpy)
    Z = np.log(mem.values[MAJORS].to_numpy())
    Z -= Z.mean(axis=1, keepdims=True)
    xy = (
        (Z - fit.clr_mean)
        @ fit.right_vectors[:, :2]
        * (np.sqrt(fit.n_rows_used - 1) / fit.singular_values[:2])
    )
    inside = (xy[:, 0] >= xr[0]) & (xy[:, 0] <= xr[1]) & (xy[:, 1] >= yr[0]) & (xy[:, 1] <= yr[1])
    mask = bench.all_rows.selected_mask(view).compute()
    np.testing.assert_array_equal(mask.to_numpy(), inside)
    # the rows the view selected in the sample are those of the shape
    assert set(model.index[model.selection]) <= set(mem.values.index[inside])


def test_second_use_of_a_lazy_composition_parses_nothing(tmp_path, monkeypatch):
    from compwidgets.lazy import intake as lazy_intake

    frame = survey(12_000, seed=5)
    path = tmp_path / "t.parquet"
    dd.from_pandas(frame, npartitions=3, sort=False).to_parquet(path, write_index=False)
    calls = []
    real = lazy_intake.partition_composition
    monkeypatch.setattr(
        lazy_intake,
        "partition_composition",
        lambda *a: (calls.append(a[2]) if len(a[0]) else None) or real(*a),  # rows parsed
    )
    spill = tmp_path / "spill"
    lazy = cw.read_composition(path, spill=spill, **OPTIONS)
    first = lazy.values.compute()
    assert sorted(calls) == [0, 1, 2]
    calls.clear()
    again = lazy.values.compute()  # a second use: read from the kept partitions
    counts = lazy.report_counts()
    lazy.sample(100)
    assert calls == []
    pd.testing.assert_frame_equal(again, first)
    mem = cw.read_composition(frame, **OPTIONS)
    pd.testing.assert_series_equal(
        counts, mem.report.groupby(["action", "code"]).size().sort_index(), check_names=False
    )
    assert len(list(spill.rglob("rest.pickle"))) == 3
    # no spill: every use parses again
    plain = cw.read_composition(path, spill=False, **OPTIONS)
    plain.values.compute()
    plain.values.compute()
    assert sorted(calls) == [0, 0, 1, 1, 2, 2]
    with pytest.raises(core.CompositionError, match="spill"):
        cw.read_composition(frame, spill=spill)


def test_temporary_spill_folder_goes_with_the_composition(tmp_path):
    import gc

    frame = survey(3000)
    lazy = cw.read_composition(dd.from_pandas(frame, npartitions=2), **OPTIONS)
    folder = lazy.spill.folder
    lazy.values.compute()
    assert os.path.isdir(folder) and len(os.listdir(folder)) == 2  # one per partition
    del lazy
    gc.collect()
    assert not os.path.exists(folder)


@pytest.mark.parametrize(
    "index",
    [
        pd.Index(np.arange(5000) * 7 + 3),  # unnamed integers
        pd.Index([f"S{k:05d}" for k in range(5000)][::-1]),  # unnamed text
        pd.Index(np.arange(5000) + 10, name="bore"),  # named
    ],
    ids=["unnamed-int", "unnamed-str", "named"],
)
def test_row_labels_round_trip_through_parquet(tmp_path, index):
    rng = np.random.default_rng(2)
    frame = pd.DataFrame(
        np.round(np.exp(rng.normal(size=(5000, 3))), 4),
        columns=["Cu (ppm)", "Zn (ppm)", "Pb (ppm)"],
    ).set_axis(index, axis=0)
    frame.iloc[17, 0] = 0.0  # a cell below detection: its report entry names the row
    options = {"detection_limits": 0.001}
    mem = cw.read_composition(frame, **options)
    # written by pandas (one file), by dask (a folder), and by the package's own writer
    frame.to_parquet(tmp_path / "one.parquet")
    dd.from_pandas(frame, npartitions=3, sort=False).to_parquet(tmp_path / "folder")
    lazy = cw.read_composition(dd.from_pandas(frame, npartitions=3, sort=False), **options)
    lazy_export.write_parquet(lazy.values, tmp_path / "own")
    for source in ("one.parquet", "folder"):
        back = cw.read_composition(tmp_path / source, **options)
        got = back.values.compute()
        pd.testing.assert_index_equal(got.index, mem.values.index, exact=False)
        report = back.report.compute()
        entry = report[report["action"] == "below_detection"]
        assert entry["row"].tolist() == [index[17]]
    own = cw.read_composition(tmp_path / "own", **options).values.compute()
    assert own.index.tolist() == mem.values.index.tolist()
    assert own.index.name == index.name


def test_statistics_note_sits_above_the_builder(small):
    lazy, _ = small
    bench = cw.explore(lazy, sample_size=1000)
    holders = []
    boxes = [bench]
    while boxes:
        box = boxes.pop()
        children = list(getattr(box, "children", ()))
        if bench.builder in children:
            holders.append(children)
        boxes.extend(c for c in children if hasattr(c, "children"))
    (children,) = holders
    assert children[children.index(bench.builder) - 1] is bench.statistics_note
