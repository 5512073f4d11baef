"""Run one pure computation in a forked child while the parent does other work.

The gate checks two sides of a model; on a machine with two cores the base side's
rules can run beside the head side's rules and the diff. The child inherits the
parsed models through fork (nothing large is pickled on the way in) and sends back
only its result. Where fork is unavailable, on one core, or if the child fails, the
computation simply runs in the parent, so results never depend on the path taken.

A forked computation may name a ``fallback`` that gives the same answer without the
objects ``function`` closes over (say, re-reading a model from its bytes): the parent
then keeps only the fallback, so it can free those objects while the child works.
"""

from __future__ import annotations

import os
import pickle
import signal
from collections.abc import Callable
from typing import Any

__all__ = ["Pending", "start", "forkable"]


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

    def cancel(self) -> None:
        """Stop a child whose result is no longer wanted (nothing happens in the parent)."""
        if self._pid is None:
            return
        os.close(self._fd)
        try:
            os.kill(self._pid, signal.SIGKILL)
        except ProcessLookupError:  # it had finished already
            pass
        os.waitpid(self._pid, 0)
        self._pid = None


def start(function: Callable[[], Any], *, fork: bool = True,
          fallback: Callable[[], Any] | None = None) -> Pending:
    """Start ``function()`` in a forked child (or lazily in the parent).

    When the child fails, :meth:`Pending.result` computes ``fallback()`` (default:
    ``function()``) here instead; a forked computation holds no reference to
    ``function`` in the parent once a fallback is given.
    """
    if not forkable(fork):
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
    return Pending(function if fallback is None else fallback, pid, read)


def forkable(fork: bool = True) -> bool:
    """Whether :func:`start` with ``fork`` would run its computation in a child."""
    return fork and hasattr(os, "fork") and (os.cpu_count() or 1) >= 2
