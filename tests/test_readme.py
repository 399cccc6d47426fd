"""The README's tour is real code: run it as written."""

import re
from pathlib import Path

import numpy as np
import pytest

import compwidgets as cw
from compwidgets import core, export

README = Path(__file__).resolve().parents[1] / "README.md"


@pytest.fixture(scope="module")
def tour() -> dict:
    text = README.read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    assert blocks, "README.md has no python block"
    namespace: dict = {}
    for k, block in enumerate(blocks, start=1):  # every block, top to bottom, as written
        exec(compile(block, f"README.md block {k}", "exec"), namespace)  # noqa: S102 - our own
    return namespace


def test_readme_tour_runs_and_exports_the_balances_it_promises(tour):
    model, ilr = tour["model"], tour["ilr"]
    assert list(ilr.columns)[0] == "felsic | mafic"
    assert ilr.index.equals(model.index)
    # the exported balances are the core's balances of the same SBP on the complete rows
    ok = model.complete_rows()
    expected = core.balances(model.part_values()[ok], model.sbp)
    np.testing.assert_allclose(ilr.to_numpy()[ok], expected)
    assert model.selection.size == 10
    # the SBP table applied to another order of the same parts gives the same balances
    # (and the refused table left it unchanged)
    other, sbp = tour["other"], tour["sbp"]
    assert other.balance_names == model.balance_names
    got = export.ilr_frame(other).to_numpy()
    np.testing.assert_allclose(got, ilr.to_numpy(), atol=1e-12, equal_nan=True)
    with pytest.raises(core.CompositionError, match="'Cr2O3' are not among.*'CaO' have no"):
        other.set_sbp(sbp.rename(columns={"CaO": "Cr2O3"}))


def test_readme_tour_assigns_new_samples_with_the_groups_rule(tour):
    model, rule, new, pipe = (tour[k] for k in ("model", "rule", "new", "pipe"))
    # the rule follows the tour's active parts and the model's groups
    assert rule.parts == list(model.active_parts) and rule.group_column == model.group_column
    assert len(new) == 20 and set(new["group"].dropna()) <= set(rule.classes)
    # the exported pipeline is the tour's SBP followed by the rule: the same assignments
    assert list(pipe.named_steps["balances"].names_) == list(model.balance_names)
    batch = cw.read_composition(cw.demo.stream_sediments(n=20, seed=1))
    assigned = new.loc[new["group"].notna()]
    parts = rule.part_frame(batch).loc[assigned.index]
    assert list(pipe.predict(parts)) == list(assigned["group"])


def test_readme_larger_than_memory_block_matches_the_in_memory_path(tour):
    pytest.importorskip("dask")
    import pandas as pd

    big, survey, limits = tour["big"], tour["survey"], tour["limits"]
    whole = cw.read_composition(survey, detection_limits=limits)  # in memory, same rows
    assert big.n_rows == whole.n_rows == 4000 and big.npartitions == 4
    pd.testing.assert_frame_equal(big.values.compute(), whole.values, check_dtype=False)
    assert tour["counts"].sum() == len(whole.report)
    parts = ["SiO2", "Al2O3", "Fe2O3", "MgO", "CaO"]
    pd.testing.assert_frame_equal(
        tour["big_T"], core.variation_matrix(whole.values[parts].dropna()), rtol=1e-12
    )
    pd.testing.assert_frame_equal(tour["T_cluster"], tour["big_T"], rtol=1e-12)
    inside = tour["inside"].compute()
    wide = tour["wide"]
    assert tour["view"].notes.value  # says which layer is the sample
    sampled = set(wide.model.index[wide.model.selection])
    assert sampled <= set(inside.index)  # the sampled rows selected are among all rows inside
