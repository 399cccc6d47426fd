"""Kernel-side tests of the clr biplot view (no browser).

Outside references: scikit-learn's ``PCA`` on the clr coordinates (point and
ray coordinates), numpy (standard deviations of log-ratios, cosines), and
``compwidgets.core.variation_matrix`` (itself checked against numpy in
tests/test_biplot.py). Data: the invented demo survey of compwidgets.demo and
small random compositions made here.

"What the front end sets" is simulated by assigning the traits the browser
writes (the brush's ``selected_x``/``selected_y`` with ``brushing``, the
scatter's ``selected`` for the lasso) or by passing bqplot's custom messages
(``element_click``, ``hover``) through the mark's own message handler.
"""

from __future__ import annotations

import re

import ipywidgets as widgets
import numpy as np
import pandas as pd
import pytest
from sklearn.decomposition import PCA

import compwidgets.core as core
from compwidgets import demo
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views.biplot import BiplotView
from compwidgets.views.ternary import TernaryView

#: Active parts of the tests; Cr has missing and replaced cells, Zr replaced ones (seed 11).
PARTS5 = ["SiO2", "Al2O3", "CaO", "Cr", "Zr"]


@pytest.fixture(scope="module")
def composition():
    # index_col=False keeps sample_id among the metadata, for the id_column of the hover
    return read_composition(demo.stream_sediments(n=240, seed=11), index_col=False)


@pytest.fixture
def model(composition):
    return CompositionModel(composition, active_parts=PARTS5, group_column="catchment")


@pytest.fixture
def view(model):
    v = BiplotView(model, id_column="sample_id")
    yield v
    v.close()


class SendSpy:
    """Records every comm message a widget sends: (widget, method, state keys)."""

    def __init__(self, monkeypatch):
        self.sent: list[tuple[widgets.Widget, str, set]] = []
        original = widgets.Widget._send

        def spy(widget, msg, buffers=None):
            self.sent.append((widget, msg.get("method"), set(msg.get("state", {}))))
            return original(widget, msg, buffers)

        monkeypatch.setattr(widgets.Widget, "_send", spy)

    def clear(self):
        self.sent.clear()

    def keys_of(self, widget) -> set:
        return {
            k for w, method, keys in self.sent if w is widget and method == "update" for k in keys
        }

    def widgets_sent(self) -> set:
        return {id(w) for w, _, _ in self.sent}


def complete_clr(model, parts):
    ok = model.complete_rows(parts)
    return np.flatnonzero(ok), np.asarray(core.clr(model.part_values(parts)[ok]))


def brush(view, x_range, y_range):
    """What the browser sets at the end of a brush stroke."""
    view.brush.brushing = True
    view.brush.selected_x = np.asarray(x_range, dtype=float)
    view.brush.selected_y = np.asarray(y_range, dtype=float)
    view.brush.brushing = False


# --------------------------------------------------------- coordinates vs sklearn


def test_points_and_rays_match_sklearn_pca(model):
    # Source: sklearn.decomposition.PCA on the clr of the complete rows. Form biplot
    # rows are the PCA scores U S; covariance rays are components_ * sqrt(explained
    # variance) = V S / sqrt(n-1) (Aitchison & Greenacre 2002). Equal up to a sign per axis.
    rows, Z = complete_clr(model, PARTS5)
    pca = PCA().fit(Z)
    scores = pca.transform(Z)
    view = BiplotView(model, components=(0, 2), scaling="form")
    try:
        np.testing.assert_array_equal(view.rows, rows)
        for axis, comp in ((view.scatter.x, 0), (view.scatter.y, 2)):
            got = np.asarray(axis, dtype=float)
            sign = np.sign(got @ scores[:, comp])
            np.testing.assert_allclose(got, sign * scores[:, comp], rtol=1e-5, atol=1e-5)
        view.scaling = "covariance"
        loadings = pca.components_.T * np.sqrt(pca.explained_variance_)
        for axis, comp in ((view.ray_tips.x, 0), (view.ray_tips.y, 2)):
            got = np.asarray(axis, dtype=float)
            sign = np.sign(got @ loadings[:, comp])
            np.testing.assert_allclose(got, sign * loadings[:, comp], rtol=1e-5, atol=1e-6)
        # Axis labels carry the share of total variance (sklearn's ratio, one decimal).
        assert (
            view.axis_x.label
            == f"clr comp. 1 \u00b7 {100 * pca.explained_variance_ratio_[0]:.1f} %"
        )
        assert (
            view.axis_y.label
            == f"clr comp. 3 \u00b7 {100 * pca.explained_variance_ratio_[2]:.1f} %"
        )
        np.testing.assert_allclose(
            view.variance_bars.y, 100 * pca.explained_variance_ratio_[:4], rtol=1e-8
        )
    finally:
        view.close()


def test_left_out_rows_are_counted(model, view):
    # Independent count with pandas: rows with a missing or non-positive value in a part.
    values = model.composition.values[PARTS5]
    n_bad = int((values.isna() | (values <= 0)).any(axis=1).sum())
    assert n_bad > 0  # the demo has missing cells, so the check means something
    assert view.n_left_out == n_bad
    assert view.status.value.startswith(f"{n_bad} row")


def test_replaced_markers_on_rows_with_replaced_values(model, view):
    # Independent: status "below_dl" with a value after replacement, among the shown rows.
    comp = model.composition
    replaced = ((comp.status[PARTS5] == "below_dl") & comp.values[PARTS5].notna()).any(axis=1)
    expected = int(replaced.to_numpy()[view.rows].sum())
    assert expected > 0  # the demo rows shown do carry replaced values
    assert len(view.replaced_marker.x) == expected


# ----------------------------------------------------------------- linked selection


def test_brush_here_shows_in_ternary_and_back(model, view):
    tern = TernaryView(model, ["SiO2", "Al2O3", "CaO"])
    try:
        x, y = np.asarray(view.scatter.x, float), np.asarray(view.scatter.y, float)
        x_range = (float(np.quantile(x, 0.2)), float(np.quantile(x, 0.8)))
        y_range = (float(np.quantile(y, 0.1)), float(np.quantile(y, 0.9)))
        brush(view, x_range, y_range)
        inside = (x >= x_range[0]) & (x <= x_range[1]) & (y >= y_range[0]) & (y <= y_range[1])
        expected = view.rows[inside]
        assert 0 < expected.size < view.rows.size
        np.testing.assert_array_equal(model.selection, expected)
        # The ternary view highlights exactly those rows.
        shown = np.asarray(tern.scatter.selected)
        np.testing.assert_array_equal(
            tern._mark_rows[shown], expected[np.isin(expected, tern.rows)]
        )

        # And back: a lasso in the ternary view (the browser sets `selected`).
        tern.scatter.selected = np.array([0, 3, 5, 9], dtype=np.uint32)
        picked = tern._mark_rows[[0, 3, 5, 9]]
        np.testing.assert_array_equal(model.selection, np.sort(picked))
        here = np.asarray(view.scatter.selected)
        np.testing.assert_array_equal(np.sort(view._mark_rows[here]), np.sort(picked))
    finally:
        tern.close()


def test_lasso_here_writes_the_model(model, view):
    view.tool = "lasso"
    view.scatter.selected = np.array([1, 4, 7], dtype=np.uint32)
    np.testing.assert_array_equal(model.selection, view.rows[[1, 4, 7]])


def test_model_selection_highlights_here(model, view):
    rows = view.rows[::7]
    model.select(rows)
    np.testing.assert_array_equal(view._mark_rows[np.asarray(view.scatter.selected)], rows)


# ------------------------------------------- switching scaling / components resends less


#: What a change of scaling or plane may send: positions, scales and figure size, the
#: axis labels and bar colours of the new plane, the controls, the pick's text, and the
#: note on the rays' display factor of the new plane (one text, "value" only).
_POSITIONS = {"x", "y"}
MOVE_ALLOWED = {
    **{
        name: _POSITIONS
        for name in (
            "scatter", "replaced_marker", "rays", "ray_tips", "ray_labels", "axis_cross",
            "link", "link_label", "density", "_legend_text", "_legend_swatches",
        )
    },
    "scale_x": {"min", "max"},
    "scale_y": {"min", "max"},
    "figure": {"layout", "min_aspect_ratio", "max_aspect_ratio"},
    "axis_x": {"label"},
    "axis_y": {"label"},
    "variance_bars": {"colors"},
    "_plane_menu": {"index"},
    "_scaling_buttons": {"index"},
    "info": {"value"},
    "ray_note": {"value"},
}  # fmt: skip


def _unchanged_widgets(view):
    """Widgets and keys whose data a change of scaling or plane must not resend."""
    return [
        (view.scatter, {"selected", "color", "colors", "unselected_style", "selected_style"}),
        (view.replaced_marker, {"colors"}),
        (view.colour_scale, {"colors", "min", "max"}),
        (view._legend_text, {"text"}),
        (view._legend_swatches, {"colors"}),
        (view.ray_labels, {"text"}),
        (view.variance_bars, {"x", "y"}),
    ]


@pytest.mark.parametrize("change", ["scaling", "components"])
def test_switching_keeps_selection_and_resends_only_coordinates(model, view, monkeypatch, change):
    model.select(view.rows[::5])
    view.picked_parts = ["SiO2", "Cr"]
    selection = model.selection.copy()
    selected_before = np.asarray(view.scatter.selected).copy()
    x_before = np.asarray(view.scatter.x).copy()
    spy = SendSpy(monkeypatch)
    if change == "scaling":
        view.scaling = "form"
    else:
        view.components = (1, 2)
    np.testing.assert_array_equal(model.selection, selection)
    np.testing.assert_array_equal(view.scatter.selected, selected_before)
    assert not np.allclose(view.scatter.x, x_before)  # the points did move
    assert {"x", "y"} <= spy.keys_of(view.scatter)  # ... and were sent
    assert spy.keys_of(view.scatter) <= {"x", "y"}
    assert {"x", "y"} <= spy.keys_of(view.rays)
    for widget, keys in _unchanged_widgets(view):
        assert not (spy.keys_of(widget) & keys), (widget, spy.keys_of(widget) & keys)
    # Strict: every message is a position, a scale/size, or a label of the new plane.
    names = {id(w): n for n, w in vars(view).items() if isinstance(w, widgets.Widget)}
    for widget, method, keys in spy.sent:
        name = names.get(id(widget), type(widget).__name__)
        allowed = MOVE_ALLOWED.get(name, set())
        assert method == "update" and keys <= allowed, (name, method, keys - allowed)


def test_spy_sees_a_selection_change(model, view, monkeypatch):
    # Control for the test above: the spy does record 'selected' when it changes.
    spy = SendSpy(monkeypatch)
    model.select(view.rows[:3])
    assert "selected" in spy.keys_of(view.scatter)
    assert "x" not in spy.keys_of(view.scatter)  # a selection never resends coordinates


def test_components_menu_and_bars_follow(view):
    view.components = (0, 2)
    assert view._plane_menu.value == (0, 2)
    colours = list(view.variance_bars.colors)
    assert colours[0] == colours[2] != colours[1]
    view._plane_menu.value = (1, 2)
    assert view.components == (1, 2)
    view._scaling_buttons.value = "form"
    assert view.scaling == "form"
    with pytest.raises(Exception, match="component 7 does not exist"):
        view.components = (0, 7)
    with pytest.raises(Exception, match="two different"):
        view.components = (1, 1)


# ----------------------------------------------------------- active parts change


def test_active_parts_change_keeps_selection_and_components(model, view):
    view.components = (0, 2)
    model.select(view.rows[::4])
    selection = model.selection.copy()
    model.active_parts = ["SiO2", "Al2O3", "CaO", "MgO"]  # 3 components: (0, 2) still exists
    assert view.components == (0, 2)
    np.testing.assert_array_equal(model.selection, selection)
    assert list(view.ray_labels.text) == ["SiO2", "Al2O3", "CaO", "MgO"]
    here = view._mark_rows[np.asarray(view.scatter.selected)]
    np.testing.assert_array_equal(here, selection[np.isin(selection, view.rows)])
    # Recomputed for the new parts: matches sklearn on the new clr (up to sign).
    rows, Z = complete_clr(model, model.active_parts)
    scores = PCA().fit(Z).transform(Z)
    got = np.asarray(view.scatter.x, dtype=float)
    cov_scores = scores[:, 0] / scores[:, 0].std(ddof=1)  # covariance rows: unit variance
    assert abs(abs(np.corrcoef(got, cov_scores)[0, 1]) - 1) < 1e-6
    np.testing.assert_allclose(np.std(got, ddof=1), 1.0, rtol=1e-5)
    # Three parts: only two components, so (0, 2) falls back to (0, 1).
    model.active_parts = ["SiO2", "Al2O3", "CaO"]
    assert view.components == (0, 1)
    np.testing.assert_array_equal(model.selection, selection)


def test_picked_parts_dropped_when_parts_go(model, view):
    view.picked_parts = ["SiO2", "Zr"]
    model.active_parts = ["SiO2", "Al2O3", "CaO", "MgO"]
    assert view.picked_parts == ["SiO2"]


def test_two_parts_single_component(model, view):
    model.active_parts = ["SiO2", "CaO"]
    assert np.all(np.asarray(view.scatter.y) == 0)
    assert view.axis_y.label.endswith("n/a")
    assert len(view.ray_labels.text) == 2


# ------------------------------------------------------------- links and associations


def _number_after(text: str, prefix: str) -> float:
    match = re.search(re.escape(prefix) + r"\s*([-+0-9.eE]+)", text)
    assert match, (prefix, text)
    return float(match.group(1))


@pytest.mark.parametrize("scaling", ["covariance", "form"])
def test_link_text_is_logratio_sd(model, view, scaling):
    view.scaling = scaling
    a, b = "SiO2", "CaO"
    # Clicking two tips, through bqplot's own message handler.
    for part in (a, b):
        i = list(view.ray_labels.text).index(part)
        view.ray_tips._handle_custom_msgs(None, {"event": "element_click", "data": {"index": i}})
    assert view.picked_parts == [a, b]
    sd_text = _number_after(view.info.value, f"sd of ln({a}/{b}):")
    # Source: core.variation_matrix over the complete rows, and numpy std (ddof=1).
    T = model.variation_matrix(PARTS5)
    ok = model.complete_rows(PARTS5)
    v = model.composition.values.loc[ok]
    direct = np.std(np.log(v[a] / v[b]), ddof=1)
    assert sd_text == pytest.approx(np.sqrt(T.loc[a, b]), rel=5e-4)  # 4 significant digits
    assert sd_text == pytest.approx(direct, rel=5e-4)
    assert len(view.link.x) == 2
    assert list(view.link_label.text) == [f"sd {sd_text:.4g}"]
    # Drawn link joins the two tips.
    ia, ib = list(view.ray_labels.text).index(a), list(view.ray_labels.text).index(b)
    np.testing.assert_allclose(view.link.x, np.asarray(view.ray_tips.x)[[ia, ib]])


def test_association_text_against_sklearn_loadings(model, view):
    view.components = (0, 1)
    view.picked_parts = ["CaO"]
    text = view.info.value
    # Source: cosines in the plane of the covariance rays from sklearn's PCA loadings
    # (components_ * sqrt(explained_variance_)), with numpy.
    _, Z = complete_clr(model, PARTS5)
    pca = PCA().fit(Z)
    G = (pca.components_.T * np.sqrt(pca.explained_variance_))[:, :2]
    i = PARTS5.index("CaO")
    cos = {
        p: float(G[i] @ G[j] / np.linalg.norm(G[i]) / np.linalg.norm(G[j]))
        for j, p in enumerate(PARTS5)
        if j != i
    }
    order = sorted(cos, key=cos.get, reverse=True)
    most = text.split("most associated (rays pointing the same way):")[1]
    most = most.split("least associated")[0]
    least = text.split("least associated (rays pointing the opposite way):")[1]
    listed_most = re.findall(r"^\s+(\S+)\s+([-+][0-9.]+)$", most, flags=re.M)
    listed_least = re.findall(r"^\s+(\S+)\s+([-+][0-9.]+)$", least, flags=re.M)
    assert [p for p, _ in listed_most] == order[:2]
    assert [p for p, _ in listed_least] == order[::-1][:2]
    for p, value in listed_most + listed_least:
        assert float(value) == pytest.approx(cos[p], abs=0.006)
    # Clicking the same tip again clears the pick.
    view.pick("CaO")
    assert view.picked_parts == [] and "Click a ray tip" in view.info.value


def test_third_click_starts_a_new_pick(view):
    view.pick("SiO2")
    view.pick("CaO")
    view.pick("Cr")
    assert view.picked_parts == ["Cr"]
    with pytest.raises(Exception, match="not in the biplot's parts"):
        view.picked_parts = ["MgO"]


# ------------------------------------------------------------------ hover and text


def test_hover_shows_id_group_and_metadata(model, view):
    pos = 5
    row = int(view._mark_rows[pos])
    view.scatter._handle_custom_msgs(None, {"event": "hover", "point": {"index": pos}})
    lines = [label.value for label in view._tooltip_lines if label.value]
    meta = model.metadata.iloc[row]
    assert lines[0] == str(meta["sample_id"])
    assert f"catchment: {meta['catchment']}" in lines
    assert f"bedrock: {meta['bedrock']}" in lines


def _walk(widget, seen=None):
    seen = set() if seen is None else seen
    if id(widget) in seen:
        return
    seen.add(id(widget))
    yield widget
    for name in widget.keys:
        value = getattr(widget, name, None)
        items = value if isinstance(value, (list, tuple)) else [value]
        for item in items:
            if isinstance(item, widgets.Widget):
                yield from _walk(item, seen)


def test_markup_in_part_names_stays_plain_text():
    hostile = "<img src=x onerror=alert(1)>"
    rng = np.random.default_rng(4)
    df = pd.DataFrame(np.exp(rng.normal(size=(40, 4))), columns=[hostile, "B", "C", "D"])
    df["site"] = ["<b>north</b>", "south"] * 20
    m = CompositionModel(read_composition(df, check_total=False), group_column="site")
    v = BiplotView(m)
    try:
        assert hostile in [str(s) for s in v.ray_labels.text]  # a plain string in the Label mark
        v.picked_parts = [hostile, "B"]
        assert f"sd of ln({hostile}/B)" in v.info.value  # Textarea: text, not markup
        assert isinstance(v.info, widgets.Textarea)
        v.scatter._handle_custom_msgs(None, {"event": "hover", "point": {"index": 0}})
        # No widget of the view renders HTML.
        tree = list(_walk(v))
        assert v.ray_labels in tree and v.info in tree
        html = [w for w in tree if isinstance(w, (widgets.HTML, widgets.HTMLMath))]
        assert html == []
    finally:
        v.close()


# ----------------------------------------------------------------------- density mode


def test_density_mode_selection_and_switch(model, monkeypatch):
    view = BiplotView(model, threshold=50, subsample_size=40)
    try:
        assert view.active_mode == "density"
        assert len(view.scatter.x) == 40  # the hover subsample
        x = view._x
        brush(view, (float(np.min(x)) - 1, float(np.median(x))), (-100.0, 100.0))
        expected = view.rows[x <= np.median(x)]
        np.testing.assert_array_equal(model.selection, expected)
        image = view._png.value
        spy = SendSpy(monkeypatch)
        view.scaling = "form"
        np.testing.assert_array_equal(model.selection, expected)
        assert view._png.value != image  # points moved: a new image
        assert not (spy.keys_of(view.scatter) & {"selected", "color"})
    finally:
        view.close()


def test_constructor_rejects_non_model():
    with pytest.raises(TypeError, match="CompositionModel"):
        BiplotView(object())


def test_no_biplot_is_explained_not_raised():
    # Every complete row has the same composition: nothing to decompose.
    df = pd.DataFrame(np.tile([[1.0, 2.0, 3.0, 4.0]], (10, 1)), columns=list("ABCD"))
    df.loc[3, "A"] = np.nan
    m = CompositionModel(read_composition(df, check_total=False))
    v = BiplotView(m)
    try:
        assert v.biplot is None
        assert v.notes.value.startswith("no biplot:") and "total variance 0" in v.notes.value
        assert len(v.scatter.x) == 0 and len(v.ray_labels.text) == 0
        v.scaling = "form"  # still no error
        assert v.info.value.startswith("no biplot:")
    finally:
        v.close()


# ------------------------------------------------- the base's public hooks (ScatterView)


def test_set_view_ranges_moves_scales_image_figure_and_legend_only(model, view, monkeypatch):
    legend_text = list(view._legend_text.text)
    swatch_colours = list(view._legend_swatches.colors)
    text_y = np.asarray(view._legend_text.y, dtype=float).copy()
    spy = SendSpy(monkeypatch)
    view.set_view_ranges((-10.0, 30.0), (-10.0, 10.0))  # width / height 2
    assert (view.scale_x.min, view.scale_x.max) == (-10.0, 30.0)
    assert (view.scale_y.min, view.scale_y.max) == (-10.0, 10.0)
    assert view.view_ranges == ((-10.0, 30.0), (-10.0, 10.0))
    # the density image follows the ranges (the biplot's extent is its ranges)
    assert list(view.density.x) == [-10.0, 30.0] and list(view.density.y) == [-10.0, 10.0]
    assert view._density_image.extent == (-10.0, 30.0, -10.0, 10.0)
    # equal aspect: plot area width / height == 2 (within a pixel of rounding)
    m = view.figure.fig_margin
    width = int(view.figure.layout.width.removesuffix("px"))
    plot_h = view.height_px - m["top"] - m["bottom"]
    assert abs((width - m["left"] - m["right"]) - 2 * plot_h) <= 1
    # the legend moved to the new anchor, same text, same steps between entries
    x_anchor, y_anchor, dy = view._legend_anchor()
    np.testing.assert_allclose(view._legend_text.y, y_anchor - dy * np.arange(len(text_y)))
    assert float(np.max(view._legend_swatches.x)) == pytest.approx(x_anchor)
    assert list(view._legend_text.text) == legend_text
    assert list(view._legend_swatches.colors) == swatch_colours
    assert not (spy.keys_of(view._legend_text) & {"text"})
    assert not (spy.keys_of(view._legend_swatches) & {"colors"})
    assert not spy.keys_of(view.scatter)  # points mode: the points did not move
    assert not spy.keys_of(view._png)  # points mode: no density image sent
    # the same ranges again: nothing is sent
    spy.clear()
    view.set_view_ranges((-10, 30), (-10, 10))
    assert spy.sent == []


@pytest.mark.parametrize(
    ("x_range", "y_range", "match"),
    [
        ((1.0, 1.0), (0.0, 1.0), "x_range must be finite with lower < upper"),
        ((0.0, 1.0), (2.0, -1.0), "y_range must be finite with lower < upper"),
        ((0.0, np.nan), (0.0, 1.0), "x_range must be finite"),
        ((0.0,), (0.0, 1.0), "x_range must be two numbers"),
    ],
)
def test_set_view_ranges_rejects_bad_ranges(view, x_range, y_range, match):
    before = view.view_ranges
    with pytest.raises(ValueError, match=match):
        view.set_view_ranges(x_range, y_range)
    assert view.view_ranges == before


def test_set_view_ranges_in_density_mode_redraws_the_image(model):
    view = BiplotView(model, threshold=50, subsample_size=40)
    try:
        image = view._png.value
        view.set_view_ranges((-20.0, 20.0), (-20.0, 20.0))
        assert view._png.value != image
        # every shown point is counted in the new grid (all inside the wider ranges)
        assert int(view._density_image.all_counts.sum()) == view.rows.size
    finally:
        view.close()


def test_move_points_sends_positions_only_and_clears_the_brush(model, view, monkeypatch):
    model.select(view.rows[::3])
    brush(view, (-0.5, 0.5), (-0.5, 0.5))
    selection = model.selection.copy()
    # the view took the rectangle, emptied the brush and draws the rectangle itself
    assert view.brush.selected_x is None and view.selection_shape["kind"] == "rectangle"
    assert len(view.selection_outline.x) == 5
    new_x = np.linspace(-1.0, 1.0, view.rows.size)
    new_y = -new_x
    spy = SendSpy(monkeypatch)
    view.move_points(new_x, new_y)
    np.testing.assert_allclose(view.scatter.x, new_x, atol=1e-6)
    np.testing.assert_allclose(view.scatter.y, new_y, atol=1e-6)
    assert view.brush.selected_x is None and view.brush.selected_y is None
    # the outline was drawn on the old positions: gone (the selection stays)
    assert view.selection_shape is None and len(view.selection_outline.x) == 0
    np.testing.assert_array_equal(model.selection, selection)  # the selection stays
    assert spy.keys_of(view.scatter) == {"x", "y"}
    assert not spy.keys_of(view.colour_scale)
    assert not (spy.keys_of(view._legend_text) & {"text"})
    # the replaced markers moved with their rows
    replaced = np.flatnonzero(core_replaced(model, view.shown_parts())[view.rows])
    np.testing.assert_allclose(view.replaced_marker.x, new_x[replaced], atol=1e-6)
    # a later rectangle selects with the new coordinates
    brush(view, (-1.01, 0.0), (-100.0, 100.0))
    np.testing.assert_array_equal(model.selection, view.rows[new_x <= 0.0])


def core_replaced(model, parts):
    """Rows with a replaced value in ``parts``, from the composition's own mask."""
    members = [m for p in parts for m in model.members(p)]
    return model.composition.replaced[members].to_numpy(dtype=bool).any(axis=1)


def test_move_points_rejects_other_rows(view):
    with pytest.raises(ValueError, match="one x and one y per row shown"):
        view.move_points(np.zeros(3), np.zeros(3))
    n = view.rows.size
    with pytest.raises(ValueError, match="both x_range and y_range"):
        view.move_points(np.zeros(n), np.zeros(n), x_range=(0.0, 1.0))


class _FailingBiplot(BiplotView):
    """A biplot whose side panel cannot be built (a constructor failing half-way)."""

    def _build_side(self):
        raise RuntimeError("side panel broken")


def test_close_is_safe_after_a_failed_constructor(model):
    # Failing before the base existed: close() and __del__ do nothing and do not raise.
    early = BiplotView.__new__(BiplotView)
    with pytest.raises(TypeError, match="CompositionModel"):
        early.__init__(object())
    early.close()
    early.__del__()
    # Failing half-way: what was built is closed (no comm left open).
    half = _FailingBiplot.__new__(_FailingBiplot)
    with pytest.raises(RuntimeError, match="side panel broken"):
        half.__init__(model)
    assert half.figure.comm is not None and half.scatter.comm is not None
    half.close()
    assert half.figure.comm is None and half.scatter.comm is None and half.comm is None
    half.close()  # twice: still fine
    half.__del__()


def test_part_names_clear_their_ray_tips_and_bars_have_few_numbers():
    # 12 parts: 11 components, numbered every second bar; names placed beyond the tips.
    rng = np.random.default_rng(5)
    parts = [f"P{i}" for i in range(11)] + ["LongPartName"]
    df = pd.DataFrame(np.exp(rng.normal(0.0, 0.6, size=(80, 12))), columns=parts)
    v = BiplotView(CompositionModel(read_composition(df, check_total=False)))
    try:
        (x0, x1), (y0, y1) = v.view_ranges
        px = v._plot_height_px() / (y1 - y0)  # pixels per data unit (equal aspect)
        tips = np.column_stack([v.ray_tips.x, v.ray_tips.y]).astype(float) * px
        labels = np.column_stack([v.ray_labels.x, v.ray_labels.y]).astype(float) * px
        for name, tip, label in zip(v.ray_labels.text, tips, labels, strict=True):
            half_w, half_h = len(str(name)) * 7.0 / 2, 7.0
            dx, dy = np.abs(tip - label)
            assert dx >= half_w or dy >= half_h, name  # the tip is outside the name's box
        assert list(v._bar_axes[0].tick_values) == [1, 3, 5, 7, 9, 11]
        assert (v._bar_x.min, v._bar_x.max) == (0.5, 11.5)
        # the legend's room is on the right of every tip and label
        legend_x = v._legend_anchor()[0]
        assert np.max(v.ray_labels.x) + 7.0 * len("LongPartName") / 2 / px < legend_x
    finally:
        v.close()


@pytest.mark.parametrize("scaling", ["covariance", "form"])
def test_every_plane_fits_its_points_and_keeps_the_figure_narrow(model, scaling):
    v = BiplotView(model, scaling=scaling)
    try:
        for components in [(0, 1), (0, 2), (1, 2)]:
            v.components = components
            (x0, x1), (y0, y1) = v.view_ranges
            assert (x1 - x0) / (y1 - y0) <= 1.6 + 1e-9
            legend_x = v._legend_anchor()[0]
            for xs, ys in ((v.scatter.x, v.scatter.y), (v.ray_tips.x, v.ray_tips.y)):
                xs, ys = np.asarray(xs, float), np.asarray(ys, float)
                assert xs.min() >= x0 and xs.max() < legend_x
                assert ys.min() >= y0 and ys.max() <= y1
            width = int(v.figure.layout.width.removesuffix("px"))
            assert width <= 1.6 * v.height_px
    finally:
        v.close()


# ------------------------------------------------------ display scale of the rays


def _plane_norms(xs, ys) -> np.ndarray:
    return np.hypot(np.asarray(xs, dtype=float), np.asarray(ys, dtype=float))


def test_form_rays_drawn_scaled_with_a_note(model):
    view = BiplotView(model, scaling="form")
    try:
        fit = view.biplot
        f = view.ray_factor
        assert f == core.biplot.ray_display_factor(fit, (0, 1))
        assert f > 1  # form rays (unit loadings) are short next to the scores
        # drawn tips = f * the biplot's columns
        drawn = np.column_stack([view.ray_tips.x, view.ray_tips.y]).astype(float)
        np.testing.assert_allclose(drawn, f * fit.column_coords[:, :2], rtol=1e-6, atol=1e-6)
        np.testing.assert_allclose(view.rays.x[:, 1], drawn[:, 0], rtol=1e-6)
        # Source: sklearn PCA loadings V (components_.T) on the clr of the complete rows:
        # relative ray lengths and angles between rays are those of the unscaled loadings.
        _, Z = complete_clr(model, PARTS5)
        V = PCA().fit(Z).components_.T[:, :2]
        lengths = _plane_norms(drawn[:, 0], drawn[:, 1])
        np.testing.assert_allclose(
            lengths / lengths.max(), _plane_norms(*V.T) / _plane_norms(*V.T).max(), rtol=1e-5
        )
        cos_drawn = (drawn @ drawn.T) / np.outer(lengths, lengths)
        cos_v = np.abs(V @ V.T) / np.outer(_plane_norms(*V.T), _plane_norms(*V.T))
        np.testing.assert_allclose(np.abs(cos_drawn), cos_v, atol=1e-5)  # sign per axis
        # the longest drawn ray reaches 0.4 .. 0.8 of the farthest point (rounded factor)
        share = lengths.max() / _plane_norms(view.scatter.x, view.scatter.y).max()
        assert 0.4 < share <= 0.8 + 1e-6
        # the note says so, with the factor
        assert view.ray_note.value == (
            f"rays drawn \u00d7 {f:g} (lengths compare between rays, not with points)"
        )
        # back to covariance: true lengths (factor 1), no note
        view.scaling = "covariance"
        assert view.ray_factor == 1.0 and view.ray_note.value == ""
        np.testing.assert_allclose(
            np.column_stack([view.ray_tips.x, view.ray_tips.y]).astype(float),
            view.biplot.column_coords[:, :2], rtol=1e-6, atol=1e-7,
        )  # fmt: skip
    finally:
        view.close()


def test_form_link_numbers_unscaled_drawn_link_scaled(model):
    view = BiplotView(model, scaling="form")
    try:
        a, b = "SiO2", "CaO"
        view.picked_parts = [a, b]
        f = view.ray_factor
        text = view.info.value
        # Source: sklearn PCA loadings V: the in-plane form link is |V_a - V_b| (unscaled)
        _, Z = complete_clr(model, PARTS5)
        V = PCA().fit(Z).components_.T[:, :2]
        ia, ib = PARTS5.index(a), PARTS5.index(b)
        in_plane = _number_after(text, "link length in this plane (components 1 and 2):")
        assert in_plane == pytest.approx(np.linalg.norm(V[ia] - V[ib]), rel=5e-4)
        assert f"(rays and link drawn \u00d7 {f:g})" in text
        # the drawn link joins the drawn tips: f times as long
        lx, ly = np.asarray(view.link.x, float), np.asarray(view.link.y, float)
        assert np.hypot(np.diff(lx), np.diff(ly))[0] == pytest.approx(
            f * np.linalg.norm(V[ia] - V[ib]), rel=1e-5
        )
        tips = np.column_stack([view.ray_tips.x, view.ray_tips.y]).astype(float)
        np.testing.assert_allclose(np.column_stack([lx, ly]), tips[[ia, ib]], rtol=1e-6)
    finally:
        view.close()


def test_covariance_rays_too_short_are_scaled_but_links_stay_exact():
    # Compositions to the power 0.02: the clr shrinks 50 times, the covariance rows
    # (unit variance) do not: rays would be invisibly short, so they are drawn scaled.
    rng = np.random.default_rng(8)
    X = np.exp(rng.normal(0.0, [0.3, 0.8, 1.2, 0.5], size=(70, 4))) ** 0.02
    df = pd.DataFrame(X, columns=["A", "B", "C", "D"])
    m = CompositionModel(read_composition(df, check_total=False))
    v = BiplotView(m)
    try:
        f = v.ray_factor
        assert f > 5
        assert v.ray_note.value.startswith(f"rays drawn \u00d7 {f:g} ")
        drawn = np.column_stack([v.ray_tips.x, v.ray_tips.y]).astype(float)
        np.testing.assert_allclose(drawn, f * v.biplot.column_coords[:, :2], rtol=1e-6)
        v.picked_parts = ["A", "C"]
        sd_text = _number_after(v.info.value, "sd of ln(A/C):")
        # Source: core.variation_matrix, and numpy std (ddof=1) of the log-ratio
        T = m.variation_matrix(["A", "B", "C", "D"])
        assert sd_text == pytest.approx(np.sqrt(T.loc["A", "C"]), rel=5e-4)
        assert sd_text == pytest.approx(np.std(np.log(X[:, 0] / X[:, 2]), ddof=1), rel=5e-4)
        # the in-plane covariance link in the text is unscaled: |G_a - G_c| from sklearn
        # loadings components_ * sqrt(explained_variance_)
        pca = PCA().fit(np.asarray(core.clr(X)))
        G = (pca.components_.T * np.sqrt(pca.explained_variance_))[:, :2]
        in_plane = _number_after(v.info.value, "link length in this plane (components 1 and 2):")
        assert in_plane == pytest.approx(np.linalg.norm(G[0] - G[2]), rel=5e-4)
    finally:
        v.close()


# -------------------------------------------------------------- ray label placement


def _label_boxes_px(view):
    """(centres, half sizes) of the ray names' boxes in pixels, from the marks' positions.

    Box size from the view's own character widths (the same estimate that places them);
    a fixed 7 px per character would be a rougher, independent bound.
    """
    from compwidgets.views._plot_layout import text_width_px

    (x0, x1), (y0, y1) = view.view_ranges
    px = view._plot_height_px() / (y1 - y0)
    centres = np.column_stack([view.ray_labels.x, view.ray_labels.y]).astype(float) * px
    half = np.array([[text_width_px(str(n)) / 2, 7.0] for n in view.ray_labels.text])
    return centres, half, px


@pytest.mark.parametrize("scaling", ["covariance", "form"])
def test_ray_names_do_not_overlap_on_the_demo(composition, scaling):
    # All 17 parts of the demo: many short rays near the origin.
    m = CompositionModel(composition, group_column="catchment")
    v = BiplotView(m, scaling=scaling)
    try:
        assert len(v.ray_labels.text) == 17
        for components in [(0, 1), (0, 2), (1, 2)]:
            v.components = components
            centres, half, px = _label_boxes_px(v)
            gap = np.abs(centres[:, None, :] - centres[None, :, :])
            touch = np.all(gap < half[:, None, :] + half[None, :, :], axis=2)
            np.fill_diagonal(touch, False)
            names = list(v.ray_labels.text)
            assert not touch.any(), [(names[i], names[j]) for i, j in np.argwhere(touch)]
            # and no name covers a ray tip (the dot's centre)
            tips = np.column_stack([v.ray_tips.x, v.ray_tips.y]).astype(float) * px
            covers = np.all(np.abs(centres[:, None, :] - tips[None]) < half[:, None, :], axis=2)
            assert not covers.any()
            # every name is inside the plot, left of the legend
            (x0, x1), (y0, y1) = v.view_ranges
            assert np.all(centres[:, 0] - half[:, 0] >= x0 * px)
            assert np.all(centres[:, 0] + half[:, 0] < v._legend_anchor()[0] * px)
            assert np.all(centres[:, 1] - half[:, 1] >= y0 * px)
            assert np.all(centres[:, 1] + half[:, 1] <= y1 * px)
    finally:
        v.close()


def test_part_names_with_no_room_inside_the_plot_are_not_drawn_and_counted():
    # 200 invented parts: some names are pushed beyond the plot, where they would be cut
    rng = np.random.default_rng(11)
    parts = [f"P{j:03d}" for j in range(200)]
    values = np.exp(rng.normal(0.0, 1.5, 200) + rng.normal(0.0, 0.5, (300, 200)))
    v = BiplotView(CompositionModel(read_composition(pd.DataFrame(values, columns=parts))))
    try:
        (x0, x1), (y0, y1) = v.view_ranges
        _, _, _, tips = v._plane_coords()
        centres, half = v._label_layout(tips, y1 - y0)
        assert np.allclose(centres, np.column_stack([v.ray_labels.x, v.ray_labels.y]))
        lo, hi = centres - half, centres + half
        inside = (lo[:, 0] >= x0) & (hi[:, 0] <= x1) & (lo[:, 1] >= y0) & (hi[:, 1] <= y1)
        drawn = np.asarray(v.ray_labels.opacities, float) > 0
        assert drawn.shape == (200,) and not drawn.all()  # some had no room
        np.testing.assert_array_equal(drawn, inside)  # hidden exactly where a name is cut
        assert list(v.ray_labels.text) == parts  # every name stays (a tip click shows it)
        hidden = int((~drawn).sum())
        assert f"{hidden} part names not drawn" in v.ray_note.value
    finally:
        v.close()


def test_every_name_is_drawn_when_all_fit(model):
    v = BiplotView(model)
    try:
        np.testing.assert_array_equal(np.asarray(v.ray_labels.opacities, float), [1.0])
        assert "not drawn" not in v.ray_note.value
    finally:
        v.close()
