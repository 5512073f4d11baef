"""Run one pure computation in a forked child while the parent does other work.

The gate compares two sides of a model; on a machine with two cores one side can be
read, checked and diffed in a child while the parent checks the other. The child
inherits the parsed models through fork (nothing large is pickled on the way in) and sends back
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
import struct
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
        # The result comes with its length: a grandchild the child forked may hold the
        # pipe open after the child is done, so its end is no sign of a whole result.
        with os.fdopen(self._fd, "rb") as pipe:
            head = pipe.read(_LENGTH.size)
            payload = pipe.read(_LENGTH.unpack(head)[0]) if len(head) == _LENGTH.size else b""
        pid, self._pid = self._pid, None
        try:
            ok, value = pickle.loads(payload)
        except Exception:  # the child died before sending a whole result
            ok = False
        if not ok:
            os.waitpid(pid, 0)
            return self._function()  # same answer, computed here
        # A whole result arrived: the child only has its exit left, and tearing down a
        # large address space takes a while. Reap it now if it is gone, else later.
        _EXITING.append(pid)
        _reap()
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


_LENGTH = struct.Struct("<Q")  # the byte count sent before a child's pickled result

# Children that sent their result and may still be exiting (reaped by _reap).
_EXITING: list[int] = []


def _reap() -> None:
    for pid in list(_EXITING):
        try:
            done, _ = os.waitpid(pid, os.WNOHANG)
        except ChildProcessError:  # reaped elsewhere
            done = pid
        if done:
            _EXITING.remove(pid)


def start(function: Callable[[], Any], *, fork: bool = True,
          fallback: Callable[[], Any] | None = None) -> Pending:
    """Start ``function()`` in a forked child (or lazily in the parent).

    When the child fails, or no child can be forked, :meth:`Pending.result` computes
    ``fallback()`` (default: ``function()``) here instead; a forked computation holds
    no reference to ``function`` in the parent once a fallback is given.
    """
    if not forkable(fork):
        return Pending(function, None, None)
    _reap()
    read, write = os.pipe()
    try:
        pid = os.fork()
    except OSError:  # no process to spare (memory, process limit): compute it here
        os.close(read)
        os.close(write)
        return Pending(function if fallback is None else fallback, None, None)
    if pid == 0:  # child: compute, send, and leave without running the parent's cleanup
        os.close(read)
        try:
            payload = pickle.dumps((True, function()), protocol=pickle.HIGHEST_PROTOCOL)
        except BaseException:
            payload = pickle.dumps((False, None))
        try:
            with os.fdopen(write, "wb") as pipe:
                pipe.write(_LENGTH.pack(len(payload)) + payload)
        finally:
            os._exit(0)
    os.close(write)
    return Pending(function if fallback is None else fallback, pid, read)


def forkable(fork: bool = True) -> bool:
    """Whether :func:`start` with ``fork`` would run its computation in a child."""
    return fork and hasattr(os, "fork") and (os.cpu_count() or 1) >= 2
