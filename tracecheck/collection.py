"""Pausing Python's cyclic garbage collector around work that only builds trees.

Decoding a large export allocates millions of dicts and lists; the cyclic collector
walks the young ones every few hundred allocations and the old ones again and again
as they pile up, to find nothing: a decoded document, the model columns and the
integer arrays hold no reference cycles. Paused for the whole of a command, the
collector never walks them at all, and reference counting frees them when the
command drops the model. (For the GraphML and ReqIF readers the collector's rescans
cost about a sixth of their time at 100k elements: benchmarks/formats.py.)
"""

from __future__ import annotations

import gc
from collections.abc import Iterator
from contextlib import contextmanager

__all__ = ["collection_paused"]


@contextmanager
def collection_paused() -> Iterator[None]:
    """Disable the cyclic collector inside the block (restored after, even on error)."""
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()
