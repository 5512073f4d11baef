"""Run the embedding's many small matrix products on one BLAS thread.

Fitting evaluates products such as ``(n x k) @ (k x n)`` with ``k`` from 1 to a few
dozen thousands of times. OpenBLAS hands each of them to its thread pool; on a
machine whose two cores are shared with other work, waking and synchronising that
pool made a 289 x 8 x 289 product cost 48 ms instead of 0.23 ms (measured while
building this module), and a fit of the demo thread took minutes. One thread is both
faster and deterministic.

The thread count is read at library load (``OPENBLAS_NUM_THREADS``), too early for a
command to set; so, as thread-pool controllers do, we find the OpenBLAS builds the
process has loaded and call their ``set_num_threads`` entry point, restoring the old
count afterwards. Anything unexpected (another BLAS, another platform) is left alone.
"""

from __future__ import annotations

import ctypes
import functools
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

__all__ = ["single_blas_thread", "one_blas_thread"]

# (get, set) symbol pairs of the OpenBLAS builds numpy and scipy ship, then plain OpenBLAS.
_SYMBOLS = (
    ("scipy_openblas_get_num_threads64_", "scipy_openblas_set_num_threads64_"),
    ("scipy_openblas_get_num_threads", "scipy_openblas_set_num_threads"),
    ("openblas_get_num_threads64_", "openblas_set_num_threads64_"),
    ("openblas_get_num_threads", "openblas_set_num_threads"),
)


def _controls() -> list[tuple[object, object]]:
    try:
        maps = Path("/proc/self/maps").read_text(encoding="utf-8", errors="replace")
    except OSError:
        return []
    paths = sorted({line.split()[-1] for line in maps.splitlines()
                    if "openblas" in line.lower() and line.split()[-1].startswith("/")})
    found = []
    for path in paths:
        try:
            library = ctypes.CDLL(path)  # already loaded: the same handle, no new copy
        except OSError:
            continue
        for get_name, set_name in _SYMBOLS:
            getter, setter = getattr(library, get_name, None), getattr(library, set_name, None)
            if getter is not None and setter is not None:
                getter.restype = ctypes.c_int
                setter.argtypes = [ctypes.c_int]
                found.append((getter, setter))
                break
    return found


@contextmanager
def single_blas_thread() -> Iterator[None]:
    """Within the block, every loaded OpenBLAS uses one thread; the old counts come back after.

    Examples
    --------
    >>> import numpy as np
    >>> with single_blas_thread():
    ...     float((np.ones((3, 2)) @ np.ones((2, 3))).sum())
    18.0
    """
    import numpy  # noqa: F401  (load numpy's BLAS before looking for it)

    try:
        controls = _controls()
        before = [getter() for getter, _ in controls]
        for _, setter in controls:
            setter(1)
    except (OSError, AttributeError, ValueError):
        controls, before = [], []
    try:
        yield
    finally:
        for (_, setter), count in zip(controls, before, strict=True):
            setter(max(1, int(count)))


def one_blas_thread(function):
    """Decorator: run ``function`` inside :func:`single_blas_thread`."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        with single_blas_thread():
            return function(*args, **kwargs)

    return wrapper
