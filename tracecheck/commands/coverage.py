"""``tracecheck coverage MODEL``: the coverage audit report."""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from pathlib import Path

from tracecheck.audit import CoverageReport, apply_profile, build_report, settings_from
from tracecheck.commands.common import Streams, emit, load
from tracecheck.errors import UsageError
from tracecheck.report import RenderOptions, render

__all__ = ["run", "coverage_report", "write_matrix"]


def coverage_report(
    spec: str,
    *,
    config_option: str | None = None,
    input_format: str | None = None,
    group_by: Sequence[str] = (),
    result_attribute: str | None = None,
    profile: str | None = None,
    timestamp: bool = False,
    fail_under: float | None = None,
    streams: Streams | None = None,
) -> CoverageReport:
    """Load ``spec`` with its configuration (and profile) and build the report."""
    stdin = streams.stdin if streams else None
    loaded = load(spec, config_option=config_option, input_format=input_format, stdin=stdin)
    settings = settings_from(
        loaded.config, group_by=group_by, result_attribute=result_attribute, profile=profile,
        timestamp=timestamp, fail_under=fail_under,
    )
    config, chosen = apply_profile(loaded.config, settings.profile)
    return build_report(loaded.source, loaded.model, config, settings, chosen)


def write_matrix(report: CoverageReport, destination: str, streams: Streams) -> None:
    """Write the matrix CSV and record its path and hash in the evidence."""
    from tracecheck.report.coverage import matrix_csv

    if destination == "-":
        raise UsageError("--matrix needs a file name; standard output carries the report.")
    data = matrix_csv(report).encode("utf-8")
    emit(data, destination, streams)
    report.evidence["matrix"] = {"path": str(Path(destination)), "sha256": hashlib.sha256(data).hexdigest(),
                                 "rows": len(report.matrix)}


def run(
    spec: str,
    *,
    fmt: str = "text",
    output: str | None = None,
    matrix: str | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    group_by: Sequence[str] = (),
    result_attribute: str | None = None,
    profile: str | None = None,
    timestamp: bool = False,
    fail_under: float | None = None,
    options: RenderOptions | None = None,
    streams: Streams | None = None,
) -> int:
    streams = streams or Streams.default()
    options = options or RenderOptions()
    report = coverage_report(
        spec, config_option=config_option, input_format=input_format, group_by=group_by,
        result_attribute=result_attribute, profile=profile, timestamp=timestamp,
        fail_under=fail_under, streams=streams,
    )
    if matrix:
        write_matrix(report, matrix, streams)
    emit(render("coverage", fmt, report, options), output, streams)
    return report.exit_code
