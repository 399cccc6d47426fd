"""Multiplicative replacement at intake, against the published formula.

Martin-Fernandez, Barcelo-Vidal & Pawlowsky-Glahn (2003), Math. Geol. 35(3):
a value below detection becomes ``delta = f * DL``; each observed part of the
same row is multiplied by ``1 - sum(delta) / c`` with ``c`` the row's observed
total. The expected numbers below are worked by hand from that formula and the
invented table (not read back from intake). 1 wt% = 10,000 ppm (common
practice).
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest

from compwidgets.composition import BELOW_DL, MISSING, OBSERVED
from compwidgets.core import CompositionError, multiplicative_replacement
from compwidgets.intake import read_composition


def majors_with_traces() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "SiO2 (wt%)": [60.0, 55.0, 70.0],
            "Al2O3 (wt%)": [38.0, 40.0, 29.0],
            "Zr (ppm)": ["<50", "200", "<20"],
            "Cu (ppm)": ["<10", "<10", "35"],
        },
        index=["R-1", "R-2", "R-3"],
    )


# By hand, in wt% (common unit): row R-1 has Zr < 50 ppm and Cu < 10 ppm below detection,
# observed total c = 60 + 38 = 98; R-2 has Cu < 10 ppm, c = 55 + 40 + 0.02 = 95.02;
# R-3 has Zr < 20 ppm, c = 70 + 29 + 0.0035 = 99.0035.
F = 0.65
EXPECTED_FACTOR = {
    "R-1": 1 - F * (50e-4 + 10e-4) / 98.0,
    "R-2": 1 - F * 10e-4 / 95.02,
    "R-3": 1 - F * 20e-4 / 99.0035,
}


@pytest.mark.parametrize("fraction", [0.65, 0.5])
def test_the_scale_factor_in_the_report_is_the_published_one(fraction):
    comp = read_composition(majors_with_traces(), fraction=fraction)
    by_hand = {
        "R-1": 1 - fraction * (50e-4 + 10e-4) / 98.0,
        "R-2": 1 - fraction * 10e-4 / 95.02,
        "R-3": 1 - fraction * 20e-4 / 99.0035,
    }
    if fraction == F:
        assert by_hand == EXPECTED_FACTOR
    report = comp.report
    # one "scaled" entry per replaced row, its value the factor
    scaled = report[report["action"] == "scaled"].set_index("row")
    assert set(scaled["code"]) == {"observed_scaled"}
    assert scaled["value"].to_dict() == pytest.approx(by_hand, rel=1e-12)
    # the text of every "replaced" entry says the same factor (6 significant digits)
    replaced = report[report["action"] == "replaced"]
    assert len(replaced) == 4
    for row, detail in zip(replaced["row"], replaced["detail"], strict=True):
        said = float(re.search(r"scaled by ([0-9.e+-]+)", detail).group(1))
        assert said == pytest.approx(by_hand[row], rel=5e-6), (row, detail)
        assert said != pytest.approx(1.0, abs=1e-9)  # a factor of 1 would say nothing
    # and the values are scaled by it; the replacements are fraction * DL
    v, raw = comp.values, comp.raw
    for row, factor in by_hand.items():
        observed = (comp.status.loc[row] == OBSERVED).to_numpy()
        np.testing.assert_allclose(
            v.loc[row].to_numpy()[observed], raw.loc[row].to_numpy()[observed] * factor
        )
    assert v.loc["R-1", "Zr"] == pytest.approx(fraction * 50e-4)
    assert v.loc["R-2", "Cu"] == pytest.approx(fraction * 10e-4)


def test_a_row_whose_replacements_reach_its_total_is_flagged_not_fatal():
    # Row T-2: one observed trace of 4 ppm, two below 10 ppm: the replacements
    # 0.65 * (10 + 10) = 13 ppm reach its observed total of 4 ppm, so the formula has no
    # positive factor (1 - 13/4 < 0). T-1 and T-3 are fine.
    df = pd.DataFrame(
        {
            "Cu (ppm)": ["120", "<10", "80"],
            "Zn (ppm)": ["<10", "<10", "95"],
            "Pb (ppm)": ["30", "4", "<5"],
        },
        index=["T-1", "T-2", "T-3"],
    )
    with pytest.raises(CompositionError, match="T-2"):  # the plain formula refuses that row
        multiplicative_replacement(
            pd.DataFrame([[0.0, 0.0, 4.0]], index=["T-2"], columns=["Cu", "Zn", "Pb"]),
            [10.0, 10.0, 10.0],
            below=[[True, True, False]],
        )
    comp = read_composition(df)  # the read does not fail ...
    assert comp.flags["code"].to_dict() == {"T-2": "not_replaced_overload"}
    assert "would reach the observed total" in comp.flags.loc["T-2", "reason"]
    # ... T-2 keeps its reading, below detection left NaN, nothing scaled
    assert list(comp.status.loc["T-2"]) == [BELOW_DL, BELOW_DL, OBSERVED]
    assert np.isnan(comp.values.loc["T-2", ["Cu", "Zn"]].to_numpy()).all()
    assert comp.values.loc["T-2", "Pb"] == 4.0
    assert not comp.replaced.loc["T-2"].any()
    # ... and the other rows are replaced by the formula
    assert comp.values.loc["T-1", "Zn"] == pytest.approx(6.5)
    np.testing.assert_allclose(
        comp.values.loc["T-1", ["Cu", "Pb"]], np.array([120.0, 30.0]) * (1 - 6.5 / 150.0)
    )
    assert comp.values.loc["T-3", "Pb"] == pytest.approx(0.65 * 5)
    np.testing.assert_allclose(
        comp.values.loc["T-3", ["Cu", "Zn"]], np.array([80.0, 95.0]) * (1 - 3.25 / 175.0)
    )
    scaled = comp.report[comp.report["action"] == "scaled"]
    assert sorted(scaled["row"]) == ["T-1", "T-3"]


def test_missing_cells_stay_missing_and_out_of_the_total():
    df = pd.DataFrame(
        {"Cu (ppm)": ["<10", "40"], "Zn (ppm)": ["", "60"], "Pb (ppm)": ["90", "<5"]},
        index=["M-1", "M-2"],
    )
    comp = read_composition(df)
    assert comp.status.loc["M-1", "Zn"] == MISSING
    assert np.isnan(comp.values.loc["M-1", "Zn"])
    # c of M-1 is the one observed part, 90 ppm: factor 1 - 6.5/90
    assert comp.values.loc["M-1", "Pb"] == pytest.approx(90 * (1 - 6.5 / 90))
