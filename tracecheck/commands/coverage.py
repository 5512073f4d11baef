"""``tracecheck coverage MODEL``: the coverage audit report."""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from pathlib import Path

from tracecheck.audit import CoverageReport, apply_profile, build_report, settings_from
from tracecheck.collection import collection_paused
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


def write_matrix(report: CoverageReport, destination: str, streams: Streams, *, shown: str | None = None) -> None:
    """Write the matrix CSV and record its path and hash in the evidence."""
    from tracecheck.report.coverage import matrix_csv

    if destination == "-":
        raise UsageError("--matrix needs a file name; standard output carries the report.")
    data = matrix_csv(report).encode("utf-8")
    emit(data, destination, streams)
    report.evidence["matrix"] = {"path": shown or str(Path(destination)), "sha256": hashlib.sha256(data).hexdigest(),
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
    if matrix and output and output != "-" and Path(matrix).resolve() == Path(output).resolve():
        raise UsageError(f"{matrix}: --matrix and -o name the same file; give the matrix its own.")
    # The decoded model holds no reference cycles: with the cyclic collector paused
    # for the command it never walks those millions of objects (see
    # tracecheck.collection); at 1M elements its rescans cost more than the audit.
    with collection_paused():
        report = coverage_report(
            spec, config_option=config_option, input_format=input_format, group_by=group_by,
            result_attribute=result_attribute, profile=profile, timestamp=timestamp,
            fail_under=fail_under, streams=streams,
        )
        if matrix:
            write_matrix(report, matrix, streams)
        emit(render("coverage", fmt, report, options), output, streams)
        return report.exit_code


def demo_step(demo, out, options) -> list[str]:
    """Demo: the audit report of the qualification stage (HTML, JSON, matrix CSV).

    None of the bundled profiles fits a ferry's shore-charging system (they follow
    airborne, road-vehicle and medical-device standards), so the demo applies its own
    configuration, grouped by integrity level and requirement level.
    """
    from tracecheck.report.coverage import fmt_percent

    streams = Streams(out, out)
    report = coverage_report(str(demo.model), group_by=("integrity", "level"), streams=streams)
    write_matrix(report, str(demo.reports / "matrix.csv"), streams, shown="reports/matrix.csv")
    names = {"html": "coverage.html", "json": "coverage.json"}
    for fmt, name in names.items():
        emit(render("coverage", fmt, report, RenderOptions()), str(demo.reports / name), streams)
    out.write("\n$ tracecheck coverage model/thread.json --by integrity --by level "
              "--matrix reports/matrix.csv --format html   (stage: qualification)\n")
    out.write("  (no bundled profile fits a ferry's shore-charging system -- they follow airborne, "
              "road-vehicle and medical-device standards -- so the demo's own declarations apply)\n")
    for d in report.declarations:
        passing = "" if d.passing is None else f"; with passing tests {fmt_percent(d.passing.percent)}"
        out.write(f"  {d.name}: {d.counts.covered}/{d.counts.total} {fmt_percent(d.counts.percent)}{passing}\n")
    out.flush()
    return [names["html"], names["json"], "matrix.csv"]
