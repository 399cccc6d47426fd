"""The triage panel, kernel-side (no browser).

Every item is cross-checked against the intake output read directly
(``composition.status``, ``.flags``, ``.report``) and against what was planted
in the invented table. The outlier item is checked against a direct
``sklearn.covariance.MinCovDet`` fit on the same ilr coordinates with the
``scipy.stats.chi2`` cut-off of Filzmoser & Hron (2008, Math. Geosci. 40).
The 98.5-101.5 wt% total window is intake's default (common practice, quoted
from memory in intake's docstring).
"""

from __future__ import annotations

import ipywidgets as widgets
import numpy as np
import pandas as pd
import pytest
from scipy import stats
from sklearn.covariance import MinCovDet

from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views.triage import CAUTION, TriagePanel, intake_items

EVIL = "<img src=x onerror=alert(1)>"
MAJORS = ["SiO2", "Al2O3", "FeO", "MgO", EVIL]
N = 80


def rows_text(n: int) -> str:
    """A count of rows as the panel words it: the unit named, singular for one."""
    return f"{n:,} row" if n == 1 else f"{n:,} rows"


def invented_table() -> tuple[pd.DataFrame, dict]:
    """Majors in wt% summing to 100 and Cu in ppm, with planted problems."""
    rng = np.random.default_rng(21)
    logs = rng.normal(size=(N, 5)) * [0.05, 0.08, 0.15, 0.2, 0.1] + np.log([60, 15, 8, 5, 4])
    majors = np.exp(logs)
    majors = 100 * majors / majors.sum(axis=1, keepdims=True)
    ids = [f"S{i:02d}" for i in range(N)]
    df = pd.DataFrame(np.round(majors, 2), columns=[f"{m} (wt%)" for m in MAJORS], index=ids)
    df.loc["S20", "FeO (wt%)"] *= 12  # a composition far from the others...
    row = df.loc["S20"]
    df.loc["S20"] = np.round(100 * row / row.sum(), 2)  # ...with a normal total
    df.loc["S05"] = np.round(df.loc["S05"] * 0.95, 2)  # total about 95 wt%: low
    df.loc["S07"] = np.round(df.loc["S07"] * 1.04, 2)  # total about 104 wt%: high
    cu = np.round(np.exp(rng.normal(3.5, 0.3, size=N)), 0).astype(object)
    cu[10] = "<5"
    cu[11] = "bdl"
    df["Cu (ppm)"] = cu
    df.loc["S12", "MgO (wt%)"] = np.nan  # not analysed
    df["site"] = rng.choice(["creek", "ridge"], size=N)
    # S12 lacks MgO, so the sum of its observed parts is low as well
    planted = {
        "low": ["S05", "S12"],
        "high": ["S07"],
        "below": ["S10", "S11"],
        "missing": ["S12"],
    }
    return df, planted


@pytest.fixture
def table():
    return invented_table()


@pytest.fixture
def model(table):
    df, _ = table
    return CompositionModel(read_composition(df, detection_limits={"Cu": 5.0}))


@pytest.fixture
def panel(model):
    return TriagePanel(model)


def item(panel, start):
    found = [(label, pos) for label, pos in panel.items if label.startswith(start)]
    assert len(found) == 1, [label for label, _ in panel.items]
    return found[0]


def positions(model, labels):
    return sorted(model.index.get_indexer(labels).tolist())


def walk(widget):
    yield widget
    for child in getattr(widget, "children", ()):
        yield from walk(child)


# ------------------------------------------------------------------- the caution


def test_caution_is_shown_above_the_panel(panel):
    assert panel.children[0] is panel.caution
    text = panel.caution.value.lower()
    assert "exploratory" in text
    assert "accredited laboratory qa/qc" in text and "local regulations" in text
    assert panel.caution.value == CAUTION


# ---------------------------------------------------------- intake, cross-checked


def test_flagged_rows_match_the_flags(panel, model, table):
    _, planted = table
    flags = model.composition.flags
    label, pos = item(panel, "all flagged rows")
    assert sorted(pos.tolist()) == positions(model, flags.index)
    assert label.endswith(f"({rows_text(len(flags))})")
    # the planted problems are all among them
    for rows in planted.values():
        if rows is not planted["below"]:
            assert set(positions(model, rows)) <= set(pos.tolist())
    _, pos = item(panel, "flagged: missing part(s)")
    expected = flags.index[flags["reason"].str.contains("missing part")]
    assert sorted(pos.tolist()) == positions(model, expected) == positions(model, ["S12"])


def test_totals_outside_the_window(panel, model, table):
    df, planted = table
    # totals computed here from the table itself (majors in wt% + Cu ppm / 10^4)
    majors = df[[f"{m} (wt%)" for m in MAJORS]].sum(axis=1, skipna=True)
    cu = pd.to_numeric(df["Cu (ppm)"], errors="coerce").fillna(0) / 1e4
    total = majors + cu
    low = total.index[total < 98.5].tolist()
    high = total.index[total > 101.5].tolist()
    assert low == planted["low"] and high == planted["high"]
    _, pos = item(panel, "analytical total below 98.5")
    assert sorted(pos.tolist()) == positions(model, low)
    _, pos = item(panel, "analytical total above 101.5")
    assert sorted(pos.tolist()) == positions(model, high)


def test_missing_and_below_detection_per_part_match_the_status(panel, model, table):
    _, planted = table
    status = model.composition.status
    for part in model.composition.parts:
        for kind, text in (("missing", "missing"), ("below_dl", "below detection")):
            expected = np.flatnonzero(status[part].to_numpy() == kind).tolist()
            labels = [lab for lab, _ in panel.items if lab.startswith(f"{part}: {text} (")]
            if not expected:
                assert labels == []
                continue
            label, pos = item(panel, f"{part}: {text} (")
            assert pos.tolist() == expected and label.endswith(f"({rows_text(len(expected))})")
    assert item(panel, "Cu: below detection")[1].tolist() == positions(model, planted["below"])
    assert item(panel, "MgO: missing")[1].tolist() == positions(model, planted["missing"])


def test_replaced_values_match_the_report(panel, model):
    report = model.composition.report
    replaced = report[report["action"] == "replaced"]
    assert sorted(replaced["row"]) == ["S10", "S11"] and set(replaced["column"]) == {"Cu"}
    label, pos = item(panel, "Cu: replaced")
    assert pos.tolist() == positions(model, replaced["row"])
    # by how much, in the unit Cu was reported in: the limit 5 ppm and the value put in
    # its place (the report holds wt%: 1 wt% = 10,000 ppm, common practice)
    assert "detection limit 5 ppm" in label
    values = replaced["value"].to_numpy(dtype=float)
    assert f"now {values.min() * 1e4:.3g} ppm" in label  # both rows had the same limit
    # intake's default fraction 0.65 of the limit (Martin-Fernandez et al. 2003 style)
    np.testing.assert_allclose(values, 0.65 * 0.0005, rtol=1e-9)


def test_intake_items_do_not_need_widgets(model):
    items = intake_items(model.composition)
    assert {i.section for i in items} >= {"Flagged rows", "Analytical totals", "Below detection"}
    assert all(i.count == i.positions.size > 0 for i in items)


def test_demo_survey_items_match_status_and_flags():
    from compwidgets.demo import DETECTION_LIMITS, MAJORS, TRACES, stream_sediments

    sheet = stream_sediments(400, seed=3)
    comp = read_composition(sheet, parts=list(MAJORS + TRACES), detection_limits=DETECTION_LIMITS)
    model = CompositionModel(comp)
    panel = TriagePanel(model)
    by_label = dict(panel.items)
    status = comp.status.to_numpy()
    for j, part in enumerate(comp.parts):
        for kind, text in (("below_dl", "below detection"), ("missing", "missing")):
            rows = np.flatnonzero(status[:, j] == kind)
            label = f"{part}: {text} ({rows_text(rows.size)})"
            assert (label in by_label) == bool(rows.size)
            if rows.size:
                assert by_label[label].tolist() == rows.tolist()
    flags = comp.flags
    assert by_label[f"all flagged rows ({rows_text(len(flags))})"].tolist() == positions(
        model, flags.index
    )
    lo, hi = comp.settings["total_window"]
    low = flags.index[flags["total"] < lo]
    if len(low):
        assert by_label[
            f"analytical total below {lo:g} wt% ({rows_text(len(low))})"
        ].tolist() == positions(model, low)
    replaced = comp.report[comp.report["action"] == "replaced"]
    for part, rows in replaced.groupby("column")["row"]:
        (label,) = [lab for lab in by_label if lab.startswith(f"{part}: replaced")]
        assert by_label[label].tolist() == positions(model, rows)


# ----------------------------------------------------------------- outliers


def direct_outliers(model, parts, quantile=0.975):
    """Source: sklearn MinCovDet + scipy chi2 (Filzmoser & Hron 2008), on the model's ilr."""
    ok = model.complete_rows(parts)
    Y = np.asarray(model.ilr(parts))[ok]
    mcd = MinCovDet(random_state=0).fit(Y)
    d = np.sqrt(mcd.mahalanobis(Y))
    cut = np.sqrt(stats.chi2.ppf(quantile, Y.shape[1]))
    return np.flatnonzero(ok)[d > cut].tolist(), cut


def test_outliers_equal_a_direct_robust_fit_and_find_the_planted_row(panel, model):
    expected, cut = direct_outliers(model, model.active_parts)
    label, pos = item(panel, "outliers")
    assert pos.tolist() == expected
    assert f"{cut:.2f}" in label
    assert model.index.get_loc("S20") in pos.tolist()
    assert f"{model.n_rows - 1:,} complete rows" in panel.outlier_label.value
    assert "1 row with a missing or zero value" in panel.outlier_label.value
    # 79 rows for 5 coordinates is few for the MCD: the panel says so
    assert "few rows for 5 coordinates" in panel.outlier_label.value


def test_outliers_are_recomputed_when_the_active_parts_change(panel, model):
    parts = ["SiO2", "Al2O3", "MgO"]
    model.active_parts = parts
    expected, cut = direct_outliers(model, parts)
    assert panel.outliers.location.size == 2  # D - 1 coordinates
    found = [pos.tolist() for label, pos in panel.items if label.startswith("outliers")]
    assert found == ([expected] if expected else [])
    assert f"{cut:.2f}" in panel.outlier_label.value


def test_quantile_moves_only_the_cutoff(panel, model):
    before = panel.distances.copy()
    panel.quantile.value = 0.999
    expected, cut = direct_outliers(model, model.active_parts, 0.999)
    np.testing.assert_array_equal(panel.distances, before)
    found = [pos.tolist() for label, pos in panel.items if label.startswith("outliers")]
    assert found == ([expected] if expected else [])
    assert f"{cut:.2f}" in panel.outlier_label.value


def test_screening_each_group_on_its_own(panel, model):
    assert panel.by_group.disabled  # no grouping column yet
    model.group_column = "site"
    assert not panel.by_group.disabled
    panel.by_group.value = True
    assert set(panel.fits) == {"creek", "ridge"} and panel.outliers is None
    ok = model.complete_rows()
    Y = np.asarray(model.ilr())
    site = model.metadata["site"].to_numpy()
    expected = []
    for group in ("creek", "ridge"):
        rows = np.flatnonzero(ok & (site == group))
        # Source: sklearn MinCovDet on the rows of that group only, scipy chi2 cut-off
        d = np.sqrt(MinCovDet(random_state=0).fit(Y[rows]).mahalanobis(Y[rows]))
        found = rows[d > np.sqrt(stats.chi2.ppf(0.975, Y.shape[1]))].tolist()
        expected += found
        if found:
            assert item(panel, f"outliers in {group}")[1].tolist() == found
    assert item(panel, "outliers, distance")[1].tolist() == sorted(expected)
    assert "each group on its own" in panel.outlier_label.value
    panel.by_group.value = False
    assert set(panel.fits) == {None}


def test_large_tables_fit_on_a_sample_and_say_so(model):
    panel = TriagePanel(model, max_fit_rows=30)
    fit = panel.outliers
    assert fit.fitted.sum() == 30 and fit.distances.size == model.n_rows - 1
    assert "MCD fitted on a random 30 of 79 rows" in panel.outlier_label.value
    assert np.isfinite(panel.distances).sum() == model.n_rows - 1


# ----------------------------------------------------------------- clicking


def test_clicking_an_item_selects_its_rows_once(panel, model):
    seen = []
    model.observe(seen.append, names=["selection"])
    k = [label for label, _ in panel.items].index(item(panel, "Cu: below detection")[0])
    panel.buttons[k].click()
    assert len(seen) == 1
    assert model.selection.tolist() == panel.items[k][1].tolist()
    panel.buttons[k].click()  # the same rows again: nothing changes, no notification
    assert len(seen) == 1


def test_click_mode_adds_to_the_selection(panel, model):
    labels = [label for label, _ in panel.items]
    low = labels.index(item(panel, "analytical total below")[0])
    high = labels.index(item(panel, "analytical total above")[0])
    panel.buttons[low].click()
    panel.mode.value = "add"
    panel.buttons[high].click()
    expected = sorted(panel.items[low][1].tolist() + panel.items[high][1].tolist())
    assert model.selection.tolist() == expected


def test_flagged_row_list_selects_one_row(panel, model):
    labels = [text for text, _ in panel.flag_list.options]
    k = next(i for i, text in enumerate(labels) if text.startswith("S12:"))
    assert "missing part(s): MgO" in labels[k]
    panel.flag_list.value = panel.flag_list.options[k][1]
    assert model.selection.tolist() == [model.index.get_loc("S12")]


# ----------------------------------------------------------------- text only


def test_part_names_and_reasons_are_plain_text(panel, model):
    model.active_parts = ["SiO2", EVIL, "Al2O3"]
    texts = [b.description for b in panel.buttons] + [panel.outlier_label.value]
    texts += [text for text, _ in panel.flag_list.options]
    assert not any("&lt;" in s for s in texts)  # nothing escaped: it is text, not markup
    for widget in walk(panel):
        assert not isinstance(widget, (widgets.HTML, widgets.HTMLMath))
        if hasattr(widget, "description_allow_html"):
            assert widget.description_allow_html is False


def test_part_named_like_markup_shows_verbatim(model):
    df = pd.DataFrame(
        {"SiO2 (wt%)": [60.0, 61.0, 59.0], EVIL: ["<1", 29.0, 31.0], "CaO": [10.0, 9.0, 9.5]},
        index=["a", "b", "c"],
    )
    panel = TriagePanel(
        CompositionModel(read_composition(df, detection_limits={EVIL: 1.0}, check_total=False))
    )
    labels = [label for label, _ in panel.items]
    assert f"{EVIL}: below detection (1 row)" in labels
    assert (
        "No outlier screening" in panel.outlier_label.value
    )  # 3 rows, 2 coordinates: too few, said so


def test_a_grouped_table_is_screened_group_by_group_by_default(model):
    model.group_column = "site"
    assert TriagePanel(model).by_group.value
    assert not TriagePanel(model, by_group=False).by_group.value
    model.group_column = ""
    assert not TriagePanel(model).by_group.value


def test_cell_items_from_the_codes_match_the_status_of_every_cell(monkeypatch):
    """Every kind of missing and below-detection cell, read back from the report's codes,
    gives the rows that intake's own status frame (an independent record) marks."""
    import compwidgets.views.triage as triage

    rng = np.random.default_rng(4)
    n = 30
    frame = pd.DataFrame(
        {
            "SiO2 (wt%)": np.round(rng.uniform(55, 65, n), 2),
            "Al2O3 (wt%)": np.round(rng.uniform(12, 16, n), 2),
            "Cu (ppm)": np.round(rng.uniform(20, 90, n), 1).astype(object),
            "Zn (ppm)": np.round(rng.uniform(40, 120, n), 1).astype(object),
        },
        index=[f"R{i:02d}" for i in range(n)],
    )
    frame.iloc[[2, 9], 2] = "<5"  # '<limit' entries
    frame.iloc[4, 2] = "bdl"  # a below-detection token
    frame.iloc[6, 3] = 0.0  # a zero read as below detection
    frame.iloc[7, 3] = -3.0  # a negative value read as below detection
    frame.iloc[11, 3] = None  # an empty cell
    frame.iloc[13, 3] = "n.a."  # a missing-value token
    frame.iloc[15, 0] = np.nan  # not analysed
    comp = read_composition(
        frame,
        detection_limits={"Cu": 5.0, "Zn": 3.0},
        negative_is_below_detection=True,
        missing_tokens=["n.a."],
        check_total=False,
    )
    looked_up = []
    real = triage._positions
    monkeypatch.setattr(triage, "_positions", lambda *a, **k: looked_up.append(1) or real(*a, **k))
    items = {i.label: i for i in intake_items(comp)}
    replaced_parts = {label.split(":")[0] for label in items if ": replaced" in label}
    # counts come from the codes: only the replaced values (their labels quote the values)
    # needed the rows, one look-up per part
    assert len(looked_up) == len(replaced_parts) == 2
    status = comp.status.to_numpy()
    for j, part in enumerate(comp.parts):
        for kind, text in (("below_dl", "below detection"), ("missing", "missing")):
            rows = np.flatnonzero(status[:, j] == kind)
            label = f"{part}: {text}"
            assert (label in items) == bool(rows.size), label
            if rows.size:
                assert items[label].count == rows.size
                assert items[label].positions.tolist() == rows.tolist()
    assert items["Cu: below detection"].positions.tolist() == [2, 4, 9]
    assert items["Zn: below detection"].positions.tolist() == [6, 7]
    assert items["Zn: missing"].positions.tolist() == [11, 13]
    assert items["SiO2: missing"].positions.tolist() == [15]
    # the positions, once found, are kept
    before = len(looked_up)
    assert items["Zn: missing"].positions.tolist() == [11, 13]
    assert len(looked_up) == before
