"""``tracecheck check MODEL``."""

from __future__ import annotations

import dataclasses
import os
from pathlib import Path

from tracecheck import gitsource
from tracecheck.baseline import apply_baseline, load_baseline
from tracecheck.check import check_model
from tracecheck.collection import collection_paused
from tracecheck.commands.common import Streams, emit, load
from tracecheck.commands.outcome import apply_review, ci_uri, step_summary
from tracecheck.report import RenderOptions, render
from tracecheck.report.progress import late_progress, progress_enabled
from tracecheck.rules import rules

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
    baseline: str | None = None,
    waivers_option: str | None = None,
    today_option: str | None = None,
) -> int:
    streams = streams or Streams.default()
    options = options or RenderOptions()
    # The model is dropped (freed by reference counting) before the collector resumes,
    # so it never walks the decoded document: see tracecheck.collection.
    with collection_paused():
        return _run(spec, fmt, output, config_option, input_format, fail_on, options, streams,
                    baseline, waivers_option, today_option)


def _run(spec, fmt, output, config_option, input_format, fail_on, options, streams,
         baseline, waivers_option, today_option) -> int:
    known = load_baseline(Path(baseline)) if baseline else None  # a bad baseline fails first
    with late_progress("check", enabled=progress_enabled(options.quiet)) as step:
        step(0.0, f"reading {spec}")
        loaded = load(spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
        step(0.6, "rules")
        result = check_model(loaded.model, loaded.source.data, loaded.config, fail_on=fail_on)
    old, summary = set(), None
    if known is not None:  # findings the baseline lists may use a waiver but are not reported
        kept, summary = apply_baseline(result.findings, known)
        old = {id(f) for f in result.findings} - {id(f) for f in kept}
    review = apply_review(result.findings, loaded.config, Path.cwd(), waivers_option=waivers_option,
                          today_option=today_option, old=old)
    root = gitsource.find_root(Path.cwd())
    result = dataclasses.replace(
        result,
        findings=review.findings,
        inputs=result.inputs + [i for i in review.config_inputs(loaded.config) if i["role"] == "waivers"],
        waivers=review.waivers,
        baseline=summary,
        rule_ids=tuple(r for r in rules() if r not in loaded.config.disabled),
        uris={loaded.model.origin: ci_uri(loaded.model.origin, root)} | review.uris(root),
    )
    emit(render("check", fmt, result, options), output, streams)
    if fmt == "github" and os.environ.get("GITHUB_STEP_SUMMARY"):
        from tracecheck.report.gate import check_summary  # folded and capped, unlike the full view

        step_summary(check_summary(result, options), Path(os.environ["GITHUB_STEP_SUMMARY"]))
    return result.exit_code
