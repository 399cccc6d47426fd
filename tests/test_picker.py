"""The subcomposition picker, kernel-side (no browser).

The variation matrix shown is checked against its definition written out with
numpy, ``T_ij = var(ln(x_i / x_j))`` with divisor n - 1, and the total variance
against ``sum_ij T_ij / (2 D)`` (both Aitchison 1986, The Statistical Analysis
of Compositional Data). The data are random and invented here.
"""

from __future__ import annotations

import ipywidgets as widgets
import numpy as np
import pandas as pd
import pytest
import traitlets

from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views.picker import SubcompositionPicker

EVIL = "<img src=x onerror=alert(1)>"
PARTS = ["Qz", "Fsp", "Lith", EVIL, "Mica"]


class StandInTernary(traitlets.HasTraits):
    """A view with a validated ``parts`` trait of three names (used until the real one exists)."""

    parts = traitlets.List(traitlets.Unicode())

    @traitlets.validate("parts")
    def _three(self, proposal):
        value = list(proposal["value"])
        if len(value) != 3 or len(set(value)) != 3:
            raise traitlets.TraitError(f"a ternary needs 3 different parts, got {value}")
        return value


def make_ternary(model, parts):
    try:
        from compwidgets.views.ternary import TernaryView
    except ImportError:
        return StandInTernary(parts=list(parts))
    return TernaryView(model, parts=list(parts))


@pytest.fixture
def frame():
    rng = np.random.default_rng(12)
    scale = np.array([0.3, 0.5, 0.9, 0.4, 0.7])
    df = pd.DataFrame(
        np.exp(rng.normal(size=(40, 5)) * scale + [3, 2, 1, 0.5, 1.5]),
        columns=PARTS,
        index=[f"T{i:02d}" for i in range(40)],
    )
    df.iloc[6, 2] = np.nan  # Lith missing in one row: incomplete whenever Lith is active
    return df


@pytest.fixture
def model(frame):
    return CompositionModel(read_composition(frame, check_total=False))


@pytest.fixture
def ternary(model):
    return make_ternary(model, ["Qz", "Fsp", "Lith"])


@pytest.fixture
def picker(model, ternary):
    return SubcompositionPicker(model, ternaries=[ternary])


def state(model):
    return list(model.active_parts), {k: list(v) for k, v in model.amalgamations.items()}


def changes(obj, name):
    seen = []
    obj.observe(seen.append, names=[name])
    return seen


def walk(widget):
    yield widget
    for child in getattr(widget, "children", ()):
        yield from walk(child)


def heat_numbers(picker) -> tuple[list[str], np.ndarray]:
    """Names and values as sent to the browser (the float32 buffer of the heat map)."""
    heat = picker.heatmap
    D = len(heat.names)
    assert len(heat.values) == 4 * D * D and len(heat.colours) == 3 * D * D
    return list(heat.names), heat.matrix()


def variation_by_definition(frame, parts):
    """T_ij = var(ln(x_i/x_j)), ddof=1, over the rows complete in ``parts`` (numpy only)."""
    x = frame[parts].to_numpy(dtype=float)
    x = x[np.all(np.isfinite(x) & (x > 0), axis=1)]
    D = len(parts)
    T = np.zeros((D, D))
    for i in range(D):
        for j in range(D):
            T[i, j] = np.var(np.log(x[:, i] / x[:, j]), ddof=1)
    return T, x.shape[0]


# ----------------------------------------------------------------- active parts


def test_choosing_parts_sets_the_model_and_the_model_drives_the_widget(picker, model):
    seen = changes(model, "active_parts")
    picker.parts_select.value = ("Qz", "Fsp", "Mica")
    assert model.active_parts == ["Qz", "Fsp", "Mica"]
    assert len(seen) == 1  # one change, no echo from the widget
    model.active_parts = ["Fsp", EVIL]  # a change made elsewhere
    assert set(picker.parts_select.value) == {"Fsp", EVIL}
    assert len(seen) == 2
    picker.all_button.click()
    assert model.active_parts == PARTS


@pytest.mark.parametrize("chosen", [("Qz",), ()])
def test_fewer_than_two_parts_are_refused_with_a_message(picker, model, chosen):
    picker.parts_select.value = ("Qz", "Fsp", "Mica")
    before = state(model)
    seen = changes(model, "active_parts")
    picker.parts_select.value = chosen
    assert state(model) == before and seen == []
    assert "at least 2 active parts" in picker.status.value
    assert "Qz, Fsp, Mica" in picker.status.value  # says what the views keep
    picker.set_active_parts(["Qz", "Fsp", "Mica"])  # back to the model's choice
    assert set(picker.parts_select.value) == {"Qz", "Fsp", "Mica"}


def test_set_active_parts_refuses_unknown_parts(picker, model):
    before = state(model)
    assert picker.set_active_parts(["Qz", "Basalt"]) is False
    assert state(model) == before
    assert "Basalt" in picker.status.value


# --------------------------------------------------------------- amalgamations


def test_amalgamation_is_added_used_and_removed(picker, model, frame):
    assert picker.add_amalgamation("Feld+Lith", ["Fsp", "Lith"]) is True
    assert model.amalgamations == {"Feld+Lith": ["Fsp", "Lith"]}
    # the new part takes the place of its members among the active parts
    assert model.active_parts == ["Qz", "Feld+Lith", EVIL, "Mica"]
    assert "Feld+Lith" in picker.parts_select.options
    assert set(picker.parts_select.value) == set(model.active_parts)
    assert list(picker.remove_select.options) == ["Feld+Lith"]
    # the heat table now shows the amalgamated part: the sum of its members
    names, shown = heat_numbers(picker)
    assert names == model.active_parts
    summed = frame.assign(**{"Feld+Lith": frame["Fsp"] + frame["Lith"]})
    T, _ = variation_by_definition(summed, names)
    np.testing.assert_allclose(shown, np.round(T, 2), atol=0.0051)
    assert picker.remove_amalgamation("Feld+Lith") is True
    assert model.amalgamations == {}
    assert model.active_parts == ["Qz", "Fsp", "Lith", EVIL, "Mica"]
    assert "Feld+Lith" not in picker.parts_select.options


def test_amalgamation_through_the_widgets(picker, model):
    picker.amalgamation_name.value = "QF"
    picker.amalgamation_members.value = ("Qz", "Fsp")
    picker.use_amalgamation.value = False
    picker.add_button.click()
    assert model.amalgamations == {"QF": ["Qz", "Fsp"]}
    assert "QF" not in model.active_parts  # not used: the active parts stay
    assert picker.amalgamation_name.value == ""  # ready for the next one
    picker.remove_select.value = "QF"
    picker.remove_button.click()
    assert model.amalgamations == {}


@pytest.mark.parametrize(
    "name, members, message",
    [
        ("", ["Qz", "Fsp"], "needs a name"),
        ("   ", ["Qz", "Fsp"], "needs a name"),
        ("QF", ["Qz", "Fsp"], "exists already"),  # duplicate name
        ("Other", ["Fsp", "Lith"], "'Fsp' is in both"),  # overlapping members
        ("X", ["Qz", "Basalt"], "Basalt"),  # unknown member
        ("Mica", ["Qz", "Lith"], "already names a part"),
        ("Solo", ["Lith"], "at least 2 parts"),
    ],
)
def test_invalid_amalgamations_leave_the_model_unchanged(picker, model, name, members, message):
    assert picker.add_amalgamation("QF", ["Qz", "Fsp"], use=False)
    before = state(model)
    seen = changes(model, "amalgamations")
    assert picker.add_amalgamation(name, members) is False
    assert state(model) == before and seen == []
    assert message in picker.status.value
    assert picker.status.value.startswith("Amalgamation not added")


def test_removing_an_unknown_amalgamation_is_refused(picker, model):
    before = state(model)
    assert picker.remove_amalgamation("nope") is False
    assert state(model) == before and "'nope' is not defined" in picker.status.value


# ----------------------------------------------------------------- ternaries


def test_dropdowns_set_the_ternary_parts_and_follow_the_view(picker, ternary):
    a, b, c = picker.ternary_dropdowns[0]
    assert [a.value, b.value, c.value] == ["Qz", "Fsp", "Lith"]
    c.value = "Mica"
    assert list(ternary.parts) == ["Qz", "Fsp", "Mica"]
    ternary.parts = [EVIL, "Qz", "Fsp"]  # changed elsewhere
    assert [a.value, b.value, c.value] == [EVIL, "Qz", "Fsp"]


def test_a_part_chosen_twice_is_refused(picker, ternary):
    a, b, c = picker.ternary_dropdowns[0]
    b.value = "Qz"
    assert list(ternary.parts) == ["Qz", "Fsp", "Lith"]
    assert "Qz is chosen twice" in picker.status.value
    a.value = "Fsp"  # a swap finishes: both drop-downs now make a valid triple
    assert list(ternary.parts) == ["Fsp", "Qz", "Lith"]


def test_ternary_may_not_show_an_amalgamation_with_its_member(picker, ternary):
    picker.add_amalgamation("QF", ["Qz", "Fsp"], use=False)
    before = list(ternary.parts)
    assert picker.set_ternary_parts(0, ["QF", "Qz", "Lith"]) is False
    assert list(ternary.parts) == before
    assert "Qz would be counted twice" in picker.status.value
    assert picker.set_ternary_parts(0, ["QF", "Lith", "Mica"]) is True
    assert list(ternary.parts) == ["QF", "Lith", "Mica"]


# ----------------------------------------------------------------- heat table


def test_heat_table_equals_the_variation_matrix_by_definition(picker, model, frame):
    names, shown = heat_numbers(picker)
    assert names == PARTS
    T, n_complete = variation_by_definition(frame, PARTS)
    assert n_complete == 39  # one row has a missing part
    np.testing.assert_allclose(shown, T, rtol=1e-6)  # float32 on the wire
    np.testing.assert_allclose(picker.variation.to_numpy(), T, rtol=1e-10)
    # total variance = sum_ij T_ij / (2 D) (Aitchison 1986)
    assert picker.total_variance == pytest.approx(T.sum() / (2 * len(PARTS)), rel=1e-10)
    assert f"{T.sum() / (2 * len(PARTS)):.3f}" in picker.total_label.value
    assert "39 of 40 rows" in picker.rows_label.value and "1 row with" in picker.rows_label.value


def test_heat_table_follows_the_active_parts(picker, model, frame):
    model.active_parts = ["Mica", "Qz", "Fsp"]  # Lith is out: every row is complete
    names, shown = heat_numbers(picker)
    assert names == ["Mica", "Qz", "Fsp"]
    T, n_complete = variation_by_definition(frame, names)
    np.testing.assert_allclose(shown, T, rtol=1e-6)
    assert n_complete == 40 and "40 of 40 rows" in picker.rows_label.value
    # the largest log-ratio variance is named under the table
    i, j = np.unravel_index(np.argmax(T), T.shape)
    assert f"{T[i, j]:.2f}" in picker.largest_label.value


def test_heat_colours_grow_with_the_value(picker):
    _, shown = heat_numbers(picker)
    colours = picker.heatmap.colour_grid().astype(int)
    i, j = np.unravel_index(np.argmax(shown), shown.shape)
    lightness = colours.sum(axis=2)
    assert lightness[0, 0] > lightness[i, j]  # the diagonal (0) is the light end
    # darker with the value along the off-diagonal cells (a monotone colour scale)
    off = ~np.eye(len(shown), dtype=bool)
    order = np.argsort(shown[off])
    assert np.all(np.diff(lightness[off][order]) <= 0)


def test_heat_map_is_one_widget_whatever_the_number_of_parts(picker, model, opened_comms):
    # one picture (not a widget per cell): changing parts creates no widget at all
    model.active_parts = ["Qz", "Fsp", "Mica"]
    assert picker.heatmap.names == ["Qz", "Fsp", "Mica"]
    model.active_parts = PARTS
    assert len(picker.heatmap.names) == len(PARTS)
    assert opened_comms == []


def test_a_clicked_cell_picks_its_pair_and_shows_it_in_a_ternary(picker, model, ternary, frame):
    names = list(picker.heatmap.names)
    i, j = names.index("Fsp"), names.index("Mica")
    picker.heatmap.picked = [i, j]  # what a click on the cell sends
    assert picker.picked_pair == ("Fsp", "Mica")
    T, _ = variation_by_definition(frame, names)
    assert f"{T[i, j]:.3f}" in picker.pair_label.value
    assert picker.use_pair(0)
    parts = list(ternary.parts)
    assert parts[:2] == ["Fsp", "Mica"]
    # the third part adds most log-ratio variance to both (numpy, by definition)
    others = [k for k in range(len(names)) if k not in (i, j)]
    best = max(others, key=lambda k: T[i, k] + T[j, k])
    assert parts[2] == names[best]
    with pytest.raises(ValueError, match="two different active parts"):
        picker.pick_pair("Fsp", "Fsp")


def test_filter_shows_matching_parts_and_keeps_the_hidden_ones(picker, model):
    picker.part_filter.value = "q"  # matches Qz only (any case)
    assert list(picker.parts_select.options) == ["Qz"]
    assert picker.parts_select.value == ("Qz",)
    picker.parts_select.value = ()  # deselect Qz: the hidden parts stay active
    assert model.active_parts == ["Fsp", "Lith", EVIL, "Mica"]
    picker.parts_select.value = ("Qz",)  # back: added at the end
    assert model.active_parts == ["Fsp", "Lith", EVIL, "Mica", "Qz"]
    picker.part_filter.value = ""
    assert list(picker.parts_select.options) == PARTS


def test_bulk_choices_by_unit_majors_and_traces():
    # invented table: three majors in wt% and two traces in ppm (units in the headers)
    rng = np.random.default_rng(5)
    df = pd.DataFrame(
        np.exp(rng.normal(size=(30, 5)) * 0.2 + [4, 2.5, 1, 3, 5]),
        columns=["SiO2 (wt%)", "Al2O3 (wt%)", "CaO (wt%)", "Zr (ppm)", "Ba (ppm)"],
    )
    model = CompositionModel(read_composition(df, check_total=False))
    picker = SubcompositionPicker(model)
    groups = {value for _, value in picker.bulk_group.options}
    assert {"all", "majors", "traces", "unit:wt%", "unit:ppm", "filter"} <= groups
    assert picker.choose("traces")
    assert model.active_parts == ["Zr", "Ba"]
    assert picker.choose("majors", "add")
    assert model.active_parts == ["Zr", "Ba", "SiO2", "Al2O3", "CaO"]
    assert picker.choose("unit:ppm", "remove")
    assert model.active_parts == ["SiO2", "Al2O3", "CaO"]
    assert not picker.choose("majors", "remove")  # nothing would be left: refused, said so
    assert model.active_parts == ["SiO2", "Al2O3", "CaO"] and "not changed" in picker.status.value
    picker.part_filter.value = "ppm"  # the filter matches units too
    assert list(picker.parts_select.options) == ["Zr", "Ba"]
    assert picker.choose("filter")
    assert model.active_parts == ["Zr", "Ba"]
    picker.bulk_group.value = "all"
    picker.bulk_buttons[0].click()
    assert model.active_parts == model.parts


# --------------------------------------------------------------- text only


def test_part_names_reach_the_browser_as_plain_text(picker):
    assert EVIL in picker.heatmap.names  # verbatim, not escaped or interpreted
    assert EVIL in picker.parts_select.options
    for widget in walk(picker):
        assert not isinstance(widget, (widgets.HTML, widgets.HTMLMath))
        if hasattr(widget, "description_allow_html"):
            assert widget.description_allow_html is False


def test_close_stops_following_the_model(picker, model):
    picker.close()
    model.active_parts = ["Qz", "Fsp"]  # must not raise on closed widgets
    assert model.active_parts == ["Qz", "Fsp"]
