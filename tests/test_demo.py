"""Tests of the invented demo survey (compwidgets.demo)."""

from __future__ import annotations

import importlib.util
import re

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from compwidgets import demo

MAJOR_COLS = [f"{p} (wt%)" for p in demo.MAJORS]
TRACE_COLS = [f"{p} (ppm)" for p in demo.TRACES]
PART_COLS = MAJOR_COLS + TRACE_COLS
MISSING_TOKENS = {"", "-"}
BELOW_WORDS = {"bdl", "n.d."}
LT_PATTERN = re.compile(r"^<(\d+(?:\.\d+)?)$")


@pytest.fixture(scope="module")
def text() -> pd.DataFrame:
    return demo.stream_sediments()


@pytest.fixture(scope="module")
def clean() -> pd.DataFrame:
    return demo.stream_sediments_clean()


@pytest.fixture(scope="module")
def big_clean() -> pd.DataFrame:
    return demo.stream_sediments_clean(20_000, seed=11)


def analytical_total(clean_frame: pd.DataFrame) -> pd.Series:
    """Sum of all parts in wt% (ppm / 10,000); not-analysed cells count as 0."""
    majors = clean_frame[MAJOR_COLS].sum(axis=1)
    traces = clean_frame[TRACE_COLS].fillna(0.0).sum(axis=1) / 1e4
    return majors + traces


def catchment_rows(frame: pd.DataFrame, bedrock_word: str) -> pd.DataFrame:
    mask = frame["bedrock"].astype(str).str.contains(bedrock_word)
    assert mask.any(), bedrock_word
    return frame[mask]


# --- determinism and size -----------------------------------------------------------------


def test_same_seed_gives_identical_frames(text: pd.DataFrame) -> None:
    again = demo.stream_sediments(2000, seed=7)
    pd.testing.assert_frame_equal(text, again)
    pd.testing.assert_frame_equal(
        demo.stream_sediments_clean(300, 3), demo.stream_sediments_clean(300, 3)
    )


def test_different_seed_gives_different_frame(text: pd.DataFrame) -> None:
    other = demo.stream_sediments(2000, seed=8)
    assert not np.array_equal(text["SiO2 (wt%)"].to_numpy(), other["SiO2 (wt%)"].to_numpy())
    assert not text["catchment"].equals(other["catchment"])


@pytest.mark.parametrize("n", [1, 17, 2000])
def test_size_argument_is_honoured(n: int) -> None:
    assert len(demo.stream_sediments(n)) == n
    assert len(demo.stream_sediments_clean(n)) == n


def test_bad_sizes_are_refused() -> None:
    with pytest.raises(ValueError, match="at least 1"):
        demo.stream_sediments(0)
    with pytest.raises(TypeError, match="integer"):
        demo.stream_sediments(2.5)  # type: ignore[arg-type]


# --- layout -------------------------------------------------------------------------------


def test_columns_and_dtypes(text: pd.DataFrame, clean: pd.DataFrame) -> None:
    expected = ["sample_id", "easting (m)", "northing (m)", "catchment", "bedrock", *PART_COLS]
    assert list(text.columns) == expected
    assert list(clean.columns) == expected
    for frame in (text, clean):
        assert isinstance(frame["catchment"].dtype, pd.CategoricalDtype)
        assert list(frame["catchment"].cat.categories) == list(demo.CATCHMENTS)
        assert isinstance(frame["bedrock"].dtype, pd.CategoricalDtype)
        assert 4 <= len(demo.CATCHMENTS) <= 5
        assert (
            frame["easting (m)"].dtype == np.float64 and frame["northing (m)"].dtype == np.float64
        )
        for col in MAJOR_COLS:
            assert frame[col].dtype == np.float64, col
    for col in TRACE_COLS:
        assert text[col].dtype == object, col
        assert clean[col].dtype == np.float64, col
    # One catchment <-> one bedrock.
    pairs = text[["catchment", "bedrock"]].astype(str).drop_duplicates()
    assert len(pairs) == len(demo.CATCHMENTS) == pairs["bedrock"].nunique()


def test_sample_ids_are_unique_and_well_formed(text: pd.DataFrame) -> None:
    ids = text["sample_id"]
    assert ids.is_unique
    assert ids.map(lambda s: isinstance(s, str) and re.fullmatch(r"SS-\d{6}", s) is not None).all()


def test_coordinates_are_finite_metres_on_a_local_grid(text: pd.DataFrame) -> None:
    xy = text[["easting (m)", "northing (m)"]].to_numpy()
    assert np.isfinite(xy).all()
    assert (xy >= 0).all() and (xy <= 50_000).all()
    np.testing.assert_array_equal(xy, np.round(xy))  # whole metres
    # Catchments occupy different places: centroids at least 5 km apart.
    centres = (
        text.groupby("catchment", observed=True)[["easting (m)", "northing (m)"]].mean().to_numpy()
    )
    gaps = np.linalg.norm(centres[:, None, :] - centres[None, :, :], axis=-1)
    assert gaps[np.triu_indices(len(centres), 1)].min() > 5_000


# --- labelling as invented ----------------------------------------------------------------


def test_frames_carry_the_demo_notice(text: pd.DataFrame, clean: pd.DataFrame) -> None:
    assert "Invented data for demonstration; not a real survey" in demo.DEMO_NOTICE
    assert text.attrs["source"] == demo.DEMO_NOTICE
    assert clean.attrs["source"] == demo.DEMO_NOTICE
    for func in (demo.stream_sediments, demo.stream_sediments_clean):
        assert "invented" in (func.__doc__ or "").lower()
    assert "invented" in (demo.__doc__ or "").lower()


# --- analytical totals --------------------------------------------------------------------


def test_most_totals_sit_in_the_usual_window(clean: pd.DataFrame, big_clean: pd.DataFrame) -> None:
    # Common practice (from memory): a good major-element analysis totals about 98.5-101.5 wt%
    # (all parts, traces converted from ppm, Fe as Fe2O3, with LOI).
    for frame in (clean, big_clean):
        total = analytical_total(frame)
        outside = ((total < 98.5) | (total > 101.5)).mean()
        assert 0.004 <= outside <= 0.03, outside
        assert abs(total.median() - 100.0) < 0.2
    total = analytical_total(big_clean)
    deliberate = total.between(96.0, 97.5) | total.between(102.0, 103.0)
    assert 0.005 <= deliberate.mean() <= 0.02
    assert (total < 96.0).any() and (total > 103.0).any()  # mis-weighed samples


# --- text tokens and detection limits -----------------------------------------------------


def test_text_cells_are_known_tokens_with_matching_limits(text: pd.DataFrame) -> None:
    seen: set[str] = set()
    for part, col in zip(demo.TRACES, TRACE_COLS, strict=True):
        for cell in text[col]:
            if isinstance(cell, str):
                match = LT_PATTERN.match(cell)
                if match:
                    assert float(match.group(1)) == demo.DETECTION_LIMITS[part], (col, cell)
                    seen.add("<x")
                else:
                    assert cell in MISSING_TOKENS | BELOW_WORDS, (col, cell)
                    seen.add(cell)
            else:
                assert isinstance(cell, float) and np.isfinite(cell), (col, cell)
    assert seen == {"<x", "bdl", "n.d.", "", "-"}
    for col in MAJOR_COLS:
        assert np.isfinite(text[col]).all(), col


def test_detection_limits_cover_every_part_and_are_honoured(text: pd.DataFrame) -> None:
    assert set(demo.DETECTION_LIMITS) == set(demo.MAJORS) | set(demo.TRACES)
    assert demo.DETECTION_LIMITS["Cu"] == 2.0 and demo.DETECTION_LIMITS["Ni"] == 3.0
    # Common practice: a number reported by the laboratory is at or above its detection
    # limit; anything lower is reported as "<limit" (or a word) instead.
    for part, col in zip(demo.MAJORS + demo.TRACES, PART_COLS, strict=True):
        numbers = pd.to_numeric(text[col].where(text[col].map(lambda c: not isinstance(c, str))))
        assert (numbers.dropna() >= demo.DETECTION_LIMITS[part]).all(), col
    # Low-abundance traces are censored somewhere (Zn in stream sediment rarely is).
    for part in ("Cr", "Ni", "Zr", "Ba", "Cu"):
        col = f"{part} (ppm)"
        assert text[col].astype(str).str.startswith("<").any(), f"no {part} below detection"


def test_token_rates_are_small(text: pd.DataFrame) -> None:
    cells = text[TRACE_COLS].to_numpy().ravel()
    is_text = np.array([isinstance(c, str) for c in cells])
    missing = np.isin(cells[is_text], list(MISSING_TOKENS)).sum() / cells.size
    assert 0.002 <= missing <= 0.015
    assert 0.002 <= is_text.mean() <= 0.05


# --- clean twin ---------------------------------------------------------------------------


def test_clean_variant_has_the_same_numbers(text: pd.DataFrame, clean: pd.DataFrame) -> None:
    non_parts = ["sample_id", "easting (m)", "northing (m)", "catchment", "bedrock"]
    pd.testing.assert_frame_equal(text[non_parts], clean[non_parts])
    pd.testing.assert_frame_equal(text[MAJOR_COLS], clean[MAJOR_COLS])
    for col in TRACE_COLS:
        for cell, number in zip(text[col], clean[col], strict=True):
            if not isinstance(cell, str):
                assert number == cell, col
            elif cell in MISSING_TOKENS:
                assert np.isnan(number), (col, cell)
            else:  # "<x", "bdl", "n.d.": below detection
                assert number == 0.0, (col, cell)


# --- geochemistry and model ---------------------------------------------------------------


def test_catchment_groups_differ_in_log_ratio(clean: pd.DataFrame) -> None:
    ultramafic = catchment_rows(clean, "serpentinite")
    granite = catchment_rows(clean, "granite")
    lr_u = np.log(ultramafic["MgO (wt%)"] / ultramafic["SiO2 (wt%)"])
    lr_g = np.log(granite["MgO (wt%)"] / granite["SiO2 (wt%)"])
    # Two-sample t test (scipy.stats.ttest_ind, Welch form).
    result = stats.ttest_ind(lr_u, lr_g, equal_var=False)
    assert result.statistic > 10 and result.pvalue < 1e-10
    basalt = catchment_rows(clean, "basalt")
    result = stats.ttest_ind(
        np.log(basalt["TiO2 (wt%)"] / basalt["K2O (wt%)"]),
        np.log(granite["TiO2 (wt%)"] / granite["K2O (wt%)"]),
        equal_var=False,
    )
    assert result.statistic > 10


def test_bedrock_signatures_are_plausible(clean: pd.DataFrame) -> None:
    med = clean.groupby("bedrock", observed=True)[PART_COLS].median()
    by = {word: med.loc[[b for b in med.index if word in b][0]] for word in (
        "granite", "basalt", "shale-limestone", "serpentinite", "sandstone")}  # fmt: skip
    # Common practice, rough values from memory: serpentinite-derived sediment is rich in
    # MgO (> 25 wt%), Cr and Ni (> 1000 ppm); granite in SiO2 (> 65 wt%), K2O (> 3 wt%) and
    # Zr (> 150 ppm); basalt in Fe2O3 (> 9 wt%), TiO2 (> 1 wt%) and CaO (> 7 wt%);
    # limestone-bearing sediment in CaO and LOI (> 15 wt% each); sandstone in SiO2 (> 75).
    assert by["serpentinite"]["MgO (wt%)"] > 25
    assert by["serpentinite"]["Cr (ppm)"] > 1000 and by["serpentinite"]["Ni (ppm)"] > 1000
    assert by["granite"]["SiO2 (wt%)"] > 65 and by["granite"]["K2O (wt%)"] > 3
    assert by["granite"]["Zr (ppm)"] > 150
    assert by["basalt"]["Fe2O3 (wt%)"] > 9 and by["basalt"]["TiO2 (wt%)"] > 1
    assert by["basalt"]["CaO (wt%)"] > 7
    assert by["shale-limestone"]["CaO (wt%)"] > 15 and by["shale-limestone"]["LOI (wt%)"] > 15
    assert by["sandstone"]["SiO2 (wt%)"] > 75
    # The highest median of each signature part belongs to its own rock.
    assert med["MgO (wt%)"].idxmax() == med["Ni (ppm)"].idxmax() == med["Cr (ppm)"].idxmax()
    assert "serpentinite" in med["MgO (wt%)"].idxmax()
    assert "basalt" in med["TiO2 (wt%)"].idxmax()
    assert "granite" in med["K2O (wt%)"].idxmax()


def test_log_ratios_within_a_catchment_are_normal(big_clean: pd.DataFrame) -> None:
    # Logistic-normal model: a log-ratio of two majors is normal within a catchment
    # (D'Agostino-Pearson test, scipy.stats.normaltest), while the plain ratio is right-skewed
    # as a lognormal is (scipy.stats.skew), so the first check has something to tell apart.
    granite = catchment_rows(big_clean, "granite")
    ratio = granite["K2O (wt%)"] / granite["Na2O (wt%)"]
    assert stats.normaltest(np.log(ratio)).pvalue > 1e-3
    assert stats.skew(ratio) > 0.2


def test_noise_is_correlated(big_clean: pd.DataFrame) -> None:
    basalt = catchment_rows(big_clean, "basalt")
    ok = (basalt["Cr (ppm)"] > 0) & (basalt["Ni (ppm)"] > 0)
    cr = np.log(basalt.loc[ok, "Cr (ppm)"] / basalt.loc[ok, "SiO2 (wt%)"])
    ni = np.log(basalt.loc[ok, "Ni (ppm)"] / basalt.loc[ok, "SiO2 (wt%)"])
    # Pearson correlation (scipy.stats.pearsonr): Cr and Ni rise together.
    assert stats.pearsonr(cr, ni).statistic > 0.4


def test_contaminated_outliers_exist_but_are_rare(big_clean: pd.DataFrame) -> None:
    cu = big_clean["Cu (ppm)"]
    zn = big_clean["Zn (ppm)"]
    median_cu = big_clean.groupby("catchment", observed=True)["Cu (ppm)"].transform("median")
    hot = (cu > 10 * median_cu) & (cu > 500) & (zn > 400)
    assert 0.001 <= hot.mean() <= 0.006


# --- intake, when present -----------------------------------------------------------------


@pytest.mark.skipif(
    importlib.util.find_spec("compwidgets.intake") is None, reason="intake not written yet"
)
def test_intake_reads_the_demo(text: pd.DataFrame, clean: pd.DataFrame) -> None:
    from compwidgets.composition import BELOW_DL, MISSING
    from compwidgets.intake import read_composition

    # The plain call runs and finds every demo part (it may add the unitless coordinates).
    plain = read_composition(text, detection_limits=demo.DETECTION_LIMITS)
    assert set(demo.MAJORS + demo.TRACES) <= set(plain.values.columns)

    result = read_composition(text, parts=PART_COLS, detection_limits=demo.DETECTION_LIMITS)
    assert list(result.values.columns) == list(demo.MAJORS + demo.TRACES)
    assert len(result.values) == len(text)
    for part, col in zip(demo.TRACES, TRACE_COLS, strict=True):
        cells = text[col]
        is_text = cells.map(lambda c: isinstance(c, str)).to_numpy()
        token = cells.astype(str).to_numpy()
        missing = is_text & np.isin(token, list(MISSING_TOKENS))
        np.testing.assert_array_equal(result.status[part].to_numpy() == MISSING, missing)
        np.testing.assert_array_equal(
            result.status[part].to_numpy() == BELOW_DL, is_text & ~missing
        )
    # Common practice: 1 wt% = 10,000 ppm, so Cu's 2 ppm limit is 0.0002 wt%.
    if result.unit == "wt%":
        assert result.detection_limits["Cu"].iloc[0] == pytest.approx(2e-4)
    # Grossly wrong totals (mis-weighed samples) are flagged by intake.
    total = analytical_total(clean)
    # intake names the rows by the sample ids (the detected id column)
    gross = text["sample_id"][(total < 95.0) | (total > 105.0)]
    assert len(gross) > 0
    assert set(gross) <= set(result.flags.index)
