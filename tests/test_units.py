"""Units and oxide/element conversion factors (compwidgets.units)."""

from __future__ import annotations

import molmass
import pytest

from compwidgets.core import CompositionError
from compwidgets.units import (
    canonical_unit,
    conversion_factor,
    normalize_unit,
    shared_cation,
    split_unit,
    unit_factor,
)

M = {sym: molmass.ELEMENTS[sym].mass for sym in ("O", "Si", "Fe", "Al", "Zr", "Ca", "C")}

# Gravimetric factors as printed in geochemistry handbooks and lab sheets
# (common practice; the four values are quoted from memory, to 4 decimals).
HANDBOOK = [
    ("SiO2", "Si", 0.4674),
    ("Fe2O3", "FeO", 0.8998),
    ("Al2O3", "Al", 0.5293),
    ("FeO", "Fe2O3", 1.1113),
]

# The same factors derived a second way: by hand from molmass element masses.
BY_ELEMENT_MASSES = [
    ("SiO2", "Si", M["Si"] / (M["Si"] + 2 * M["O"])),
    ("Fe2O3", "FeO", 2 * (M["Fe"] + M["O"]) / (2 * M["Fe"] + 3 * M["O"])),
    ("Al2O3", "Al", 2 * M["Al"] / (2 * M["Al"] + 3 * M["O"])),
    ("FeO", "Fe2O3", (2 * M["Fe"] + 3 * M["O"]) / (2 * (M["Fe"] + M["O"]))),
    ("Zr", "ZrO2", (M["Zr"] + 2 * M["O"]) / M["Zr"]),
    # calcite to lime: only Ca is shared, CO2 is lost
    ("CaCO3", "CaO", (M["Ca"] + M["O"]) / (M["Ca"] + M["C"] + 3 * M["O"])),
]


@pytest.mark.parametrize(("source", "target", "expected"), HANDBOOK)
def test_conversion_factors_match_handbook_values(source, target, expected):
    assert round(conversion_factor(source, target), 4) == pytest.approx(expected, abs=1e-12)


@pytest.mark.parametrize(("source", "target", "expected"), BY_ELEMENT_MASSES)
def test_conversion_factors_match_element_masses(source, target, expected):
    assert conversion_factor(source, target) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize(
    ("a", "b"), [("SiO2", "Si"), ("Fe2O3", "FeO"), ("TiO2", "Ti"), ("P2O5", "P"), ("K2O", "K")]
)
def test_conversion_there_and_back_is_one(a, b):
    assert conversion_factor(a, b) * conversion_factor(b, a) == pytest.approx(1.0, rel=1e-12)


def test_shared_cation():
    assert shared_cation("Fe2O3", "FeO") == "Fe"
    assert shared_cation("CaCO3", "CaO") == "Ca"


@pytest.mark.parametrize(
    ("source", "target", "match"),
    [
        ("SiO2", "FeO", r"'SiO2' -> 'FeO': the formulas share no element other than oxygen"),
        ("FeTiO3", "Fe2TiO5", r"'FeTiO3' -> 'Fe2TiO5': the formulas share several elements"),
        ("O2", "O", r"share no element other than oxygen"),
        ("LOI", "FeO", r"source 'LOI' is not a chemical formula"),
        ("FeO", "Xx2O", r"target 'Xx2O' is not a chemical formula"),
        ("", "FeO", r"source '' is not a chemical formula"),
    ],
)
def test_conversion_errors_name_the_pair(source, target, match):
    with pytest.raises(CompositionError, match=match):
        conversion_factor(source, target)


def test_unit_factors():
    # Common practice: 1 wt% = 10,000 ppm; mg/kg = g/t = ug/g = ppm; 1 ppm = 1000 ppb.
    assert unit_factor("wt%", "ppm") == 1e4
    assert unit_factor("ppm", "wt%") == pytest.approx(1e-4)
    assert unit_factor("ppb", "ppm") == pytest.approx(1e-3)
    assert unit_factor("mg/g", "wt%") == pytest.approx(0.1)
    assert unit_factor("g/kg", "ppm") == 1e3
    for same in ("mg/kg", "g/t", "ug/g"):
        assert unit_factor(same, "ppm") == 1.0
    with pytest.raises(CompositionError, match="point counts are not mass fractions"):
        unit_factor("count", "wt%")


@pytest.mark.parametrize(
    ("text", "unit"),
    [
        ("wt%", "wt%"),
        ("Wt.%", "wt%"),
        ("%", "wt%"),
        ("PPM", "ppm"),
        ("µg/g", "ug/g"),
        ("μg/g", "ug/g"),
        (" mg/kg ", "mg/kg"),
        ("counts", "count"),
        ("furlongs", None),
        (3, None),
    ],
)
def test_normalize_unit(text, unit):
    assert normalize_unit(text) == unit


def test_canonical_unit_error_names_the_place_and_lists_units():
    with pytest.raises(CompositionError, match=r"column 'Zr': unknown unit 'ppmm'; known units"):
        canonical_unit("ppmm", where="column 'Zr'")


@pytest.mark.parametrize(
    ("name", "expected"),
    [
        ("SiO2 (wt%)", ("SiO2", "wt%", True)),
        ("Zr [ppm]", ("Zr", "ppm", True)),
        ("Au(ppb)", ("Au", "ppb", True)),
        ("Ba_ppm", ("Ba", "ppm", False)),
        ("Cu mg/kg", ("Cu", "mg/kg", False)),
        ("Easting (m)", ("Easting", "m", True)),  # any bracketed text is returned
        ("sample_id", ("sample_id", None, False)),  # '_id' is no unit
        ("SiO2", ("SiO2", None, False)),
        (7, (7, None, False)),
    ],
)
def test_split_unit(name, expected):
    assert split_unit(name) == expected
