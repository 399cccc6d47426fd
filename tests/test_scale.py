"""Behaviour that keeps the workbench fast on large tables (kernel side, nothing timed).

* explore() fits no robust model: the outlier screening runs when the triage tab
  opens, with the same flags as a direct ``sklearn.covariance.MinCovDet`` fit
  (the method used before the screening was made lazy) on the demo survey;
* switching the active parts back and forth reuses every derived array (counted
  calls of the core functions that compute them);
* a selection change opens no widget (no comm), in points and in density mode;
* a change of parts shows its stages in the workbench's progress line.

Speed itself is measured by ``benchmarks/bench_workbench.py``.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy import stats
from sklearn.covariance import MinCovDet

import compwidgets as cw
from compwidgets import core
from compwidgets.core import biplot as core_biplot
from compwidgets.core import discriminant as core_discriminant
from compwidgets.core import geometry
from compwidgets.core import ternary as core_ternary
from compwidgets.model import CompositionModel
from compwidgets.views import _plot_layout as plot_layout


@pytest.fixture(scope="module")
def demo_bench():
    table = cw.demo.stream_sediments(n=2000, seed=7)
    return cw.explore(table, detection_limits=cw.demo.DETECTION_LIMITS)


def direct_flags(Y: np.ndarray, quantile: float = 0.975) -> np.ndarray:
    """Source: sklearn MinCovDet(random_state=0) and the scipy chi2 cut-off
    (Filzmoser & Hron 2008): the screening as it was computed eagerly before."""
    mcd = MinCovDet(random_state=0).fit(Y)
    return np.sqrt(mcd.mahalanobis(Y)) > np.sqrt(stats.chi2.ppf(quantile, Y.shape[1]))


def test_explore_fits_nothing_until_the_triage_tab_opens(monkeypatch):
    fits = []
    original = MinCovDet.fit

    def counting(self, X, y=None):
        fits.append(np.shape(X))
        return original(self, X, y)

    monkeypatch.setattr(MinCovDet, "fit", counting)
    bench = cw.explore(cw.demo.stream_sediments(n=300, seed=3), group="")
    assert fits == []
    assert not bench.triage.screened
    assert "Not screened yet" in bench.triage.outlier_label.value
    bench.sidebar.selected_index = 1  # the user opens the triage tab
    assert len(fits) == 1 and bench.triage.screened
    assert not bench.triage.progress.active  # the progress line is hidden when done
    assert "complete rows beyond distance" in bench.triage.outlier_label.value
    # once shown, a change of parts marks the results stale (outside a kernel nothing
    # is scheduled; they are computed when asked for)
    bench.model.active_parts = list(bench.model.active_parts)[:6]
    assert not bench.triage.screened and len(fits) == 1
    assert bench.triage.outliers.location.size == 5 and len(fits) == 2


def test_outlier_flags_on_the_demo_survey_are_those_of_a_direct_mcd_fit(demo_bench):
    model, triage = demo_bench.model, demo_bench.triage
    assert model.group_column == "catchment" and triage.by_group.value
    triage.show()
    ok = model.complete_rows()
    Y = np.asarray(model.ilr())
    codes = model.group_codes()[1]
    assert Y.shape[1] <= triage.max_coordinates  # small D: the MCD itself, not reduced
    expected = []
    for label, (pos, fit) in triage.fits.items():
        assert not fit.reduced and fit.fitted.all()  # 2,000 rows: no sample either
        k = model.group_codes()[0].index(label)
        rows = np.flatnonzero(ok & (codes == k))
        np.testing.assert_array_equal(pos, rows)
        flags = direct_flags(Y[rows])
        np.testing.assert_array_equal(fit.outliers, flags)
        expected += rows[flags].tolist()
    found = [pos for text, pos in triage.items if text.startswith("outliers, distance")]
    assert [p.tolist() for p in found] == [sorted(expected)]
    # and screened as one population
    triage.by_group.value = False
    fit = triage.outliers
    np.testing.assert_array_equal(fit.outliers, direct_flags(Y[ok]))
    triage.by_group.value = True


def counted(monkeypatch, module, name, calls, rows: int = 1000):
    """Record the calls of ``module.name`` on data (first argument of at least ``rows``
    rows; the small geometry of grids and ticks also goes through some of them)."""
    original = getattr(module, name)

    def wrapper(*args, **kwargs):
        if args and np.shape(args[0])[:1] and np.shape(args[0])[0] >= rows:
            calls.append(name)
        return original(*args, **kwargs)

    monkeypatch.setattr(module, name, wrapper)


def test_switching_parts_back_reuses_every_derived_array(monkeypatch):
    # 6,000 rows: the views draw density images, so their bin numbers are cached too
    table = cw.demo.stream_sediments_clean(n=6000, seed=2)
    majors = [c for c in table.columns if str(c).endswith("(wt%)")]
    bench = cw.explore(table, parts=majors, check_total=False)  # grouped: a discriminant too
    model = bench.model
    assert model.group_column and bench.discriminant.rule is not None
    assert {v.active_mode for v in bench.views} == {"density"}
    full = list(model.active_parts)
    fewer = full[:6]
    calls: list[str] = []
    for module, name in [
        (core, "clr"),
        (core, "closure"),
        (core, "ilr"),
        (core, "variation_matrix"),
        (core_ternary, "ternary_to_xy"),
        (core_biplot, "clr_biplot"),
        (core_biplot, "composition_biplot"),
        (geometry, "bin_index"),
    ]:
        counted(monkeypatch, module, name, calls)
    counted(monkeypatch, plot_layout, "ray_label_positions", calls, rows=1)  # one per part
    counted(monkeypatch, core_discriminant, "fit_discriminant", calls)
    model.active_parts = fewer
    first = len(calls)
    # the biplot takes each block of rows to clr itself: no clr matrix of the model
    assert {"composition_biplot", "variation_matrix", "fit_discriminant"} <= set(calls)
    model.active_parts = full
    model.active_parts = fewer
    model.active_parts = full
    assert calls[first:] == []  # back and forth: every array came from the cache
    assert bench.biplot.biplot.parts == full and bench.picker.heatmap.names == full
    assert bench.discriminant.rule.parts == full


def test_the_cache_keeps_to_its_byte_budget():
    df = pd.DataFrame(
        np.exp(np.random.default_rng(0).normal(size=(5000, 6))), columns=list("ABCDEF")
    )
    model = CompositionModel(cw.read_composition(df, check_total=False))
    model.cache_bytes = 600_000  # about two 5,000 x 6 float matrices
    first = model.clr(list("ABCDE"))
    assert model.clr(list("ABCDE")) is first  # cached
    for parts in (list("ABCD"), list("BCDE"), list("ACDE"), list("ABDE")):
        model.clr(parts)
    assert model.cache_used <= model.cache_bytes
    again = model.clr(list("ABCDE"))
    assert again is not first  # evicted (least recently used), computed again
    np.testing.assert_array_equal(again, first)


def test_replaced_mask_matches_the_status_text():
    # the model reads the replaced cells from raw/values; the composition from its status
    comp = cw.read_composition(
        cw.demo.stream_sediments(n=800, seed=5), detection_limits=cw.demo.DETECTION_LIMITS
    )
    model = CompositionModel(comp)
    expected = ((comp.status == "below_dl") & comp.values.notna()).to_numpy()
    assert expected.any()
    np.testing.assert_array_equal(model.replaced(), expected)
    parts = comp.parts[-3:]
    np.testing.assert_array_equal(model.replaced_rows(parts), expected[:, -3:].any(axis=1))


@pytest.mark.parametrize("rows", [600, 6000])
def test_a_selection_change_opens_no_widget(rows, opened_comms):
    table = cw.demo.stream_sediments_clean(n=rows, seed=4)
    majors = [c for c in table.columns if str(c).endswith("(wt%)")]
    bench = cw.explore(table, parts=majors, check_total=False)
    model = bench.model
    n = len(majors)
    model.set_sbp(np.triu(-np.ones((n - 1, n), dtype=int), 1) + np.eye(n - 1, n, dtype=int))
    mode = "density" if rows > 5000 else "points"
    assert {v.active_mode for v in bench.views if v.rows.size} == {mode}
    opened_comms.clear()
    rng = np.random.default_rng(1)
    before = [v._png.value for v in bench.views]
    for _ in range(3):
        model.select(np.sort(rng.choice(model.n_rows, model.n_rows // 10, replace=False)))
        assert bench.builder.n_selected == model.selection.size
    if mode == "density":  # the pictures show the selection, in widgets made with the views
        assert all(v.density.image in v._pictures for v in bench.views)
        assert all(v._png.value != b for v, b in zip(bench.views, before, strict=True))
    bench.ternaries[0].select_rectangle((0.1, 0.9), (0.0, 0.5))
    model.clear_selection()
    assert opened_comms == []
    assert bench.builder.n_selected == 0


def test_a_change_of_parts_shows_its_stages(demo_bench):
    seen = []
    bench = demo_bench
    bench.progress.stage.observe(lambda change: seen.append(change["new"]), names=["value"])
    model = bench.model
    full = list(model.active_parts)
    model.active_parts = full[:8]
    model.active_parts = full
    stages = [s for s in seen if s]
    assert stages[0] == "updating clr biplot"
    assert "updating ternary 1" in stages and "updating variation matrix" in stages
    assert not bench.progress.active  # hidden once every view is up to date


def test_selection_counts_from_the_bins_kept_by_row_equal_a_histogram():
    # Source: numpy.histogram2d of the selected points on the same grid (transposed: the
    # image's row 0 is the lowest y)
    from compwidgets.views._density import DensityImage

    rng = np.random.default_rng(6)
    n_rows = 5000
    rows = np.sort(rng.choice(n_rows, 3000, replace=False)).astype(np.uint32)  # rows shown
    x, y = rng.uniform(-0.1, 1.1, 3000), rng.uniform(0.0, 0.9, 3000)
    image = DensityImage((0.0, 1.0, 0.0, 0.8), (40, 32))
    image.set_points(x, y, rows, n_rows)
    selection = np.sort(rng.choice(n_rows, 700, replace=False))
    shown = np.isin(rows, selection)
    counts = image.counts_of_rows(selection)
    reference, _, _ = np.histogram2d(
        x[shown], y[shown], bins=(40, 32), range=[[0.0, 1.0], [0.0, 0.8]]
    )
    np.testing.assert_array_equal(counts, reference.T.astype(int))
    np.testing.assert_array_equal(counts, image.selection_counts(shown))
    assert image.counts_of_rows(np.setdiff1d(np.arange(n_rows), rows)) is None  # none shown


def test_heat_map_refuses_a_matrix_of_the_wrong_shape_and_a_bad_pick():
    from compwidgets.views.heatmap import VariationHeatmap, default_cell_px

    heat = VariationHeatmap()
    with pytest.raises(ValueError, match="square matrix of 3 names"):
        heat.set_matrix(["a", "b", "c"], np.zeros((2, 2)))
    heat.set_matrix(["a", "b", "c"], np.array([[0, 1, 2], [1, 0, 3], [2, 3, 0]]))
    assert heat.cell_px == default_cell_px(3)
    assert default_cell_px(200) == 12  # 200 parts: the smallest readable cell, scrolled
    with pytest.raises(Exception, match="within 0..2"):
        heat.picked = [0, 3]
    np.testing.assert_array_equal(heat.matrix(), [[0, 1, 2], [1, 0, 3], [2, 3, 0]])
