"""Every example in the package's docstrings runs as written.

Docstring examples are doctests (``>>>``), run here module by module with the
standard library's :mod:`doctest`. The README's python blocks are run by
test_readme.py, the notebooks by nbval.
"""

from __future__ import annotations

import doctest
import importlib
import pkgutil

import pytest

import compwidgets

MODULES = sorted(
    m.name for m in pkgutil.walk_packages(compwidgets.__path__, prefix="compwidgets.")
)
MODULES.insert(0, "compwidgets")
FINDER = doctest.DocTestFinder(exclude_empty=True)


def _examples(name: str) -> list[doctest.DocTest]:
    module = importlib.import_module(name)
    return [t for t in FINDER.find(module, name) if t.examples]


def test_the_modules_with_examples_are_all_found():
    # so that the test below cannot pass by finding nothing
    with_examples = {name for name in MODULES if _examples(name)}
    assert {
        "compwidgets",
        "compwidgets.transformer",
        "compwidgets.units",
        "compwidgets.views.ternary",
        "compwidgets.views.biplot",
    } <= with_examples


@pytest.mark.parametrize("name", [n for n in MODULES if _examples(n)])
def test_docstring_examples_run_as_written(name):
    runner = doctest.DocTestRunner(
        optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE, verbose=False
    )
    report: list[str] = []
    for test in _examples(name):
        runner.run(test, out=report.append)
    assert runner.failures == 0, "".join(report)
