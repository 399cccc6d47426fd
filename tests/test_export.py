"""Exports (ilr / SBP / contrast frames, CSV, JSON document) and BalanceTransformer.

Independent references used here:
- the balance formula ``sqrt(r s / (r + s)) ln(g(x+) / g(x-))`` of Egozcue &
  Pawlowsky-Glahn (2005), evaluated directly with numpy;
- orthonormality and zero row sums of the contrasts checked with numpy;
- ``scipy.linalg.helmert`` for the pivot basis (the relation is stated in
  core.default_basis and checked here against scipy);
- scikit-learn's own estimator checks and LinearDiscriminantAnalysis;
- ``json`` from the standard library for reading the document back.
All tables are invented.
"""

from __future__ import annotations

import copy
import json

import numpy as np
import pandas as pd
import pytest
import scipy.linalg
from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
from sklearn.pipeline import make_pipeline
from sklearn.utils import estimator_checks

from compwidgets import core
from compwidgets.export import (
    DocumentError,
    ExportError,
    contrast_frame,
    ilr_frame,
    load_sbp,
    read_document,
    save_ilr_csv,
    save_sbp,
    save_selected_csv,
    sbp_document,
    sbp_frame,
)
from compwidgets.intake import read_composition
from compwidgets.model import CompositionModel
from compwidgets.transformer import BalanceTransformer, pivot_sbp

PARTS = ["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO", "Na2O"]
SBP = np.array(
    [
        [1, 1, -1, -1, -1, -1],
        [1, -1, 0, 0, 0, 0],
        [0, 0, 1, 1, -1, -1],
        [0, 0, 1, -1, 0, 0],
        [0, 0, 0, 0, 1, -1],
    ]
)


def invented_table(n: int = 40, seed: int = 0, parts=PARTS, hole: bool = True) -> pd.DataFrame:
    """Invented grouped compositions: three sites differing in ln(g(Fe,Mg)/g(Ca,Na))."""
    rng = np.random.default_rng(seed)
    site = np.array(["north", "ridge", "south"])[np.arange(n) % 3]
    shift = {"north": -1.0, "ridge": 0.0, "south": 1.0}
    logx = rng.normal(0, 0.3, size=(n, len(parts))) + np.log(np.linspace(5, 1, len(parts)))
    for j, p in enumerate(parts):
        if p in ("Fe2O3", "MgO"):
            logx[:, j] += [shift[s] for s in site]
    values = np.exp(logx)
    frame = pd.DataFrame(values / values.sum(axis=1, keepdims=True) * 100, columns=list(parts))
    frame.index = [f"S-{100 + i}" for i in range(n)]
    if hole:
        frame.iloc[3, 2] = np.nan  # one missing cell: that row has no balances
    frame.insert(0, "site", site)
    return frame


def make_model(frame: pd.DataFrame | None = None, **kw) -> CompositionModel:
    frame = invented_table() if frame is None else frame
    parts = [c for c in frame.columns if c != "site"]
    return CompositionModel(read_composition(frame, parts=parts, check_total=False, **kw))


def balance_direct(values: np.ndarray, row) -> np.ndarray:
    """Balance from its definition (Egozcue & Pawlowsky-Glahn 2005)."""
    row = np.asarray(row)
    logx = np.log(values)
    r, s = (row > 0).sum(), (row < 0).sum()
    return np.sqrt(r * s / (r + s)) * (
        logx[:, row > 0].mean(axis=1) - logx[:, row < 0].mean(axis=1)
    )


# ------------------------------------------------------------- ilr frame
def test_ilr_frame_equals_balances_and_keeps_every_row():
    frame = invented_table()
    model = make_model(frame)
    model.set_sbp(SBP, names=["felsic | rest", "", "", "", ""])
    out = ilr_frame(model)
    assert list(out.index) == list(frame.index)  # nothing dropped, original labels
    assert list(out.columns) == model.balance_names
    assert out.columns[0] == "felsic | rest"
    assert out.columns[1] == "SiO2 | Al2O3"  # default name "num | den"
    values = frame[PARTS].to_numpy(dtype=float)
    ok = np.isfinite(values).all(axis=1)
    assert out.loc["S-103"].isna().all()  # the row with a missing cell
    expected = np.column_stack([balance_direct(values[ok], row) for row in SBP])
    np.testing.assert_allclose(out.to_numpy()[ok], expected, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(
        out.to_numpy()[ok], core.balances(values[ok], SBP), rtol=1e-12, atol=1e-12
    )


def test_ilr_frame_metadata_and_selection_columns():
    model = make_model()
    model.set_sbp(SBP)
    model.select([0, 5, 7])
    out = ilr_frame(model, include_metadata=True, include_selection=True)
    assert list(out.columns[:2]) == ["site", "selected"]
    assert list(out.columns[2:]) == model.balance_names
    assert out["selected"].dtype == bool
    assert list(np.flatnonzero(out["selected"].to_numpy())) == [0, 5, 7]
    assert list(out["site"]) == list(invented_table()["site"])


def test_ilr_frame_partial_and_missing_sbp():
    model = make_model()
    with pytest.raises(ExportError, match="no SBP"):
        ilr_frame(model)
    model.set_sbp(SBP[:2])
    with pytest.raises(ExportError, match=r"partial: 2 of 5.*\{Fe2O3, MgO, CaO, Na2O\}"):
        ilr_frame(model)
    out = ilr_frame(model, require_complete=False)
    assert out.shape == (40, 2)
    values = invented_table()[PARTS].to_numpy(dtype=float)
    np.testing.assert_allclose(out.iloc[:, 1].to_numpy()[5:], balance_direct(values[5:], SBP[1]))


def test_a_balance_named_like_a_column_is_refused_when_named_not_when_exported():
    # so that every export works in every state the model accepts
    model = make_model()
    for taken in ("site", "SiO2"):
        with pytest.raises(core.CompositionError, match=f"'{taken}'.*already column names"):
            model.set_sbp(SBP, names=[taken, "", "", "", ""])
    assert model.sbp is None
    model.set_sbp(SBP, names=["felsic", "", "", "", ""])
    with pytest.raises(core.CompositionError, match="exists already"):
        model.selection_to_group("felsic")
    out = ilr_frame(model, include_metadata=True, include_selection=True)
    assert list(out.columns[:2]) == ["site", "selected"]


# --------------------------------------------------- sbp / contrast frames
def test_sbp_and_contrast_frames():
    model = make_model()
    model.set_sbp(SBP)
    S = sbp_frame(model)
    assert list(S.columns) == PARTS and list(S.index) == model.balance_names
    np.testing.assert_array_equal(S.to_numpy(), SBP)
    V = contrast_frame(model)
    assert V.shape == S.shape and list(V.index) == list(S.index)
    v = V.to_numpy()
    np.testing.assert_allclose(v @ v.T, np.eye(5), atol=1e-12)  # orthonormal rows (numpy)
    np.testing.assert_allclose(v.sum(axis=1), 0, atol=1e-12)  # contrasts: rows sum to zero
    np.testing.assert_array_equal(np.sign(v), SBP)
    values = invented_table()[PARTS].to_numpy(dtype=float)[5:]
    logx = np.log(values)
    clr = logx - logx.mean(axis=1, keepdims=True)
    np.testing.assert_allclose(clr @ v.T, ilr_frame(model).to_numpy()[5:], atol=1e-12)


# ------------------------------------------------------------ CSV files
def test_csv_files(tmp_path):
    model = make_model()
    model.set_sbp(SBP)
    path = save_ilr_csv(model, tmp_path / "ilr.csv", include_metadata=True)
    back = pd.read_csv(path, index_col=0)
    expected = ilr_frame(model, include_metadata=True)
    assert list(back.index) == list(expected.index)
    np.testing.assert_allclose(
        back[model.balance_names].to_numpy(), expected.iloc[:, 1:].to_numpy()
    )
    model.select([1, 2])
    n = save_selected_csv(model, tmp_path / "sel.csv")
    sel = pd.read_csv(tmp_path / "sel.csv", index_col=0)
    assert n == 2 and list(sel.index) == ["S-101", "S-102"]
    np.testing.assert_allclose(
        sel[model.balance_names].to_numpy(), expected.iloc[[1, 2], 1:].to_numpy()
    )


# ---------------------------------------------------------- JSON document
def test_document_round_trip_on_same_table(tmp_path):
    model = make_model()
    model.set_sbp(SBP, names=["light | heavy", "", "mafic | alkali", "", ""])
    path = save_sbp(model, tmp_path / "part.json")
    with open(path, encoding="utf-8") as handle:
        doc = json.load(handle)  # plain JSON (standard library)
    assert doc["format"] == "compwidgets-sbp" and doc["version"] == 1
    assert doc["parts"] == PARTS
    assert doc["balances"][0] == {
        "name": "light | heavy",
        "numerator": ["SiO2", "Al2O3"],
        "denominator": ["Fe2O3", "MgO", "CaO", "Na2O"],
    }
    assert doc["tree"]["name"] == "light | heavy"
    assert doc["tree"]["children"][0]["name"] == ""  # default name stored as ""
    assert doc["replacement"]["strategy"] == "multiplicative"
    fresh = make_model()
    loaded = load_sbp(fresh, path)
    np.testing.assert_array_equal(fresh.sbp, model.sbp)
    assert fresh.balance_names == model.balance_names
    assert loaded.notes == []
    np.testing.assert_allclose(ilr_frame(fresh), ilr_frame(model))


def test_document_keeps_row_order_of_non_preorder_sbp(tmp_path):
    # Valid SBP whose third row splits the denominator group before the numerator group.
    order = SBP[[0, 2, 1, 3, 4]]
    model = make_model()
    model.set_sbp(order)
    fresh = make_model()
    load_sbp(fresh, save_sbp(model, tmp_path / "p.json"))
    np.testing.assert_array_equal(fresh.sbp, order)


def test_document_on_new_table_with_other_column_order():
    model = make_model()
    model.set_sbp(SBP, names=["a", "b", "c", "d", "e"])
    doc = sbp_document(model)
    other_parts = ["Na2O", "K2O", "CaO", "MgO", "Fe2O3", "Al2O3", "SiO2"]
    new = make_model(invented_table(25, seed=3, parts=other_parts, hole=False))
    load_sbp(new, doc)
    assert new.active_parts == PARTS
    assert new.balance_names == ["a", "b", "c", "d", "e"]
    values = invented_table(25, seed=3, parts=other_parts, hole=False)[PARTS].to_numpy(dtype=float)
    expected = np.column_stack([balance_direct(values, row) for row in SBP])
    np.testing.assert_allclose(ilr_frame(new).to_numpy(), expected, atol=1e-12)
    # checking against a list of parts applies nothing
    assert load_sbp(other_parts, doc).names == ["a", "b", "c", "d", "e"]


def test_document_with_unknown_parts_is_rejected():
    parts = [*PARTS, "Cr2O3", "V"]
    model = make_model(invented_table(parts=parts, hole=False))
    model.set_sbp([[1, 1, 1, 1, 1, 1, -1, -1]])  # partial SBP over all 8 parts
    doc = sbp_document(model)
    target = make_model()
    before = (list(target.active_parts), target.sbp)
    with pytest.raises(DocumentError, match="parts not in this table: Cr2O3, V"):
        load_sbp(target, doc)
    assert (list(target.active_parts), target.sbp) == before  # model unchanged
    with pytest.raises(DocumentError, match="parts not in this table: Cr2O3, V"):
        load_sbp(PARTS, doc)


def test_amalgamations_travel_with_the_document():
    model = make_model()
    model.amalgamations = {"FeMg": ["Fe2O3", "MgO"]}
    model.active_parts = ["SiO2", "Al2O3", "FeMg", "CaO"]
    S = [[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]]
    model.set_sbp(S)
    doc = sbp_document(model)
    assert doc["amalgamations"] == {"FeMg": ["Fe2O3", "MgO"]}
    fresh = make_model()
    load_sbp(fresh, doc)
    assert fresh.amalgamations == {"FeMg": ["Fe2O3", "MgO"]}
    assert fresh.active_parts == ["SiO2", "Al2O3", "FeMg", "CaO"]
    np.testing.assert_array_equal(fresh.sbp, S)
    values = invented_table()[PARTS].to_numpy(dtype=float)[5:]
    amalgamated = np.column_stack(
        [values[:, 0], values[:, 1], values[:, 2] + values[:, 3], values[:, 4]]
    )
    np.testing.assert_allclose(
        ilr_frame(fresh).to_numpy()[5:, 2], balance_direct(amalgamated, S[2])
    )
    clash = make_model()
    clash.amalgamations = {"FeMg": ["Fe2O3", "CaO"]}
    with pytest.raises(DocumentError, match="FeMg are defined differently"):
        load_sbp(clash, doc)


def test_unit_difference_is_a_note():
    model = make_model()
    model.set_sbp(SBP)
    doc = sbp_document(model)
    ppm = invented_table()
    ppm[PARTS] = ppm[PARTS] * 10_000
    target = make_model(ppm, default_unit="ppm")
    loaded = load_sbp(target, doc)
    assert any("wt%" in note and "ppm" in note for note in loaded.notes)


def _doc() -> dict:
    model = make_model()
    model.set_sbp(SBP)
    return sbp_document(model)


def _edited(edit):
    doc = copy.deepcopy(_doc())
    edit(doc)
    return doc


MALFORMED = [
    (lambda d: d.update(format="other-format"), "'format' is 'other-format'"),
    (lambda d: d.update(version=2), "version 2 is not supported"),
    (lambda d: d.update(version="1"), "version '1' is not supported"),
    (lambda d: d.update(version=True), "version True is not supported"),
    (lambda d: d.pop("tree"), r"missing key\(s\) tree"),
    (lambda d: d.pop("balances"), r"missing key\(s\) balances"),
    (lambda d: d.pop("parts"), r"missing key\(s\) parts"),
    (lambda d: d.update(extra=1), r"unknown key\(s\) extra"),
    (lambda d: d.update(parts="SiO2"), "'parts' must be a list of strings"),
    (lambda d: d["parts"].pop(), r"'tree' does not fit 'parts'.*unknown part\(s\) \{Na2O\}"),
    (lambda d: d["tree"]["children"].pop(), "exactly one child"),
    (lambda d: d.update(balances=[]), "non-empty list"),
    (lambda d: d["balances"][0].pop("name"), "balance 1 must be an object"),
    (lambda d: d["balances"][1].update(numerator=["Fe2O3"]), "not a valid partition"),
    (lambda d: d["balances"][1].update(numerator=["Cr"]), "balance 2 .* Cr that are not in"),
    (lambda d: d["balances"][1].update(denominator=["SiO2"]), "lists part.*SiO2 twice"),
    (lambda d: d["balances"].pop(), "different partitions"),
    (lambda d: d["tree"].update(name="other"), "balance 1 is named"),
    (lambda d: d.update(amalgamations=[]), "'amalgamations' must be an object"),
    (lambda d: d.update(unit=3), "'unit' must be a string"),
    # every key at every level: tree nodes (deep ones too), balances, replacement
    (lambda d: d["tree"].update(colour="red"), r"tree node 'n0': unknown key\(s\) 'colour'"),
    (
        lambda d: d["tree"]["children"][1]["children"][0].update(note=1),
        r"unknown key\(s\) 'note'",
    ),
    (lambda d: d["balances"][2].update(weight=2), r"balance 3 must be an object.*'weight'"),
    (lambda d: d["replacement"].update(seed=4), r"unknown key\(s\) 'seed' in 'replacement'"),
    (lambda d: d["replacement"].update(strategy=1), "'strategy' must be a string"),
    (lambda d: d["replacement"].update(fraction=1.5), "'fraction' must be a number between"),
    (lambda d: d["replacement"].update(fraction=True), "'fraction' must be a number between"),
    (
        lambda d: d["replacement"].update(detection_limits={"MgO": "low"}),
        "'detection_limits' must be a number or an object",
    ),
    (
        lambda d: d["replacement"].update(negative_is_below_detection="yes"),
        "'negative_is_below_detection' must be true or false",
    ),
    (lambda d: d.update(replacement=[1]), "'replacement' must be an object"),
    (lambda d: d.update(amalgamations={"FeMg": ["Fe2O3"]}), "'FeMg' is not one of 'parts'"),
    (lambda d: d["tree"].update(name=float("nan")), r"holds nan \(float\)"),
    (lambda d: d["parts"].append(("tuple",)), r"holds \('tuple',\) \(tuple\)"),
    (lambda d: d.update({3: "x"}), "key 3 in the document is not a string"),
]


@pytest.mark.parametrize(("edit", "message"), MALFORMED)
def test_malformed_documents_are_rejected(edit, message):
    target = make_model()
    with pytest.raises(DocumentError, match=message):
        load_sbp(target, _edited(edit))
    assert target.sbp is None and target.active_parts == PARTS


def test_malformed_files(tmp_path):
    bad = tmp_path / "bad.json"
    bad.write_text('{"format": "compwidgets-sbp",\n "version": }', encoding="utf-8")
    with pytest.raises(DocumentError, match="not valid JSON.*line 2"):
        read_document(bad)
    nan = tmp_path / "nan.json"
    nan.write_text(json.dumps(_doc()).replace('"version": 1', '"version": NaN'), encoding="utf-8")
    with pytest.raises(DocumentError, match="NaN"):
        read_document(nan)
    top = tmp_path / "list.json"
    top.write_text("[1, 2]", encoding="utf-8")
    with pytest.raises(DocumentError, match="JSON object"):
        read_document(top)
    with pytest.raises(DocumentError, match="no file"):
        read_document(tmp_path / "absent.json")
    with pytest.raises(DocumentError, match="path or a dict"):
        read_document(42)


def test_documents_too_large_too_deep_or_repeating_a_key_are_refused(tmp_path, monkeypatch):
    import compwidgets.export as export_module

    good = json.dumps(_doc())
    twice = tmp_path / "twice.json"
    twice.write_text(good.replace('"version": 1', '"version": 1, "version": 1'), "utf-8")
    with pytest.raises(DocumentError, match="'version' is given twice"):
        read_document(twice)
    # a file nested far beyond any partition: refused, never a RecursionError
    deep = tmp_path / "deep.json"
    deep.write_text('{"format": "compwidgets-sbp", "tree": ' + "[" * 200_000 + "]" * 200_000 + "}")
    with pytest.raises(DocumentError, match="nested"):
        read_document(deep)
    deep_dict = _doc()
    inner = deep_dict["replacement"]
    for _ in range(10_000):  # deeper than the interpreter's recursion limit
        inner["strategy"] = {}
        inner = inner["strategy"]
    with pytest.raises(DocumentError, match="nested deeper than 400"):
        read_document(deep_dict)
    looped = _doc()
    looped["tree"]["children"][0]["children"] = [looped["tree"], looped["tree"]]
    with pytest.raises(DocumentError, match="nested deeper"):
        read_document(looped)
    monkeypatch.setattr(export_module, "MAX_DOCUMENT_BYTES", len(good) - 1)
    big = tmp_path / "big.json"
    big.write_text(good, "utf-8")
    with pytest.raises(DocumentError, match="not read"):
        read_document(big)


def test_the_largest_partition_the_reader_takes_round_trips(tmp_path):
    # A chain of splits over 190 parts nests about 2 * 190 levels deep: still read.
    parts = [f"P{i:03d}" for i in range(190)]
    frame = pd.DataFrame(
        np.exp(np.random.default_rng(4).normal(size=(5, len(parts)))), columns=parts
    )
    model = CompositionModel(read_composition(frame, check_total=False))
    model.set_sbp(pivot_sbp(len(parts)))
    loaded = read_document(save_sbp(model, tmp_path / "chain.json"))
    np.testing.assert_array_equal(loaded.sbp, pivot_sbp(len(parts)))


def test_a_document_given_as_a_dict_is_copied_not_kept():
    doc = _doc()
    loaded = read_document(doc)
    loaded.tree["name"] = "changed"
    assert doc["tree"]["name"] == ""


def test_names_are_only_text():
    # A name that looks like code stays a name: the loader never evaluates anything.
    doc = _doc()
    doc["balances"][0]["name"] = "__import__('os').getcwd()"
    model = make_model()
    load_sbp(model, doc)
    assert model.balance_names[0] == "__import__('os').getcwd()"


# ------------------------------------------------------ BalanceTransformer
def _strictly_positive_checks():
    """scikit-learn's generic checks for the transformer.

    With the ``positive_only`` tag, scikit-learn shifts its random test data to
    ``X - X.min()``, which leaves one zero cell; log-ratios need strictly
    positive data, so for these checks the data are shifted by one more
    (``X - X.min() + 1``). Every check then runs unchanged.
    """
    return estimator_checks.parametrize_with_checks([BalanceTransformer()])


@pytest.fixture
def strictly_positive_test_data(monkeypatch):
    original = estimator_checks._enforce_estimator_tags_X

    def shifted(estimator, X, X_test=None, **kw):
        out = original(estimator, X, X_test, **kw)  # X - X.min() for positive_only
        return out + 1.0 if X_test is None else (out[0] + 1.0, out[1] + 1.0)

    monkeypatch.setattr(estimator_checks, "_enforce_estimator_tags_X", shifted)


@_strictly_positive_checks()
def test_sklearn_estimator_checks(estimator, check, strictly_positive_test_data):
    check(estimator)


def test_sklearn_checks_without_shift_fail_only_on_zeros():
    # Without the shift, the failures are all the zero cell (honest record of why).
    from sklearn.utils import get_tags

    assert get_tags(BalanceTransformer()).input_tags.positive_only
    results = estimator_checks.check_estimator(BalanceTransformer(), on_fail=None)
    failed = [r for r in results if r["status"] == "failed"]
    assert failed  # the zero cell does break them
    assert all("zero or negative" in str(r["exception"]) for r in failed)


def _data(n=30, D=5, seed=1):
    rng = np.random.default_rng(seed)
    return np.exp(rng.normal(size=(n, D)))


def test_transform_matches_core_balances_and_inverse_closes():
    X = _data()
    sbp = np.array([[1, 1, -1, -1, -1], [1, -1, 0, 0, 0], [0, 0, 1, -1, -1], [0, 0, 0, 1, -1]])
    t = BalanceTransformer(sbp).fit(X)
    B = t.transform(X)
    np.testing.assert_allclose(B, core.balances(X, sbp), atol=1e-12)
    np.testing.assert_allclose(B, np.column_stack([balance_direct(X, r) for r in sbp]), atol=1e-12)
    back = t.inverse_transform(B)
    np.testing.assert_allclose(back, X / X.sum(axis=1, keepdims=True), rtol=1e-10)  # closure
    assert list(t.get_feature_names_out()) == core.balance_names(
        sbp, [f"x{j}" for j in range(1, 6)]
    )


def test_default_is_pivot_basis():
    X = _data(D=4)
    t = BalanceTransformer().fit(X)
    np.testing.assert_array_equal(t.sbp_, pivot_sbp(4))
    np.testing.assert_allclose(t.basis_, core.default_basis(4), atol=1e-12)
    # scipy reference: the pivot basis is -helmert(D) with rows and columns reversed.
    np.testing.assert_allclose(t.basis_, -scipy.linalg.helmert(4)[::-1, ::-1], atol=1e-12)
    np.testing.assert_allclose(t.transform(X), core.ilr(X), atol=1e-12)


def test_dataframe_columns_by_name_and_pandas_output():
    X = pd.DataFrame(_data(D=4), columns=["b", "a", "d", "c"], index=[f"r{i}" for i in range(30)])
    X["note_number"] = 7.0  # extra column: ignored when parts are named
    sbp = pd.DataFrame(
        [[1, 1, -1, -1], [1, -1, 0, 0], [0, 0, 1, -1]], columns=["a", "b", "c", "d"]
    )
    t = BalanceTransformer(sbp, names=["ab|cd", "a|b", "c|d"]).fit(X)
    assert t.parts_ == ["a", "b", "c", "d"]
    out = t.set_output(transform="pandas").transform(X)
    assert isinstance(out, pd.DataFrame)
    assert list(out.columns) == ["ab|cd", "a|b", "c|d"] and list(out.index) == list(X.index)
    np.testing.assert_allclose(
        out.to_numpy(), core.balances(X[["a", "b", "c", "d"]], sbp.to_numpy())
    )
    inv = t.inverse_transform(out)
    assert list(inv.columns) == ["a", "b", "c", "d"]
    parts = X[["a", "b", "c", "d"]].to_numpy()
    np.testing.assert_allclose(inv.to_numpy(), parts / parts.sum(axis=1, keepdims=True))


def test_pipeline_with_lda_on_grouped_data():
    frame = invented_table(90, seed=5, hole=False)
    y = frame["site"].to_numpy()
    X = frame[PARTS]
    pipe = make_pipeline(BalanceTransformer(SBP, parts=PARTS), LinearDiscriminantAnalysis())
    pipe.fit(X, y)
    # Reference: LDA fitted directly on the balances computed from their definition.
    B = np.column_stack([balance_direct(X.to_numpy(), r) for r in SBP])
    reference = LinearDiscriminantAnalysis().fit(B, y)
    np.testing.assert_array_equal(pipe.predict(X), reference.predict(B))
    assert pipe.score(X, y) > 0.9  # the sites differ strongly in one balance


def test_from_model():
    frame = invented_table(hole=False)
    model = make_model(frame)
    model.set_sbp(SBP, names=["one", "", "", "", ""])
    t = BalanceTransformer.from_model(model)
    np.testing.assert_allclose(t.fit_transform(frame[PARTS]), ilr_frame(model).to_numpy())
    assert list(t.get_feature_names_out()) == model.balance_names
    model.set_sbp(SBP[:2])
    with pytest.raises(core.SBPError, match="partial"):
        BalanceTransformer.from_model(model)


def test_transformer_errors_name_rows_and_parts():
    X = pd.DataFrame(_data(D=3), columns=["a", "b", "c"], index=[f"r{i}" for i in range(30)])
    bad = X.copy()
    bad.loc["r4", "b"] = 0.0
    with pytest.raises(core.CompositionError, match="r4.*'b'"):
        BalanceTransformer().fit(bad)
    t = BalanceTransformer().fit(X)
    with pytest.raises(core.CompositionError, match="r4.*'b'"):
        t.transform(bad)
    neg = X.copy()
    neg.loc["r2", "c"] = -1.0
    with pytest.raises(core.CompositionError, match="Negative values.*'r2'.*'c'"):
        t.transform(neg)
    with pytest.raises(core.SBPError, match=r"\['z'\] are not columns"):
        BalanceTransformer(parts=["a", "z"]).fit(X)
    with pytest.raises(core.SBPError, match="rows for 3 parts"):
        BalanceTransformer(sbp=[[1, -1, -1]]).fit(X)
    with pytest.raises(core.SBPError, match="1 names for 2"):
        BalanceTransformer(names=["x"]).fit(X)
    with pytest.raises(core.CompositionError, match="3 columns given; this SBP has 2"):
        t.inverse_transform(np.zeros((2, 3)))
    before = X.copy()
    BalanceTransformer().fit_transform(X)
    pd.testing.assert_frame_equal(X, before)  # input not mutated


def test_selected_rows_csv_says_which_values_were_replaced(tmp_path):
    from compwidgets.export import REPLACED_COLUMN

    df = pd.DataFrame(
        {"A": [10.0, 20.0, 30.0], "B": ["<0.5", "2.0", "<0.5"], "C": [5.0, 6.0, 7.0]},
        index=["r1", "r2", "r3"],
    )
    m = CompositionModel(read_composition(df, check_total=False))
    m.select([0, 1, 2])
    save_selected_csv(m, tmp_path / "sel.csv")
    back = pd.read_csv(tmp_path / "sel.csv", index_col=0, keep_default_na=False)
    # the cells written as "<0.5" in the caller's table are the replaced ones
    assert back[REPLACED_COLUMN].tolist() == ["B", "", "B"]
    assert (df["B"].astype(str).str.startswith("<")).tolist() == [True, False, True]
