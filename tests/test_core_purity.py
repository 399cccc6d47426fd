"""compwidgets.core is pure maths: importing or using it pulls in no widget/kernel library.

Checked in a fresh interpreter (``sys.executable -c ...``) because the test
process itself may already have imported widget libraries. Importing
``compwidgets.core`` imports the parent package ``compwidgets`` first, so this
also guards the top-level package against eager widget imports.
"""

from __future__ import annotations

import ast
import json
import pathlib
import subprocess
import sys

import pytest

import compwidgets.core

WIDGET_LIBRARIES = ("ipywidgets", "traitlets", "bqplot", "anywidget", "IPython", "ipykernel")

CORE_DIR = pathlib.Path(compwidgets.core.__file__).parent
REPO_ROOT = CORE_DIR.parent.parent

PROBE = """
import json, sys
before = set(sys.modules)
{body}
banned = {banned!r}
loaded = sorted(
    m for m in sys.modules if m.split(".")[0] in banned
)
print(json.dumps({{
    "loaded": loaded,
    "parent_imported": "compwidgets" in sys.modules,
    "core_imported": "compwidgets.core" in sys.modules,
    "banned_before": sorted(m for m in before if m.split(".")[0] in banned),
}}))
"""

IMPORT_ONLY = "import compwidgets.core"

IMPORT_AND_USE = """
import numpy as np
import pandas as pd
import compwidgets.core as core
df = pd.DataFrame([[0.5, 0.3, 0.2], [0.1, 0.6, 0.3], [0.2, 0.2, 0.6]], columns=list("abc"))
core.clr(df); core.ilr(df); core.alr(df); core.clr_inv(core.clr(df))
core.balances(df, [[1, 1, -1], [1, -1, 0]]); core.variation_matrix(df)
core.total_variance(df); core.center(df); core.clr_covariance(df)
core.multiplicative_replacement(df.where(df > 0.15, 0.0), 0.1)
core.subcomposition(df, ["a", "b"]); core.amalgamate(df, {"ab": ["a", "b"]})
core.aitchison_distance(df, df.iloc[0]); core.perturb(df, df); core.power(df, 2)
try:
    core.clr("x")
except TypeError:
    pass
"""


def run_probe(body: str) -> dict:
    code = PROBE.format(body=body, banned=WIDGET_LIBRARIES)
    result = subprocess.run(
        [sys.executable, "-c", code],
        capture_output=True,
        text=True,
        cwd=REPO_ROOT,
        timeout=120,
    )
    assert result.returncode == 0, result.stderr
    return json.loads(result.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize("body", [IMPORT_ONLY, IMPORT_AND_USE], ids=["import", "import-and-use"])
def test_core_pulls_in_no_widget_library(body):
    report = run_probe(body)
    # The probe is meaningful: a clean interpreter that did import the package.
    assert report["banned_before"] == []
    assert report["parent_imported"] and report["core_imported"]
    assert report["loaded"] == [], (
        "importing compwidgets.core loaded widget/kernel modules "
        f"{report['loaded']}; the top-level package must import its views lazily"
    )


def test_probe_detects_a_widget_import():
    # The probe itself can fail: importing a module that needs traitlets is seen.
    pytest.importorskip("traitlets")
    report = run_probe("import compwidgets.core\nimport traitlets")
    assert "traitlets" in report["loaded"]


def _imported_roots(source: str) -> set[str]:
    """Top-level names of every absolute import in ``source``, at any depth."""
    roots = set()
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Import):
            roots.update(alias.name.split(".")[0] for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            roots.add(node.module.split(".")[0])
    return roots


def test_core_source_never_imports_a_widget_library():
    # Also catches imports hidden inside functions, which the probe only sees when run.
    files = sorted(CORE_DIR.rglob("*.py"))
    assert files
    for path in files:
        found = _imported_roots(path.read_text(encoding="utf-8")) & set(WIDGET_LIBRARIES)
        assert not found, f"{path.relative_to(CORE_DIR)} imports {sorted(found)}"


def test_import_scanner_sees_nested_imports():
    source = (
        "import numpy\ndef f():\n    import traitlets.config\n    from ipywidgets import Box\n"
    )
    assert _imported_roots(source) == {"numpy", "traitlets", "ipywidgets"}


def test_the_plot_layout_of_the_views_imports_no_widget_library():
    # views/_plot_layout.py holds the layout code that left core: it stays widget-free
    path = CORE_DIR.parent / "views" / "_plot_layout.py"
    found = _imported_roots(path.read_text(encoding="utf-8")) & set(WIDGET_LIBRARIES)
    assert not found, f"views/_plot_layout.py imports {sorted(found)}"
    # and core keeps no label placement or plot limits (they moved there)
    import compwidgets.core.biplot as core_biplot

    assert not hasattr(core_biplot, "ray_label_positions")
    assert not hasattr(core_biplot, "plane_limits")
