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
    rows = picker.heat_labels
    names = [lab.value for lab in rows[0][1:]]
    assert [row[0].value for row in rows[1:]] == names
    return names, np.array([[float(lab.value) for lab in row[1:]] for row in rows[1:]])


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
    assert "at least 2 active parts" in picker.message.value
    assert "Qz, Fsp, Mica" in picker.message.value  # says what the views keep
    picker.set_active_parts(["Qz", "Fsp", "Mica"])  # back to the model's choice
    assert set(picker.parts_select.value) == {"Qz", "Fsp", "Mica"}


def test_set_active_parts_refuses_unknown_parts(picker, model):
    before = state(model)
    assert picker.set_active_parts(["Qz", "Basalt"]) is False
    assert state(model) == before
    assert "Basalt" in picker.message.value


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
    assert message in picker.message.value
    assert picker.message.value.startswith("Amalgamation not added")


def test_removing_an_unknown_amalgamation_is_refused(picker, model):
    before = state(model)
    assert picker.remove_amalgamation("nope") is False
    assert state(model) == before and "'nope' is not defined" in picker.message.value


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
    assert "Qz is chosen twice" in picker.message.value
    a.value = "Fsp"  # a swap finishes: both drop-downs now make a valid triple
    assert list(ternary.parts) == ["Fsp", "Qz", "Lith"]


def test_ternary_may_not_show_an_amalgamation_with_its_member(picker, ternary):
    picker.add_amalgamation("QF", ["Qz", "Fsp"], use=False)
    before = list(ternary.parts)
    assert picker.set_ternary_parts(0, ["QF", "Qz", "Lith"]) is False
    assert list(ternary.parts) == before
    assert "Qz would be counted twice" in picker.message.value
    assert picker.set_ternary_parts(0, ["QF", "Lith", "Mica"]) is True
    assert list(ternary.parts) == ["QF", "Lith", "Mica"]


# ----------------------------------------------------------------- heat table


def test_heat_table_equals_the_variation_matrix_by_definition(picker, model, frame):
    names, shown = heat_numbers(picker)
    assert names == PARTS
    T, n_complete = variation_by_definition(frame, PARTS)
    assert n_complete == 39  # one row has a missing part
    np.testing.assert_allclose(shown, np.round(T, 2), atol=0.0051)
    np.testing.assert_allclose(picker.variation.to_numpy(), T, rtol=1e-10)
    # total variance = sum_ij T_ij / (2 D) (Aitchison 1986)
    assert picker.total_variance == pytest.approx(T.sum() / (2 * len(PARTS)), rel=1e-10)
    assert f"{T.sum() / (2 * len(PARTS)):.3f}" in picker.total_label.value
    assert "39 of 40 rows" in picker.rows_label.value and "1 row(s)" in picker.rows_label.value


def test_heat_table_follows_the_active_parts(picker, model, frame):
    model.active_parts = ["Mica", "Qz", "Fsp"]  # Lith is out: every row is complete
    names, shown = heat_numbers(picker)
    assert names == ["Mica", "Qz", "Fsp"]
    T, n_complete = variation_by_definition(frame, names)
    np.testing.assert_allclose(shown, np.round(T, 2), atol=0.0051)
    assert n_complete == 40 and "40 of 40 rows" in picker.rows_label.value
    # the largest log-ratio variance is named under the table
    i, j = np.unravel_index(np.argmax(T), T.shape)
    assert f"{T[i, j]:.2f}" in picker.largest_label.value


def test_heat_colours_grow_with_the_value(picker):
    _, shown = heat_numbers(picker)
    cells = [row[1:] for row in picker.heat_labels[1:]]
    i, j = np.unravel_index(np.argmax(shown), shown.shape)
    darkest = cells[i][j].style.background
    assert cells[0][0].style.background != darkest  # the diagonal (0) is the light end

    def lightness(hex_colour):
        return sum(int(hex_colour[k : k + 2], 16) for k in (1, 3, 5))

    assert lightness(cells[0][0].style.background) > lightness(darkest)


# --------------------------------------------------------------- text only


def test_part_names_reach_the_browser_as_plain_text(picker):
    header = [lab.value for lab in picker.heat_labels[0]]
    assert EVIL in header  # verbatim, not escaped or interpreted
    assert EVIL in picker.parts_select.options
    for widget in walk(picker):
        assert not isinstance(widget, (widgets.HTML, widgets.HTMLMath))
        if hasattr(widget, "description_allow_html"):
            assert widget.description_allow_html is False


def test_close_stops_following_the_model(picker, model):
    picker.close()
    model.active_parts = ["Qz", "Fsp"]  # must not raise on closed widgets
    assert model.active_parts == ["Qz", "Fsp"]
