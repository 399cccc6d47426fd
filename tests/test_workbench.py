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


def walk(widget):
    yield widget
    for child in getattr(widget, "children", ()):
        yield from walk(child)


def test_explore_returns_one_layout_with_the_model_and_every_view(bench):
    assert isinstance(bench, w.VBox) and "cw-workbench" in bench._dom_classes
    assert len(bench.ternaries) == 2
    views = (*bench.ternaries, bench.biplot, bench.builder, bench.picker, bench.triage)
    for view in (*views, bench.selection_bar):
        assert view.model is bench.model
    shown = {id(x) for x in walk(bench)}
    for view in (*views, bench.discriminant, bench.selection_bar, bench.sidebar):
        assert id(view) in shown, type(view).__name__
    # the caution of the trade sits above the triage panel
    texts = " ".join(c.value for c in bench.triage.children if isinstance(c, w.Label | w.HTML))
    assert "accredited" in texts


def test_the_builder_shares_the_first_row_with_the_ternaries(bench):
    # the grid's order is the reading order: the builder, then the brushable ternaries
    # (one flex row that wraps with the width; the browser test measures the screen)
    cells = list(bench.grid.children)
    assert cells[0].children[1] is bench.builder
    assert [c.children[1] for c in cells[1:3]] == list(bench.ternaries)
    assert cells[3].children[1] is bench.biplot
    assert {c.children[1] for c in cells} >= {bench.sidebar, bench.discriminant}
    assert all("cw-cell" in c._dom_classes for c in cells)
    assert "cw-grid" in bench.grid._dom_classes


def test_views_carry_human_names_that_follow_the_parts(bench):
    titles = {key: label.value for key, label in bench.titles.items()}
    a, b, c = bench.ternaries[0].parts
    assert titles["ternary-1"] == f"Ternary 1 \u00b7 {a}\u2013{b}\u2013{c}"
    assert titles["biplot"] == "clr biplot" and titles["builder"] == "Balance dendrogram"
    # no Python class name anywhere in the names shown
    assert not [t for t in titles.values() if "View" in t or "Builder" in t or "Panel" in t]
    # each title is the Label shown right above its view
    for cell in bench.grid.children:
        assert cell.children[0] in bench.titles.values()
    before = list(bench.ternaries[1].parts)
    bench.ternaries[1].parts = [before[1], before[0], before[2]]
    try:
        assert bench.titles["ternary-2"].value == "Ternary 2 \u00b7 " + "\u2013".join(
            [before[1], before[0], before[2]]
        )
    finally:
        bench.ternaries[1].parts = before


def test_every_view_names_its_message_area_messages(bench):
    # the scatter views, the bar, the triage panel and the picker: an Output for errors
    for view in (*bench.views, bench.selection_bar, bench.triage, bench.picker):
        assert isinstance(view.messages, w.Output), type(view).__name__
        assert view.messages in list(walk(view)), type(view).__name__
    # the builder's message area is its synced text trait of the same name
    assert bench.builder.messages == "" and "messages" in bench.builder.keys


def test_only_static_text_in_html_widgets(bench):
    # the one HTML widget the layout adds is its style sheet: nothing from the table in it
    from compwidgets.views._layout import CSS

    mine = [x for x in walk(bench) if isinstance(x, w.HTML) and "<style>" in x.value]
    assert len(mine) == 1 and mine[0].value == f"<style>{CSS}</style>"
    for part in bench.model.parts:
        assert str(part) not in CSS


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
