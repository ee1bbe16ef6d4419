"""One BLAS thread for loops of small matrix products over row blocks.

A product of a few thousand rows by a p x p matrix is too small to split
across threads: with a multi-threaded BLAS on a busy machine the threads
spend longer waiting for each other than computing. Row-block loops and the
robust estimate's many small products therefore run on one thread, and the
caller's thread settings return afterwards.
"""

from __future__ import annotations

from contextlib import AbstractContextManager
from functools import cache

from threadpoolctl import ThreadpoolController


@cache
def _controller() -> ThreadpoolController:
    return ThreadpoolController()


def one_blas_thread() -> AbstractContextManager[object]:
    """A context in which the loaded BLAS libraries use a single thread."""
    return _controller().limit(limits=1, user_api="blas")
