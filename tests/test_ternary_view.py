"""TernaryView linked to the shared model, kernel side (no browser).

Front-end actions are replayed the way the browser sends them, with
``widget.set_state(...)`` (what ipywidgets calls on an incoming update) or a
mark's custom-message handler: a brush sets ``brushing`` True, then
``selected_x``/``selected_y``, then ``brushing`` False (bqplot's
BrushSelector); a lasso sets the scatter's ``selected``; a click with the
polygon tool appends to the vertex mark's ``x``/``y`` (bqplot's
``interactions={'click': 'add'}``) or, on the density image, sends an
``element_click`` with ``click_x``/``click_y``.

Expected rows are computed without the view: numpy closure and the ternary
projection ``x = c + a / 2, y = a * sqrt(3) / 2`` (the standard barycentric
placement, common practice; vertex order A top, B left, C right), then plain
comparisons or ``matplotlib.path.Path.contains_points``. Test data are
random numbers invented here.
"""

from __future__ import annotations

import io

import ipywidgets as widgets
import matplotlib.image as mpimg
import numpy as np
import pandas as pd
import pytest
import traitlets
from matplotlib.path import Path

from compwidgets.core import geometry
from compwidgets.core import ternary as core_ternary
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views import _common
from compwidgets.views.ternary import TernaryView

PARTS = ["A", "B", "C", "D", "E"]
H = np.sqrt(3) / 2
EVIL = "<img src=x onerror=alert(1)>"


def make_frame(n: int, seed: int = 0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    values = np.exp(rng.normal([1.0, 0.5, 0.0, -0.5, 0.2], 0.7, size=(n, 5)))
    df = pd.DataFrame(values, columns=PARTS, index=[f"S{i:05d}" for i in range(n)])
    df["site"] = rng.choice(["upper", "middle", "lower"], size=n)
    return df


@pytest.fixture
def frame():
    df = make_frame(300)
    df.loc["S00003", "B"] = np.nan  # missing B: out of views showing B only
    df["C"] = df["C"].astype(object)
    df.loc[["S00010", "S00011"], "C"] = "<0.05"  # below detection -> replaced
    return df


@pytest.fixture
def model(frame):
    return CompositionModel(read_composition(frame, check_total=False), group_column="site")


def projected(model, parts):
    """Reference projection from the composition's values with plain numpy."""
    X = model.composition.values[parts].to_numpy(dtype=float)
    ok = np.all(np.isfinite(X) & (X > 0), axis=1)
    C = X / X.sum(axis=1, keepdims=True)
    return ok, C[:, 2] + C[:, 0] / 2, C[:, 0] * H


def brush(view, xr, yr):
    view.brush.set_state({"brushing": True})
    view.brush.set_state({"selected_x": list(xr), "selected_y": list(yr)})
    view.brush.set_state({"brushing": False})


def shown_selected(view):
    """Model rows highlighted by a view's scatter mark."""
    sel = view.scatter.selected
    return np.zeros(0, dtype=np.uint32) if sel is None else view._mark_rows[np.asarray(sel)]


def count(model):
    seen = []
    model.observe(lambda change: seen.append(change["new"]), names=["selection"])
    return seen


# ----------------------------------------------------------------- linking


def test_brush_in_one_view_selects_the_same_rows_everywhere(model):
    v1 = TernaryView(model, ["A", "B", "C"])
    v2 = TernaryView(model, ["C", "D", "E"])
    assert v1.active_mode == v2.active_mode == "points"
    seen = count(model)
    brush(v1, (0.5, 0.2), (0.05, 0.4))  # reversed x order, as a brush may report it
    ok, x, y = projected(model, ["A", "B", "C"])
    expected = np.flatnonzero(ok & (x >= 0.2) & (x <= 0.5) & (y >= 0.05) & (y <= 0.4))
    assert 10 < expected.size < 290
    assert len(seen) == 1  # one notification, no echo from either view
    np.testing.assert_array_equal(model.selection, expected)
    np.testing.assert_array_equal(shown_selected(v1), expected)
    in_v2 = np.intersect1d(expected, v2.rows)
    np.testing.assert_array_equal(np.sort(shown_selected(v2)), in_v2)
    assert list(model.selected_frame().index) == list(model.index[expected])
    assert v1.scatter.selected.dtype == np.uint32


def test_lasso_selection_links_to_the_model_and_other_view(model):
    v1 = TernaryView(model, ["A", "B", "C"])
    v2 = TernaryView(model, ["B", "D", "E"])
    seen = count(model)
    positions = [0, 5, 17, 42, 100]
    v1.scatter.set_state({"selected": positions})  # what the LassoSelector sends
    expected = v1.rows[positions]
    assert len(seen) == 1
    np.testing.assert_array_equal(model.selection, np.sort(expected))
    np.testing.assert_array_equal(np.sort(shown_selected(v2)), np.intersect1d(expected, v2.rows))
    # the lasso's own indices are not sent back (equal array: no reassignment)
    np.testing.assert_array_equal(v1.scatter.selected, positions)


def test_add_mode_and_clearing(model):
    v1 = TernaryView(model, ["A", "B", "C"])
    v2 = TernaryView(model, ["C", "D", "E"])
    seen = count(model)
    v1.scatter.set_state({"selected": [1, 2]})
    v2.select_mode = "add"
    v2.scatter.set_state({"selected": [7]})
    assert len(seen) == 2
    np.testing.assert_array_equal(model.selection, np.sort(np.r_[v1.rows[[1, 2]], v2.rows[7]]))
    brush(v2, (0.0, 1.0), (0.0, 1.0))
    v1.clear_selection()
    assert len(seen) == 4 and model.selection.size == 0
    assert v1.scatter.selected is None and v2.scatter.selected is None
    assert v2.brush.selected_x is None  # the rectangle is gone from the other view too
    v1.clear_selection()  # nothing to clear: no notification
    assert len(seen) == 4


def test_changing_active_parts_keeps_the_selection(model):
    follower = TernaryView(model)  # follows the first three active parts
    fixed = TernaryView(model, ["C", "D", "E"])
    assert follower.parts == ["A", "B", "C"]
    model.select([4, 8, 15, 16, 23, 42])
    seen = count(model)
    model.active_parts = ["D", "E", "A", "B"]
    assert follower.parts == ["D", "E", "A"] and fixed.parts == ["C", "D", "E"]
    assert seen == []  # the selection did not change
    np.testing.assert_array_equal(model.selection, [4, 8, 15, 16, 23, 42])
    np.testing.assert_array_equal(np.sort(shown_selected(follower)), [4, 8, 15, 16, 23, 42])
    np.testing.assert_array_equal(np.sort(shown_selected(fixed)), [4, 8, 15, 16, 23, 42])
    ok, x, y = projected(model, ["D", "E", "A"])
    np.testing.assert_allclose(follower.scatter.x, x[ok], atol=1e-6)  # float32 on the wire
    assert follower.scatter.x.dtype == np.float32
    follower.parts = ["A", "C", "E"]  # set by the user: no longer follows the model
    model.active_parts = ["B", "C", "D"]
    assert follower.parts == ["A", "C", "E"]


def test_selection_change_sends_only_the_index_array(model, monkeypatch):
    v1 = TernaryView(model, ["A", "B", "C"])
    v2 = TernaryView(model, ["C", "D", "E"])
    changes = []
    for v in (v1, v2):
        v.scatter.observe(lambda c: changes.append(c["name"]), names=["x", "y"])
    sent = []
    original = widgets.Widget._send

    def spy(self, msg, buffers=None):
        sent.append((self, msg, buffers))
        return original(self, msg, buffers)

    monkeypatch.setattr(widgets.Widget, "_send", spy)
    brush(v1, (0.1, 0.9), (0.1, 0.5))
    model.select([1, 2, 3, 50])
    model.clear_selection()
    assert changes == []  # x and y never reassigned
    # only the outline of the drawn rectangle (drawn, then cleared by the selections made
    # elsewhere) sends coordinates
    outlines = (v1.selection_outline, v2.selection_outline)
    keys = {k for w, msg, _ in sent if w not in outlines for k in msg.get("state", {})}
    assert "x" not in keys and "y" not in keys
    outline_msgs = [msg for w, msg, _ in sent if w in outlines]
    assert len(outline_msgs) == 2 and all(w is v1.selection_outline for w, *_ in sent
                                          if w in outlines)  # fmt: skip
    scatter_msgs = [msg for w, msg, _ in sent if w in (v1.scatter, v2.scatter)]
    # the selection, and the few-key style that fades or unfades the points (_mark_selection)
    assert scatter_msgs and all(set(m["state"]) in ({"selected"}, {"unselected_style"})
                                for m in scatter_msgs)  # fmt: skip
    selected_msgs = [m for m in scatter_msgs if "selected" in m["state"]]
    assert selected_msgs
    arrays = [m["state"]["selected"] for m in selected_msgs if m["state"]["selected"] is not None]
    assert arrays and all(a["dtype"] == "uint32" for a in arrays)


def test_no_echo_when_the_view_writes_its_own_marks(model):
    v1 = TernaryView(model, ["A", "B", "C"])
    TernaryView(model, ["B", "C", "D"])
    seen = count(model)
    for rows in ([1, 2], [1, 2], [3], []):
        model.select(rows)
    assert len(seen) == 3  # [1, 2], [3], [] : the repeat is not a change, no view re-selects
    assert v1.scatter.selected is None


# ------------------------------------------------------------ left-out rows


def test_rows_missing_a_part_are_left_out_of_this_view_only(model):
    v1 = TernaryView(model, ["A", "B", "C"])
    v2 = TernaryView(model, ["C", "D", "E"])
    assert v1.n_left_out == 1 and 3 not in v1.rows
    assert v1.status.value == "1 row left out (missing or zero in A, B, C)"
    assert v2.n_left_out == 0 and 3 in v2.rows and v2.status.value == ""
    assert model.n_rows == 300
    pos = int(np.flatnonzero(v2.rows == 3)[0])
    v2.scatter.set_state({"selected": [pos]})
    np.testing.assert_array_equal(model.selection, [3])
    assert v1.scatter.selected is None  # not shown there, yet selected in the model
    assert list(model.selected_frame().index) == ["S00003"]


def test_replaced_values_get_their_own_marker(model):
    v1 = TernaryView(model, ["A", "B", "C"])
    v2 = TernaryView(model, ["A", "D", "E"])
    status = model.composition.status
    below = np.flatnonzero((status[["A", "B", "C"]] == "below_dl").any(axis=1).to_numpy())
    assert below.tolist() == [10, 11]
    ok, x, y = projected(model, ["A", "B", "C"])
    got = sorted(zip(v1.replaced_marker.x.tolist(), v1.replaced_marker.y.tolist(), strict=True))
    want = sorted(
        zip(
            x[below].astype(np.float32).tolist(), y[below].astype(np.float32).tolist(), strict=True
        )
    )
    assert got == want
    assert v2.replaced_marker.x.size == 0  # C is not shown there


# ---------------------------------------------------------------- density mode


@pytest.fixture(scope="module")
def big_model():
    df = make_frame(20_000, seed=11)
    df.iloc[:40, 1] = np.nan  # 40 rows without B
    return CompositionModel(read_composition(df, check_total=False), group_column="site")


def test_density_mode_rectangle_selects_like_core_geometry(big_model, monkeypatch):
    big_model.clear_selection()
    view = TernaryView(big_model, ["A", "B", "C"], mode="density")
    other = TernaryView(big_model, ["C", "D", "E"])  # auto: 20,000 > 5,000 rows
    assert view.active_mode == other.active_mode == "density"
    assert view.density.visible and view.scatter.x.size == 500 and view.n_left_out == 40
    sent = []
    original = widgets.Widget._send

    def spy(self, msg, buffers=None):
        sent.append((self, msg))
        return original(self, msg, buffers)

    monkeypatch.setattr(widgets.Widget, "_send", spy)
    before = view._png.value
    brush(view, (0.3, 0.7), (0.1, 0.45))
    closed = np.asarray(big_model.closed(["A", "B", "C"]))[view.rows]
    x, y = core_ternary.ternary_to_xy(closed)
    mask = geometry.points_in_rectangle(x, y, (0.3, 0.7), (0.1, 0.45))
    np.testing.assert_array_equal(big_model.selection, view.rows[mask])
    # independent check of the same rectangle on the plain-numpy projection
    ok, rx, ry = projected(big_model, ["A", "B", "C"])
    ref = np.flatnonzero(ok & (rx >= 0.3) & (rx <= 0.7) & (ry >= 0.1) & (ry <= 0.45))
    np.testing.assert_array_equal(big_model.selection, ref)
    assert view._png.value != before  # the selection layer was redrawn
    outlines = (view.selection_outline, other.selection_outline)  # the rectangle drawn
    keys = {k for w, m in sent if w not in outlines for k in m.get("state", {})}
    # "image": bqplot's Image mark shows a new picture only when its image widget is
    # replaced (checked in Chromium); only the density marks may send it
    assert keys <= {"selected", "value", "selected_x", "selected_y", "brushing", "image"}, keys
    image_senders = {id(w) for w, m in sent if "image" in m.get("state", {})}
    assert image_senders and image_senders <= {id(view.density), id(other.density)}
    # the subsample highlights exactly its selected rows
    np.testing.assert_array_equal(
        np.sort(shown_selected(other)), np.intersect1d(other._mark_rows, big_model.selection)
    )


def test_density_mode_polygon_selects_like_core_geometry(big_model):
    big_model.clear_selection()
    view = TernaryView(big_model, ["B", "D", "E"], mode="density")
    view.tool = "lasso"  # no lasso in density mode: the polygon tool instead
    assert view.tool == "polygon" and view.figure.interaction is None
    assert view.polygon_marker.interactions == {"click": "add"}  # clicks add vertices now
    view.close_polygon()  # nothing clicked yet: a note, no selection
    assert "at least 3 points" in view.notes.value and big_model.selection.size == 0
    assert view.scatter.visible is False  # hover points hidden so clicks reach the figure
    verts = [(0.2, 0.05), (0.8, 0.1), (0.55, 0.6), (0.35, 0.3)]
    # two clicks on the background (front end appends), two on the density image
    view.polygon_marker.set_state({"x": [verts[0][0]], "y": [verts[0][1]]})
    view.polygon_marker.set_state({"x": [verts[0][0], verts[1][0]], "y": [0.05, 0.1]})
    for vx, vy in verts[2:]:
        msg = {"event": "element_click", "data": {"click_x": vx, "click_y": vy}}
        view.density._handle_custom_msgs(view.density, msg)
    np.testing.assert_allclose(
        np.column_stack([view.polygon_marker.x, view.polygon_marker.y]), verts
    )
    assert view._polygon_line.x.size == 5  # closed outline drawn
    view.close_polygon()
    closed = np.asarray(big_model.closed(["B", "D", "E"]))[view.rows]
    x, y = core_ternary.ternary_to_xy(closed)
    expected = view.rows[geometry.points_in_polygon(x, y, verts)]
    np.testing.assert_array_equal(big_model.selection, expected)
    # and against matplotlib's point-in-polygon on the plain-numpy projection
    ok, rx, ry = projected(big_model, ["B", "D", "E"])
    ref = np.flatnonzero(ok)[Path(verts).contains_points(np.column_stack([rx, ry])[ok])]
    np.testing.assert_array_equal(big_model.selection, ref)
    assert view.polygon_marker.x.size == 0  # ready for the next polygon
    assert "at least 3 points" not in view.notes.value
    view.tool = "none"
    assert view.polygon_marker.interactions == {} and view.scatter.visible


def test_density_image_is_a_valid_png_with_both_layers(big_model):
    big_model.clear_selection()
    view = TernaryView(big_model, ["A", "B", "C"], mode="density")
    # Source: matplotlib's PNG reader (independent decoder).
    img = mpimg.imread(io.BytesIO(view._png.value), format="png")
    counts = view._density_image.all_counts
    assert img.shape == counts.shape + (4,)
    np.testing.assert_array_equal(img[::-1, :, 3] > 0, counts > 0)  # row 0 of the PNG is the top
    view.select_rectangle((0.0, 1.0), (0.0, 0.2))
    img2 = mpimg.imread(io.BytesIO(view._png.value), format="png")
    sel = view._density_image.selection_counts(big_model.selected_mask()[view.rows])
    red = np.array(_common.hex_to_rgb(_common.DENSITY_SELECTION_COLOUR)) / 255
    reddish = np.abs(img2[::-1, :, :3] - red).sum(axis=2) < np.abs(img[::-1, :, :3] - red).sum(
        axis=2
    )
    assert sel.sum() == big_model.selection.size
    assert np.all(reddish[sel > 0])  # every selected cell moved towards the selection colour
    assert not np.any(reddish[(sel == 0) & (counts > 0)])


def test_auto_mode_threshold_and_override(model):
    assert TernaryView(model, ["A", "B", "C"], threshold=100).active_mode == "density"
    v = TernaryView(model, ["A", "B", "C"], threshold=100, mode="points")
    assert v.active_mode == "points" and v.scatter.x.size == v.rows.size
    v.mode = "auto"
    assert v.active_mode == "density" and v.density.visible


# --------------------------------------------------------------- ternary options


def test_centred_view_puts_the_centre_at_the_barycentre(model):
    v = TernaryView(model, ["A", "B", "C"], centred=True)
    # the displayed points, read back as compositions, have their centre at (1/3, 1/3, 1/3):
    # geometric mean by numpy, closed (definition of the centre, Aitchison 1986)
    shown = core_ternary.xy_to_ternary(v._x, v._y)
    g = np.exp(np.log(shown).mean(axis=0))
    np.testing.assert_allclose(g / g.sum(), 1 / 3, atol=1e-12)
    # the grid reads original shares: perturbed back by the data centre (numpy geometric
    # mean of the shown rows, closed), each line has a constant share of its part
    X = model.composition.values[["A", "B", "C"]].to_numpy()[v.rows]
    centre = np.exp(np.log(X / X.sum(axis=1, keepdims=True)).mean(axis=0))
    for gx, gy in zip(v.grid.x[:9], v.grid.y[:9], strict=True):  # the 9 lines of part A
        back = core_ternary.xy_to_ternary(gx.astype(float), gy.astype(float)) * centre
        back /= back.sum(axis=1, keepdims=True)
        assert np.ptp(back[:, 0]) < 1e-5  # float32 on the wire
    # ticks still read the original shares: 9 per edge, labels "10" ... "90"
    assert [list(m.text) for m in v.tick_labels] == [[str(10 * k) for k in range(1, 10)]] * 3


def test_regions_are_drawn_per_group_and_inside_the_triangle(model):
    v = TernaryView(model, ["A", "B", "C"], probability_levels=[0.99, 0.9, 0.95])
    assert v.probability_levels == [0.9, 0.95, 0.99]
    assert v.regions.x.shape == (9, 181)  # 3 groups x 3 levels
    tri = Path(core_ternary.VERTICES)
    pts = np.column_stack([v.regions.x.ravel(), v.regions.y.ravel()])
    assert tri.contains_points(pts).all()
    palette = _common.group_colours(["lower", "middle", "upper"])
    assert v.regions.colors == [c for c in palette for _ in range(3)]
    v.confidence_level = 0.95
    assert v.centre_regions.x.shape == (3, 181)
    v.probability_levels = []
    assert v.regions.x.shape[0] == 0
    with pytest.raises(traitlets.TraitError, match=r"\(0, 1\)"):
        v.probability_levels = [1.5]


def test_small_groups_get_a_note_instead_of_a_region(frame):
    frame = frame.copy()
    frame["site"] = "big"
    frame.loc[["S00000", "S00001"], "site"] = "tiny"
    m = CompositionModel(read_composition(frame, check_total=False), group_column="site")
    v = TernaryView(m, ["A", "B", "C"], probability_levels=[0.95])
    assert np.atleast_2d(v.regions.x).shape == (1, 181)  # bqplot squeezes one line to 1-D
    assert "no region for group 'tiny'" in v.notes.value and "3 rows" in v.notes.value


def test_compositional_lines(model):
    v = TernaryView(model, ["A", "B", "C"], compositional_line=(0, 1))
    a = model.composition.values.loc[["S00000", "S00001"], ["A", "B", "C"]].to_numpy()
    a = a / a.sum(axis=1, keepdims=True)
    pts = core_ternary.xy_to_ternary(v.line.x.astype(float), v.line.y.astype(float))
    # every point is x1 (+) t (.) (x2 (-) x1): its log-ratios are collinear with the two rows
    Z = np.log(np.vstack([a, pts]))
    Z = Z - Z.mean(axis=1, keepdims=True)
    s = np.linalg.svd(Z - Z[0], compute_uv=False)
    assert s[1] < 1e-4 * s[0]  # float32 on the wire: collinear to single precision
    v.compositional_line = {"direction": [1.0, -0.5, -0.5]}  # through the data centre
    x = v.line.x.astype(float)
    assert x.size == 201
    v.compositional_line = (0, 3)  # row 3 is missing B: no line, a note says why
    assert v.line.x.size == 0 and "S00003" in v.notes.value
    with pytest.raises(traitlets.TraitError, match="two different"):
        v.compositional_line = (2, 2)


def test_amalgamation_as_a_vertex(model):
    model.amalgamations = {"DE": ["D", "E"]}
    v = TernaryView(model, ["A", "B", "DE"])
    X = model.composition.values[["A", "B", "D", "E"]].to_numpy()
    X = np.column_stack([X[:, 0], X[:, 1], X[:, 2] + X[:, 3]])
    ok = np.all(np.isfinite(X), axis=1)
    C = X[ok] / X[ok].sum(axis=1, keepdims=True)
    np.testing.assert_allclose(v._x, C[:, 2] + C[:, 0] / 2, rtol=1e-12)
    with pytest.raises(traitlets.TraitError, match="share a member"):
        v.parts = ["A", "D", "DE"]
    with pytest.raises(traitlets.TraitError, match="unknown part"):
        v.parts = ["A", "B", "Z"]
    with pytest.raises(traitlets.TraitError, match="twice"):
        v.parts = ["A", "A", "B"]
    with pytest.raises(traitlets.TraitError, match="exactly 3"):
        v.parts = ["A", "B"]


def test_colour_by_balance(model):
    v = TernaryView(model, ["A", "B", "C"])
    codes = model.group_codes()[1]
    np.testing.assert_array_equal(v.scatter.color, (codes[v.rows] + 1).astype(np.float32))
    model.set_sbp([[1, 1, -1, -1, -1], [1, -1, 0, 0, 0], [0, 0, 1, -1, -1], [0, 0, 0, 1, -1]])
    name = model.balance_names[0]
    model.colour_by = name
    np.testing.assert_array_equal(
        v.scatter.color, model.balance_values(name)[v.rows].astype(np.float32)
    )
    assert list(v.colour_scale.colors) == list(_common.BALANCE_COLOURS)
    assert v.colour_scale.min == -v.colour_scale.max
    assert f"balance {name}" in list(v._legend_text.text)


# -------------------------------------------------------------- text and safety


def test_table_text_reaches_the_marks_as_plain_strings():
    df = make_frame(30)
    df = df.rename(columns={"A": EVIL})
    df["site"] = ["<b>bold</b>"] * 15 + ["a & b"] * 15
    df.iloc[0, 1] = np.nan
    m = CompositionModel(read_composition(df, check_total=False), group_column="site")
    v = TernaryView(m, [EVIL, "B", "C"])
    assert list(v.vertex_labels.text) == [EVIL, "B", "C"]
    assert {"<b>bold</b>", "a & b"} <= set(v._legend_text.text)
    assert v.status.value == f"1 row left out (missing or zero in {EVIL}, B, C)"
    v._on_hover(v.scatter, {"event": "hover", "point": {"index": 0}})
    hover = [label.value for label in v._tooltip_lines]
    assert hover[0] == "S00001" and hover[1] == "site: <b>bold</b>"
    assert hover[2].startswith(EVIL + ": ")

    def walk(w):
        yield w
        for child in getattr(w, "children", ()):
            yield from walk(child)

    tree = list(walk(v)) + [v.hover_box, *v._tooltip_lines]
    assert not any(isinstance(w, widgets.HTML | widgets.HTMLMath) for w in tree)
    assert all(isinstance(w, widgets.Label) for w in v._tooltip_lines)


def test_hover_shows_values_units_and_replacement(model):
    v = TernaryView(model, ["A", "B", "C"])
    pos = int(np.flatnonzero(v._mark_rows == 10)[0])
    v._on_hover(v.scatter, {"event": "hover", "point": {"index": pos}})
    lines = [label.value for label in v._tooltip_lines if label.value]
    assert lines[0] == "S00010"
    closed = model.composition.values.loc["S00010", ["A", "B", "C"]].to_numpy()
    closed = 100 * closed / closed.sum()
    for line, part, pct in zip(lines[2:], "ABC", closed, strict=True):
        assert line.startswith(f"{part}: {pct:.2f} % of the 3 shown | ") and "wt%" in line
    assert "replaced" in lines[4] and "below detection" in lines[4]


def test_bad_model_argument_and_close(model):
    with pytest.raises(TypeError, match="CompositionModel"):
        TernaryView(model.composition)
    v = TernaryView(model, ["A", "B", "C"])
    calls = []
    v._apply_selection = lambda: calls.append(1)
    model.select([1])
    assert calls == [1]
    v.close()
    model.select([2])
    model.group_column = ""
    assert calls == [1]  # a closed view no longer follows the model


def test_callers_frame_is_not_mutated(frame):
    copy = frame.copy()
    m = CompositionModel(read_composition(frame, check_total=False), group_column="site")
    v = TernaryView(m, ["A", "B", "C"], centred=True, probability_levels=[0.9])
    brush(v, (0, 1), (0, 1))
    pd.testing.assert_frame_equal(frame, copy)


def test_views_follow_parts_that_disappear(model):
    model.amalgamations = {"DE": ["D", "E"]}
    v = TernaryView(model, ["A", "B", "DE"])
    model.amalgamations = {}
    assert v.parts == ["A", "B", "C"]  # back to the model's active parts
    assert "no longer exist" in v.notes.value and "DE" in v.notes.value
    model.active_parts = ["C", "D"]  # fewer than 3 active parts: filled from the others
    assert v.parts[:2] == ["C", "D"] and len(set(v.parts)) == 3


def test_tool_buttons_and_mode_switches(model):
    v = TernaryView(model, ["A", "B", "C"])
    assert v.figure.interaction is v.brush
    v._tool_buttons.value = "lasso"  # a click on the toolbar
    assert v.tool == "lasso" and v.figure.interaction is v.lasso
    v.tool = "none"
    v.mode = "density"  # new button options must not reset the chosen tool
    assert v.tool == "none" and v._tool_buttons.value == "none"
    assert "lasso" not in [value for _, value in v._tool_buttons.options]
    v.mode = "points"
    v.tool = "lasso"
    v.mode = "density"
    assert v.tool == "polygon" and v._tool_buttons.value == "polygon"


# ------------------------------------------------- colours, legend and clicks seen in a browser


def test_colour_values_are_sent_before_the_colour_scale(model, monkeypatch):
    # In Chromium, bqplot repaints the points of a changed colour scale in a transition run
    # at the next frame: colour values sent after the scale were painted with the old
    # values. The view sends the values first.
    v = TernaryView(model, ["A", "B", "C"])
    model.set_sbp([[1, 1, -1, -1, -1], [1, -1, 0, 0, 0], [0, 0, 1, -1, -1], [0, 0, 0, 1, -1]])
    sent = []
    original = widgets.Widget._send

    def spy(widget, msg, buffers=None):
        sent.append((widget, set(msg.get("state", {}))))
        return original(widget, msg, buffers)

    monkeypatch.setattr(widgets.Widget, "_send", spy)
    model.colour_by = model.balance_names[0]
    order = [
        "values" if w is v.scatter and "color" in keys else "scale"
        for w, keys in sent
        if (w is v.scatter and "color" in keys) or w is v.colour_scale
    ]
    assert order[0] == "values" and "scale" in order, order


def test_rows_without_a_balance_value_are_grey(frame):
    frame.loc["S00005", "D"] = np.nan  # complete in A, B, C, but no balance A,B | C,D,E
    m = CompositionModel(read_composition(frame, check_total=False), group_column="site")
    v = TernaryView(m, ["A", "B", "C"])
    m.set_sbp([[1, 1, -1, -1, -1], [1, -1, 0, 0, 0], [0, 0, 1, -1, -1], [0, 0, 0, 1, -1]])
    m.colour_by = m.balance_names[0]
    values = m.balance_values(m.balance_names[0])
    row = int(np.flatnonzero(m.index == "S00005")[0])
    pos = int(np.flatnonzero(v._mark_rows == row)[0])
    colour = np.asarray(v.scatter.color)
    assert np.all(np.isfinite(colour))  # the browser draws NaN black
    limit = float(np.nanmax(np.abs(values[v.rows])))
    # evenly spaced colours from min to max: grey at -2L, then the balance scale -L, 0, +L
    assert list(v.colour_scale.colors) == [_common.NO_GROUP_COLOUR, *_common.BALANCE_COLOURS]
    assert v.colour_scale.min == pytest.approx(-2 * limit)
    assert v.colour_scale.max == pytest.approx(limit)
    assert colour[pos] == pytest.approx(-2 * limit)
    others = np.delete(np.arange(colour.size), pos)
    np.testing.assert_allclose(colour[others], values[v._mark_rows[others]], rtol=1e-6)
    assert "(undefined)" in list(v._legend_text.text)


def test_legend_text_is_shortened_to_the_room_it_has(frame):
    long_name = "a catchment with a rather long name indeed"
    frame["site"] = [long_name] * 150 + ["short"] * 150
    m = CompositionModel(read_composition(frame, check_total=False), group_column="site")
    v = TernaryView(m, ["A", "B", "C"])
    text = list(v._legend_text.text)
    budget = v._legend_max_chars()
    assert 10 <= budget < len(long_name)
    assert long_name not in text and long_name[: budget - 1] + "\u2026" in text
    assert "short" in text
    assert all(len(t) <= budget for t in text)
    # the tooltip keeps the whole name
    pos = int(np.flatnonzero(m.group_codes()[1][v._mark_rows] == 0)[0])
    v._on_hover(v.scatter, {"event": "hover", "data": {"index": pos}})
    assert v._tooltip_lines[1].value == f"site: {long_name}"


def test_polygon_click_on_a_point_adds_a_vertex_there(model):
    v = TernaryView(model, ["A", "B", "C"])
    click = {"event": "element_click", "data": {"x": 0.31, "y": 0.22, "index": 4}}
    v.scatter._handle_custom_msgs(None, click)
    assert len(v.polygon_marker.x) == 0  # rectangle tool: a click on a point adds nothing
    v.tool = "polygon"
    v.scatter._handle_custom_msgs(None, click)
    v.replaced_marker._handle_custom_msgs(
        None, {"event": "element_click", "data": {"x": 0.6, "y": 0.1}}
    )
    np.testing.assert_allclose(v.polygon_marker.x, [0.31, 0.6])
    np.testing.assert_allclose(v.polygon_marker.y, [0.22, 0.1])


def test_tool_buttons_have_one_tooltip_per_button(model):
    v = TernaryView(model, ["A", "B", "C"])
    assert len(v._tool_buttons.tooltips) == len(v._tool_buttons.options) == 4
    assert "hover" in v._tool_buttons.tooltips[-1]
    v.mode = "density"
    assert len(v._tool_buttons.tooltips) == len(v._tool_buttons.options) == 3


def test_density_picture_changes_without_a_new_widget(big_model, opened_comms):
    # bqplot's Image mark redraws only when its ``image`` changes (seen in Chromium): the
    # view keeps two picture widgets and shows the new picture in the one not shown
    big_model.clear_selection()
    view = TernaryView(big_model, ["A", "B", "C"], mode="density")
    first = view.density.image
    assert first is view._png
    opened_comms.clear()
    before = first.value
    view.select_rectangle((0.0, 1.0), (0.0, 0.2))
    second = view.density.image
    assert second is view._png and second is not first
    assert second.value != before  # the picture with the selection on top
    assert first.comm is not None and second.comm is not None  # both kept open
    big_model.select(big_model.selection)  # the same selection: the same picture, nothing sent
    assert view.density.image is second
    view.select_rectangle((0.0, 1.0), (0.2, 0.5))
    assert view.density.image is first and first.value != before  # back to the first widget
    view.clear_selection()
    assert opened_comms == []  # no widget (no comm) was opened by any of these changes
    # and the picture shown is the one of the model's selection (none now): as at the start
    assert view._png.value == before
    view.close()
    assert first.comm is None and second.comm is None


def test_the_view_warns_when_its_regions_under_cover_by_kind_and_group_size():
    df = make_frame(200, seed=4)
    df["site"] = ["few"] * 12 + ["many"] * 188
    m = CompositionModel(read_composition(df, check_total=False), group_column="site")
    v = TernaryView(m, parts=PARTS[:3], probability_levels=[0.95], confidence_level=0.9)
    # the default prediction regions hold their level at any size: no warning
    assert v.probability_kind == "prediction"
    assert "prediction regions for a new sample (normal model on ilr) at 95 %" in v.notes.value
    assert "fewer new samples" not in v.notes.value
    assert "confidence region of the centre at 90 %" in v.notes.value
    # the known-parameter (chi-square) regions: the small group is named with the share it
    # holds; F(2, 10) law of the new sample's distance (core.regions.expected_coverage,
    # checked by simulation in test_ternary_geometry): 87.0 % at 95 % for 12 rows
    from scipy import stats

    v.probability_kind = "known_parameters"
    notes = v.notes.value
    assert "known-parameter regions (chi-square, normal model on ilr) at 95 %" in notes
    held = stats.f.cdf(stats.chi2.ppf(0.95, 2) * 12 * 10 / (2 * 13 * 11), 2, 10)
    assert f"group 'few' (12 rows) about {100 * held:.3g} % at 95 %" in notes
    assert "'many'" not in notes  # 188 rows: within 10 % of the nominal miss rate
    v.probability_levels = [0.99]
    assert "'many' (188 rows) about" in v.notes.value  # at 99 %: 313 rows are needed


def test_hover_reads_traces_back_in_the_unit_they_were_reported_in():
    df = pd.DataFrame(
        {
            "SiO2 (wt%)": [60.0, 55.0, 70.0],
            "CaO (wt%)": [8.0, 9.0, 5.0],
            "Cu (ppm)": [45.0, 30, 12],
        },
        index=["q1", "q2", "q3"],
    )
    m = CompositionModel(read_composition(df, check_total=False))
    assert m.composition.unit == "wt%"
    v = TernaryView(m, ["SiO2", "CaO", "Cu"])
    pos = int(np.flatnonzero(v._mark_rows == 0)[0])
    v._on_hover(v.scatter, {"event": "hover", "point": {"index": pos}})
    lines = [label.value for label in v._tooltip_lines if label.value]
    # the caller's own numbers, in the caller's own units
    assert lines[1].endswith("| 60 wt%") and lines[3].endswith("| 45 ppm")


# ------------------------------------------------- centring control, parts left active


def test_the_centring_toggle_mirrors_the_trait(model):
    v = TernaryView(model, ["A", "B", "C"])
    toggle = v._centring_toggle
    assert toggle in v.boundary_controls.children and not toggle.value
    plain = v._x.copy()
    toggle.set_state({"value": True})  # a click in the browser
    assert v.centred
    # the points moved: their centre is the barycentre now (numpy geometric mean, closed)
    shown = core_ternary.xy_to_ternary(v._x, v._y)
    g = np.exp(np.log(shown).mean(axis=0))
    np.testing.assert_allclose(g / g.sum(), 1 / 3, atol=1e-12)
    assert not np.allclose(v._x, plain)
    v.centred = False  # set in code: the toggle follows
    assert toggle.value is False
    np.testing.assert_allclose(v._x, plain)
    v.close()
    assert toggle.comm is None


def test_a_part_taken_out_of_the_active_parts_is_noted_until_it_is_back(model):
    v = TernaryView(model, ["A", "B", "C"])  # chosen parts: the view keeps them
    model.active_parts = ["A", "C", "D", "E"]
    assert v.parts == ["A", "B", "C"]
    assert "B is no longer among the active parts" in v.notes.value
    model.active_parts = ["A", "C", "D"]  # another change: still noted
    assert "B is no longer among the active parts" in v.notes.value
    model.active_parts = list(PARTS)  # back: the note goes
    assert "no longer" not in v.notes.value
    model.active_parts = ["C", "D", "E"]
    assert "A, B are no longer among the active parts" in v.notes.value
    v.parts = ["C", "D", "E"]  # the user chose again: nothing to say
    assert "no longer" not in v.notes.value
    model.active_parts = ["A", "C", "D", "E"]
    v.parts = ["A", "B", "C"]  # B was not active when chosen: no note about a change
    assert "no longer" not in v.notes.value
    model.active_parts = ["C", "D", "E"]
    assert "A is no longer among the active parts" in v.notes.value
    v.follow_active_parts()
    assert v.parts == ["C", "D", "E"] and "no longer" not in v.notes.value


# ------------------------------------------------------------- boundary priors


def _posteriors_on_the_curves(view, model, priors):
    """scikit-learn's LDA with the given priors, fitted on the rows shown (ilr of the
    3 parts, pivot basis: numpy), evaluated at every point of the view's boundary curves:
    the top two posteriors of each point."""
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis

    from compwidgets import core

    categories, codes = model.group_codes()
    X = model.part_values(view.parts)[view.rows]
    L = np.log(X)
    Z = (L - L.mean(axis=1, keepdims=True)) @ core.default_basis(3).T
    y = codes[view.rows]
    lda = LinearDiscriminantAnalysis(priors=[priors[c] for c in categories]).fit(Z, y)
    tops = []
    for curve in view.boundary_curves:
        C = np.log(curve)
        P = np.sort(
            lda.predict_proba((C - C.mean(axis=1, keepdims=True)) @ core.default_basis(3).T)
        )
        tops.append(P[:, -2:])
    return np.concatenate(tops)


@pytest.mark.parametrize("priors", ["proportional", "equal"])
def test_boundaries_use_the_priors_of_the_discriminant_view(frame, priors):
    from compwidgets.views.discriminant import DiscriminantView

    # unequal groups, and rows missing in a part that is active but not shown: the shares
    # of the discriminant's rows differ from those of the ternary's rows
    frame = frame.copy()
    frame.loc[frame.index[:60], "site"] = "upper"
    frame.loc[frame.index[100:130], "E"] = np.nan
    m = CompositionModel(read_composition(frame, check_total=False), group_column="site")
    d = DiscriminantView(m, priors=priors)
    v = TernaryView(m, ["A", "B", "C"], boundaries=True)
    widgets.link((d, "priors"), (v, "boundary_priors"))  # as the workbench links them
    assert v.boundary_priors == priors
    fit = d.rule.fit
    used = dict(zip(fit.classes, fit.priors, strict=True))
    if priors == "proportional":  # the discriminant's rows: complete in A..E (numpy count)
        ok = np.isfinite(m.part_values(list(PARTS))).all(axis=1)
        labels = frame["site"].to_numpy()[ok]
        expected = {c: float(np.mean(labels == c)) for c in used}
        assert used == pytest.approx(expected, rel=1e-12)
        shown = frame["site"].to_numpy()[v.rows]
        assert abs(np.mean(shown == "upper") - used["upper"]) > 1e-3  # they do differ
    top = _posteriors_on_the_curves(v, m, used)
    assert top.shape[0] > 100
    # every point of every boundary: the two largest posteriors are equal (to 1e-9)
    np.testing.assert_allclose(top[:, 0], top[:, 1], atol=1e-9, rtol=0)
    assert "priors: " + ("group shares" if priors == "proportional" else "equal") in v.notes.value
    # the control: with other priors the same curves are not boundaries (equal ones, or
    # the group shares of the ternary's own rows)
    shown = frame["site"].to_numpy()[v.rows]
    if priors == "proportional":
        other = dict.fromkeys(used, 1 / len(used))
    else:
        other = {c: float(np.mean(shown == c)) for c in used}
    off = _posteriors_on_the_curves(v, m, other)
    assert np.max(np.abs(off[:, 0] - off[:, 1])) > 1e-3
    d.priors = "equal" if priors == "proportional" else "proportional"  # the view follows
    assert v.boundary_priors == d.priors
    v.close()
    d.close()
