"""Run one pure computation in a forked child while the parent does other work.

The gate checks two sides of a model; on a machine with two cores the base side's
rules can run beside the head side's rules and the diff. The child inherits the
parsed models through fork (nothing large is pickled on the way in) and sends back
only its result. Where fork is unavailable, on one core, or if the child fails, the
computation simply runs in the parent, so results never depend on the path taken.
"""

from __future__ import annotations

import os
import pickle
from collections.abc import Callable
from typing import Any

__all__ = ["Pending", "start"]


class Pending:
    """A computation started by :func:`start`; :meth:`result` waits for it."""

    def __init__(self, function: Callable[[], Any], pid: int | None, fd: int | None) -> None:
        self._function = function
        self._pid = pid
        self._fd = fd

    def result(self) -> Any:
        if self._pid is None:
            return self._function()
        chunks = []
        with os.fdopen(self._fd, "rb") as pipe:
            while chunk := pipe.read(1 << 20):
                chunks.append(chunk)
        _, status = os.waitpid(self._pid, 0)
        self._pid = None
        try:
            ok, value = pickle.loads(b"".join(chunks))
        except Exception:  # the child died before sending a whole result
            ok = False
        if status != 0 or not ok:
            return self._function()  # same answer, computed here
        return value


def start(function: Callable[[], Any], *, fork: bool = True) -> Pending:
    """Start ``function()`` in a forked child (or lazily in the parent)."""
    if not fork or not hasattr(os, "fork") or (os.cpu_count() or 1) < 2:
        return Pending(function, None, None)
    read, write = os.pipe()
    pid = os.fork()
    if pid == 0:  # child: compute, send, and leave without running the parent's cleanup
        os.close(read)
        try:
            payload = pickle.dumps((True, function()), protocol=pickle.HIGHEST_PROTOCOL)
        except BaseException:
            payload = pickle.dumps((False, None))
        try:
            with os.fdopen(write, "wb") as pipe:
                pipe.write(payload)
        finally:
            os._exit(0)
    os.close(write)
    return Pending(function, pid, read)
