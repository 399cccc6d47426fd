"""Widget callbacks whose errors are shown in an ``Output`` widget, at no cost otherwise.

``Output.capture()`` enters the output around every call: it flushes stdout and
stderr twice (each flush waits for the kernel's IOPub thread) and sends the
output's ``msg_id`` to the page twice. On a selection change, which runs a
callback in every view, that added a few hundred milliseconds before the last
view was updated (measured in Chromium). :func:`shows_errors` runs the callback
directly and enters the output only when it raises: in a kernel the traceback
is shown there and the error goes no further (as with ``capture``); outside a
kernel (scripts, tests) the error propagates.
"""

from __future__ import annotations

import functools
from collections.abc import Callable

import ipywidgets as w

__all__ = ["shows_errors"]


def _in_kernel() -> bool:
    try:
        from IPython import get_ipython
    except ImportError:  # pragma: no cover - IPython comes with ipywidgets
        return False
    shell = get_ipython()
    return shell is not None and getattr(shell, "kernel", None) is not None


def shows_errors(output: w.Output) -> Callable[[Callable], Callable]:
    """Decorator: errors of the wrapped callback go to ``output`` (in a kernel)."""

    def decorate(func: Callable) -> Callable:
        @functools.wraps(func)
        def run(*args, **kwargs):
            try:
                return func(*args, **kwargs)
            except Exception:
                if not _in_kernel():
                    raise
                with output:  # shows the traceback in the output and stops the error there
                    raise
            return None

        return run

    return decorate
