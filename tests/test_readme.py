"""The README's tour is real code: run it as written."""

import re
from pathlib import Path

import numpy as np
import pytest

from compwidgets import core, export

README = Path(__file__).resolve().parents[1] / "README.md"


def test_readme_tour_runs_and_exports_the_balances_it_promises():
    text = README.read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    assert blocks, "README.md has no python block"
    namespace: dict = {}
    for k, block in enumerate(blocks, start=1):  # every block, top to bottom, as written
        exec(compile(block, f"README.md block {k}", "exec"), namespace)  # noqa: S102 - our own
    model, ilr = namespace["model"], namespace["ilr"]
    assert list(ilr.columns)[0] == "felsic | mafic"
    assert ilr.index.equals(model.index)
    # the exported balances are the core's balances of the same SBP on the complete rows
    ok = model.complete_rows()
    expected = core.balances(model.part_values()[ok], model.sbp)
    np.testing.assert_allclose(ilr.to_numpy()[ok], expected)
    assert model.selection.size == 10
    # the SBP table applied to another order of the same parts gives the same balances
    # (and the refused table left it unchanged)
    other, sbp = namespace["other"], namespace["sbp"]
    assert other.balance_names == model.balance_names
    got = export.ilr_frame(other).to_numpy()
    np.testing.assert_allclose(got, ilr.to_numpy(), atol=1e-12, equal_nan=True)
    with pytest.raises(core.CompositionError, match="'Cr2O3' are not among.*'CaO' have no"):
        other.set_sbp(sbp.rename(columns={"CaO": "Cr2O3"}))
