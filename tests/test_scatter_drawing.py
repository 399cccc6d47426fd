"""Drawing tools, replaced-value markers, group symbols and figure saving of ScatterView.

Kernel side (no browser): front-end actions are replayed as the browser sends them
(``set_state`` of a brush, of the scatter's ``selected`` for a lasso, of the
polygon vertices). Expected rows come from plain numpy (closure and the
barycentric placement ``x = c + a / 2, y = a * sqrt(3) / 2``, common practice)
and matplotlib's ``Path.contains_points``; data are invented here.
"""

from __future__ import annotations

import bqplot as bq
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from matplotlib.path import Path

from compwidgets.intake import read_composition
from compwidgets.lazy.workbench import selection_shape
from compwidgets.model import CompositionModel
from compwidgets.views import _common as cm
from compwidgets.views._drawing import EMPTY_SHAPE_NOTE
from compwidgets.views._figure_save import FigureSaveControl
from compwidgets.views.ternary import TernaryView

PARTS = ["A", "B", "C", "D"]
H = np.sqrt(3) / 2


def make_frame(n: int, seed: int = 0, groups: int = 3) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    values = np.exp(rng.normal([1.0, 0.5, 0.0, -0.5], 0.7, size=(n, 4)))
    df = pd.DataFrame(values, columns=PARTS, index=[f"S{i:05d}" for i in range(n)])
    df["site"] = [f"g{k}" for k in rng.integers(0, groups, size=n)]
    return df


@pytest.fixture
def model():
    df = make_frame(300)
    df["C"] = df["C"].astype(object)
    df.loc[["S00010", "S00011", "S00012"], "C"] = "<0.05"  # replaced below detection
    return CompositionModel(read_composition(df, check_total=False), group_column="site")


@pytest.fixture(scope="module")
def big_model():
    return CompositionModel(read_composition(make_frame(12_000, seed=5), check_total=False))


def projected(model, parts):
    """Plain-numpy ternary projection of every row (NaN where a part is missing)."""
    X = model.composition.values[parts].to_numpy(dtype=float)
    C = X / X.sum(axis=1, keepdims=True)
    return C[:, 2] + C[:, 0] / 2, C[:, 0] * H


def brush(view, xr, yr):
    view.brush.set_state({"brushing": True})
    view.brush.set_state({"selected_x": list(xr), "selected_y": list(yr)})
    view.brush.set_state({"brushing": False})


def inside_rectangle(model, xr, yr):
    x, y = projected(model, ["A", "B", "C"])
    return np.flatnonzero((x >= xr[0]) & (x <= xr[1]) & (y >= yr[0]) & (y <= yr[1]))


# ------------------------------------------------------------------ rectangle


def test_each_press_starts_a_new_rectangle_and_only_the_last_is_drawn(model):
    view = TernaryView(model, ["A", "B", "C"])
    brush(view, (0.2, 0.8), (0.05, 0.5))
    first = inside_rectangle(model, (0.2, 0.8), (0.05, 0.5))
    np.testing.assert_array_equal(model.selection, first)
    # the kernel took the rectangle and emptied the brush: a press inside the old
    # rectangle finds no rectangle to move, it draws a new one
    assert view.brush.selected_x is None and view.brush.selected_y is None
    assert view.selection_shape == {"kind": "rectangle", "vertices": [[0.2, 0.05], [0.8, 0.5]]}
    np.testing.assert_allclose(view.selection_outline.x, [0.2, 0.8, 0.8, 0.2, 0.2])
    np.testing.assert_allclose(view.selection_outline.y, [0.05, 0.05, 0.5, 0.5, 0.05])
    # a second, smaller rectangle inside the first replaces the selection
    brush(view, (0.4, 0.6), (0.1, 0.3))
    second = inside_rectangle(model, (0.4, 0.6), (0.1, 0.3))
    assert 0 < second.size < first.size
    np.testing.assert_array_equal(model.selection, second)
    np.testing.assert_allclose(view.selection_outline.x, [0.4, 0.6, 0.6, 0.4, 0.4])
    assert selection_shape(view) == view.selection_shape  # the adapter reads the attribute


def test_a_shape_enclosing_nothing_leaves_the_selection_and_says_so(model):
    view = TernaryView(model, ["A", "B", "C"])
    brush(view, (0.2, 0.8), (0.05, 0.5))
    before = model.selection.copy()
    shape = view.selection_shape
    seen = []
    model.observe(lambda change: seen.append(change), names=["selection"])
    brush(view, (1.2, 1.3), (0.8, 0.85))  # outside the triangle: no row there
    assert seen == []
    np.testing.assert_array_equal(model.selection, before)
    assert EMPTY_SHAPE_NOTE in view.notes.value
    assert view.selection_shape == shape  # still the shape of the selection shown
    view.select_polygon([(1.2, 0.8), (1.3, 0.8), (1.25, 0.85)], mode="intersect")
    np.testing.assert_array_equal(model.selection, before)  # not emptied by intersect
    # a lasso around no point: the browser empties the mark; the view shows the
    # model's selection again
    view.tool = "lasso"
    view.scatter.set_state({"selected": []})
    np.testing.assert_array_equal(model.selection, before)
    np.testing.assert_array_equal(view._mark_rows[view.scatter.selected], before)
    # a shape that encloses rows selects and clears the note
    brush(view, (0.3, 0.7), (0.1, 0.4))
    assert model.selection.size > 0 and EMPTY_SHAPE_NOTE not in view.notes.value


def test_a_selection_made_elsewhere_removes_this_views_outline(model):
    v1 = TernaryView(model, ["A", "B", "C"])
    v2 = TernaryView(model, ["B", "C", "D"])
    brush(v1, (0.2, 0.8), (0.05, 0.5))
    assert len(v1.selection_outline.x) == 5
    brush(v2, (0.2, 0.8), (0.05, 0.5))
    assert v1.selection_shape is None and len(v1.selection_outline.x) == 0
    assert v2.selection_shape is not None
    v2.clear_selection()
    assert v2.selection_shape is None and len(v2.selection_outline.x) == 0


# ---------------------------------------------------------------------- lasso


def test_each_lasso_starts_on_a_fresh_selector_without_new_widgets(model, opened_comms):
    view = TernaryView(model, ["A", "B", "C"])
    opened_comms.clear()
    view._tool_buttons.value = "lasso"
    first = view.lasso
    assert view.figure.interaction is first
    view.scatter.set_state({"selected": [0, 4, 9]})
    np.testing.assert_array_equal(model.selection, np.sort(view.rows[[0, 4, 9]]))
    # the other lasso (made with the view) takes over: its outline layer is empty, so
    # the old outline goes and the next lasso is not joined to it
    assert view.lasso is not first and view.figure.interaction is view.lasso
    assert view.selection_shape is None  # a lasso's outline never reaches the kernel
    view.scatter.set_state({"selected": [20, 21]})
    np.testing.assert_array_equal(model.selection, np.sort(view.rows[[20, 21]]))
    assert view.lasso is first and view.figure.interaction is first
    assert opened_comms == []


# -------------------------------------------------------------------- density


def test_density_mode_says_what_it_draws_and_why_it_has_no_lasso(big_model):
    view = TernaryView(big_model, ["A", "B", "C"], subsample_size=300)
    assert view.active_mode == "density"
    assert f"density of {big_model.n_rows:,} rows, 300 drawn as points" in view.notes.value
    assert "no lasso here" in view.notes.value and "Polygon" in view.notes.value
    view.mode = "points"
    assert "density of" not in view.notes.value


@pytest.fixture(scope="module")
def density_view(big_model):
    view = TernaryView(big_model, ["A", "B", "D"], mode="density", subsample_size=200)
    view.tool = "polygon"
    yield view
    view.close()


@settings(max_examples=25)
@given(
    st.lists(
        st.tuples(st.floats(-0.1, 1.1), st.floats(-0.1, 1.0)),
        min_size=3,
        max_size=7,
        unique=True,
    )
)
def test_density_polygon_selects_the_rows_inside_among_all_rows(big_model, density_view, vertices):
    view = density_view
    big_model.select([0, 1, 2])
    for vx, vy in vertices:  # clicks on the density image
        msg = {"event": "element_click", "data": {"click_x": vx, "click_y": vy}}
        view.density._handle_custom_msgs(view.density, msg)
    view.close_polygon()
    # reference: matplotlib's even-odd point-in-polygon on every row, not the 200 drawn
    x, y = projected(big_model, ["A", "B", "D"])
    path = Path(np.asarray(vertices), closed=False)
    inside = path.contains_points(np.column_stack([x, y]))
    if inside.any():
        np.testing.assert_array_equal(big_model.selection, np.flatnonzero(inside))
        assert view.selection_shape["kind"] == "polygon"
    else:
        np.testing.assert_array_equal(big_model.selection, [0, 1, 2])
        assert EMPTY_SHAPE_NOTE in view.notes.value


def test_a_polygon_of_repeated_clicks_says_why_it_selects_nothing(model):
    view = TernaryView(model, ["A", "B", "C"])
    view.tool = "polygon"
    for vx, vy in [(0.3, 0.2), (0.6, 0.2), (0.3, 0.2)]:  # the last click closes on the first
        view.scatter._handle_custom_msgs(None, {"event": "element_click",
                                                 "data": {"x": vx, "y": vy}})  # fmt: skip
    view.close_polygon()
    assert "at least 3 vertices" in view.notes.value and model.selection.size == 0


# ---------------------------------------------------------- replaced markers


def test_unselected_replaced_markers_fade_like_unselected_points(model):
    view = TernaryView(model, ["A", "B", "C"])
    assert view.replaced_marker.x.size == 3
    style = view.replaced_marker.unselected_style
    # the marker is hollow: it fades by its stroke, as much as a point by its fill
    assert style["stroke-opacity"] == view.scatter.unselected_style["fill-opacity"]
    assert float(style["stroke-opacity"]) < 1.0
    assert view.replaced_marker.selected is None  # no selection: drawn plainly
    model.select([10, 50, 60])  # one of the three replaced rows
    replaced_rows = view._mark_rows[view._replaced_pos]
    np.testing.assert_array_equal(replaced_rows, [10, 11, 12])
    np.testing.assert_array_equal(view.replaced_marker.selected, [0])
    model.select([50, 60])  # replaced rows all unselected: all faded
    assert list(view.replaced_marker.selected) == []
    model.clear_selection()
    assert view.replaced_marker.selected is None


def sent_states(monkeypatch, marks) -> list:
    """(mark, state keys and values) of every message sent to the front end by ``marks``."""
    import ipywidgets as widgets

    sent = []
    original = widgets.Widget._send

    def spy(self, msg, buffers=None):
        if any(self is m for m in marks):
            sent.append((self, msg.get("state", {})))
        return original(self, msg, buffers)

    monkeypatch.setattr(widgets.Widget, "_send", spy)
    return sent


def test_clearing_the_selection_unfades_the_points_before_it_goes(model, monkeypatch):
    # bqplot's scatter leaves a fill opacity set when `selected` becomes None (its restyle
    # clears the keys of a list of styles, not of the styles): the views first give the
    # unselected points opacity 1, in a message of its own, then drop the selection
    view = TernaryView(model, ["A", "B", "C"])
    marks = (view.scatter, view.replaced_marker)
    model.select([10, 50, 60])
    sent = sent_states(monkeypatch, marks)
    model.clear_selection()
    for mark, key in ((view.scatter, "fill-opacity"), (view.replaced_marker, "stroke-opacity")):
        states = [s for m, s in sent if m is mark]
        assert [sorted(s) for s in states] == [["unselected_style"], ["selected"]], states
        assert states[0]["unselected_style"] == {key: "1"} and states[1]["selected"] is None
        assert mark.selected_style[key] == "1"  # the selected ones were at 1 already
    sent.clear()
    model.select([50, 60])  # a selection again: faded first, while nothing is selected
    for mark, key in ((view.scatter, "fill-opacity"), (view.replaced_marker, "stroke-opacity")):
        states = [s for m, s in sent if m is mark]
        assert [sorted(s) for s in states] == [["unselected_style"], ["selected"]], states
        assert states[0]["unselected_style"] == {key: cm.UNSELECTED_OPACITY}
    sent.clear()
    model.select([60, 70])  # one selection to another: only the indices travel (and only
    # for the points: the replaced markers, none selected either time, stay as they are)
    assert [(m is view.scatter, sorted(s)) for m, s in sent] == [(True, ["selected"])]


def test_a_lasso_after_a_cleared_selection_fades_the_rest(model, monkeypatch):
    view = TernaryView(model, ["A", "B", "C"])
    view.tool = "lasso"
    model.select([10, 50])
    model.clear_selection()
    assert view.scatter.unselected_style == {"fill-opacity": "1"}
    sent = sent_states(monkeypatch, (view.scatter,))
    # the lasso sets `selected` in the browser, where the points restyle with the plain
    # unselected style: the view sends the fading one back
    view.scatter.set_state({"selected": [3, 4, 5]})
    np.testing.assert_array_equal(model.selection, np.sort(view._mark_rows[[3, 4, 5]]))
    assert view.scatter.unselected_style == {"fill-opacity": cm.UNSELECTED_OPACITY}
    styles = [s["unselected_style"] for _, s in sent if "unselected_style" in s]
    assert styles == [{"fill-opacity": cm.UNSELECTED_OPACITY}]


def test_the_legend_explains_the_replaced_value_marker(model):
    with_replaced = TernaryView(model, ["A", "B", "C"])
    without = TernaryView(model, ["A", "B", "D"])
    assert cm.REPLACED_LEGEND[0] in list(with_replaced._legend_text.text)
    assert cm.REPLACED_LEGEND[0] not in list(without._legend_text.text)


# -------------------------------------------------------------------- symbols


def test_groups_can_be_drawn_with_distinct_symbols(opened_comms):
    df = make_frame(400, seed=2, groups=8)
    model = CompositionModel(read_composition(df, check_total=False), group_column="site")
    view = TernaryView(model, ["A", "B", "C"])
    assert all(len(m.x) == 0 for m in view._symbol_marks)
    view._symbols_box.value = True  # the checkbox is linked to the trait
    assert view.group_symbols
    codes = model.group_codes()[1][view._mark_rows]
    symbol = codes % len(cm.GROUP_SYMBOLS)
    x, y = projected(model, ["A", "B", "C"])
    # circles stay in the points mark; other symbols are drawn by their own marks and
    # the points beneath go transparent (they keep hover and lasso)
    np.testing.assert_array_equal(view.scatter.opacities, (symbol == 0).astype(float))
    for k, mark in enumerate(view._symbol_marks, start=1):
        assert mark.marker == cm.GROUP_SYMBOLS[k]
        rows = view._mark_rows[symbol == k]
        assert rows.size > 0
        np.testing.assert_allclose(mark.x, x[rows], rtol=1e-6)
        np.testing.assert_allclose(mark.y, y[rows], rtol=1e-6)
        np.testing.assert_array_equal(mark.color, codes[symbol == k] + 1)
    legend = list(view._legend_text.text)
    assert "\u25b2 g2" in legend and "\u25cf g0" in legend and "\u25cf g6" in legend
    # a selection shows in the symbol marks too, without a new widget
    opened_comms.clear()
    model.select(view.rows[::5])
    for k, mark in enumerate(view._symbol_marks, start=1):
        drawn = view._mark_rows[symbol == k]
        expected = np.flatnonzero(np.isin(drawn, model.selection))
        np.testing.assert_array_equal(mark.selected, expected)
    assert opened_comms == []
    view.group_symbols = False
    assert view._symbols_box.value is False
    assert len(view.scatter.opacities) == 0 and all(len(m.x) == 0 for m in view._symbol_marks)


# --------------------------------------------------------------------- toolbar


def test_the_toolbar_keeps_its_size_when_the_tool_changes(model):
    view = TernaryView(model, ["A", "B", "C"])
    layouts = [dict(w.layout.get_state()) for w in view.toolbar.children]
    for tool in ("polygon", "lasso", "none", "brush"):
        view._tool_buttons.value = tool
        assert (view._close_button.layout.visibility == "visible") == (tool == "polygon")
        now = [dict(w.layout.get_state()) for w in view.toolbar.children]
        for before, after in zip(layouts, now, strict=True):
            before.pop("visibility", None), after.pop("visibility", None)
            assert before == after  # nothing appears or goes: the figure does not move


def test_select_mode_dropdown_and_trait_are_linked(model):
    view = TernaryView(model, ["A", "B", "C"])
    view._mode_dropdown.value = "add"
    assert view.select_mode == "add"
    view.select_mode = "intersect"
    assert view._mode_dropdown.value == "intersect"


def test_every_view_saves_its_own_figure(model, tmp_path, monkeypatch):
    v1 = TernaryView(model, ["A", "B", "C"])
    v2 = TernaryView(model, ["B", "C", "D"])
    for view in (v1, v2):
        assert isinstance(view.figure_save, FigureSaveControl)
        assert view.figure_save in view.toolbar.children
        assert view.figure_save.source.figure is view.figure
    names = {v1.figure_save.file_name.value, v2.figure_save.file_name.value}
    assert names == {"ternary-A-B-C.png", "ternary-B-C-D.png"}
    # the page answers bqplot's request with PNG bytes (8-byte signature + IHDR, PNG spec)
    png = b"\x89PNG\r\n\x1a\n" + b"\x00\x00\x00\rIHDR" + (40).to_bytes(4, "big") * 2 + b"\0" * 9

    def answer(callback, scale=None):
        callback(png)

    monkeypatch.setattr(v1.figure, "get_png_data", answer)
    v1.figure_save.folder = tmp_path
    v1.figure_save.scale.value = 4
    path = v1.figure_save.save()
    assert path == tmp_path / "ternary-A-B-C.png" and path.read_bytes() == png
    assert "40 \u00d7 40 px" in v1.figure_save.message.value


def test_every_mark_that_fades_and_the_brush_are_handed_to_the_page(model, opened_comms):
    view = TernaryView(model, ["A", "B", "C"])
    # the marks whose selection fades the rest: each Scatter of the figure with an
    # unselected style; the page's fast restyle must know every one of them
    fading = [m for m in view.figure.marks if isinstance(m, bq.Scatter) and m.unselected_style]
    helper = view._figure_speedups
    assert {id(m) for m in helper.marks} == {id(m) for m in fading}
    assert len(helper.marks) == len(fading) == 2 + len(view._symbol_marks)
    assert helper.get_state()["marks"] == [f"IPY_MODEL_{m.model_id}" for m in helper.marks]
    assert helper.get_state()["brushes"] == [f"IPY_MODEL_{view.brush.model_id}"]
    assert "export default { initialize };" in helper._esm
    opened_comms.clear()
    model.select(view.rows[::7])
    model.clear_selection()
    assert opened_comms == []  # made once, never per selection


def test_one_message_paints_the_selection_of_every_view_of_the_model(model, monkeypatch):
    views = [TernaryView(model, ["A", "B", "C"]), TernaryView(model, ["B", "C", "D"])]
    helper = views[0]._figure_speedups
    assert views[1]._figure_speedups is helper  # one per model
    assert len(helper.marks) == sum(2 + len(v._symbol_marks) for v in views)
    sent = []
    monkeypatch.setattr(
        helper, "send", lambda content, buffers=None: sent.append((content, buffers))
    )
    for selection in (views[0].rows[::5], None, views[1].rows[3:40]):
        sent.clear()
        if selection is None:
            model.clear_selection()
        else:
            model.select(selection)
        assert len(sent) == 1, "one message for all the views"
        content, buffers = sent[0]
        # every mark with points, in order (empty symbol marks have nothing to paint)
        by_id = {m.model_id: m for m in helper.marks if len(m.x)}
        assert len(by_id) >= 3  # both views' points, a replaced-value marker at least
        assert [e["mark"] for e in content["marks"]] == [f"IPY_MODEL_{i}" for i in by_id]
        for entry in content["marks"]:
            mark = by_id[entry["mark"].removeprefix("IPY_MODEL_")]
            # what the page paints ahead is what the marks' own messages then say
            if entry["selected"] is None:  # (no unselected point: its style shows nowhere)
                assert mark.selected is None
            else:
                got = np.frombuffer(buffers[entry["selected"]], dtype="<u4")
                np.testing.assert_array_equal(got, mark.selected)
                assert entry["unselected_style"] == dict(mark.unselected_style)
    # the positions are those of the selected rows among each view's drawn points
    scatter = views[1].scatter
    expected = np.flatnonzero(np.isin(views[1]._mark_rows, views[1].rows[3:40]))
    np.testing.assert_array_equal(scatter.selected, expected)
    views[0].close()
    assert helper.comm is not None  # shared: the other view still uses it
    assert {id(m) for m in helper.marks} == {
        id(m) for m in (views[1].scatter, views[1].replaced_marker, *views[1]._symbol_marks)
    }
    assert helper.brushes == [views[1].brush]
    sent.clear()
    model.select(views[1].rows[:5])
    assert len(sent) == 1
    assert len(sent[0][0]["marks"]) == sum(1 for m in helper.marks if len(m.x))


def test_closing_a_view_closes_its_new_widgets(model):
    view = TernaryView(model, ["A", "B", "C"])
    widgets = [view.selection_outline, *view._lassos, *view._symbol_marks, view.figure_save]
    widgets += [view.figure_save.file_name, view._balance_scale_menu, view._symbols_box]
    view.close()
    assert all(w.comm is None for w in widgets)


def test_clicks_add_polygon_vertices_only_with_the_polygon_tool(model):
    view = TernaryView(model, ["A", "B", "C"])
    view.tool = "brush"
    view._on_point_click(None, {"data": {"x": 0.4, "y": 0.2}})
    assert len(view.polygon_marker.x) == 0  # another tool: a click adds nothing
    view.tool = "polygon"
    view._on_point_click(None, {"data": {"x": 0.4, "y": 0.2}})  # a point's own position
    view._on_image_click(None, {"data": {"click_x": 0.6, "click_y": 0.3}})  # the picture's
    view._on_image_click(None, {"data": {"x": 0.9, "y": 0.9}})  # no click position: nothing
    np.testing.assert_allclose(view.polygon_marker.x, [0.4, 0.6])
    np.testing.assert_allclose(view.polygon_marker.y, [0.2, 0.3])
