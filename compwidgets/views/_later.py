"""Run a function once the kernel is idle (after the current cell or widget message).

Costly work that need not hold up what the user just did (an outlier
screening after a change of parts, a panel displayed on its own) is put on
the IPython kernel's event loop: it runs right after the current cell or
widget callback returns, in the kernel's main thread, so widget updates it
makes (a progress bar) reach the page as it goes. Outside a kernel (a script,
the tests) nothing is scheduled and the caller computes on demand instead.
"""

from __future__ import annotations

from collections.abc import Callable

__all__ = ["kernel_loop", "run_when_idle"]

#: Seconds after which the scheduled function runs (lets pending messages go out first).
DELAY = 0.05


def kernel_loop():
    """The running IPython kernel's event loop (tornado IOLoop), or None outside a kernel."""
    try:
        from IPython import get_ipython
    except ImportError:  # pragma: no cover - IPython comes with ipywidgets
        return None
    shell = get_ipython()
    kernel = getattr(shell, "kernel", None) if shell is not None else None
    return getattr(kernel, "io_loop", None)


def run_when_idle(func: Callable[[], object]) -> bool:
    """Schedule ``func()`` on the kernel's event loop; False (nothing scheduled) outside one."""
    loop = kernel_loop()
    if loop is None:
        return False
    loop.call_later(DELAY, func)
    return True
