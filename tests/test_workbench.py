"""explore(): one call from a table to the linked workbench (kernel-side, no browser)."""

import itertools

import ipywidgets as w
import numpy as np
import pandas as pd
import pytest

import compwidgets as cw
from compwidgets import core
from compwidgets.core.ternary import ternary_to_xy
from compwidgets.workbench import (
    default_group_column,
    default_id_column,
    default_ternary_parts,
)


@pytest.fixture(scope="module")
def table():
    return cw.demo.stream_sediments(n=600, seed=11)


@pytest.fixture(scope="module")
def bench(table):
    return cw.explore(table, detection_limits=cw.demo.DETECTION_LIMITS)


def test_explore_returns_one_layout_with_the_model_and_every_view(bench):
    assert isinstance(bench, w.AppLayout)
    assert len(bench.ternaries) == 2
    views = (*bench.ternaries, bench.biplot, bench.builder, bench.picker, bench.triage)
    for view in (*views, bench.selection_bar):
        assert view.model is bench.model
    shown = {id(c) for c in (bench.header, bench.left_sidebar, bench.center, bench.footer)}
    assert id(bench.selection_bar) in shown and id(bench.builder) in shown
    # the caution of the trade sits above the triage panel
    texts = " ".join(c.value for c in bench.triage.children if isinstance(c, w.Label | w.HTML))
    assert "accredited" in texts


def test_grouping_column_defaults_to_a_categorical_metadata_column(table, bench):
    assert bench.model.group_column == "catchment"
    meta = pd.DataFrame(
        {
            "id": [f"s{i}" for i in range(6)],  # unique: not a grouping
            "depth": np.arange(6.0),  # numeric: not a grouping
            "site": ["a", "a", "b", "b", "c", "c"],
        }
    )
    assert default_group_column(meta) == "site"
    assert default_group_column(meta[["id", "depth"]]) == ""
    assert default_id_column(meta) == "id"
    assert default_id_column(meta[["depth", "site"]]) == ""


def test_hover_names_samples_by_their_id(table, bench):
    # intake makes the sample-id column the row labels, so the hover heads with them
    assert bench.model.index.name == "sample_id"
    assert list(bench.model.index) == list(table["sample_id"])
    assert "sample_id" not in bench.model.metadata.columns
    for view in (*bench.ternaries, bench.biplot):
        assert view.id_column == ""
        assert view._hover_heading(3)[0] == table["sample_id"].iloc[3]
    # read without the labels, the id column of the metadata names the samples
    kept = cw.explore(table, index_col=False)
    assert all(v.id_column == "sample_id" for v in (*kept.ternaries, kept.biplot))


def test_default_ternaries_are_the_triples_spreading_the_points_most(bench):
    model = bench.model
    (first, second) = default_ternary_parts(model)
    assert len(set(first) | set(second)) == 6  # two ternaries, no part shown twice
    # independent route: numpy's covariance of the drawn points of every triple of the
    # parts holding at least 1 % of the composition (median share of the known parts),
    # each triple on the rows complete in it
    active = list(model.active_parts)
    values = model.part_values(active)
    shares = values / np.nansum(values, axis=1, keepdims=True)
    big = [p for p, s in zip(active, np.nanmedian(shares, axis=0), strict=True) if s >= 0.01]

    def spread(triple):
        v = model.part_values(list(triple))
        v = v[np.all(v > 0, axis=1)]
        v = v / v.sum(axis=1, keepdims=True)
        xy = v @ np.array([[0.5, np.sqrt(3) / 2], [0.0, 0.0], [1.0, 0.0]])
        return np.trace(np.cov(xy.T, bias=True))

    spreads = {t: spread(t) for t in itertools.combinations(big, 3)}
    assert tuple(first) == max(spreads, key=spreads.get)
    assert [v.parts for v in bench.ternaries] == [list(first), list(second)]


def test_a_selection_in_one_ternary_shows_in_every_view(bench):
    model = bench.model
    t1, t2 = bench.ternaries
    model.clear_selection()
    t1.select_rectangle((0.2, 0.6), (0.0, 0.3))
    # independent route: project the closed three parts and test the rectangle by hand
    parts = t1.parts
    ok = model.complete_rows(parts)
    v = model.part_values(parts)
    x, y = ternary_to_xy(v[ok] / v[ok].sum(axis=1, keepdims=True))
    inside = (x >= 0.2) & (x <= 0.6) & (y >= 0.0) & (y <= 0.3)
    expected = np.flatnonzero(ok)[inside]
    assert expected.size > 0
    np.testing.assert_array_equal(model.selection, expected)
    n = expected.size
    assert bench.builder.n_selected == n
    assert bench.selection_bar.count == n
    for view in (t2, bench.biplot):
        selected_rows = view.rows[np.asarray(view.scatter.selected, dtype=int)]
        expected_here = np.intersect1d(expected, view.rows)
        np.testing.assert_array_equal(np.sort(selected_rows), expected_here)
    assert model.selected_frame().index.equals(model.index[expected])
    model.clear_selection()
    assert bench.builder.n_selected == 0 and bench.selection_bar.count == 0


def test_explore_takes_a_path_a_composition_or_a_model(tmp_path):
    df = pd.DataFrame(
        {
            "site": ["a", "a", "b", "b"],
            "SiO2 (wt%)": [60.0, 62.0, 50.0, 48.0],
            "Al2O3 (wt%)": [20.0, 19.0, 25.0, 26.0],
            "CaO (wt%)": [10.0, 11.0, 15.0, 16.5],
            "MgO (wt%)": [9.5, 7.5, 9.5, 9.0],
        },
        index=["A1", "A2", "B1", "B2"],
    )
    path = tmp_path / "table.csv"
    df.to_csv(path, index_label="id")
    from_path = cw.explore(path, index_col="id")
    assert from_path.model.index.tolist() == ["A1", "A2", "B1", "B2"]
    comp = cw.read_composition(df)
    from_comp = cw.explore(comp, group="")
    assert from_comp.model.composition is comp and from_comp.model.group_column == ""
    again = cw.explore(from_comp.model, active_parts=["SiO2", "Al2O3", "CaO"])
    assert again.model is from_comp.model and again.model.active_parts == ["SiO2", "Al2O3", "CaO"]
    with pytest.raises(TypeError, match="read options"):
        cw.explore(comp, detection_limits={"SiO2": 0.01})
    # the closed parts in the views are the core's closure of the caller's numbers
    np.testing.assert_allclose(
        again.model.closed(), core.closure(df[["SiO2 (wt%)", "Al2O3 (wt%)", "CaO (wt%)"]].values)
    )
