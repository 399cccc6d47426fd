"""Colours of the scatter-like views, checked with a colour-science library.

Perceptual differences are CIEDE2000 (``colour.delta_E(..., method="CIE 2000")``
of the colour-science package) between sRGB colours converted to CIELAB (D65).
Red-green colour blindness is simulated with the severity-1 matrices of Machado,
Oliveira & Fernandes (2009), as colour-science gives them
(``colour.blindness.matrix_cvd_Machado2009``), applied to linear sRGB.

Threshold: a selection colour must differ from every group colour by at least
``SELECTION_MIN_DELTA_E`` = 20 CIEDE2000 units in every vision. A difference of
about 1 is a just-noticeable difference between large patches side by side
(Sharma, Wu & Dalal 2005, from memory); small marks scattered on a plot need a
much larger one, and 20 is our own margin of twenty times that, in line with the
common practice of asking categorical plot colours to differ by 10 to 20 or more.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views import _common as cm
from compwidgets.views.ternary import TernaryView

with warnings.catch_warnings():
    warnings.simplefilter("ignore")  # colour-science warns about optional packages
    import colour

VISIONS = (None, "Protanomaly", "Deuteranomaly")


def to_lab(hexes, vision=None) -> np.ndarray:
    """CIELAB (D65) of sRGB colours, seen with normal vision or a simulated deficiency."""
    rgb = np.array([cm.hex_to_rgb(h) for h in hexes], dtype=float) / 255.0
    linear = colour.models.eotf_sRGB(rgb)
    if vision is not None:
        matrix = colour.blindness.matrix_cvd_Machado2009(vision, 1.0)
        linear = np.clip(linear @ matrix.T, 0.0, 1.0)
    xyz = colour.RGB_to_XYZ(linear, colour.RGB_COLOURSPACES["sRGB"], apply_cctf_decoding=False)
    return colour.XYZ_to_Lab(xyz)


def delta_e(a: str, b: str, vision=None) -> float:
    lab = to_lab([a, b], vision)
    return float(colour.delta_E(lab[0], lab[1], method="CIE 2000"))


def test_the_ciede2000_of_the_library_matches_a_published_pair():
    # Sharma, Wu & Dalal (2005), test data pair 1: Delta E00 = 2.0425 (quoted from memory)
    d = colour.delta_E([50.0, 2.6772, -79.7751], [50.0, 0.0, -82.7485], method="CIE 2000")
    assert float(d) == pytest.approx(2.0425, abs=1e-4)


@pytest.mark.parametrize("vision", VISIONS, ids=["normal", "protanopia", "deuteranopia"])
def test_selection_colour_is_far_from_every_group_colour(vision):
    colours = [*cm.PALETTE, cm.NO_GROUP_COLOUR, cm.DENSITY_ALL_COLOUR]
    for c in colours:
        d = delta_e(cm.SELECTION_COLOUR, c, vision)
        assert d >= cm.SELECTION_MIN_DELTA_E, (c, vision, d)
    assert cm.SELECTION_MIN_DELTA_E == 20.0
    # the selection is drawn in this colour everywhere
    assert cm.DENSITY_SELECTION_COLOUR == cm.SELECTION_COLOUR
    assert cm.SELECTED_STYLE["stroke"] == cm.SELECTION_COLOUR


def test_the_threshold_rejects_an_orange_selection_next_to_an_orange_group():
    # control: an orange-red selection beside the orange group colour fails the test
    # for deuteranopia, so the check above can fail
    assert delta_e("#e4572e", cm.PALETTE[1], "Deuteranomaly") < cm.SELECTION_MIN_DELTA_E


# ------------------------------------------------------------------ balance colours


def test_balance_scale_is_sequential_over_a_range_that_does_not_span_zero():
    values = np.array([0.7, 1.5, 3.2, 6.9, np.nan])
    kind, colours, lo, hi = cm.balance_scale(values)
    assert (kind, lo, hi) == ("sequential", 0.7, 6.9)
    assert colours == cm.SEQUENTIAL_COLOURS
    # the sequential colours run from light to dark (CIELAB L*, colour-science)
    lightness = to_lab(list(colours))[:, 0]
    assert np.all(np.diff(lightness) < -15), lightness
    # all negative: sequential over the range too
    assert cm.balance_scale(-values)[0::2] == ("sequential", -6.9)


def test_balance_scale_is_diverging_around_zero_when_the_values_span_it():
    kind, colours, lo, hi = cm.balance_scale(np.array([-1.2, 0.4, 3.0]))
    assert (kind, lo, hi) == ("diverging", -3.0, 3.0)
    assert colours == cm.BALANCE_COLOURS
    # a choice overrides the rule both ways
    assert cm.balance_scale(np.array([0.7, 6.9]), "diverging")[2:] == (-6.9, 6.9)
    assert cm.balance_scale(np.array([-1.2, 3.0]), "sequential")[2:] == (-1.2, 3.0)
    with pytest.raises(ValueError, match="balance scale must be one of"):
        cm.balance_scale(np.array([1.0]), "rainbow")
    # one value only: a unit around it
    assert cm.balance_scale(np.array([2.0, 2.0]))[2:] == (1.5, 2.5)


def two_part_model(balance: np.ndarray) -> CompositionModel:
    """Parts A, B, C with the second balance A | B equal to ``balance`` (sqrt(1/2) ln(A/B))."""
    rng = np.random.default_rng(3)
    b = rng.uniform(1.0, 2.0, balance.size)
    frame = pd.DataFrame(
        {"A": b * np.exp(balance * np.sqrt(2.0)), "B": b, "C": rng.uniform(1.0, 3.0, b.size)},
        index=[f"R{i}" for i in range(b.size)],
    )
    model = CompositionModel(read_composition(frame, check_total=False))
    model.set_sbp([[1, 1, -1], [1, -1, 0]])
    return model


def test_a_view_colours_a_positive_balance_on_its_range_and_the_control_switches():
    balance = np.linspace(0.7, 6.9, 60)
    model = two_part_model(balance)
    view = TernaryView(model, ["A", "B", "C"])
    name = model.balance_names[1]
    np.testing.assert_allclose(model.balance_values(name), balance)  # the set-up is right
    assert view._balance_scale_box.layout.display == "none"  # no balance coloured yet
    model.colour_by = name
    assert view._balance_scale_box.layout.display is None
    assert list(view.colour_scale.colors) == list(cm.SEQUENTIAL_COLOURS)
    assert view.colour_scale.min == pytest.approx(0.7)
    assert view.colour_scale.max == pytest.approx(6.9)
    assert "(sequential, range)" in list(view._legend_text.text)
    # the control (a dropdown linked to the trait) switches to the diverging scale
    view._balance_scale_menu.value = "diverging"
    assert view.balance_scale == "diverging"
    assert list(view.colour_scale.colors) == list(cm.BALANCE_COLOURS)
    assert view.colour_scale.min == pytest.approx(-6.9) and view.colour_scale.max == 6.9
    assert "(diverging, 0 centre)" in list(view._legend_text.text)
    view.balance_scale = "auto"  # and the trait moves the control
    assert view._balance_scale_menu.value == "auto"
    assert list(view.colour_scale.colors) == list(cm.SEQUENTIAL_COLOURS)


def test_a_balance_spanning_zero_is_diverging_in_a_view():
    model = two_part_model(np.linspace(-2.0, 5.0, 50))
    view = TernaryView(model, ["A", "B", "C"])
    model.colour_by = model.balance_names[1]
    assert list(view.colour_scale.colors) == list(cm.BALANCE_COLOURS)
    assert view.colour_scale.min == pytest.approx(-5.0) and view.colour_scale.max == 5.0


def test_the_builder_marks_the_selection_in_the_same_colour_as_the_scatter_views():
    # a selection shows in every view: the balance builder's style sheet (its own front end)
    # must name the same selection colour as the scatter views, or the builder's selected
    # marks would read as one more group colour
    import re
    from pathlib import Path

    css = (Path(__file__).parents[1] / "js" / "builder.css").read_text()
    found = re.search(r"--cw-selection:\s*(#[0-9a-fA-F]{6})", css)
    assert found, "builder.css defines no --cw-selection"
    assert found.group(1).lower() == cm.SELECTION_COLOUR.lower()
