"""Small linear algebra on one BLAS thread.

The interactive steps of the views (a biplot's SVD, the robust fits of the
outlier screening) work on matrices of a few to a few hundred columns. On a
machine whose cores are shared, OpenBLAS's worker threads then wait for each
other and a 10 ms SVD can take a second (seen here with two cores under load);
one thread runs it in steady time. Large problems (more than
:data:`SMALL_WORK` numbers) keep every thread: there the threads pay. The limit
holds only inside the ``with`` block: the user's own numpy work keeps its threads.
"""

from __future__ import annotations

from contextlib import contextmanager

__all__ = ["one_blas_thread"]

#: Up to this many numbers in the matrix, linear algebra runs on one thread.
SMALL_WORK = 4_000_000

_controller = None


@contextmanager
def one_blas_thread(work: int = 0):
    """Run the block with BLAS limited to one thread when ``work`` (numbers) is small.

    A no-op for larger work, or when threadpoolctl finds no BLAS to limit.
    """
    global _controller
    if work > SMALL_WORK:
        yield
        return
    try:
        from threadpoolctl import ThreadpoolController

        if _controller is None:
            _controller = ThreadpoolController()
        limit = _controller.limit(limits=1, user_api="blas")
    except Exception:  # pragma: no cover - no BLAS found: nothing to limit
        limit = None
    if limit is None:
        yield
        return
    with limit:
        yield
