"""Renderers for ``coverage`` reports: json, text (rich), markdown, csv, and the matrix CSV.

CSV choices (for spreadsheet programs, common practice, no source): UTF-8 *with* a
byte order mark, because spreadsheet programs commonly open a CSV without one in the
legacy 8-bit code page of the machine and garble every non-ASCII name ("degC" signs,
accented names), while Python (``encoding="utf-8-sig"``) and other readers skip the
mark; CRLF row ends and minimal quoting as the :mod:`csv` module writes them (RFC 4180);
a cell that starts with ``=``, ``+``, ``-``, ``@``, tab or carriage return gets a leading
apostrophe so no spreadsheet evaluates model text as a formula (the usual guard
against formula injection, from memory).
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterable
from json.encoder import encode_basestring
from typing import Any

from rich.padding import Padding
from rich.table import Table
from rich.text import Text

from tracecheck.audit import UNSET, CoverageReport, DeclarationReport, MatrixRow
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.console import to_text

__all__ = [
    "coverage_json",
    "indented_json",
    "coverage_text",
    "coverage_markdown",
    "coverage_csv",
    "matrix_csv",
    "MATRIX_COLUMNS",
    "SUMMARY_COLUMNS",
    "fmt_percent",
    "evidence_lines",
    "shown_groups",
]

BOM = "\ufeff"
MATRIX_COLUMNS = ("requirement", "name", "satisfied_by", "allocated_to", "verified_by", "tests", "passing", "failing")
SUMMARY_COLUMNS = ("declaration", "direction", "group_attribute", "group_value", "covered", "total", "percent",
                   "passing_covered", "passing_percent", "uncovered")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def shown_groups(d: DeclarationReport):
    """Groups worth showing: an attribute none of the declaration's elements carries
    (integrity on tests, say) only repeats the total, so the views leave it out; the
    JSON keeps it."""
    return [(attribute, values) for attribute, values in d.groups.items() if set(values) != {UNSET}]


def fmt_percent(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.1f}%"


def _cell(value: object) -> str:
    text = str(value)
    return "'" + text if text.startswith(_FORMULA_START) else text


def _csv(header: Iterable[str], rows: Iterable[Iterable[object]]) -> str:
    buffer = io.StringIO(newline="")
    writer = csv.writer(buffer, quoting=csv.QUOTE_MINIMAL, lineterminator="\r\n")
    writer.writerow(list(header))
    for row in rows:
        writer.writerow([_cell(v) for v in row])
    return BOM + buffer.getvalue()


def matrix_header(report: CoverageReport) -> list[str]:
    """Fixed columns, with the ``--by`` attributes after the requirement's name."""
    return [*MATRIX_COLUMNS[:2], *report.settings.group_by, *MATRIX_COLUMNS[2:]]


def matrix_cells(row: MatrixRow) -> list[object]:
    tests = "; ".join(f"{test} [{result}]" for test, result in row.verified_by)
    return [row.requirement, row.name, *row.attributes, "; ".join(row.satisfied_by),
            "; ".join(row.allocated_to), tests, len(row.verified_by), row.passing, row.failing]


def matrix_csv(report: CoverageReport) -> str:
    """The traceability matrix: one row per requirement, sorted by id."""
    return _csv(matrix_header(report), (matrix_cells(row) for row in report.matrix))


@renderer("coverage", "json")
def coverage_json(report: CoverageReport, options: RenderOptions) -> str:
    document = report.to_json()
    try:
        return indented_json(document) + "\n"
    except TypeError:  # a value indented_json leaves to the json module
        return json.dumps(document, indent=2, ensure_ascii=False) + "\n"


def indented_json(value: Any, indent: str = "") -> str:
    """``json.dumps(value, indent=2, ensure_ascii=False)``, byte for byte, for dicts
    with string keys, lists, strings, numbers, booleans and None (``TypeError`` for
    anything else).

    The json module's indenting encoder is pure Python, one generator step per list
    item; a report at 1M elements lists several hundred thousand ids, which this joins
    with the module's C string encoder instead (about a third of the time).
    """
    if isinstance(value, str):
        return encode_basestring(value)
    if value is None or value is True or value is False:
        return "null" if value is None else "true" if value else "false"
    if isinstance(value, int):
        return int.__repr__(value)
    if isinstance(value, float):
        return json.dumps(value)
    inner = indent + "  "
    between = ",\n" + inner
    if isinstance(value, list):
        if not value:
            return "[]"
        if all(type(item) is str for item in value):
            items = between.join(map(encode_basestring, value))
        else:
            items = between.join([indented_json(item, inner) for item in value])
        return f"[\n{inner}{items}\n{indent}]"
    if isinstance(value, dict) and all(type(key) is str for key in value):
        if not value:
            return "{}"
        items = between.join([f"{encode_basestring(k)}: {indented_json(v, inner)}" for k, v in value.items()])
        return f"{{\n{inner}{items}\n{indent}}}"
    raise TypeError(f"not left to indented_json: {type(value).__name__}")


def _summary_rows(d: DeclarationReport):
    passing = d.passing
    yield [d.name, d.direction, "", "", d.counts.covered, d.counts.total, _pct(d.counts.percent),
           "" if passing is None else passing.covered, "" if passing is None else _pct(passing.percent),
           "; ".join(d.counts.uncovered)]
    for attribute, values in d.groups.items():
        for value, counts in values.items():
            yield [d.name, d.direction, attribute, value, counts.covered, counts.total, _pct(counts.percent),
                   "", "", "; ".join(counts.uncovered)]


def _pct(value: float | None) -> str:
    return "" if value is None else f"{value:.1f}"


@renderer("coverage", "csv")
def coverage_csv(report: CoverageReport, options: RenderOptions) -> str:
    """One row per declaration, then one per group of it; the evidence is in the JSON."""
    return _csv(SUMMARY_COLUMNS, (row for d in report.declarations for row in _summary_rows(d)))


def evidence_lines(report: CoverageReport) -> list[tuple[str, str]]:
    """The evidence block as (label, value) pairs, shared by text, markdown and HTML."""
    e = report.evidence
    model = e["model"]
    lines = [
        ("tool", f"tracecheck {e['tool']['version']} (Python {e['tool']['python']})"),
        ("model", f"{model['path']} ({model['format']})"),
        ("model SHA-256", model["sha256"]),
    ]
    if model.get("stage") or model.get("name"):
        lines.append(("model name / stage", f"{model.get('name') or '-'} / {model.get('stage') or '-'}"))
    git = model.get("git")
    if git is not None:
        state = "dirty" if git["dirty"] else "clean"
        if git.get("modified"):
            state += ", model file differs from the commit"
        lines.append(("git commit", f"{git['commit'] or '(no commit yet)'} ({state}); {git['path']}"))
    else:
        lines.append(("git commit", "not in a git repository"))
    config = e["config"]
    lines.append(("configuration", "defaults (no file)" if config is None else f"{config['path']} SHA-256 {config['sha256']}"))
    if e["profile"] is not None:
        p = e["profile"]
        lines.append(("profile", f"{p['name']}: {p['standard']}; SHA-256 {p['sha256']}"))
    names = ", ".join(d["name"] for d in e["declarations"])
    lines.append(("declarations", f"{len(e['declarations'])}: {names}; SHA-256 {e['declarations_sha256']}"))
    counts = e["counts"]
    kinds = ", ".join(f"{k} {n}" for k, n in counts["by_kind"].items())
    lines.append(("counts", f"{counts['elements']} elements ({kinds}), {counts['links']} links"))
    if e["group_by"]:
        lines.append(("grouped by", ", ".join(e["group_by"])))
    results = ", ".join(f"{k} {n}" for k, n in counts["test_results"].items()) or "no tests"
    lines.append(("test results", f"attribute {e['result_attribute']!r}: {results}"))
    if "matrix" in e:
        lines.append(("matrix", f"{e['matrix']['path']} SHA-256 {e['matrix']['sha256']}"))
    if "generated" in e:
        lines.append(("generated", e["generated"]))
    return lines


def verdict(report: CoverageReport) -> str:
    limit = report.settings.fail_under
    if limit is None:
        return ""
    low = report.below_threshold
    if not low:
        return f"PASS: every declaration is at or above {limit:g}%."
    names = ", ".join(f"{d.name} ({fmt_percent(d.result.percent)})" for d in low)
    return f"FAIL: below {limit:g}%: {names}."


def _declaration_table(report: CoverageReport) -> Table:
    table = Table(show_edge=False, pad_edge=False, box=None, header_style="bold")
    for column, justify in (("declaration", "left"), ("direction", "left"), ("covered", "right"),
                            ("percent", "right"), ("passing tests", "right")):
        table.add_column(column, justify=justify, no_wrap=column != "declaration")
    for d in report.declarations:
        passing = "-" if d.passing is None else f"{d.passing.covered}/{d.passing.total} {fmt_percent(d.passing.percent)}"
        table.add_row(d.name, d.direction, f"{d.counts.covered}/{d.counts.total}",
                      fmt_percent(d.counts.percent), passing)
    return table


def _group_table(report: CoverageReport) -> Table | None:
    rows = [(d.name, attribute, value, c) for d in report.declarations
            for attribute, values in shown_groups(d) for value, c in values.items()]
    if not rows:
        return None
    table = Table(show_edge=False, pad_edge=False, box=None, header_style="bold")
    for column, justify in (("declaration", "left"), ("by", "left"), ("value", "left"),
                            ("covered", "right"), ("percent", "right")):
        table.add_column(column, justify=justify)
    previous = None
    for name, attribute, value, c in rows:
        shown = "" if (name, attribute) == previous else name
        table.add_row(shown, attribute if shown else "", value, f"{c.covered}/{c.total}", fmt_percent(c.percent))
        previous = (name, attribute)
    return table


def _gap_text(report: CoverageReport) -> list:
    items: list = []
    for direction in ("forward", "backward"):
        for d in (d for d in report.declarations if d.direction == direction and d.counts.uncovered):
            items.append(Text(f"{direction} gaps, {d.name} ({len(d.counts.uncovered)}):", style="bold"))
            items.append(Padding(Text(", ".join(d.counts.uncovered), overflow="fold"), (0, 0, 0, 2)))
    for d in (d for d in report.declarations if d.failing_only):
        items.append(Text(f"only failing tests, {d.name} ({len(d.failing_only)}):", style="bold"))
        items.append(Padding(Text(", ".join(d.failing_only), overflow="fold"), (0, 0, 0, 2)))
    return items


@renderer("coverage", "text")
def coverage_text(report: CoverageReport, options: RenderOptions) -> str:
    items: list = [Text(f"tracecheck coverage {report.evidence['model']['path']}", style="bold"), Text("")]
    items.append(_declaration_table(report))
    if not options.quiet:
        groups = _group_table(report)
        if groups is not None:
            items += [Text(""), groups]
        items.append(Text(""))
        items += _gap_text(report)
        items.append(Text(""))
        grid = Table.grid(padding=(0, 2))
        grid.add_column(style="dim", no_wrap=True)
        grid.add_column(overflow="fold")
        for label, value in evidence_lines(report):
            grid.add_row(label, value)
        items += [Text("Evidence", style="bold"), Padding(grid, (0, 0, 0, 2)), Text("")]
    # The profile note and the caution go with every view, --quiet included.
    if report.evidence["profile"] is not None:
        items.append(Text(report.evidence["profile"]["note"]))
    items.append(Text(f"Caution: {report.evidence['caution']}"))
    if verdict(report):
        items.append(Text(verdict(report), style="bold red" if report.exit_code else "bold green"))
    return to_text(items, options)


def _md(text: object) -> str:
    return str(text).replace("\\", "\\\\").replace("|", "\\|").replace("\n", " ").replace("<", "&lt;")


@renderer("coverage", "markdown")
def coverage_markdown(report: CoverageReport, options: RenderOptions) -> str:
    e = report.evidence
    lines = [f"# Coverage: {_md(e['model']['path'])}", "", f"> **Caution.** {_md(e['caution'])}", ""]
    if e["profile"] is not None:
        lines += [f"> **Profile {_md(e['profile']['name'])}.** {_md(e['profile']['note'])}", ""]
    if verdict(report):
        lines += [f"**{_md(verdict(report))}**", ""]
    clauses = any(d.clause for d in report.declarations)
    lines += ["| declaration | direction | covered | total | percent | passing tests |" + (" clause |" if clauses else ""),
              "|---|---|---:|---:|---:|---:|" + ("---|" if clauses else "")]
    for d in report.declarations:
        passing = "-" if d.passing is None else f"{d.passing.covered} ({fmt_percent(d.passing.percent)})"
        clause = f" {_md(d.clause or '')} |" if clauses else ""
        lines.append(f"| `{_md(d.name)}` | {d.direction} | {d.counts.covered} | {d.counts.total} | "
                     f"{fmt_percent(d.counts.percent)} | {passing} |{clause}")
    lines.append("")
    for d in report.declarations:
        for attribute, values in shown_groups(d):
            lines += [f"### `{_md(d.name)}` by {_md(attribute)}", "", "| value | covered | total | percent |",
                      "|---|---:|---:|---:|"]
            lines += [f"| {_md(v)} | {c.covered} | {c.total} | {fmt_percent(c.percent)} |" for v, c in values.items()]
            lines.append("")
    gaps = [(d, d.counts.uncovered, "gaps") for d in report.declarations if d.counts.uncovered]
    gaps += [(d, d.failing_only, "only failing tests") for d in report.declarations if d.failing_only]
    if gaps:
        lines += ["## Gaps", ""]
        for d, ids, what in gaps:
            lines.append(f"- **{_md(d.name)}** ({d.direction} {what}, {len(ids)}): " + ", ".join(f"`{_md(i)}`" for i in ids))
        lines.append("")
    lines += ["## Evidence", "", "| item | value |", "|---|---|"]
    lines += [f"| {_md(label)} | {_md(value)} |" for label, value in evidence_lines(report)]
    return "\n".join(lines) + "\n"
