"""The README's tour is real code: run it as written."""

import re
from pathlib import Path

import numpy as np

from compwidgets import core

README = Path(__file__).resolve().parents[1] / "README.md"


def test_readme_tour_runs_and_exports_the_balances_it_promises():
    text = README.read_text(encoding="utf-8")
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    assert blocks, "README.md has no python block"
    namespace: dict = {}
    exec(compile(blocks[0], "README.md", "exec"), namespace)  # noqa: S102 - our own README
    model, ilr = namespace["model"], namespace["ilr"]
    assert list(ilr.columns)[0] == "felsic | mafic"
    assert ilr.index.equals(model.index)
    # the exported balances are the core's balances of the same SBP on the complete rows
    ok = model.complete_rows()
    expected = core.balances(model.part_values()[ok], model.sbp)
    np.testing.assert_allclose(ilr.to_numpy()[ok], expected)
    assert model.selection.size == 10
