"""compwidgets: linked Jupyter widgets for exploring compositional data.

Quick start (in a notebook; display ``bench`` in a cell to see the linked views):

>>> import compwidgets as cw
>>> bench = cw.explore(cw.demo.stream_sediments())  # a linked workbench
>>> bench.model.select_labels(bench.model.index[:5])  # keep working in code
>>> int(bench.model.selection.size)
5

The maths lives in :mod:`compwidgets.core` (pure numpy / scipy / pandas).
Widget modules are imported lazily, so ``import compwidgets.core`` pulls in no
widget library.
"""

from __future__ import annotations

import importlib

from . import core

__version__ = "0.1.0"

_LAZY = {
    "read_composition": ("compwidgets.intake", "read_composition"),
    "Composition": ("compwidgets.composition", "Composition"),
    "CompositionModel": ("compwidgets.model", "CompositionModel"),
    "explore": ("compwidgets.workbench", "explore"),
    "Workbench": ("compwidgets.workbench", "Workbench"),
    "BalanceTransformer": ("compwidgets.transformer", "BalanceTransformer"),
    "TernaryView": ("compwidgets.views.ternary", "TernaryView"),
    "BiplotView": ("compwidgets.views.biplot", "BiplotView"),
    "DiscriminantView": ("compwidgets.views.discriminant", "DiscriminantView"),
    "GroupDiscriminant": ("compwidgets.discriminant", "GroupDiscriminant"),
    "BalanceBuilder": ("compwidgets.views.builder", "BalanceBuilder"),
    "demo": ("compwidgets.demo", None),
    "export": ("compwidgets.export", None),
    "lazy": ("compwidgets.lazy", None),
    "LazyComposition": ("compwidgets.lazy", "LazyComposition"),
    "views": ("compwidgets.views", None),
}

__all__ = ["core", *_LAZY]


def __getattr__(name: str):
    try:
        module_name, attribute = _LAZY[name]
    except KeyError:
        raise AttributeError(f"module 'compwidgets' has no attribute {name!r}") from None
    module = importlib.import_module(module_name)
    value = module if attribute is None else getattr(module, attribute)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_LAZY))
