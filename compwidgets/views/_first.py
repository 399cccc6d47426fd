"""Model observers that run before the views' own: the cheap text first.

traitlets calls the observers of a trait in the order they were added, and each
observer's widget messages leave the kernel as it runs. On a selection change
every scatter view then restyles its points in the page, one after another; the
selection bar's count and the builder's few numbers, sent behind them, are
shown only after all of that. :func:`observe_first` adds a handler right after
the model's own observers (its ``@observe`` methods, which e.g. drop the cached
selection mask, so the handler sees the new state), ahead of every view's.
"""

from __future__ import annotations

from collections.abc import Callable

import traitlets as t

__all__ = ["observe_first"]


def observe_first(model: t.HasTraits, handler: Callable, name: str) -> None:
    """``model.observe(handler, names=[name])``, called before the observers added so far.

    Only the order changes (``model.unobserve`` removes it as usual); where traitlets
    keeps its observers in another form, the handler simply runs in the order added.
    """
    model.observe(handler, names=[name])
    notifiers = getattr(model, "_trait_notifiers", {}).get(name, {}).get("change")
    if not isinstance(notifiers, list) or handler not in notifiers:
        return
    notifiers.remove(handler)
    own = [i for i, h in enumerate(notifiers) if isinstance(h, t.EventHandler)]
    notifiers.insert(own[-1] + 1 if own else 0, handler)
