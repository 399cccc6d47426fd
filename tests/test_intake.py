"""Intake: messy tables -> Composition (compwidgets.intake.read_composition).

The survey table below is invented (stream-sediment style): sample ids as the
index, coordinates, a lithology label, majors in wt% and traces in ppm with
the usual below-detection and missing-value entries of a results sheet.
"""

from __future__ import annotations

import copy
import json

import molmass
import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from compwidgets.composition import BELOW_DL, MISSING, OBSERVED, Composition
from compwidgets.core import CompositionError
from compwidgets.intake import read_composition

IDS = ["S-001", "S-002", "S-003", "S-004", "S-005", "S-006"]
MAJORS = ["SiO2", "Al2O3", "Fe2O3", "CaO", "LOI"]
TRACES = ["Zr", "Cu", "As"]
PARTS = MAJORS + TRACES
DL = {"Cu": 2, "As": 1}  # ppm; Zr limits come with its '<5' cells
WT_PER_PPM = 1e-4  # common practice: 1 wt% = 10,000 ppm


def survey() -> pd.DataFrame:
    return pd.DataFrame(
        {
            "Easting (m)": [431200.0, 431350.0, 431510.0, 431640.0, 431800.0, 431950.0],
            "Northing (m)": [5120400.0, 5120520.0, 5120610.0, 5120750.0, 5120830.0, 5120990.0],
            "lithology": ["shale", "sandstone", "shale", "granite", "schist", "shale"],
            "SiO2": [62.0, 70.0, 55.0, 65.0, 60.0, 61.5],
            "Al2O3": [15.0, 13.0, 17.0, 14.0, 16.0, 15.5],
            "Fe2O3": [6.0, 3.0, 8.0, "", 7.0, 6.5],
            "CaO": [5.0, 2.0, 6.0, 4.0, 5.0, 5.5],
            "LOI": [11.9, 11.8, 10.2, 12.0, 12.0, 11.0],
            "Zr [ppm]": ["210", "<5", "180", "150", "< 5", "190"],
            "Cu_ppm": ["35", "28", "n.d.", "-", "41", "BDL"],
            "As (ppm)": ["12", "bdl", "7", "5", "<2", "9"],
        },
        index=pd.Index(IDS, name="sample"),
    )


# Expected status per cell, written by hand from the table above.
O, B, M = OBSERVED, BELOW_DL, MISSING
EXPECTED_STATUS = pd.DataFrame(
    [
        [O, O, O, O, O, O, O, O],
        [O, O, O, O, O, B, O, B],
        [O, O, O, O, O, O, B, O],
        [O, O, M, O, O, O, M, O],
        [O, O, O, O, O, B, O, B],
        [O, O, O, O, O, O, B, O],
    ],
    index=IDS,
    columns=PARTS,
)
# Analytical totals in wt% by hand: majors + (sum of observed traces in ppm) / 10,000.
EXPECTED_TOTAL = {
    "S-001": 99.9 + 257e-4,
    "S-002": 99.8 + 28e-4,
    "S-003": 96.2 + 187e-4,
    "S-004": 95.0 + 155e-4,
    "S-005": 100.0 + 41e-4,
    "S-006": 100.0 + 199e-4,
}


@pytest.fixture(scope="module")
def comp() -> Composition:
    return read_composition(survey(), detection_limits=DL)


# ----------------------------------------------------------------------------- parsing


def test_parts_units_and_metadata(comp):
    assert comp.parts == PARTS
    assert comp.n_rows == 6
    assert comp.unit == "wt%"
    assert comp.units == {**dict.fromkeys(MAJORS, "wt%"), **dict.fromkeys(TRACES, "ppm")}
    assert list(comp.values.index) == IDS
    assert comp.values.index.name == "sample"
    pd.testing.assert_frame_equal(
        comp.metadata, survey()[["Easting (m)", "Northing (m)", "lithology"]]
    )


def test_explicit_parts_give_the_same_result(comp):
    other = read_composition(
        survey(),
        parts=["SiO2", "Al2O3", "Fe2O3", "CaO", "LOI", "Zr", "Cu", "As"],
        detection_limits=DL,
    )
    pd.testing.assert_frame_equal(other.values, comp.values)
    # the same cells reported; the column entries say why each column is what it is, and
    # that differs (named in parts= / detected from its header)
    cells = other.report["action"] != "column"
    pd.testing.assert_frame_equal(
        other.report[cells].reset_index(drop=True),
        comp.report[comp.report["action"] != "column"].reset_index(drop=True),
    )
    pd.testing.assert_series_equal(other.column_account["role"], comp.column_account["role"])
    assert set(other.column_account["code"][other.column_account["role"] == "part"]) == {
        "part_named"
    }


def test_status_per_cell(comp):
    pd.testing.assert_frame_equal(
        comp.status.astype(object),
        EXPECTED_STATUS.astype(object),
        check_names=False,
        check_index_type=False,
    )
    assert set(np.unique(comp.status.to_numpy())) <= {OBSERVED, BELOW_DL, MISSING}


def test_raw_values_in_the_common_unit(comp):
    assert comp.raw.loc["S-001", "SiO2"] == 62.0
    assert comp.raw.loc["S-001", "Zr"] == pytest.approx(210 * WT_PER_PPM)
    assert comp.raw.loc["S-006", "As"] == pytest.approx(9 * WT_PER_PPM)
    not_observed = (EXPECTED_STATUS != OBSERVED).to_numpy()
    assert np.isnan(comp.raw.to_numpy()[not_observed]).all()
    assert np.isfinite(comp.raw.to_numpy()[~not_observed]).all()


def test_detection_limits_per_cell(comp):
    dl = comp.detection_limits
    assert np.isnan(dl[MAJORS].to_numpy()).all()
    # Zr: only the '<5' cells carry a limit; Cu and As: the given limits everywhere,
    # except where a cell brings its own ('<2' in S-005 beats the given 1 ppm).
    np.testing.assert_allclose(
        dl["Zr"].to_numpy(), [np.nan, 5e-4, np.nan, np.nan, 5e-4, np.nan], equal_nan=True
    )
    np.testing.assert_allclose(dl["Cu"].to_numpy(), np.full(6, 2 * WT_PER_PPM))
    np.testing.assert_allclose(dl["As"].to_numpy(), [1e-4, 1e-4, 1e-4, 1e-4, 2e-4, 1e-4])


def _cells(report, action):
    sub = report[report["action"] == action]
    return set(zip(sub["row"], sub["column"], sub["original"], strict=True))


def test_report_names_every_cell_by_its_original_label(comp):
    r = comp.report
    assert list(r.columns) == ["row", "column", "action", "code", "original", "value", "detail"]
    assert _cells(r, "missing") == {("S-004", "Fe2O3", ""), ("S-004", "Cu", "-")}
    below = {
        ("S-002", "Zr", "<5"),
        ("S-005", "Zr", "< 5"),
        ("S-003", "Cu", "n.d."),
        ("S-006", "Cu", "BDL"),
        ("S-002", "As", "bdl"),
        ("S-005", "As", "<2"),
    }
    assert _cells(r, "below_detection") == below
    assert _cells(r, "replaced") == below
    bd = r[r["action"] == "below_detection"].set_index(["row", "column"])["value"]
    assert bd[("S-005", "As")] == pytest.approx(2e-4)
    assert bd[("S-003", "Cu")] == pytest.approx(2e-4)
    conv = r[r["action"] == "unit_converted"]
    assert sorted(conv["column"]) == sorted(TRACES)
    np.testing.assert_allclose(conv["value"], WT_PER_PPM)
    assert conv["detail"].str.contains("ppm -> wt%").all()
    flagged = r[r["action"] == "flagged"]
    assert list(flagged["row"]) == ["S-003", "S-004"]
    assert set(r["action"]) == {
        "column",
        "missing",
        "below_detection",
        "unit_converted",
        "replaced",
        "scaled",
        "flagged",
    }
    # one entry per input column, saying what became of it
    columns = r[r["action"] == "column"]
    assert list(columns["column"]) == list(survey().columns)
    assert list(columns["original"]) == ["metadata"] * 3 + ["part"] * 8


def test_every_non_observed_cell_is_in_the_report(comp):
    r = comp.report
    cells = set(zip(r["row"], r["column"], strict=True))
    rows, cols = np.nonzero(comp.status.to_numpy() != OBSERVED)
    for i, j in zip(rows, cols, strict=True):
        assert (IDS[i], PARTS[j]) in cells


def test_decimal_comma_and_parsed_text():
    df = pd.DataFrame(
        {
            "SiO2": [" 60,5 ", "61,0"],
            "Al2O3": ["15.2", "14,8"],
            "Zr (ppm)": ["<0,5", "\u221212,5"],
        },
        index=["A-1", "A-2"],
    )
    c = read_composition(df, decimal=",", negative_is_below_detection=True, check_total=False)
    assert c.raw.loc["A-1", "SiO2"] == 60.5
    assert c.raw.loc["A-2", "Al2O3"] == 14.8
    assert c.detection_limits.loc["A-1", "Zr"] == pytest.approx(0.5 * WT_PER_PPM)
    # the unicode minus sign reads as a negative number -> below a 12.5 ppm limit
    assert c.detection_limits.loc["A-2", "Zr"] == pytest.approx(12.5 * WT_PER_PPM)
    assert _cells(c.report, "parsed_text") == {
        ("A-1", "SiO2", " 60,5 "),
        ("A-2", "SiO2", "61,0"),
        ("A-2", "Al2O3", "14,8"),
    }
    assert _cells(c.report, "negative_as_below_detection") == {("A-2", "Zr", "\u221212,5")}
    # '15.2' needed nothing but reading: not reported
    assert ("A-1", "Al2O3") not in set(zip(c.report["row"], c.report["column"], strict=True))


def test_negative_is_below_detection_option():
    df = survey()
    df.loc["S-001", "Zr [ppm]"] = "-5"
    c = read_composition(df, detection_limits=DL, negative_is_below_detection=True)
    assert c.status.loc["S-001", "Zr"] == BELOW_DL
    assert c.detection_limits.loc["S-001", "Zr"] == pytest.approx(5 * WT_PER_PPM)
    assert _cells(c.report, "negative_as_below_detection") == {("S-001", "Zr", "-5")}


def test_zero_with_a_known_limit_is_below_detection():
    df = survey()
    df.loc["S-001", "Cu_ppm"] = "0"
    c = read_composition(df, detection_limits=DL)
    assert c.status.loc["S-001", "Cu"] == BELOW_DL
    assert c.detection_limits.loc["S-001", "Cu"] == pytest.approx(2 * WT_PER_PPM)


def test_real_nan_in_a_float_column_is_missing():
    df = pd.DataFrame({"a": [1.0, np.nan, 2.0], "b": [3.0, 4.0, None], "c": [1.0, 1.0, 1.0]})
    c = read_composition(df, check_total=False)
    assert c.status.loc[1, "a"] == MISSING and c.status.loc[2, "b"] == MISSING
    assert _cells(c.report, "missing") == {(1, "a", "NaN"), (2, "b", "NaN")}


def test_custom_tokens_including_a_numeric_code():
    df = survey()
    df.loc["S-001", "As (ppm)"] = "-999"
    c = read_composition(
        df,
        detection_limits=DL,
        below_tokens=["bdl"],
        missing_tokens=["", "-", "n.d.", "-999"],
    )
    assert c.status.loc["S-001", "As"] == MISSING
    assert c.status.loc["S-003", "Cu"] == MISSING  # 'n.d.' now means "no data"
    assert c.status.loc["S-006", "Cu"] == BELOW_DL  # 'BDL' matches 'bdl' (case-insensitive)


def test_auto_detection_skips_totals_but_never_hides_a_broken_part():
    df = survey()
    df["Total"] = [99.9, 99.8, 96.2, 95.0, 100.0, 100.0]
    c = read_composition(df, detection_limits=DL)
    assert "Total" not in c.parts and "Total" in c.metadata.columns
    df = survey()
    df.loc["S-003", "As (ppm)"] = "7 (dup)"
    with pytest.raises(CompositionError, match=r"row 'S-003', column 'As \(ppm\)'.*'7 \(dup\)'"):
        read_composition(df, detection_limits=DL)


def test_common_unit_and_unit_conversions():
    df = pd.DataFrame(
        {"Zr_ppm": [100.0, 200.0], "Au (ppb)": [50.0, 5.0], "S [mg/g]": [1.5, 2.0]},
        index=["a", "b"],
    )
    c = read_composition(df, check_total=False)
    assert c.unit == "ppm"  # no wt% part
    assert c.values.loc["a", "Au"] == pytest.approx(0.05)  # 1 ppm = 1000 ppb
    assert c.values.loc["b", "S"] == pytest.approx(2000.0)  # 1 mg/g = 1000 ppm
    conv = c.report[c.report["action"] == "unit_converted"].set_index("column")["value"]
    assert conv.to_dict() == pytest.approx({"Au": 1e-3, "S": 1e3})
    wt = read_composition(survey(), detection_limits=DL, common_unit="ppm")
    assert wt.values.loc["S-001", "SiO2"] == pytest.approx(62.0 * 1e4)
    assert wt.detection_limits.loc["S-003", "Cu"] == pytest.approx(2.0)


def test_point_counts_are_not_totalled():
    df = pd.DataFrame({"Qz": [120, 98], "Fsp": [60, 75], "Lith": [20, 27]}, index=["t1", "t2"])
    c = read_composition(df, default_unit="count")
    assert c.unit == "count"
    assert c.settings["total_checked"] is False
    assert len(c.flags) == 0


def test_formula_conversion_renames_and_scales():
    m = {s: molmass.ELEMENTS[s].mass for s in ("Fe", "O", "Zr")}
    fe = 2 * (m["Fe"] + m["O"]) / (2 * m["Fe"] + 3 * m["O"])  # Fe2O3 -> FeO by element masses
    zr = (m["Zr"] + 2 * m["O"]) / m["Zr"]  # Zr -> ZrO2
    plain = read_composition(survey(), detection_limits=DL, replacement="none")
    c = read_composition(
        survey(), detection_limits=DL, replacement="none", convert={"Fe2O3": "FeO", "Zr": "ZrO2"}
    )
    assert c.parts == ["SiO2", "Al2O3", "FeO", "CaO", "LOI", "ZrO2", "Cu", "As"]
    np.testing.assert_allclose(c.raw["FeO"], plain.raw["Fe2O3"] * fe)
    np.testing.assert_allclose(c.raw["ZrO2"], plain.raw["Zr"] * zr)
    np.testing.assert_allclose(c.detection_limits["ZrO2"], plain.detection_limits["Zr"] * zr)
    fc = c.report[c.report["action"] == "formula_converted"]
    assert list(fc["detail"]) == ["Fe2O3 -> FeO, factor 0.8998", "Zr -> ZrO2, factor 1.3508"]
    assert c.units["FeO"] == "wt%" and c.units["ZrO2"] == "ppm"
    # the analytical total is the one of the table as reported
    pd.testing.assert_series_equal(c.flags["total"], plain.flags["total"])
    assert c.flags.loc["S-004", "reason"].startswith("missing part(s): FeO, Cu; analytical")


# ----------------------------------------------------------------------------- replacement


def _row_checks(c: Composition, label: str, fraction: float) -> None:
    """Martin-Fernandez et al. (2003): the published definition of the method."""
    st_row = c.status.loc[label].to_numpy()
    raw = c.raw.loc[label].to_numpy()
    new = c.values.loc[label].to_numpy()
    dl = c.detection_limits.loc[label].to_numpy()
    obs, below, miss = st_row == OBSERVED, st_row == BELOW_DL, st_row == MISSING
    # each value below detection becomes fraction * DL ...
    np.testing.assert_allclose(new[below], fraction * dl[below], rtol=1e-12)
    # ... the ratios among the observed parts are kept ...
    ratios_before = raw[obs][:, None] / raw[obs][None, :]
    ratios_after = new[obs][:, None] / new[obs][None, :]
    np.testing.assert_allclose(ratios_after, ratios_before, rtol=1e-12)
    # ... and the row keeps its total (the total of its observed parts)
    assert new[obs | below].sum() == pytest.approx(raw[obs].sum(), rel=1e-12)
    # missing parts take no part
    assert np.isnan(new[miss]).all()


@pytest.mark.parametrize("fraction", [0.65, 0.5])
def test_multiplicative_replacement(fraction):
    df = survey()
    df.loc["S-004", "Zr [ppm]"] = "<5"  # a row with missing parts and one below detection
    c = read_composition(df, detection_limits=DL, fraction=fraction)
    for label in ("S-002", "S-003", "S-004", "S-005", "S-006"):
        _row_checks(c, label, fraction)
    assert c.values.loc["S-002", "Zr"] == pytest.approx(fraction * 5 * WT_PER_PPM)
    assert (c.values.loc["S-002", ["SiO2", "LOI"]] < c.raw.loc["S-002", ["SiO2", "LOI"]]).all()
    # rows without values below detection are untouched
    pd.testing.assert_series_equal(c.values.loc["S-001"], c.raw.loc["S-001"])
    expected_replaced = (c.status == BELOW_DL).to_numpy()
    np.testing.assert_array_equal(c.replaced.to_numpy(), expected_replaced)


def test_simple_and_no_replacement():
    simple = read_composition(survey(), detection_limits=DL, replacement="simple")
    below = (simple.status == BELOW_DL).to_numpy()
    v, raw, dl = (x.to_numpy() for x in (simple.values, simple.raw, simple.detection_limits))
    np.testing.assert_allclose(v[below], 0.65 * dl[below])
    np.testing.assert_array_equal(v[~below], raw[~below])  # nothing else changes
    none = read_composition(survey(), replacement="none")  # no limits needed
    assert np.isnan(none.values.to_numpy()[below]).all()
    assert (none.status == simple.status).all().all()
    assert not none.replaced.to_numpy().any()
    assert "replaced" not in set(none.report["action"])
    # without given limits the tokens have none: NaN, reported as unknown
    assert np.isnan(none.detection_limits.loc["S-003", "Cu"])
    bd = none.report[
        (none.report["action"] == "below_detection") & (none.report["row"] == "S-003")
    ]
    assert bd["detail"].str.contains("limit unknown").all()


def test_row_with_no_observed_part_is_flagged_not_replaced():
    df = pd.DataFrame(
        {"Cu": ["<2", "12", "bdl"], "Zn": ["-", "40", "<5"], "Pb": ["nd", "8", "30"]},
        index=["x1", "x2", "x3"],
    )
    c = read_composition(df, default_unit="ppm", detection_limits=2, check_total=False)
    assert c.flags.loc["x1", "reason"].startswith("no part observed; missing part(s): Zn")
    assert "not replaced" in c.flags.loc["x1", "reason"]
    assert np.isnan(c.values.loc["x1", ["Cu", "Pb"]]).all()
    assert c.status.loc["x1", "Cu"] == BELOW_DL and not c.replaced.loc["x1"].any()
    _row_checks(c, "x3", 0.65)
    assert "x2" not in c.flags.index


@settings(max_examples=40, deadline=None)
@given(data=st.data())
def test_multiplicative_replacement_properties(data):
    n = data.draw(st.integers(2, 8), label="rows")
    d = data.draw(st.integers(3, 6), label="parts")
    logs = data.draw(
        st.lists(st.floats(-2, 3), min_size=n * d, max_size=n * d), label="log values"
    )
    values = np.round(np.exp(np.array(logs).reshape(n, d)), 4)
    kinds = np.array(
        data.draw(st.lists(st.sampled_from("oooobm"), min_size=n * d, max_size=n * d))
    ).reshape(n, d)
    limits = np.array([0.01, 0.02, 0.05, 0.01, 0.03, 0.02][:d])
    cells = np.where(
        kinds == "b",
        np.char.add("<", limits.astype(str))[None, :].repeat(n, 0),
        np.where(kinds == "m", "", values.astype(str)),
    )
    df = pd.DataFrame(
        cells, columns=[f"p{j}" for j in range(d)], index=[f"r{i}" for i in range(n)]
    )
    c = read_composition(df, parts=list(df.columns), default_unit="ppm", check_total=False)
    for i in range(n):
        label = f"r{i}"
        if (kinds[i] == "o").any():
            _row_checks(c, label, 0.65)
        else:
            assert "no part observed" in c.flags.loc[label, "reason"]


# ----------------------------------------------------------------------------- flags


def test_total_window_flags_with_reason_and_total(comp):
    f = comp.flags
    assert list(f.index) == ["S-003", "S-004"]
    assert list(f.columns) == ["reason", "code", "total", "stated_total"]
    assert f.loc["S-003", "code"] == "total_outside_window"
    assert f.loc["S-004", "code"] == "missing_parts;total_outside_window"
    assert np.isnan(f["stated_total"]).all()  # the table has no total column
    assert f.loc["S-003", "reason"] == "analytical total 96.22 wt% outside 98.5-101.5"
    assert f.loc["S-004", "reason"] == (
        "missing part(s): Fe2O3, Cu; analytical total 95.02 wt% outside 98.5-101.5"
    )
    for label in f.index:
        assert f.loc[label, "total"] == pytest.approx(EXPECTED_TOTAL[label], rel=1e-12)
    assert set(f.index) <= set(comp.values.index)  # flagged rows stay


def test_custom_total_window_and_no_total_check():
    c = read_composition(survey(), detection_limits=DL, total_window=(95, 97))
    # S-003 (96.22) is inside now; S-004 (95.02) too, but it misses parts
    assert list(c.flags.index) == ["S-001", "S-002", "S-004", "S-005", "S-006"]
    assert c.flags.loc["S-001", "reason"] == "analytical total 99.93 wt% outside 95-97"
    assert c.flags.loc["S-004", "reason"] == "missing part(s): Fe2O3, Cu"
    assert c.settings["total_window"] == [95.0, 97.0]
    off = read_composition(survey(), detection_limits=DL, check_total=False)
    assert list(off.flags.index) == ["S-004"]
    assert np.isnan(off.flags.loc["S-004", "total"])


def test_rounding_never_hides_that_a_total_is_outside():
    df = pd.DataFrame({"SiO2": [60.0], "Al2O3": [41.5001]}, index=["r"])
    c = read_composition(df)
    reason = c.flags.loc["r", "reason"]
    assert reason.startswith("analytical total 101.5001 wt% outside"), reason


# ----------------------------------------------------------------------------- the object


def test_composition_helpers(comp):
    none = read_composition(survey(), replacement="none")
    np.testing.assert_array_equal(none.complete_rows(), [True, False, False, False, False, False])
    assert none.complete_rows(["SiO2", "Al2O3"]).all()
    assert comp.complete_rows().tolist() == [True, True, True, False, True, True]
    with pytest.raises(CompositionError, match="unknown part"):
        comp.complete_rows(["Au"])
    text = comp.summary()
    assert "6 rows x 8 parts in wt%" in text
    assert "flagged rows: 2" in text and "'S-003': analytical total 96.22" in text
    assert "below detection: 6" in text
    settings_ = json.loads(json.dumps(comp.settings))
    assert settings_["replacement"] == "multiplicative" and settings_["fraction"] == 0.65
    assert settings_["detection_limits"] == {"Cu": 2.0, "As": 1.0}
    assert settings_["unit"] == "wt%"
    with pytest.raises(AttributeError):
        comp.unit = "ppm"  # frozen


# ----------------------------------------------------------------------------- bad input


def _with(label, column, value):
    def make():
        df = survey()
        df[column] = df[column].astype(object)
        df.loc[label, column] = value
        return df

    return make


def _dup_columns():
    df = survey()
    return pd.concat([df, df[["SiO2"]]], axis=1)


def _dup_index():
    df = survey()
    df.index = pd.Index(["S-001", "S-002", "S-003", "S-001", "S-005", "S-006"], name="sample")
    return df


def _with_feo():
    df = survey()
    df["FeO"] = 1.0
    return df


CATALOGUE = [
    (
        "garbage cell",
        _with("S-002", "Cu_ppm", "12..5"),
        {},
        r"row 'S-002', column 'Cu_ppm': value '12\.\.5' is not a finite number",
    ),
    (
        "decimal comma without the option",
        _with("S-002", "SiO2", "70,0"),
        {},
        r"row 'S-002', column 'SiO2': value '70,0'.*decimal=','",
    ),
    ("duplicate columns", _dup_columns, {}, r"duplicate column names \['SiO2'\]"),
    ("duplicate index", _dup_index, {}, r"duplicate index labels \['S-001'\]"),
    ("empty frame", lambda: survey().iloc[:0], {}, r"DataFrame: empty table \(0 rows"),
    (
        "unknown part name",
        survey,
        {"parts": ["SiO2", "Al2O3", "Ni"]},
        r"parts: unknown column name\(s\) \['Ni'\]; the table's columns are \['Easting \(m\)'",
    ),
    ("single part", survey, {"parts": ["SiO2"]}, r"1 part column\(s\) found \(\['SiO2'\]\)"),
    (
        "negative value",
        _with("S-003", "SiO2", -1.0),
        {},
        r"negative value '-1\.0' at row 'S-003', column 'SiO2'.*negative_is_below_detection",
    ),
    (
        "zero without a limit",
        _with("S-001", "Zr [ppm]", "0"),
        {},
        r"zero at row 'S-001', column 'Zr \[ppm\]'.*detection_limits=\{'Zr': \.\.\.\}",
    ),
    (
        "below-DL token without a limit",
        survey,
        {"detection_limits": {"As": 1}},
        r"entry 'n\.d\.' at row 'S-003', column 'Cu_ppm' has no detection limit; pass "
        r"detection_limits=\{'Cu': \.\.\.\} \(in ppm\) or replacement='none'",
    ),
    (
        "bad '<' entry",
        _with("S-001", "Zr [ppm]", "<0"),
        {},
        r"row 'S-001', column 'Zr \[ppm\]': value '<0'.*positive limit",
    ),
    (
        "unknown unit in units",
        survey,
        {"units": {"SiO2": "furlongs"}},
        r"units\['SiO2'\]: unknown unit 'furlongs'",
    ),
    (
        "unknown unit in a name",
        lambda: survey().rename(columns={"As (ppm)": "As (ppmm)"}),
        {},
        r"column 'As \(ppmm\)'.*unknown unit 'ppmm'",
    ),
    (
        "unit conflict",
        survey,
        {"units": {"Zr [ppm]": "wt%"}},
        r"column 'Zr \[ppm\]': the name says 'ppm' but units gives 'wt%'",
    ),
    (
        "counts mixed with wt%",
        survey,
        {"units": {"LOI": "count"}},
        r"point counts \['LOI'\] cannot be mixed with mass units",
    ),
    (
        "bad convert pair",
        survey,
        {"convert": {"SiO2": "FeO"}},
        r"convert\['SiO2'\].*'SiO2' -> 'FeO': the formulas share no element other than oxygen",
    ),
    (
        "convert a non-formula",
        survey,
        {"convert": {"LOI": "O"}},
        r"convert\['LOI'\].*source 'LOI' is not a chemical formula",
    ),
    (
        "convert onto an existing part",
        _with_feo,
        {"convert": {"Fe2O3": "FeO"}},
        r"convert 'Fe2O3' -> 'FeO': 'FeO' is already a part",
    ),
    (
        "convert an unknown part",
        survey,
        {"convert": {"Ni": "NiO"}},
        r"convert: 'Ni' is not a part",
    ),
    (
        "unknown detection-limit key",
        survey,
        {"detection_limits": {"Cu": 2, "As": 1, "Ni": 3}},
        r"detection_limits: 'Ni' is not a part",
    ),
    (
        "negative detection limit",
        survey,
        {"detection_limits": {"Cu": -2, "As": 1}},
        r"detection_limits\['Cu'\]: a detection limit must be a positive number, got -2",
    ),
    (
        "fraction out of range",
        survey,
        {"fraction": 1.2},
        r"fraction must lie strictly between 0 and 1, got 1\.2",
    ),
    ("fraction zero", survey, {"fraction": 0}, r"fraction must lie strictly between 0 and 1"),
    (
        "bad total window",
        survey,
        {"total_window": (101.5, 98.5)},
        r"total_window must satisfy low < high.*\(101\.5, 98\.5\)",
    ),
    (
        "unknown replacement strategy",
        survey,
        {"replacement": "median"},
        r"replacement must be one of 'multiplicative', 'simple', 'none', got 'median'",
    ),
    (
        "token in both lists",
        survey,
        {"missing_tokens": ["", "bdl"]},
        r"token\(s\) \['bdl'\] are in both below_tokens and missing_tokens",
    ),
    ("bad decimal", survey, {"decimal": ";"}, r"decimal must be '\.' or ',', got ';'"),
]


@pytest.mark.parametrize(
    ("make", "options", "match"),
    [pytest.param(m, o, r, id=name) for name, m, o, r in CATALOGUE],
)
def test_malformed_input_names_the_place(make, options, match):
    options = {"detection_limits": DL, **options}
    with pytest.raises(CompositionError, match=match):
        read_composition(make(), **options)


def test_unknown_file_extension(tmp_path):
    path = tmp_path / "survey.json"
    path.write_text("{}")
    with pytest.raises(CompositionError, match=r"survey\.json'.*unknown file extension '\.json'"):
        read_composition(path)


def test_missing_file(tmp_path):
    with pytest.raises(FileNotFoundError, match="nope.csv"):
        read_composition(tmp_path / "nope.csv")


# ----------------------------------------------------------------------------- no mutation


@pytest.mark.parametrize(
    "options",
    [
        {"detection_limits": DL},
        {"detection_limits": DL, "replacement": "simple", "fraction": 0.5},
        {"replacement": "none", "check_total": False},
        {"detection_limits": DL, "convert": {"Fe2O3": "FeO"}, "common_unit": "ppm"},
        {"detection_limits": DL, "parts": PARTS, "units": {"LOI": "wt%"}},
        {"detection_limits": 3, "negative_is_below_detection": True, "decimal": ","},
    ],
)
def test_the_input_frame_is_never_mutated(options):
    df = survey()
    if options.get("negative_is_below_detection"):
        df.loc["S-001", "Zr [ppm]"] = "-5"
    if options.get("decimal") == ",":
        df["SiO2"] = df["SiO2"].astype(object)
        df.loc["S-002", "SiO2"] = " 70,0 "
    before = copy.deepcopy(df)
    c = read_composition(df, **options)
    pd.testing.assert_frame_equal(df, before)
    assert c.values.index.equals(df.index)
    c.metadata.iloc[0, 0] = -1.0  # the metadata is a copy, not a view of the input
    pd.testing.assert_frame_equal(df, before)


def test_the_input_frame_is_intact_after_an_error():
    df = survey()
    df.loc["S-001", "Zr [ppm]"] = "-5"
    before = copy.deepcopy(df)
    with pytest.raises(CompositionError, match="negative value"):
        read_composition(df, detection_limits=DL)
    pd.testing.assert_frame_equal(df, before)


# ----------------------------------------------------------------------------- files


def _assert_same(a: Composition, b: Composition) -> None:
    for name in ("values", "raw", "detection_limits", "flags"):
        pd.testing.assert_frame_equal(getattr(a, name), getattr(b, name), check_index_type=False)
    # a file holds the labels in a column of its own, which the report accounts for
    a_labels = a.column_account.index[a.column_account["role"] == "index"]
    assert list(a_labels) == ["sample"] and b.column_account["role"].ne("index").all()
    pd.testing.assert_frame_equal(
        a.report[a.report["column"] != "sample"].reset_index(drop=True),
        b.report,
        check_index_type=False,
    )
    pd.testing.assert_frame_equal(
        a.status.astype(object), b.status.astype(object), check_index_type=False
    )
    assert a.units == b.units and a.unit == b.unit
    assert list(a.metadata.columns) == list(b.metadata.columns)
    assert list(a.metadata["lithology"]) == list(b.metadata["lithology"])
    np.testing.assert_allclose(
        pd.to_numeric(a.metadata["Easting (m)"]), pd.to_numeric(b.metadata["Easting (m)"])
    )


def test_csv_and_tsv_give_the_same_composition(tmp_path, comp):
    df = survey()
    df.to_csv(tmp_path / "survey.csv")
    df.to_csv(tmp_path / "survey.tsv", sep="\t")
    df.to_csv(tmp_path / "survey_semicolon.txt", sep=";")
    for name in ("survey.csv", "survey.tsv", "survey_semicolon.txt"):
        c = read_composition(tmp_path / name, index_col="sample", detection_limits=DL)
        _assert_same(c, comp)
        assert c.metadata["Easting (m)"].iloc[0] == "431200.0"  # files: metadata stays text
    assert read_composition(str(tmp_path / "survey.csv"), index_col=0, detection_limits=DL)


def test_excel_gives_the_same_composition(tmp_path, comp):
    path = tmp_path / "survey.xlsx"
    survey().to_excel(path, sheet_name="results")
    c = read_composition(path, sheet_name="results", index_col="sample", detection_limits=DL)
    _assert_same(c, comp)
    with pytest.raises(CompositionError, match="survey.xlsx"):
        read_composition(path, sheet_name="nope", index_col="sample", detection_limits=DL)


def test_decimal_comma_csv(tmp_path):
    path = tmp_path / "comma.csv"
    path.write_text("sample;SiO2;Al2O3;Zr (ppm)\nA-1; 60,5 ;39,5;<0,5\nA-2;61,0;38,9;12,5\n")
    c = read_composition(path, decimal=",", index_col="sample")
    assert c.settings["sep"] == ";"
    np.testing.assert_allclose(c.raw["SiO2"], [60.5, 61.0])
    assert c.status.loc["A-1", "Zr"] == BELOW_DL
    assert len(c.flags) == 0  # 100.0 and 99.9 + 12.5 ppm are inside the window


def test_trace_only_table_is_not_checked_for_an_analytical_total():
    # common practice: a total window applies to full (major-element) analyses in
    # percent; a table of traces in ppm alone sums to a fraction of one percent
    df = pd.DataFrame(
        {"Cu (ppm)": [12.0, 30.0], "Zn (ppm)": [80.0, 95.0], "Pb (ppm)": [20.0, 11.0]},
        index=["T-1", "T-2"],
    )
    comp = read_composition(df)
    assert len(comp.flags) == 0
    majors = pd.DataFrame({"SiO2 (wt%)": [60.0], "Al2O3 (wt%)": [20.0]}, index=["M-1"])
    flagged = read_composition(majors).flags
    assert flagged.loc["M-1", "total"] == pytest.approx(80.0)


def test_coordinate_columns_are_metadata_by_default():
    # common practice: survey tables carry coordinates and sample numbers beside the parts
    df = pd.DataFrame(
        {
            "easting": [512300.0, 512410.0],
            "Latitude": [47.1, 47.2],
            "SiO2 (wt%)": [70.0, 55.0],
            "Al2O3 (wt%)": [29.5, 44.2],
            "Zr (ppm)": [200.0, 150.0],
        },
        index=["A", "B"],
    )
    comp = read_composition(df)
    assert comp.parts == ["SiO2", "Al2O3", "Zr"]
    assert list(comp.metadata.columns) == ["easting", "Latitude"]
    pd.testing.assert_series_equal(comp.metadata["easting"], df["easting"])
    # named explicitly, a coordinate-like column can still be a part
    chosen = read_composition(df, parts=["SiO2 (wt%)", "easting"], check_total=False)
    assert chosen.parts == ["SiO2", "easting"]
