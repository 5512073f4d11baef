"""Run the embedding's many small matrix products on one BLAS thread.

Fitting evaluates products such as ``(n x k) @ (k x n)`` with ``k`` from 1 to a few
dozen thousands of times. OpenBLAS hands each of them to its thread pool; on a
machine whose two cores are shared with other work, waking and synchronising that
pool costs far more than the product itself (see the measurement beside the
threadpoolctl dependency in ``pyproject.toml``). One thread is both faster and
deterministic.

The thread count is read at library load (``OPENBLAS_NUM_THREADS``), too early for a
command to set, so the limit is applied at run time with threadpoolctl, which finds
the BLAS libraries the process has loaded (any vendor, any platform) and restores their
old counts afterwards.
"""

from __future__ import annotations

import functools
from collections.abc import Iterator
from contextlib import contextmanager

from threadpoolctl import threadpool_limits

__all__ = ["single_blas_thread", "one_blas_thread"]


@contextmanager
def single_blas_thread() -> Iterator[None]:
    """Within the block, every loaded BLAS uses one thread; the old counts come back after.

    Examples
    --------
    >>> import numpy as np
    >>> with single_blas_thread():
    ...     float((np.ones((3, 2)) @ np.ones((2, 3))).sum())
    18.0
    """
    import numpy  # noqa: F401  (load numpy's BLAS before limiting it)

    with threadpool_limits(limits=1, user_api="blas"):
        yield


def one_blas_thread(function):
    """Decorator: run ``function`` inside :func:`single_blas_thread`."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        with single_blas_thread():
            return function(*args, **kwargs)

    return wrapper
