"""The shared model: selection, caching, validation and notifications (no browser)."""

import numpy as np
import pandas as pd
import pytest
import traitlets

from compwidgets import core
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel, ModelError

PARTS = ["SiO2", "Al2O3", "FeO", "MgO", "CaO"]


@pytest.fixture
def frame():
    rng = np.random.default_rng(3)
    values = np.exp(rng.normal(size=(40, len(PARTS))))
    df = pd.DataFrame(values, columns=PARTS, index=[f"R-{i:03d}" for i in range(40)])
    df["site"] = rng.choice(["upper", "lower"], size=40)
    df.loc["R-005", "MgO"] = np.nan  # a missing part: incomplete for MgO only
    return df


@pytest.fixture
def model(frame):
    return CompositionModel(read_composition(frame, check_total=False), group_column="site")


def count(model, name):
    seen = []
    model.observe(lambda change: seen.append(change), names=[name])
    return seen


def test_selection_notifies_once_and_only_on_change(model):
    seen = count(model, "selection")
    model.select([4, 2, 2, 9])
    assert model.selection.dtype == np.uint32
    assert model.selection.tolist() == [2, 4, 9]
    assert len(seen) == 1
    model.select(np.array([9, 4, 2]))  # the same set: no notification
    model.select([2, 4, 9], mode="add")
    assert len(seen) == 1
    model.clear_selection()
    assert len(seen) == 2 and model.selection.size == 0
    model.clear_selection()
    assert len(seen) == 2


def test_selection_modes_and_masks(model):
    model.select([1, 2, 3])
    model.select([3, 4], mode="add")
    assert model.selection.tolist() == [1, 2, 3, 4]
    model.select([1, 4], mode="remove")
    assert model.selection.tolist() == [2, 3]
    model.select([3, 7], mode="intersect")
    assert model.selection.tolist() == [3]
    model.invert_selection()
    assert model.selection.size == model.n_rows - 1 and 3 not in model.selection
    mask = np.zeros(model.n_rows, bool)
    mask[[0, 5]] = True
    model.select(mask)
    assert model.selection.tolist() == [0, 5]
    assert model.selected_mask().sum() == 2


@pytest.mark.parametrize(
    "rows, message",
    [
        ([0, 40], "outside 0..39"),
        ([-1], "outside 0..39"),
        (np.zeros(3, bool), "needs 40 values"),
        ([0.5], "integer row positions"),
    ],
)
def test_bad_selection_is_refused_and_model_unchanged(model, rows, message):
    model.select([1])
    with pytest.raises(traitlets.TraitError, match=message):
        model.select(rows)
    assert model.selection.tolist() == [1]


def test_selected_frame_keeps_original_labels_and_metadata(model, frame):
    model.select_labels(["R-010", "R-002"])
    out = model.selected_frame()
    assert out.index.tolist() == ["R-002", "R-010"]
    assert out["site"].tolist() == frame.loc[["R-002", "R-010"], "site"].tolist()
    np.testing.assert_allclose(out["SiO2"], frame.loc[["R-002", "R-010"], "SiO2"])
    with pytest.raises(ModelError, match="R-999"):
        model.select_labels(["R-999"])


def test_selection_becomes_a_group_in_the_metadata(model):
    model.select([0, 1, 2])
    versions = count(model, "metadata_version")
    column = model.selection_to_group("cluster A", "in", "out")
    assert len(versions) == 1
    assert model.group_column == "cluster A"
    cats, codes = model.group_codes()
    assert cats == ["in", "out"]
    assert (codes[[0, 1, 2]] == 0).all() and (codes[3:] == 1).all()
    assert column.index.equals(model.index)
    with pytest.raises(ModelError, match="exists already"):
        model.selection_to_group("cluster A")


def test_changing_active_parts_keeps_the_selection(model):
    model.select([3, 5, 8])
    model.active_parts = ["SiO2", "FeO", "CaO"]
    assert model.selection.tolist() == [3, 5, 8]


def test_derived_data_equal_core_and_are_cached(model, frame):
    parts = ["SiO2", "FeO", "MgO"]
    ok = model.complete_rows(parts)
    assert ok.sum() == len(frame) - 1 and not ok[5]  # R-005 lacks MgO
    # reference: the core applied directly to the complete rows of the caller's frame
    expected = core.clr(frame[parts].drop(index="R-005")).to_numpy()
    np.testing.assert_allclose(model.clr(parts)[ok], expected)
    assert np.isnan(model.clr(parts)[5]).all()
    assert model.clr(parts) is model.clr(parts)  # cached: the same array object
    with pytest.raises(ValueError):
        model.clr(parts)[0, 0] = 1.0  # cached arrays are read-only


def test_active_parts_change_invalidates_only_what_depends_on_them(model):
    ternary = model.closed(["SiO2", "FeO", "CaO"])
    model.active_parts = ["SiO2", "Al2O3", "FeO"]
    assert model.closed(["SiO2", "FeO", "CaO"]) is ternary
    assert model.clr().shape == (model.n_rows, 3)


def test_amalgamation_is_a_sum_and_updates_when_redefined(model, frame):
    model.amalgamations = {"FM": ["FeO", "MgO"]}
    model.active_parts = ["SiO2", "Al2O3", "FM"]
    fm = model.part_values(["FM"])[:, 0]
    np.testing.assert_allclose(fm, (frame["FeO"] + frame["MgO"]).to_numpy())
    before = model.closed()
    model.amalgamations = {"FM": ["FeO", "CaO"]}
    after = model.closed()
    assert not np.allclose(before[~np.isnan(before)], after[~np.isnan(before)])
    np.testing.assert_allclose(
        model.part_values(["FM"])[:, 0], (frame["FeO"] + frame["CaO"]).to_numpy()
    )


@pytest.mark.parametrize(
    "parts, message",
    [
        (["SiO2"], "at least 2"),
        (["SiO2", "Xx"], "unknown part"),
        (["SiO2", "SiO2"], "twice"),
    ],
)
def test_invalid_active_parts_leave_the_model_unchanged(model, parts, message):
    before = list(model.active_parts)
    with pytest.raises(traitlets.TraitError, match=message):
        model.active_parts = parts
    assert model.active_parts == before


def test_amalgamation_may_not_double_count(model):
    model.amalgamations = {"FM": ["FeO", "MgO"]}
    with pytest.raises(traitlets.TraitError, match="count a part twice"):
        model.active_parts = ["FM", "FeO", "SiO2"]
    with pytest.raises(traitlets.TraitError, match="FeO"):
        model.amalgamations = {"A": ["FeO", "MgO"], "B": ["FeO", "CaO"]}


def test_sbp_is_validated_and_dropped_when_the_parts_change(model):
    model.active_parts = ["SiO2", "Al2O3", "FeO", "CaO"]
    seen = count(model, "sbp")
    model.set_sbp([[1, 1, -1, -1], [1, -1, 0, 0]], names=["felsic vs rest", ""])
    assert len(seen) == 1
    assert model.balance_names == ["felsic vs rest", "SiO2 | Al2O3"]
    # balances from the model equal the core's on the same complete rows
    ok = model.complete_rows()
    ref = core.balances(model.part_values()[ok], [[1, 1, -1, -1], [1, -1, 0, 0]], complete=False)
    np.testing.assert_allclose(model.balances()[ok], ref)
    with pytest.raises(ModelError, match="row 2"):
        model.set_sbp([[1, 1, -1, -1], [1, 0, -1, 0]])
    assert model.balance_names == ["felsic vs rest", "SiO2 | Al2O3"]
    model.colour_by = "felsic vs rest"
    model.active_parts = ["SiO2", "Al2O3", "FeO"]
    assert model.sbp is None and model.balance_names == [] and model.colour_by == ""


def test_model_needs_a_composition():
    with pytest.raises(TypeError, match="read_composition"):
        CompositionModel(pd.DataFrame({"a": [1.0]}))


def test_unknown_group_column_is_refused(model):
    with pytest.raises(traitlets.TraitError, match="unknown grouping column 'nope'"):
        model.group_column = "nope"
    assert model.group_column == "site"


def test_exports_work_from_the_export_module_and_the_model_does_not_import_it(model, tmp_path):
    # One direction between the modules: export reads the model; the model never imports
    # export, so the two cannot call each other. The model builds the tables of its own
    # SBP (sbp_frame, contrast_frame, ilr_frame); files and documents are export's.
    import ast
    import inspect

    from compwidgets import export
    from compwidgets import model as model_module

    tree = ast.parse(inspect.getsource(model_module))
    imported = [
        (node.module or "") + ":" + ",".join(a.name for a in node.names)
        for node in ast.walk(tree)
        if isinstance(node, ast.ImportFrom)
    ]
    assert not [i for i in imported if "export" in i], imported
    assert not hasattr(model, "load_sbp") and not hasattr(model, "save_ilr_csv")

    model.active_parts = ["SiO2", "Al2O3", "FeO", "CaO"]
    model.set_sbp([[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]])
    # the balances are the core's balances of the same SBP (complete rows)
    ok = model.complete_rows()
    np.testing.assert_allclose(
        export.ilr_frame(model).to_numpy()[ok], core.balances(model.part_values()[ok], model.sbp)
    )
    pd.testing.assert_frame_equal(model.ilr_frame(), export.ilr_frame(model))
    pd.testing.assert_frame_equal(model.sbp_frame(), export.sbp_frame(model))
    pd.testing.assert_frame_equal(model.contrast_frame(), export.contrast_frame(model))
    doc = export.save_sbp(model, tmp_path / "sbp.json")
    model.set_sbp([[1, -1, 1, -1], [1, 0, -1, 0], [0, 1, 0, -1]])
    export.load_sbp(model, doc)
    np.testing.assert_array_equal(model.sbp, [[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]])
    csv = export.save_ilr_csv(model, tmp_path / "ilr.csv")
    back = pd.read_csv(csv, index_col=0)
    np.testing.assert_allclose(back.to_numpy(), export.ilr_frame(model).to_numpy(), equal_nan=True)
    model.select([0, 1])
    export.save_selected_csv(model, tmp_path / "selected.csv")
    assert pd.read_csv(tmp_path / "selected.csv", index_col=0).index.tolist() == ["R-000", "R-001"]


def test_assigning_an_equal_selection_array_does_not_notify(model):
    seen = count(model, "selection")
    model.selection = np.array([5, 7], dtype=np.uint32)
    model.selection = np.array([5, 7], dtype=np.int64)  # equal set of rows
    model.selection = np.array([7, 5])  # unsorted: validated to the same rows
    assert len(seen) == 1
    model.selection = np.zeros(0, dtype=np.uint32)
    model.selection = np.zeros(0, dtype=np.uint32)
    assert len(seen) == 2


def test_redefining_an_active_amalgamation_cannot_count_a_part_twice(model):
    model.amalgamations = {"FM": ["FeO", "MgO"]}
    model.active_parts = ["FM", "CaO", "SiO2"]
    model.set_sbp([[1, -1, -1], [0, 1, -1]])
    with pytest.raises(traitlets.TraitError, match="CaO twice"):
        model.amalgamations = {"FM": ["FeO", "CaO"]}
    assert model.amalgamations == {"FM": ["FeO", "MgO"]}
    assert model.sbp is not None
    # a valid redefinition keeps the partition; the balances follow the new members
    model.amalgamations = {"FM": ["FeO", "MgO", "Al2O3"]}
    assert model.sbp is not None
    fm = model.part_values(["FM"])[:, 0]
    parts = model.composition.values
    np.testing.assert_allclose(fm, (parts["FeO"] + parts["MgO"] + parts["Al2O3"]).to_numpy())


def test_cached_arrays_are_read_only(model):
    model.select([1, 2])
    for array in (model.selected_mask(), model.part_values(), model.complete_rows()):
        with pytest.raises(ValueError):
            array[0] = array[0]


def test_sbp_tables_without_an_sbp_are_refused_as_composition_errors(model):
    # A table of an SBP that is not set is a refusal the user can catch with one except.
    for method in (model.sbp_frame, model.contrast_frame, model.ilr_frame):
        with pytest.raises(core.CompositionError, match="no SBP"):
            method()


def test_sbp_frame_of_one_model_keeps_its_meaning_in_a_model_with_reordered_parts(model):
    # Balances are defined by which parts sit in numerator and denominator
    # (Egozcue & Pawlowsky-Glahn 2005), so a label-matched SBP gives the same
    # balances whatever the column order of the receiving model.
    model.active_parts = ["SiO2", "Al2O3", "FeO", "CaO"]
    model.set_sbp([[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]])
    other = CompositionModel(model.composition, active_parts=["CaO", "FeO", "SiO2", "Al2O3"])
    other.set_sbp(model.sbp_frame())
    np.testing.assert_allclose(other.balances(), model.balances(), equal_nan=True)
    assert other.balance_names == model.balance_names
