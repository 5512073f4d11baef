"""``tracecheck check MODEL``."""

from __future__ import annotations

from tracecheck.check import check_model
from tracecheck.collection import collection_paused
from tracecheck.commands.common import Streams, emit, load
from tracecheck.report import RenderOptions, render

__all__ = ["run"]


def run(
    spec: str,
    *,
    fmt: str = "text",
    output: str | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    fail_on: str = "error",
    options: RenderOptions | None = None,
    streams: Streams | None = None,
) -> int:
    streams = streams or Streams.default()
    options = options or RenderOptions()
    # The model is dropped (freed by reference counting) before the collector resumes,
    # so it never walks the decoded document: see tracecheck.collection.
    with collection_paused():
        return _run(spec, fmt, output, config_option, input_format, fail_on, options, streams)


def _run(spec, fmt, output, config_option, input_format, fail_on, options, streams) -> int:
    loaded = load(spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
    result = check_model(loaded.model, loaded.source.data, loaded.config, fail_on=fail_on)
    emit(render("check", fmt, result, options), output, streams)
    return result.exit_code
