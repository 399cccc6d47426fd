"""The views of the workbench; each holds the shared model and observes it.

Imported lazily so that ``import compwidgets.views`` stays cheap.
"""

from __future__ import annotations

import importlib

_VIEWS = {
    "TernaryView": "ternary",
    "BiplotView": "biplot",
    "DiscriminantView": "discriminant",
    "BalanceBuilder": "builder",
    "SubcompositionPicker": "picker",
    "TriagePanel": "triage",
    "SelectionBar": "selection_bar",
}

__all__ = list(_VIEWS)


def __getattr__(name: str):
    if name not in _VIEWS:
        raise AttributeError(f"module 'compwidgets.views' has no attribute {name!r}")
    value = getattr(importlib.import_module(f"{__name__}.{_VIEWS[name]}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(_VIEWS))
