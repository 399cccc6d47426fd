"""The selection bar, kernel-side (no browser).

Exported files are compared byte for byte with what ``compwidgets.export``
writes for the same model, and the first balance in the ilr file is checked
against its definition ``sqrt(r s / (r + s)) ln(g(x+) / g(x-))`` (Egozcue &
Pawlowsky-Glahn 2005) computed with numpy. The data are random and invented here.
"""

from __future__ import annotations

import ipywidgets as widgets
import numpy as np
import pandas as pd
import pytest

from compwidgets import export
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.views.selection_bar import SelectionBar

EVIL = "<img src=x onerror=alert(1)>"
PARTS = ["Sand", "Silt", "Clay", EVIL, "Org"]
SBP = [[1, 1, -1, -1, -1], [1, -1, 0, 0, 0], [0, 0, 1, -1, -1], [0, 0, 0, 1, -1]]


def frame(n: int = 40) -> pd.DataFrame:
    rng = np.random.default_rng(5)
    df = pd.DataFrame(
        np.exp(rng.normal(size=(n, 5)) * 0.5 + [2, 1.5, 1, 0.2, 0.5]),
        columns=PARTS,
        index=[f"C{i:04d}" for i in range(n)],
    )
    df.iloc[3, 1] = np.nan  # one incomplete row: it is still exported, with empty balances
    df["plot"] = rng.choice(["north", "south"], size=n)
    return df


@pytest.fixture
def model():
    return CompositionModel(read_composition(frame(), check_total=False))


@pytest.fixture
def bar(model):
    return SelectionBar(model)


# ------------------------------------------------------------------ the count


def test_count_follows_the_model(bar, model):
    assert bar.count_value.value == "0" and bar.count == 0
    assert bar.count_label.value == "0 of 40 rows selected"
    model.select([1, 5, 9])
    assert bar.count_value.value == "3"
    assert bar.count_label.value == "3 of 40 rows selected"


def test_large_counts_are_easy_to_read():
    model = CompositionModel(read_composition(frame(2000), check_total=False))
    bar = SelectionBar(model)
    model.select(np.arange(0, 2000, 2))
    assert bar.count_label.value == "1,000 of 2,000 rows selected"
    assert int(bar.count_value.value) == 1000


def test_clear_and_invert(bar, model):
    model.select([0, 2])
    bar.invert_button.click()
    assert bar.count == 38
    assert 0 not in model.selection and 2 not in model.selection
    assert np.setdiff1d(np.arange(40), model.selection).tolist() == [0, 2]
    bar.clear_button.click()
    assert model.selection.size == 0 and bar.count_value.value == "0"


# ------------------------------------------------------------------- groups


def test_group_from_the_selection(bar, model):
    model.select([4, 7])
    bar.group_name.value = "picked"
    bar.group_button.click()
    column = model.metadata["picked"]
    assert (column == "selected").to_numpy().nonzero()[0].tolist() == [4, 7]
    assert (column == "other").sum() == 38
    assert model.group_column == "picked"
    assert "'picked'" in bar.status.value and "2 rows selected" in bar.status.value


@pytest.mark.parametrize("name, message", [("plot", "exists already"), ("  ", "non-empty")])
def test_bad_group_names_are_refused(bar, model, name, message):
    model.select([1])
    before = list(model.metadata.columns)
    assert bar.make_group(name) is False
    assert list(model.metadata.columns) == before
    assert message in bar.status.value


def test_no_group_from_an_empty_selection(bar, model):
    before = list(model.metadata.columns)
    assert bar.make_group("nothing") is False
    assert list(model.metadata.columns) == before
    assert "nothing is selected" in bar.status.value


# ------------------------------------------------------------------- exports


def test_ilr_export_matches_the_export_module(bar, model, tmp_path):
    model.set_sbp(SBP)
    bar.file_name.value = str(tmp_path / "coords")  # the suffix is added
    bar.ilr_button.click()
    written = tmp_path / "coords.csv"
    reference = export.save_ilr_csv(model, tmp_path / "reference.csv")
    assert written.read_bytes() == reference.read_bytes()
    assert str(written) in bar.status.value and "40 rows" in bar.status.value
    # every count names what it counts (one row of the frame lacks a part)
    assert "40 rows x 4 balances; 1 row of them incomplete" in bar.status.value
    # first balance by its definition (Egozcue & Pawlowsky-Glahn 2005): Sand, Silt | rest
    data = pd.read_csv(written, index_col=0)
    x = frame()[PARTS].to_numpy()
    gm = lambda cols: np.exp(np.log(x[:, cols]).mean(axis=1))  # noqa: E731
    b1 = np.sqrt(2 * 3 / 5) * np.log(gm([0, 1]) / gm([2, 3, 4]))
    ok = np.isfinite(b1)
    np.testing.assert_allclose(data.iloc[:, 0].to_numpy()[ok], b1[ok], rtol=1e-9)
    assert data.iloc[3].isna().all()  # the incomplete row is there, empty


def test_sbp_export_matches_the_export_module(bar, model, tmp_path):
    model.set_sbp(SBP)
    bar.file_name.value = str(tmp_path / "partition.json")
    bar.sbp_button.click()
    reference = export.save_sbp(model, tmp_path / "reference.json")
    assert (tmp_path / "partition.json").read_bytes() == reference.read_bytes()
    assert "4 balances over 5 parts" in bar.status.value


def test_selected_rows_export_matches_the_export_module(bar, model, tmp_path):
    model.select([2, 3, 30])
    bar.file_name.value = str(tmp_path / "picked.csv")
    bar.selected_button.click()
    reference = tmp_path / "reference.csv"
    n = export.save_selected_csv(model, reference)
    assert (tmp_path / "picked.csv").read_bytes() == reference.read_bytes()
    assert n == 3 and "(3 rows)" in bar.status.value
    assert pd.read_csv(tmp_path / "picked.csv", index_col=0).index.tolist() == [
        "C0002",
        "C0003",
        "C0030",
    ]


def test_exports_without_an_sbp_say_so(bar, model, tmp_path):
    bar.file_name.value = str(tmp_path / "x")
    for button, suffix in ((bar.ilr_button, "csv"), (bar.sbp_button, "json")):
        button.click()
        assert "no SBP yet: build one in the balance builder" in bar.status.value
        assert not (tmp_path / f"x.{suffix}").exists()


@pytest.mark.parametrize(
    "name, message",
    [("", "type a file name first"), ("out.txt", "does not end in .csv")],
)
def test_bad_file_names_are_refused(bar, model, tmp_path, name, message):
    model.select([1])
    bar.file_name.value = str(tmp_path / name) if name else ""
    bar.selected_button.click()
    assert message in bar.status.value
    assert list(tmp_path.iterdir()) == []


def test_missing_folder_is_named(bar, model, tmp_path):
    model.select([1])
    bar.file_name.value = str(tmp_path / "no-such-folder" / "picked.csv")
    bar.selected_button.click()
    assert "does not exist" in bar.status.value and "no-such-folder" in bar.status.value


def test_existing_files_are_kept_unless_overwrite_is_ticked(bar, model, tmp_path):
    target = tmp_path / "picked.csv"
    target.write_text("keep me", encoding="utf-8")
    model.select([1])
    bar.file_name.value = str(target)
    bar.selected_button.click()
    assert target.read_text(encoding="utf-8") == "keep me"
    assert "exists already" in bar.status.value
    bar.overwrite.value = True
    bar.selected_button.click()
    assert target.read_text(encoding="utf-8") != "keep me"
    assert "Wrote selected rows" in bar.status.value


def test_empty_selection_export_is_refused(bar, tmp_path):
    bar.file_name.value = str(tmp_path / "picked.csv")
    bar.selected_button.click()
    assert "nothing is selected" in bar.status.value
    assert not (tmp_path / "picked.csv").exists()


# ------------------------------------------------------------------ figures


def test_figures_are_not_saved_here(bar):
    # each view saves its own figure (its "Save figure" control); the bar keeps the CSV
    # export of the selected rows and lists no views
    def walk(widget):
        yield widget
        for child in getattr(widget, "children", ()):
            yield from walk(child)

    texts = [getattr(w, "description", "") for w in walk(bar)]
    assert "Selected rows (CSV)" in texts
    assert not [t for t in texts if "PNG" in t or "SVG" in t or t == "View"]
    assert not hasattr(bar, "export_view") and not hasattr(bar, "view_select")


def test_messages_is_the_error_area(bar, model):
    # the same name as in the scatter views: errors raised in callbacks are shown there
    assert isinstance(bar.messages, widgets.Output)
    assert bar.messages in bar.children and bar.status in bar.children


# ------------------------------------------------------------------ text only


def test_only_text_widgets(model):
    bar = SelectionBar(model)

    def walk(widget):
        yield widget
        for child in getattr(widget, "children", ()):
            yield from walk(child)

    for widget in walk(bar):
        assert not isinstance(widget, (widgets.HTML, widgets.HTMLMath))
        if hasattr(widget, "description_allow_html"):
            assert widget.description_allow_html is False
