"""Kernel-side tests of the discriminant view and of the ternary's decision boundaries.

Outside references: scikit-learn's LinearDiscriminantAnalysis and
QuadraticDiscriminantAnalysis on clr coordinates (plane, posteriors,
assignments) and cross_val_predict with the same folds (the confusion grid).
Data: the invented demo survey of compwidgets.demo.

"What the front end sets" is simulated by assigning the traits the browser
writes: the confusion grid's ``selected`` cells (bqplot's GridHeatMap with the
click-select interaction), and hover messages through the scatter's handler.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.discriminant_analysis import (
    LinearDiscriminantAnalysis,
    QuadraticDiscriminantAnalysis,
)
from sklearn.model_selection import StratifiedKFold, cross_val_predict

import compwidgets.core as core
from compwidgets import demo
from compwidgets.discriminant import CAUTION
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views.discriminant import DiscriminantView
from compwidgets.views.ternary import TernaryView

PARTS = ["SiO2", "Al2O3", "MgO", "CaO", "Na2O", "K2O"]


@pytest.fixture(scope="module")
def composition():
    table = demo.stream_sediments(n=600, seed=13)
    return read_composition(table, detection_limits=demo.DETECTION_LIMITS)


@pytest.fixture
def model(composition):
    return CompositionModel(composition, active_parts=PARTS, group_column="catchment")


@pytest.fixture
def view(model):
    v = DiscriminantView(model)
    yield v
    v.close()


def clr_rows(model):
    ok = np.flatnonzero(model.complete_rows(PARTS))
    L = np.log(model.part_values(PARTS)[ok])
    return ok, L - L.mean(axis=1, keepdims=True)


def test_points_are_the_rows_on_the_discriminant_plane(model, view):
    ok, Z = clr_rows(model)
    np.testing.assert_array_equal(view.rows, ok)
    labels = model.metadata["catchment"].astype(str).to_numpy()[ok]
    classes = view.rule.classes
    y = np.array([classes.index(v) for v in labels])
    # Source: scikit-learn LDA on clr coordinates: its canonical coordinates are ours up
    # to the orientation of each axis (and the shift of the centre, the same for all rows)
    ref = LinearDiscriminantAnalysis(priors=np.bincount(y) / y.size).fit(Z, y)
    T = ref.transform(Z)[:, :2]
    for ours, theirs in ((view._x, T[:, 0]), (view._y, T[:, 1])):
        assert abs(np.corrcoef(ours, theirs)[0, 1]) > 1 - 1e-9
        np.testing.assert_allclose(np.std(ours), np.std(theirs), rtol=1e-8)
    ratio = ref.explained_variance_ratio_
    assert view.axis_x.label == f"discriminant axis 1 \u00b7 {100 * ratio[0]:.1f} %"
    assert view.axis_y.label == f"discriminant axis 2 \u00b7 {100 * ratio[1]:.1f} %"
    # colours are the groups' (the base's group colouring)
    assert view.scatter.color is not None and len(view.scatter.color) == ok.size


def test_confusion_grid_is_the_cross_validated_count(model, view):
    ok, Z = clr_rows(model)
    y = view.rule.codes
    # Source: scikit-learn cross_val_predict with StratifiedKFold(5, shuffle, seed 0)
    folds = StratifiedKFold(n_splits=5, shuffle=True, random_state=0)
    ref = LinearDiscriminantAnalysis(priors=view.rule.fit.priors)
    predicted = cross_val_predict(ref, Z, y, cv=folds)
    K = len(view.rule.classes)
    expected = np.zeros((K, K))
    np.add.at(expected, (y, predicted), 1)
    np.testing.assert_array_equal(view.confusion.color, expected)
    assert list(view.confusion.row) == view.rule.classes == list(view.confusion.column)
    assert "assigned to their own group" in view.notes.value


def test_clicking_a_cell_selects_its_rows_in_every_view(model, view):
    ternary = TernaryView(model, ["SiO2", "MgO", "CaO"])
    cv = view.rule.cross_validation
    counts = cv.confusion
    i, j = np.unravel_index(np.argmax(counts - np.diag(np.diag(counts))), counts.shape)
    if counts[i, j] == 0:
        i = j = 0
    view.confusion.selected = [[int(i), int(j)]]  # what the browser sends on a click
    labels = model.metadata["catchment"].astype(str).to_numpy()
    expected = np.flatnonzero(
        np.isin(np.arange(model.n_rows), view.rows[(cv.true == i) & (cv.predicted == j)])
    )
    np.testing.assert_array_equal(model.selection, expected)
    assert np.all(labels[model.selection] == view.rule.classes[i])
    shown = ternary.rows[np.asarray(ternary.scatter.selected, dtype=int)]
    np.testing.assert_array_equal(np.sort(shown), np.intersect1d(expected, ternary.rows))
    # a selection made elsewhere clears the highlighted cell, so the same cell can be
    # clicked again
    ternary.select_rectangle((0.0, 1.0), (0.0, 0.5))
    assert view.confusion.selected is None
    view.confusion.selected = [[int(i), int(j)]]
    np.testing.assert_array_equal(model.selection, expected)
    # two cells (ctrl-click in the browser): the union of their rows
    view.confusion.selected = [[0, 0], [1, 1]]
    both = np.union1d(cv.cell_rows(0, 0), cv.cell_rows(1, 1))
    np.testing.assert_array_equal(model.selection, both)
    view.select_cell(2, 2)
    np.testing.assert_array_equal(model.selection, cv.cell_rows(2, 2))
    # the browser's message, as ipywidgets delivers it (a JSON list of [row, column])
    view.confusion.set_state({"selected": [[1, 1]]})
    np.testing.assert_array_equal(model.selection, cv.cell_rows(1, 1))
    with pytest.raises(ValueError, match="outside"):
        view.select_cell(9, 0)
    ternary.close()


def test_hover_shows_the_posteriors(model, view):
    pos = 7
    row = int(view._mark_rows[pos])
    view._on_hover(view.scatter, {"event": "hover", "point": {"index": pos}})
    lines = [label.value for label in view._tooltip_lines if label.value]
    assert lines[0] == str(model.index[row])  # the sample id (the intake made it the index)
    at = int(np.searchsorted(view.rule.rows, row))
    post = view.rule.posteriors[at]
    best = int(np.argmax(post))
    assert lines[2] == f"assigned: {view.rule.classes[best]} (posterior {post[best]:.3f})"
    assert lines[3].startswith(f"posteriors: {view.rule.classes[best]} {post[best]:.3f}")
    assert lines[4].startswith("cross-validated: ")


def test_loadings_chart_and_named_parts(view):
    L = view.rule.fit.clr_loadings
    np.testing.assert_allclose(np.asarray(view.loadings.y), np.vstack([L[:, 0], L[:, 1]]))
    assert list(view.loadings.x) == PARTS
    plus, minus = view.rule.fit.top_parts(0, 3)
    assert f"high {', '.join(plus)} against {', '.join(minus)}" in view.axis_text.value
    assert "summing to 0" in view.axis_text.value
    assert "exploratory" in view.caution.value and CAUTION[:40] in view.caution.value


def test_quadratic_rule_and_priors_refit(model, view):
    view._kind_buttons.value = "quadratic"  # the toggle in the view
    assert view.kind == "quadratic" and view.rule.kind == "quadratic"
    ok, Z = clr_rows(model)
    y = view.rule.codes
    H = view.rule.fit.basis
    # Source: scikit-learn QDA on the same ilr coordinates
    ref = QuadraticDiscriminantAnalysis(priors=view.rule.fit.priors).fit(Z @ H.T, y)
    np.testing.assert_allclose(view.rule.posteriors, ref.predict_proba(Z @ H.T), atol=1e-8)
    assert "quadratic" in view.notes.value
    view.priors = "equal"
    np.testing.assert_allclose(view.rule.fit.priors, np.full(len(view.rule.classes), 0.2))
    assert view._priors_menu.value == "equal"


def test_new_groups_and_parts_refit(model, view):
    model.select(np.arange(0, model.n_rows, 3))
    model.selection_to_group("thirds")
    assert view.rule.group_column == "thirds" and view.rule.classes == ["other", "selected"]
    assert view.axis_y.label.startswith("spread across axis 1")
    model.group_column = ""
    assert view.rule is None and "no grouping column" in view.notes.value
    assert view.rows.size == 0
    model.group_column = "bedrock"
    model.active_parts = ["SiO2", "MgO", "CaO", "K2O"]
    assert view.rule.parts == ["SiO2", "MgO", "CaO", "K2O"] and view.rule.group_column == "bedrock"


def test_sampling_on_large_tables_is_said(model):
    v = DiscriminantView(model, max_fit_rows=200, max_cv_rows=150)
    n = int(v.rule.fit.n_available.sum())
    assert f"fitted on a stratified random {int(v.rule.fit.n_train.sum()):,} of {n:,} rows" in (
        v.notes.value
    )
    assert "cross-validation of a stratified random" in v.notes.value
    assert v.rule.cross_validation.rows.size <= 150 + len(v.rule.classes) * 5
    assert v.rows.size == n  # every row is drawn
    v.close()


def test_density_mode(model):
    v = DiscriminantView(model, mode="density")
    assert v.active_mode == "density" and v.density.visible
    v.select_rectangle(v.view_ranges[0], v.view_ranges[1])
    assert model.selection.size == v.rows.size
    v.close()


def test_close_stops_following_the_model(model):
    v = DiscriminantView(model)
    v.close()
    v.close()  # twice is fine
    model.select(np.arange(5))
    model.group_column = "bedrock"  # no error from a closed view


# ------------------------------------------------------------------ ternary boundaries


def test_ternary_boundaries_are_drawn_on_toggle_with_equal_scores(model):
    parts = ["SiO2", "MgO", "CaO"]
    t = TernaryView(model, parts)
    assert t.boundary_lines.x.shape[0] == 0
    t._boundary_toggle.value = True  # the toggle in the view
    assert t.boundaries
    assert "decision boundaries of a linear discriminant" in t.notes.value
    ok = model.complete_rows(parts)
    values = model.part_values(parts)[ok]
    codes = model.group_codes()[1][ok]
    L = np.log(values)
    Z = L - L.mean(axis=1, keepdims=True)
    H = core.default_basis(3)
    ref = LinearDiscriminantAnalysis(priors=np.bincount(codes) / codes.size).fit(Z @ H.T, codes)
    # every drawn point (back from the triangle to ilr) has two equal top posteriors
    xs, ys = np.asarray(t.boundary_lines.x, float), np.asarray(t.boundary_lines.y, float)
    assert xs.shape[0] >= 1
    from compwidgets.core.ternary import xy_to_ternary

    for x, y in zip(xs, ys, strict=True):
        comp = np.asarray(xy_to_ternary(x, y))
        inner = comp.min(axis=1) > 1e-3  # (float32 on the wire: points near edges blur)
        logp = np.sort(ref.predict_log_proba(np.asarray(core.ilr(comp[inner]))), axis=1)
        np.testing.assert_allclose(logp[:, -1], logp[:, -2], atol=1e-3)
    t._boundary_menu.value = "quadratic"
    assert "quadratic discriminant" in t.notes.value
    t.boundaries = False
    assert t.boundary_lines.x.shape[0] == 0 and "decision boundaries" not in t.notes.value
    t.close()
    assert t._boundary_toggle.comm is None and t.boundary_controls.comm is None
    t.close()  # twice is fine
