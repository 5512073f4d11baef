"""Renderers for ``check`` results: text (rich), json, markdown."""

from __future__ import annotations

import json
from itertools import groupby

from rich.padding import Padding
from rich.table import Table
from rich.text import Text

from tracecheck.check import CheckResult
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.console import to_text

__all__ = ["check_json", "check_text", "check_markdown", "summary_line", "md_escape"]

_STYLE = {"error": "bold red", "warning": "yellow", "note": "cyan"}


def dump_json(document) -> str:
    return json.dumps(document, indent=2, ensure_ascii=False) + "\n"


@renderer("check", "json")
def check_json(result: CheckResult, options: RenderOptions) -> str:
    return dump_json(result.to_json())


def summary_line(result: CheckResult) -> str:
    summary = result.summary()
    counts = summary["by_severity"]
    parts = [f"{n} {s}{'s' if n != 1 else ''}" for s, n in counts.items() if n]
    total = summary["findings"]
    body = f"{total} finding{'s' if total != 1 else ''}" + (f" ({', '.join(parts)})" if parts else "")
    verdict = "FAIL" if summary["failed"] else "PASS"
    return f"{verdict}: {body}; failing at {result.fail_on} or above."


def _by_rule(result: CheckResult):
    ordered = sorted(result.findings, key=lambda f: f.rule)
    return [(rule, list(items)) for rule, items in groupby(ordered, key=lambda f: f.rule)]


def _where(finding) -> str:
    return str(finding.location) if finding.location else "(no location)"


@renderer("check", "text")
def check_text(result: CheckResult, options: RenderOptions) -> str:
    origin = ", ".join(i["path"] for i in result.inputs if i["role"] == "model")
    items: list = []
    if not options.quiet:
        items.append(Text(f"tracecheck check {origin}", style="bold"))
        for rule, findings in _by_rule(result):
            severities = sorted({f.severity for f in findings})
            header = Text()
            header.append(f"{rule}", style="bold")
            header.append(f"  {len(findings)} x {'/'.join(severities)}", style=_STYLE.get(severities[0], ""))
            table = Table.grid(padding=(0, 2))
            table.add_column(style="dim", no_wrap=True)
            table.add_column(overflow="fold")
            for finding in findings:
                table.add_row(_where(finding), finding.message)
            items += [Text(""), header, Padding(table, (0, 0, 0, 2))]
        from tracecheck.report.gate import review_text

        items += review_text(result)
        items.append(Text(""))
    verdict = summary_line(result)
    items.append(Text(verdict, style="bold red" if result.failing else "bold green"))
    return to_text(items, options)


def md_escape(text: str) -> str:
    return (
        str(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ").replace("<", "&lt;")
    )


@renderer("check", "markdown")
def check_markdown(result: CheckResult, options: RenderOptions) -> str:
    origin = ", ".join(i["path"] for i in result.inputs if i["role"] == "model")
    lines = [f"# tracecheck check: {md_escape(origin)}", "", f"**{summary_line(result)}**", ""]
    summary = result.summary()
    if summary["by_rule"]:
        lines += ["| rule | findings |", "|---|---:|"]
        lines += [f"| `{rule}` | {n} |" for rule, n in summary["by_rule"].items()]
        lines.append("")
    for rule, findings in _by_rule(result):
        lines += [f"## `{rule}` ({len(findings)})", "", "| severity | location | elements | message |", "|---|---|---|---|"]
        for f in findings:
            elements = ", ".join(f"`{md_escape(e)}`" for e in f.elements)
            lines.append(f"| {f.severity} | {md_escape(_where(f))} | {elements} | {md_escape(f.message)} |")
        lines.append("")
    from tracecheck.report.gate import review_markdown

    lines += review_markdown(result)
    return "\n".join(lines)
