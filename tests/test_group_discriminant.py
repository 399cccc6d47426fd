"""The model-level discriminant rule: fit on a model, classify a new table, export.

Outside references: scikit-learn (LinearDiscriminantAnalysis on clr
coordinates, cross_val_predict, Pipeline), the balance formula of Egozcue &
Pawlowsky-Glahn (2005) through the existing BalanceTransformer, and the
affine invariance of the discriminant rules (assignments do not depend on the
SBP). The tables are the invented demo survey and batches drawn from it.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from sklearn.discriminant_analysis import LinearDiscriminantAnalysis
from sklearn.model_selection import StratifiedKFold, cross_val_predict
from sklearn.pipeline import Pipeline

import compwidgets as cw
from compwidgets import core
from compwidgets.core.principal import principal_balances
from compwidgets.discriminant import CAUTION, GroupDiscriminant, intake_options
from compwidgets.model import CompositionModel
from compwidgets.transformer import BalanceTransformer

PARTS = ["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO", "Na2O", "K2O", "Zr"]


@pytest.fixture(scope="module")
def model():
    table = cw.demo.stream_sediments(n=900, seed=3)
    comp = cw.read_composition(table, detection_limits=cw.demo.DETECTION_LIMITS)
    return CompositionModel(comp, active_parts=PARTS, group_column="catchment")


@pytest.fixture(scope="module")
def rule(model):
    return GroupDiscriminant(model)


def clr_of(values):
    L = np.log(values)
    return L - L.mean(axis=1, keepdims=True)


def test_the_rule_is_sklearn_lda_on_the_models_rows(model, rule):
    ok = model.complete_rows(PARTS)
    assert np.array_equal(rule.rows, np.flatnonzero(ok))
    labels = model.metadata["catchment"].astype(str).to_numpy()[ok]
    assert rule.classes == sorted(set(labels))
    y = np.array([rule.classes.index(v) for v in labels])
    np.testing.assert_array_equal(rule.codes, y)
    # Source: scikit-learn LDA on the clr coordinates of the same rows (affine invariance)
    X = model.part_values(PARTS)[ok]
    ref = LinearDiscriminantAnalysis(priors=np.bincount(y) / y.size).fit(clr_of(X), y)
    np.testing.assert_allclose(rule.posteriors, ref.predict_proba(clr_of(X)), atol=1e-9)
    frame = rule.assignments()
    assert frame.index.equals(model.index) and frame["group"].isna().sum() == (~ok).sum()
    assigned = frame["group"].to_numpy()[ok]
    np.testing.assert_array_equal(assigned, np.asarray(rule.classes)[ref.predict(clr_of(X))])


def test_confusion_frame_equals_cross_val_predict_and_cells_are_model_rows(model, rule):
    ok = np.flatnonzero(model.complete_rows(PARTS))
    y = rule.codes
    folds = StratifiedKFold(n_splits=5, shuffle=True, random_state=0)
    ref = LinearDiscriminantAnalysis(priors=rule.fit.priors)
    # Source: scikit-learn cross_val_predict with the same folds, LDA on clr coordinates
    predicted = cross_val_predict(ref, clr_of(model.part_values(PARTS)[ok]), y, cv=folds)
    frame = rule.confusion_frame()
    assert list(frame.index) == rule.classes == list(frame.columns)
    expected = pd.crosstab(y, predicted).reindex(index=range(5), columns=range(5), fill_value=0)
    np.testing.assert_array_equal(frame.to_numpy(), expected.to_numpy())
    cv = rule.cross_validation
    labels = model.metadata["catchment"].astype(str).to_numpy()
    for i in range(5):
        for j in range(5):
            rows = cv.cell_rows(i, j)
            assert rows.size == frame.iat[i, j]
            assert np.all(labels[rows] == rule.classes[i])  # model positions, true group i


def test_classify_a_new_batch_matches_the_rule_and_keeps_every_row(model, rule):
    batch = cw.demo.stream_sediments(n=40, seed=77)
    out = rule.classify(batch)
    comp = cw.read_composition(batch, detection_limits=cw.demo.DETECTION_LIMITS)
    assert out.index.equals(comp.values.index) and len(out) == len(batch)  # every row kept
    values = rule.part_frame(comp).to_numpy()
    ok = np.all(np.isfinite(values) & (values > 0), axis=1)
    post = rule.fit.posteriors(rule.fit.coordinates(values[ok]))
    columns = [f"posterior: {c}" for c in rule.classes]
    np.testing.assert_allclose(out.loc[ok, columns].to_numpy(), post, atol=1e-12)
    np.testing.assert_allclose(out.loc[ok, columns].sum(axis=1), 1.0)
    assert list(out.loc[ok, "group"]) == list(np.asarray(rule.classes)[post.argmax(axis=1)])
    # the invented batch comes from the same catchments: nearly all are assigned home
    truth = batch["catchment"].astype(str).to_numpy()
    assert np.mean(out.loc[ok, "group"].to_numpy() == truth[ok]) > 0.9
    assert out.loc[ok, "far"].sum() <= 2
    assert (out.loc[ok, "nearest"].to_numpy() == out.loc[ok, "group"].to_numpy()).mean() > 0.9


def test_incomplete_new_rows_are_kept_with_a_note(rule):
    batch = cw.demo.stream_sediments(n=10, seed=5)
    batch.loc[batch.index[2], "MgO (wt%)"] = np.nan
    batch.loc[batch.index[4], "Zr (ppm)"] = "n.a."
    out = rule.classify(batch)
    assert len(out) == 10
    assert pd.isna(out["group"].iloc[2]) and out["note"].iloc[2] == "missing or zero in MgO"
    assert out["note"].iloc[4] == "missing or zero in Zr"
    assert out["group"].drop(out.index[[2, 4]]).notna().all()


def test_missing_parts_are_refused_by_name(rule):
    batch = cw.demo.stream_sediments(n=10, seed=5).drop(columns=["Zr (ppm)", "Na2O (wt%)"])
    with pytest.raises(core.CompositionError, match="lacks part\\(s\\) Na2O, Zr"):
        rule.classify(batch)


def test_the_same_intake_options_apply_to_the_new_table(model, rule):
    options = intake_options(model.composition)
    assert options["detection_limits"]["Cu"] == 2.0
    assert options["fraction"] == model.composition.settings["fraction"]
    # a batch with a below-detection Zr written "<5": replaced as in the training table
    batch = cw.demo.stream_sediments(n=12, seed=8)
    batch["Zr (ppm)"] = batch["Zr (ppm)"].astype(object)
    batch.loc[batch.index[0], "Zr (ppm)"] = "<5"
    out = rule.classify(batch)
    read = cw.read_composition(batch, detection_limits=cw.demo.DETECTION_LIMITS)
    assert read.values["Zr"].iloc[0] == pytest.approx(0.65 * 5 * 1e-4)  # 65 % of the limit
    assert out["group"].iloc[0] is not None
    # the batch lacks Cu (which the limits name but the rule does not use): still read
    out = rule.classify(batch.drop(columns=["Cu (ppm)"]))
    assert out["group"].notna().all()


def test_pipeline_is_the_balance_transformer_then_the_discriminant(model, rule):
    batch = cw.demo.stream_sediments(n=30, seed=21)
    comp = cw.read_composition(batch, detection_limits=cw.demo.DETECTION_LIMITS)
    frame = rule.part_frame(comp)
    ok = np.all(frame.to_numpy() > 0, axis=1)
    out = rule.classify(comp)
    pipe = rule.pipeline()
    assert isinstance(pipe, Pipeline)
    assert isinstance(pipe.named_steps["balances"], BalanceTransformer)
    assert isinstance(pipe.named_steps["discriminant"], LinearDiscriminantAnalysis)
    # no SBP in the model: the pivot SBP, whose balances are the default ilr coordinates
    np.testing.assert_allclose(
        pipe.named_steps["balances"].transform(frame[ok]),
        np.asarray(core.ilr(frame[ok].to_numpy())),
        atol=1e-12,
    )
    columns = [f"posterior: {c}" for c in pipe.classes_]
    np.testing.assert_allclose(pipe.predict_proba(frame[ok]), out.loc[ok, columns], atol=1e-9)
    assert list(pipe.predict(frame[ok])) == list(out.loc[ok, "group"])
    # with the model's SBP (principal balances) the same rule, by affine invariance
    model.set_sbp(principal_balances(model.clr(PARTS)[model.complete_rows(PARTS)]))
    try:
        with_sbp = GroupDiscriminant(model).pipeline()
        np.testing.assert_array_equal(with_sbp.named_steps["balances"].sbp_, model.sbp)
        assert list(with_sbp.named_steps["balances"].names_) == list(model.balance_names)
        np.testing.assert_allclose(
            with_sbp.predict_proba(frame[ok]), out.loc[ok, columns], atol=1e-9
        )
    finally:
        model.sbp = None


def test_amalgamated_parts_are_summed_in_new_tables():
    table = cw.demo.stream_sediments(n=400, seed=2)
    comp = cw.read_composition(table, detection_limits=cw.demo.DETECTION_LIMITS)
    m = CompositionModel(comp, group_column="catchment")
    m.amalgamations = {"mafic": ["Fe2O3", "MgO"]}
    m.active_parts = ["SiO2", "Al2O3", "mafic", "CaO", "K2O"]
    rule = GroupDiscriminant(m)
    assert rule.members["mafic"] == ["Fe2O3", "MgO"]
    batch = cw.demo.stream_sediments(n=15, seed=9)
    read = cw.read_composition(batch, detection_limits=cw.demo.DETECTION_LIMITS)
    frame = rule.part_frame(read)
    # (the intake's values: multiplicative replacement rescales the other parts a little)
    np.testing.assert_allclose(frame["mafic"], read.values["Fe2O3"] + read.values["MgO"])
    np.testing.assert_allclose(frame["SiO2"], read.values["SiO2"])
    with pytest.raises(core.CompositionError, match="lacks part\\(s\\) MgO"):
        rule.classify(batch.drop(columns=["MgO (wt%)"]))


def test_a_model_without_groups_is_refused_and_the_caution_is_stated():
    comp = cw.read_composition(cw.demo.stream_sediments(n=50, seed=1))
    with pytest.raises(core.CompositionError, match="no grouping column"):
        GroupDiscriminant(CompositionModel(comp))
    assert "exploratory" in CAUTION and "validated methods" in CAUTION
    import compwidgets.discriminant as module

    assert "validated methods and local practice" in module.__doc__


def test_categorical_labels_give_the_codes_of_the_label_route():
    """Group labels given as categories are coded per category; the codes and names equal
    those of the same labels given one by one as text (None: no group)."""
    from compwidgets.core.discriminant import _group_codes

    rng = np.random.default_rng(8)
    text = np.array(["b", "a", "c", "d"], dtype=object)[rng.integers(0, 4, 300)]
    text[rng.choice(300, 20, replace=False)] = None
    cat = pd.Categorical(text, categories=["d", "c", "b", "a", "unused"])
    for classes in (None, ["a", "b", "c"], ["c", "x", "a"]):
        fast = _group_codes(cat, 300, classes)
        slow = _group_codes(text, 300, classes)
        np.testing.assert_array_equal(fast[0], slow[0])
        assert fast[1] == slow[1]
    assert _group_codes(cat, 300, None)[1] == ["a", "b", "c", "d"]  # in use, sorted
    with pytest.raises(core.CompositionError, match="300 group labels for 299 rows"):
        _group_codes(cat, 299, None)


def test_the_rule_reads_the_models_values_without_a_copy():
    table = cw.demo.stream_sediments(n=300, seed=5)
    comp = cw.read_composition(table, detection_limits=cw.demo.DETECTION_LIMITS)
    parts = ["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO"]
    model = CompositionModel(comp, active_parts=parts, group_column="catchment")
    assert model.complete_rows(parts).all()
    rule = GroupDiscriminant(model)
    assert np.shares_memory(rule.values, model.part_values(parts))
    assert not rule.values.flags.writeable  # the model's cache stays as it is
    # the coordinates are those of every row (Source: the clr definition, numpy)
    from compwidgets.core.transforms import default_basis

    expected = clr_of(model.part_values(parts)) @ default_basis(len(parts)).T
    np.testing.assert_allclose(rule.coordinates, expected, atol=1e-12)
