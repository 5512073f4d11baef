"""``tracecheck diff OLD NEW`` and ``tracecheck diff REV1..REV2 PATH``."""

from __future__ import annotations

import gc
import os
from collections.abc import Iterator
from contextlib import contextmanager

from tracecheck.commands.common import Streams, emit, load
from tracecheck.diff import diff_models
from tracecheck.errors import UsageError
from tracecheck.report import RenderOptions, render

__all__ = ["run", "sides"]


def sides(old: str, new: str | None) -> tuple[str, str]:
    """The two model specs: ``OLD NEW`` as given, or ``REV1..REV2 PATH`` expanded to
    ``REV1:PATH`` and ``REV2:PATH``."""
    if new is None:
        raise UsageError("diff needs two models (OLD NEW) or a revision range and a path (REV1..REV2 PATH).")
    if _is_range(old):
        first, _, second = old.partition("..")
        if not first or not second or ".." in second:
            raise UsageError(f"{old}: a revision range is written REV1..REV2, both revisions given.")
        return f"{first}:{new}", f"{second}:{new}"
    return old, new


def _is_range(spec: str) -> bool:
    """REV1..REV2, not a path that climbs a folder ("../old.json", "a/../b.json")."""
    if ".." not in spec or ":" in spec or os.path.exists(spec):
        return False
    first, _, second = spec.partition("..")
    return not (first == "" and second.startswith(("/", "\\")) or first.endswith(("/", "\\")))


@contextmanager
def _without_cyclic_gc() -> Iterator[None]:
    """Pause the cyclic garbage collector while two models are built and compared.

    Reading and diffing creates millions of small acyclic objects; each collection
    pass rescans all of them, which cost about 30 % of a 100k-element diff
    (benchmarks/diff.py: 24.2 s -> 16.8 s CPU). Reference counting still frees
    everything that is not in a cycle, and collection resumes afterwards.
    """
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


def run(
    old: str,
    new: str | None,
    *,
    fmt: str = "text",
    output: str | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    fail_on_change: bool = False,
    options: RenderOptions | None = None,
    streams: Streams | None = None,
) -> int:
    streams = streams or Streams.default()
    options = options or RenderOptions()
    old_spec, new_spec = sides(old, new)
    if old_spec == "-" and new_spec == "-":
        raise UsageError("only one side of a diff can be read from standard input.")
    # One configuration for both sides, found from the new one: the rules of the stage
    # under review judge both.
    with _without_cyclic_gc():
        after = load(new_spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
        before = load(old_spec, input_format=input_format, stdin=streams.stdin, config=after.config)
        result = diff_models(before.model, after.model, after.config, with_picture=fmt == "html")
        emit(render("diff", fmt, result, options), output, streams)
    return 1 if fail_on_change and result.changed else 0
