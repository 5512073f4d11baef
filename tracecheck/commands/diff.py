"""``tracecheck diff OLD NEW`` and ``tracecheck diff REV1..REV2 PATH``."""

from __future__ import annotations

import os

from tracecheck.collection import collection_paused
from tracecheck.commands.common import Streams, emit, load
from tracecheck.diff import diff_models
from tracecheck.errors import UsageError
from tracecheck.report import RenderOptions, render
from tracecheck.report.progress import late_progress, progress_enabled

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
    # Reading and diffing builds millions of small acyclic objects; the cyclic collector
    # stays paused (tracecheck.collection) and resumes only after _run has returned, so
    # both models are already freed by reference counting and it never walks them
    # (resuming with them alive cost a full collection, about 1 s at 100k elements).
    with collection_paused():
        return _run(old_spec, new_spec, fmt, output, config_option, input_format, fail_on_change,
                    options, streams)


def _run(old_spec, new_spec, fmt, output, config_option, input_format, fail_on_change, options, streams) -> int:
    # One configuration for both sides, found from the new one: the rules of the stage
    # under review judge both.
    with late_progress("diff", enabled=progress_enabled(options.quiet)) as step:
        step(0.0, f"reading {new_spec}")
        after = load(new_spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
        step(0.3, f"reading {old_spec}")
        before = load(old_spec, input_format=input_format, stdin=streams.stdin, config=after.config)
        step(0.6, "comparing")
        result = diff_models(before.model, after.model, after.config, with_picture=fmt == "html")
    emit(render("diff", fmt, result, options), output, streams)
    return 1 if fail_on_change and result.changed else 0
