"""One rulebook (core.rules), label-matched SBP and contrast tables, and round trips.

References used here, outside the code under test:
- the balance of an SBP row from its definition, sqrt(r s / (r + s)) ln(g(x+) / g(x-))
  (Egozcue & Pawlowsky-Glahn 2005, Mathematical Geology 37(7); from memory), evaluated
  with numpy on the caller's own columns picked by name;
- an SBP built by the test itself by splitting groups at random (the definition of a
  sequential binary partition: each row splits one group made by the rows above).
All tables are invented.
"""

from __future__ import annotations

import shutil
import tempfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import traitlets
from conftest import valid_sbps
from hypothesis import settings
from hypothesis import strategies as st
from hypothesis.stateful import RuleBasedStateMachine, invariant, rule

from compwidgets import core, export
from compwidgets.core import CompositionError, SBPError
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel, ModelError
from compwidgets.transformer import BalanceTransformer

PARTS = ["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO"]
SBP = np.array(
    [
        [1, 1, -1, -1, -1],
        [1, -1, 0, 0, 0],
        [0, 0, 1, -1, -1],
        [0, 0, 0, 1, -1],
    ]
)
NAMES = ["felsic | mafic", "Si | Al", "Fe | MgCa", "Mg | Ca"]


def table(columns, n=30, seed=0) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    values = np.exp(rng.normal(size=(n, len(columns))) + np.linspace(2, 0, len(columns)))
    frame = pd.DataFrame(
        values, columns=list(columns), index=[f"K-{seed}-{i:03d}" for i in range(n)]
    )
    frame.insert(0, "site", np.array(["upper", "lower", "ford"])[np.arange(n) % 3])
    return frame


def model_of(frame: pd.DataFrame) -> CompositionModel:
    parts = [c for c in frame.columns if c != "site"]
    return CompositionModel(read_composition(frame, parts=parts, check_total=False))


def balance_by_definition(frame: pd.DataFrame, numerator, denominator) -> np.ndarray:
    """Balance from its definition, on the caller's columns picked by name."""
    r, s = len(numerator), len(denominator)
    num = np.log(frame[list(numerator)].to_numpy(dtype=float)).mean(axis=1)
    den = np.log(frame[list(denominator)].to_numpy(dtype=float)).mean(axis=1)
    return np.sqrt(r * s / (r + s)) * (num - den)


def expected_balances(frame: pd.DataFrame, sbp=SBP, parts=PARTS) -> np.ndarray:
    cols = []
    for row in np.asarray(sbp):
        num = [p for p, v in zip(parts, row, strict=True) if v > 0]
        den = [p for p, v in zip(parts, row, strict=True) if v < 0]
        cols.append(balance_by_definition(frame, num, den))
    return np.column_stack(cols)


# ---------------------------------------------------------------- SBP tables by label
def test_an_sbp_table_is_matched_by_its_column_labels():
    frame = table(PARTS)
    model = model_of(frame)
    reordered = ["CaO", "SiO2", "MgO", "Al2O3", "Fe2O3"]
    sbp = pd.DataFrame(SBP, columns=PARTS, index=NAMES)[reordered]  # same SBP, columns shuffled
    model.set_sbp(sbp)
    np.testing.assert_array_equal(model.sbp, SBP)  # reordered back to the active parts
    assert model.balance_names == NAMES  # the table's index names the balances
    np.testing.assert_allclose(export.ilr_frame(model).to_numpy(), expected_balances(frame))


@pytest.mark.parametrize(
    ("columns", "named"),
    [
        (["SiO2", "Al2O3", "Fe2O3", "MgO", "Cr2O3"], r"'Cr2O3' are not among.*'CaO' have no"),
        (["SiO2", "Al2O3", "Fe2O3", "MgO"], r"part\(s\) 'CaO' have no column"),
        (["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO", "Na2O"], r"column\(s\) 'Na2O' are not"),
    ],
)
def test_unknown_or_missing_sbp_labels_are_refused_by_name(columns, named):
    model = model_of(table(PARTS))
    model.set_sbp(SBP, names=NAMES)
    before = (model.sbp.copy(), list(model.balance_names))
    bad = pd.DataFrame(np.zeros((4, len(columns)), dtype=int), columns=columns)
    bad.iloc[:, : min(5, len(columns))] = SBP[:, : min(5, len(columns))]
    for attempt in (lambda: model.set_sbp(bad), lambda: setattr(model, "sbp", bad)):
        with pytest.raises(ModelError, match=named):
            attempt()
        np.testing.assert_array_equal(model.sbp, before[0])
        assert model.balance_names == before[1]
    with pytest.raises(SBPError, match=named):
        core.balances(table(PARTS)[PARTS], bad)


def test_a_frame_without_column_names_is_taken_in_order():
    # pandas names the columns of a frame built from a list 0..D-1: no labels to match
    model = model_of(table(PARTS))
    model.set_sbp(pd.DataFrame(SBP))
    np.testing.assert_array_equal(model.sbp, SBP)
    with pytest.raises(ModelError, match="4 unnamed columns for 5 parts"):
        model.set_sbp(pd.DataFrame(SBP[:, :4]))


def test_contrast_table_is_matched_by_label_as_an_ilr_basis():
    frame = table(PARTS)
    model = model_of(frame)
    model.set_sbp(SBP, names=NAMES)
    V = export.contrast_frame(model)
    shuffled = frame[["MgO", "CaO", "SiO2", "Fe2O3", "Al2O3"]]
    out = core.ilr(shuffled, basis=V)  # the basis follows the data's columns by name
    np.testing.assert_allclose(np.asarray(out), expected_balances(frame), atol=1e-12)
    # the inverse takes the parts from the basis labels
    back = core.ilr_inv(out, basis=V)
    assert list(back.columns) == PARTS
    np.testing.assert_allclose(back.to_numpy(), core.closure(frame[PARTS]).to_numpy())
    with pytest.raises(CompositionError, match="'Na2O' are not among"):
        core.ilr(frame[PARTS], basis=V.rename(columns={"CaO": "Na2O"}))


def test_transformer_matches_its_frames_by_label():
    frame = table(PARTS)
    sbp = pd.DataFrame(SBP, columns=PARTS)[["Fe2O3", "CaO", "SiO2", "MgO", "Al2O3"]]
    t = BalanceTransformer(sbp, parts=PARTS, names=NAMES).fit(frame[PARTS])
    B = t.transform(frame[PARTS])
    np.testing.assert_allclose(B, expected_balances(frame), atol=1e-12)
    given = pd.DataFrame(B, columns=NAMES, index=frame.index)[NAMES[::-1]]  # shuffled
    back = t.inverse_transform(given)
    np.testing.assert_allclose(back.to_numpy(), core.closure(frame[PARTS]).to_numpy())
    with pytest.raises(CompositionError, match=r"balance\(s\) 'Mg \| Ca' have no column"):
        t.inverse_transform(given.rename(columns={"Mg | Ca": "other"}))
    with pytest.raises(SBPError, match="'Cr' are not among the parts"):
        BalanceTransformer(sbp.rename(columns={"CaO": "Cr"}), parts=PARTS).fit(frame[PARTS])


# ------------------------------------------------------------------- round trips
def test_sbp_table_and_document_carry_over_to_reordered_and_extra_parts(tmp_path):
    a_frame = table(PARTS, seed=1)
    a = model_of(a_frame)
    a.set_sbp(SBP, names=NAMES)
    other_order = ["Na2O", "CaO", "K2O", "Al2O3", "MgO", "SiO2", "Fe2O3"]
    b_frame = table(other_order, n=25, seed=2)
    reference = expected_balances(b_frame)  # from the definition, columns picked by name
    independent = core.balances(b_frame[PARTS].to_numpy(), SBP)  # plain arrays, parts in order
    np.testing.assert_allclose(independent, reference, atol=1e-12)

    # 1. the SBP table: parts taken from its columns, balance names from its index
    b1 = model_of(b_frame)
    b1.set_partition(export.sbp_frame(a))
    assert b1.active_parts == PARTS and b1.balance_names == NAMES
    np.testing.assert_allclose(export.ilr_frame(b1).to_numpy(), reference, atol=1e-12)

    # 2. the same table applied over active parts in yet another order
    b2 = model_of(b_frame)
    b2.active_parts = ["MgO", "SiO2", "CaO", "Fe2O3", "Al2O3"]
    b2.set_sbp(export.sbp_frame(a))
    out = export.ilr_frame(b2)
    assert list(out.columns) == NAMES
    np.testing.assert_allclose(out.to_numpy(), reference, atol=1e-12)

    # 3. the JSON document
    b3 = model_of(b_frame)
    export.load_sbp(b3, export.save_sbp(a, tmp_path / "partition.json"))
    assert b3.active_parts == PARTS and b3.balance_names == NAMES
    np.testing.assert_allclose(export.ilr_frame(b3).to_numpy(), reference, atol=1e-12)

    # 4. the contrast table as a basis on the second table's own column order
    V = export.contrast_frame(a)
    np.testing.assert_allclose(
        np.asarray(core.ilr(b_frame[other_order[1:]].drop(columns="K2O"), basis=V)),
        reference,
        atol=1e-12,
    )


def test_applying_a_partition_is_all_or_nothing():
    model = model_of(table(PARTS + ["Na2O"]))
    model.amalgamations = {"FM": ["Fe2O3", "MgO"]}
    model.set_sbp(core.rules.check_sbp([[1, 1, 1, 1, 1, -1]], model.active_parts))
    before = (
        dict(model.amalgamations),
        list(model.active_parts),
        model.sbp.copy(),
        list(model.balance_names),
    )
    seen = []
    model.observe(lambda c: seen.append(c["name"]), names=["active_parts", "sbp", "amalgamations"])
    bad_calls = [
        # an SBP that is not a partition of the new parts
        lambda: model.set_partition([[1, -1, 0], [1, 0, -1]], ["SiO2", "FM", "CaO"]),
        # a new amalgamation that clashes with the model's own
        lambda: model.set_partition([[1, -1]], ["SiO2", "FM"], amalgamations={"FM": ["CaO"]}),
        # parts that would count MgO twice
        lambda: model.set_partition([[1, -1, -1], [0, 1, -1]], ["SiO2", "FM", "MgO"]),
        # names: one too many
        lambda: model.set_partition([[1, -1]], ["SiO2", "CaO"], names=["a", "b"]),
    ]
    for call in bad_calls:
        with pytest.raises(ModelError):
            call()
        after = (
            dict(model.amalgamations),
            list(model.active_parts),
            model.sbp.copy(),
            list(model.balance_names),
        )
        assert after[:2] == before[:2] and after[3] == before[3]
        np.testing.assert_array_equal(after[2], before[2])
    assert seen == []  # nothing was announced either

    # a valid change arrives as one consistent state: observers see the final SBP already
    states = []
    model.observe(
        lambda c: states.append((list(model.active_parts), model.sbp.shape, model.balance_names)),
        names=["active_parts"],
    )
    model.set_partition(
        [[1, 1, -1], [1, -1, 0]],
        ["SiO2", "FM", "CN"],
        names=["", "Si | FM"],
        amalgamations={"CN": ["CaO", "Na2O"]},
    )
    assert states == [(["SiO2", "FM", "CN"], (2, 3), ["SiO2,FM | CN", "Si | FM"])]
    assert model.amalgamations == {"FM": ["Fe2O3", "MgO"], "CN": ["CaO", "Na2O"]}


# ------------------------------------------------------------ sbp assigned directly
def test_assigning_the_sbp_directly_gives_default_names_and_every_export_works(tmp_path):
    model = model_of(table(PARTS))
    model.sbp = SBP  # not through set_sbp
    assert model.balance_names == core.balance_names(SBP, PARTS)
    assert not model.sbp.flags.writeable  # no silent in-place edits
    _every_export_works(model, tmp_path)
    model.balance_names = ["a", "", "c", "d"]  # "" keeps the default of that balance
    assert model.balance_names == ["a", "SiO2 | Al2O3", "c", "d"]
    for bad, message in [
        (["a", "b"], "2 names for 4 balances"),
        (["a", "a", "c", "d"], "'a' is used twice"),
    ]:
        with pytest.raises(ModelError, match=message):
            model.balance_names = bad
    model.sbp = SBP[:2]  # another SBP: its own default names, the custom ones are gone
    assert model.balance_names == core.balance_names(SBP[:2], PARTS, complete=False)
    _every_export_works(model, tmp_path)
    model.sbp = None
    assert model.balance_names == [] and model.colour_by == ""
    with pytest.raises(ModelError, match="need an SBP"):
        model.balance_names = ["x"]


def test_an_sbp_belongs_to_the_parts_in_their_order():
    model = model_of(table(PARTS))
    model.set_sbp(SBP, names=NAMES)
    shuffled = ["CaO", "MgO", "Fe2O3", "Al2O3", "SiO2"]
    model.active_parts = shuffled  # same parts, other order: the columns mean other parts
    assert model.sbp is None and model.balance_names == []
    # assigned together with the new order, the same matrix stands over the new parts,
    # named after them
    model.active_parts = PARTS
    model.set_sbp(SBP, names=NAMES)
    with model.hold_trait_notifications():
        model.active_parts = shuffled
        model.sbp = SBP
    np.testing.assert_array_equal(model.sbp, SBP)
    assert model.balance_names == core.balance_names(SBP, shuffled)


def _every_export_works(model, tmp_path) -> None:
    complete = model.sbp is not None and model.sbp.shape[0] == len(model.active_parts) - 1
    out = export.ilr_frame(
        model, require_complete=False, include_metadata=True, include_selection=True
    )
    assert list(out.columns)[-len(model.balance_names) :] == list(model.balance_names)
    assert list(out.columns)[: model.metadata.shape[1]] == list(model.metadata.columns)
    assert export.sbp_frame(model).shape == model.sbp.shape
    assert export.contrast_frame(model).shape == model.sbp.shape
    if complete:
        export.ilr_frame(model)
        BalanceTransformer.from_model(model)
    export.save_ilr_csv(model, tmp_path / "b.csv", require_complete=False)
    export.save_selected_csv(model, tmp_path / "s.csv")
    loaded = export.read_document(export.save_sbp(model, tmp_path / "d.json"))
    np.testing.assert_array_equal(loaded.sbp, model.sbp)
    assert loaded.names == list(model.balance_names)


# ---------------------------------------------------------------- model traits
def test_every_refused_model_change_is_a_composition_error():
    model = model_of(table(PARTS))
    model.set_sbp(SBP, names=NAMES)
    bad = [
        lambda: setattr(model, "active_parts", ["SiO2", "Xx"]),
        lambda: setattr(model, "active_parts", "SiO2"),
        lambda: setattr(model, "active_parts", [1, 2]),
        lambda: setattr(model, "amalgamations", ["FeO"]),
        lambda: setattr(model, "amalgamations", {"FM": "Fe2O3"}),
        lambda: setattr(model, "amalgamations", {"FM": [0, 1]}),  # positions are not names
        lambda: setattr(model, "group_column", 5),
        lambda: setattr(model, "group_column", "nope"),
        lambda: setattr(model, "sbp", [[1, 1, -1, -1, -1]] * 2),
        lambda: setattr(model, "sbp", "not a matrix"),
        lambda: setattr(model, "balance_names", ["only one"]),
        lambda: setattr(model, "colour_by", "no such balance"),
        lambda: setattr(model, "selection", [0, 99]),
        lambda: setattr(model, "selection", "rows"),
        lambda: model.select([0.5]),
        lambda: model.select([1], mode="xor"),
        lambda: model.select_labels("K-0-999"),
        lambda: model.set_sbp(SBP[:, :4]),
        lambda: model.part_values(["Zz"]),
        lambda: model.selection_to_group(""),
        lambda: CompositionModel(table(PARTS)),
    ]
    for call in bad:
        with pytest.raises(CompositionError) as info:
            call()
        assert isinstance(info.value, ValueError)
    # traitlets can still roll a batch back: a refusal inside a hold is a TraitError too
    with pytest.raises(traitlets.TraitError):
        with model.hold_trait_notifications():
            model.active_parts = ["SiO2", "CaO"]
            model.colour_by = "no such balance"
    assert model.active_parts == PARTS and model.balance_names == NAMES


def test_one_except_catches_bad_input_at_every_other_entry_point(tmp_path):
    frame = table(PARTS)
    model = model_of(frame)
    fitted = BalanceTransformer(SBP, parts=PARTS).fit(frame[PARTS])
    bad_json = tmp_path / "bad.json"
    bad_json.write_text("{", encoding="utf-8")
    cases = {
        # intake
        "no such file": lambda: read_composition(tmp_path / "absent.csv"),
        "unknown part column": lambda: read_composition(frame, parts=["Zz"]),
        "unreadable cell": lambda: read_composition(
            pd.DataFrame({"SiO2 (wt%)": ["abc", "50"], "MgO (wt%)": [1.0, 2.0]})
        ),
        # exports and documents
        "no SBP to export": lambda: export.ilr_frame(model),
        "no SBP to save": lambda: export.save_sbp(model, tmp_path / "x.json"),
        "not JSON": lambda: export.load_sbp(model, bad_json),
        "not a document": lambda: export.load_sbp(model, {"format": "other"}),
        # the transformer
        "too few columns": lambda: fitted.transform(frame[PARTS[:4]]),
        "text cells": lambda: fitted.transform(frame[PARTS].astype(str) + " wt%"),
        "zero part": lambda: fitted.transform(frame[PARTS].assign(CaO=0.0)),
        "wrong names": lambda: BalanceTransformer(SBP, parts=PARTS, names=["a"]).fit(frame[PARTS]),
        "partial model SBP": lambda: (
            model.set_sbp(SBP[:1]),
            BalanceTransformer.from_model(model),
        ),
        # core
        "negative part": lambda: core.clr(frame[PARTS].assign(MgO=-1.0)),
    }
    for what, call in cases.items():
        with pytest.raises(CompositionError) as info:
            call()
        assert isinstance(info.value, ValueError), what


def test_select_labels_takes_one_label_of_any_kind():
    frame = table(PARTS, n=6)
    model = model_of(frame)
    model.select_labels("K-0-004")
    assert model.index[model.selection].tolist() == ["K-0-004"]
    numbered = frame.set_axis([10, 20, 30, 40, 50, 60], axis=0)
    m = model_of(numbered)
    m.select_labels(40)
    m.select_labels(np.int64(20), mode="add")
    assert m.selection.tolist() == [1, 3]
    m.select_labels([60, 60, 10])  # repeats count once
    assert m.selection.tolist() == [0, 5]
    with pytest.raises(ModelError, match="unknown row label.*70"):
        m.select_labels(70)
    tupled = frame.set_axis(pd.Index([("pit", i) for i in range(6)], tupleize_cols=False))
    t = model_of(tupled)
    t.select_labels(("pit", 2))  # a tuple that is a label is one label
    assert t.selection.tolist() == [2]


def test_repeated_positions_select_each_row_once():
    # a sorted list with a repeat must not keep the repeat (it is not unsorted)
    model = model_of(table(PARTS))
    model.select([1, 1, 4])
    assert model.selection.tolist() == [1, 4]
    assert len(model.selected_frame()) == 2
    model.select([2, 2], mode="add")
    assert model.selection.tolist() == [1, 2, 4]
    model.select_labels(["K-0-007", "K-0-007"])
    assert model.selection.tolist() == [7]
    model.select(3)  # a single position
    assert model.selection.tolist() == [3]


def test_ilr_frame_keeps_the_groups_made_in_the_session():
    model = model_of(table(PARTS))
    model.set_sbp(SBP, names=NAMES)
    model.select([0, 2, 5])
    model.selection_to_group("picked", "in", "out")
    out = export.ilr_frame(model, include_metadata=True)
    assert list(out.columns[:2]) == ["site", "picked"]
    assert out["picked"].tolist() == ["in" if i in (0, 2, 5) else "out" for i in range(30)]
    model.select([1])
    model.selection_to_group("second")
    assert "second" in export.ilr_frame(model, include_metadata=True).columns


# ------------------------------------------------------------- one rule, many callers
def test_the_part_and_sbp_rules_are_the_ones_in_core(monkeypatch):
    calls: dict[str, int] = {}

    def spy(name):
        original = getattr(core, name)

        def wrapped(*args, **kwargs):
            calls[name] = calls.get(name, 0) + 1
            return original(*args, **kwargs)

        monkeypatch.setattr(core, name, wrapped)

    for name in ("check_parts", "check_sbp", "require_sbp", "check_balance_names"):
        spy(name)
    from compwidgets.views.ternary import TernaryView

    frame = table(PARTS)
    model = model_of(frame)
    model.active_parts = PARTS[:4]
    assert calls.pop("check_parts") >= 1
    TernaryView(model, ["SiO2", "Al2O3", "MgO"])
    assert calls.pop("check_parts") >= 1
    model.set_sbp([[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]])
    assert calls.pop("check_sbp") >= 1 and calls.pop("check_balance_names") >= 1
    export.ilr_frame(model)
    assert calls.pop("require_sbp") >= 1
    BalanceTransformer(SBP, parts=PARTS).fit(frame[PARTS])
    assert calls.pop("check_parts") >= 1 and calls.pop("check_sbp") >= 1


# ------------------------------------------- any sequence of changes, every export works
class ModelChanges(RuleBasedStateMachine):
    """Random sequences of accepted and refused changes to one model.

    After every step the state is consistent and every export works (or, with no SBP,
    is refused as a CompositionError); a refused change leaves the model as it was.
    SBPs are drawn by random splitting (conftest.valid_sbps, the definition of an SBP).
    """

    def __init__(self):
        super().__init__()
        self.frame = table(PARTS, n=12, seed=5)
        self.model = model_of(self.frame)
        self.folder = Path(tempfile.mkdtemp(prefix="compwidgets-changes-"))

    def teardown(self):
        shutil.rmtree(self.folder, ignore_errors=True)

    def _state(self):
        m = self.model
        sbp = None if m.sbp is None else m.sbp.tolist()
        return (list(m.active_parts), dict(m.amalgamations), sbp, list(m.balance_names))

    def _attempt(self, change) -> None:
        before = self._state()
        try:
            change()
        except CompositionError:
            assert self._state() == before  # refused: nothing changed

    def _sbp(self, data, parts):
        S = data.draw(valid_sbps(len(parts)))
        k = data.draw(st.integers(1, len(parts) - 1))
        return S[:k]  # the first rows of an SBP are a partition still being built

    @rule(data=st.data())
    def active_parts(self, data):
        pool = self.model.available_parts
        parts = data.draw(st.lists(st.sampled_from(pool), min_size=1, max_size=len(pool)))
        self._attempt(lambda: setattr(self.model, "active_parts", parts))

    @rule(data=st.data())
    def amalgamation(self, data):
        members = data.draw(st.lists(st.sampled_from(PARTS), min_size=1, max_size=3))
        groups = data.draw(st.sampled_from([{}, {"FM": members}]))
        self._attempt(lambda: setattr(self.model, "amalgamations", groups))

    @rule(data=st.data(), direct=st.booleans())
    def sbp(self, data, direct):
        parts = list(self.model.active_parts)
        S = self._sbp(data, parts)
        if direct:
            self._attempt(lambda: setattr(self.model, "sbp", S))
        else:
            names = data.draw(st.lists(st.sampled_from(["", "a", "b", " c ", "SiO2"]), max_size=6))
            self._attempt(lambda: self.model.set_sbp(S, names=names[: len(S)] or None))

    @rule(data=st.data())
    def sbp_table_in_another_order(self, data):
        parts = list(self.model.active_parts)
        S = self._sbp(data, parts)
        order = data.draw(st.permutations(parts))
        frame = pd.DataFrame(S, columns=parts)[list(order)]
        self._attempt(lambda: self.model.set_partition(frame))
        if self.model.sbp is not None and self.model.active_parts == list(order):
            np.testing.assert_array_equal(self.model.sbp, frame.to_numpy())

    @rule(data=st.data())
    def names(self, data):
        names = data.draw(st.lists(st.sampled_from(["", "x", "y", "z", "site"]), max_size=5))
        self._attempt(lambda: setattr(self.model, "balance_names", names))

    @rule(data=st.data())
    def colour(self, data):
        name = data.draw(st.sampled_from(["", "x", *self.model.balance_names]))
        self._attempt(lambda: setattr(self.model, "colour_by", name))

    @rule(name=st.sampled_from(["g1", "g2", "x", "site"]))
    def group(self, name):
        self._attempt(lambda: self.model.selection_to_group(name))

    @rule()
    def clear(self):
        self.model.clear_sbp()

    @rule(rows=st.lists(st.integers(0, 11), max_size=6))
    def select(self, rows):
        self.model.select(rows)

    @invariant()
    def consistent_and_exportable(self):
        m = self.model
        if m.sbp is None:
            assert m.balance_names == [] and m.colour_by == ""
            with pytest.raises(CompositionError, match="no SBP"):
                export.ilr_frame(m)
            return
        assert m.sbp.shape[1] == len(m.active_parts)
        assert len(m.balance_names) == m.sbp.shape[0] == len(set(m.balance_names))
        assert m.colour_by in ("", *m.balance_names)
        _every_export_works(m, self.folder)
        # the balances are those of the definition over the active parts' values
        values = pd.DataFrame(m.part_values(), columns=m.active_parts)
        ok = m.complete_rows()
        expected = expected_balances(values[ok], m.sbp, m.active_parts)
        got = export.ilr_frame(m, require_complete=False).to_numpy()[ok]
        np.testing.assert_allclose(got, expected, atol=1e-12)


ModelChanges.TestCase.settings = settings(max_examples=20, stateful_step_count=8, deadline=None)
test_any_sequence_of_changes_keeps_every_export_working = ModelChanges.TestCase
