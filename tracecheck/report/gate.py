"""Renderers for ``gate`` results (text, json, markdown) and the waiver/baseline
sections that ``check`` views share.

The Markdown view is meant for a pull-request comment and the GitHub step summary:
status first, a table per model file, long lists folded in ``<details>`` and capped so
the whole stays far below the 1 MiB step-summary limit.
"""

from __future__ import annotations

from rich.padding import Padding
from rich.table import Table
from rich.text import Text

from tracecheck.check import CheckResult
from tracecheck.gate import GateResult
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.check import dump_json, md_escape
from tracecheck.report.ci import CAUTION, uri_of
from tracecheck.report.console import to_text

__all__ = ["gate_text", "gate_json", "gate_markdown", "review_markdown", "review_text", "verdict"]

_STYLE = {"error": "bold red", "warning": "yellow", "note": "cyan"}
MD_ROWS = 100  # rows per Markdown list; the rest is counted, not shown
MD_FOLD = 10  # lists longer than this are folded
MD_CELL = 300  # characters of a message in a table cell


def verdict(result: GateResult) -> str:
    s = result.summary()
    status = "FAIL" if s["failed"] else "PASS"
    new = s["new"]
    by = ", ".join(f"{n} {sev}{'s' if n != 1 else ''}" for sev, n in s["by_severity"].items() if n)
    text = f"{status}: {new} new finding{'s' if new != 1 else ''}" + (f" ({by})" if by else "")
    text += f", {s['resolved']} resolved"
    if "waived" in s:
        text += f", {s['waived']} waived"
    if result.embedding_exact is not None:
        text += f", embedding {'exact' if result.embedding_exact else 'NOT EXACT'}"
    return text + f"; failing at {result.fail_on} or above" + (
        ", or on an inexact embedding." if result.embedding_exact is not None else ".")


def _side(info: dict) -> str:
    if info.get("worktree"):
        return "working tree" + (f" on {info['commit'][:12]}" if info.get("commit") else "")
    if "how" in info:  # the base: its commit; how it was chosen is said next to it
        return str(info.get("commit"))[:12]
    return f"{info.get('rev')} ({str(info.get('commit'))[:12]})"


def _diff_line(diff: dict | None) -> str:
    if not diff:
        return "-"
    e, links = diff["elements"], diff["links"]
    parts = [f"+{e['added']} -{e['removed']} ~{e['modified']}"]
    if e.get("moved"):
        parts.append(f"{e['moved']} moved")
    if e.get("reidentified"):
        parts.append(f"{e['reidentified']} re-identified")
    parts.append(f"links +{links.get('added', 0)} -{links.get('removed', 0)}")
    return ", ".join(parts)


# --- text ------------------------------------------------------------------------------


def _finding_rows(result, findings, label: str) -> list:
    items: list = [Text(""), Text(f"{label} ({len(findings)})", style="bold")]
    if not findings:
        return items
    table = Table.grid(padding=(0, 2))
    table.add_column(no_wrap=True)
    table.add_column(style="dim", no_wrap=True)
    table.add_column(overflow="fold")
    for f in findings:
        where = f"{uri_of(result, f)}:{f.location.line}" if f.location and f.location.line else (uri_of(result, f) or "-")
        table.add_row(Text(f"{f.severity} {f.rule}", style=_STYLE.get(f.severity, "")), where, f.message)
    return [*items, Padding(table, (0, 0, 0, 2))]


def review_text(result: CheckResult) -> list:
    """Waived findings, unused waivers, baseline and notes, as rich text lines."""
    items: list = []
    if result.waivers is not None:
        waived = result.waivers.waived
        items += [Text(""), Text(f"Waived ({len(waived)}), waivers from {result.waivers.file} "
                                 f"as of {result.waivers.as_of.isoformat()}", style="bold")]
        table = Table.grid(padding=(0, 2))
        table.add_column(no_wrap=True)
        table.add_column(overflow="fold")
        for f, w in waived:
            table.add_row(f.rule, f"{f.message}\nwaived: {w.reason} (approved by {w.approved_by}, "
                          f"until {w.expires.isoformat()})")
        if waived:
            items.append(Padding(table, (0, 0, 0, 2)))
        for w in result.waivers.unused:
            items.append(Text(f"  unused waiver: {w.rule} on {w.subject} ({w.location}) matches no finding",
                              style="yellow"))
    if result.baseline is not None:
        b = result.baseline
        items += [Text(""), Text(f"Baseline {b['file']}: {b['matched']} finding(s) already listed, not "
                                 f"repeated; {b['gone']} of its {b['findings']} are gone.")]
    for note in result.notes:
        items += [Text(""), Text(f"Note: {note}", style="yellow")]
    return items


def _embedding_text(result: GateResult) -> list:
    """The optional embedding check: a verdict per head model, then what it misses or invents."""
    if result.embedding_file is None:
        return []
    from tracecheck.report.embed import _link_table, verify_verdict

    items: list = [Text(""), Text(f"Embedding {result.embedding_file}", style="bold")]
    for path, check in result.embedding:
        items.append(Text(f"  {path}: {verify_verdict(check)}", style="" if check.exact else "red"))
        items += _link_table(f"{path}: missing (in the model, not reproduced)", check.missing, "red")
        items += _link_table(f"{path}: spurious (predicted, not in the model)", check.spurious, "red")
        if check.unknown_elements:
            items.append(Text(f"  {path}: unknown elements: {', '.join(check.unknown_elements)}", style="red"))
    return items


@renderer("gate", "text")
def gate_text(result: GateResult, options: RenderOptions) -> str:
    items: list = []
    if not options.quiet:
        items.append(Text(f"tracecheck gate: base {_side(result.base)} -> head {_side(result.head)}", style="bold"))
        items.append(Text(f"  base: the {result.base.get('how')}"))
        for outcome in result.files:
            items.append(Text(f"  {outcome.path}: {outcome.status}; {len(outcome.new)} new, "
                              f"{len(outcome.resolved)} resolved; diff {_diff_line(outcome.diff)}"))
        items += _finding_rows(result, result.findings, "New findings")
        items += _finding_rows(result, result.resolved, "Resolved")
        items += review_text(result)
        items += _embedding_text(result)
        items.append(Text(""))
    items.append(Text(verdict(result), style="bold red" if result.exit_code else "bold green"))
    return to_text(items, options)


@renderer("gate", "json")
def gate_json(result: GateResult, options: RenderOptions) -> str:
    return dump_json(result.to_json())


# --- markdown --------------------------------------------------------------------------


def _cell(text: str) -> str:
    text = str(text)
    return md_escape(text if len(text) <= MD_CELL else text[: MD_CELL - 1] + "…")


def _where_md(result, f) -> str:
    uri = uri_of(result, f)
    if uri is None:
        return "-"
    return _cell(f"{uri}:{f.location.line}" if f.location and f.location.line else uri)


def _table(header: list[str], rows: list[list[str]], title: str) -> list[str]:
    """A Markdown table under a heading, capped at MD_ROWS and folded when long."""
    body = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    body += ["| " + " | ".join(row) + " |" for row in rows[:MD_ROWS]]
    if len(rows) > MD_ROWS:
        body += ["", f"… and {len(rows) - MD_ROWS} more; see the JSON or SARIF report."]
    lines = [f"### {title} ({len(rows)})", ""]
    if len(rows) > MD_FOLD:
        return lines + ["<details>", f"<summary>{len(rows)} entries</summary>", "", *body, "", "</details>", ""]
    return lines + body + [""]


def _finding_table(result, findings, title: str) -> list[str]:
    if not findings:
        return []
    rows = [[f.severity, f"`{f.rule}`", _where_md(result, f), _cell(f.message)] for f in findings]
    return _table(["severity", "rule", "location", "message"], rows, title)


def review_markdown(result: CheckResult) -> list[str]:
    """Waived findings, unused waivers, baseline and notes, as Markdown lines."""
    lines: list[str] = []
    if result.waivers is not None:
        rows = [[f"`{f.rule}`", _where_md(result, f), _cell(f.message), _cell(w.reason), _cell(w.approved_by),
                 w.expires.isoformat()] for f, w in result.waivers.waived]
        if rows:
            lines += _table(["rule", "location", "message", "reason", "approved by", "expires"], rows, "Waived")
        unused = [[f"`{w.rule}`", _cell(w.subject), _cell(str(w.location))] for w in result.waivers.unused]
        if unused:
            lines += _table(["rule", "subject", "waiver"], unused, "Unused waivers")
        lines += [f"Waivers: `{md_escape(result.waivers.file)}`, expiry judged as of "
                  f"{result.waivers.as_of.isoformat()}.", ""]
    if result.baseline is not None:
        b = result.baseline
        lines += [f"Baseline `{md_escape(b['file'])}`: {b['matched']} finding(s) already listed and not "
                  f"repeated; {b['gone']} of its {b['findings']} are gone.", ""]
    lines += [f"> **Note:** {md_escape(note)}" for note in result.notes]
    return lines + ([""] if result.notes else [])


@renderer("gate", "markdown")
def gate_markdown(result: GateResult, options: RenderOptions) -> str:
    lines = [f"## tracecheck gate: {verdict(result)}", ""]
    lines += [f"Base: {md_escape(_side(result.base))}, the {md_escape(str(result.base.get('how')))}; "
              f"head: {md_escape(_side(result.head))}.", ""]
    lines += ["| model file | status | new | resolved | diff |", "|---|---|---:|---:|---|"]
    for o in result.files:
        lines.append(f"| `{md_escape(o.path)}` | {o.status} | {len(o.new)} | {len(o.resolved)} | "
                     f"{md_escape(_diff_line(o.diff))} |")
    lines.append("")
    lines += _finding_table(result, result.findings, "New findings")
    lines += _finding_table(result, list(result.resolved), "Resolved")
    lines += review_markdown(result)
    lines += _embedding_markdown(result)
    lines += [f"_{CAUTION}_", ""]
    return "\n".join(lines)


def _embedding_markdown(result: GateResult) -> list[str]:
    if result.embedding_file is None:
        return []
    from tracecheck.report.embed import verify_verdict

    lines = [f"### Embedding `{md_escape(result.embedding_file)}`", ""]
    for path, check in result.embedding:
        lines += [f"`{md_escape(path)}`: {md_escape(verify_verdict(check))}", ""]
        rows = [[_cell(link.source), _cell(link.relation or "(any)"), _cell(link.target), side]
                for side, links in (("missing", check.missing), ("spurious", check.spurious))
                for link in links]
        if rows:
            lines += _table(["source", "relation", "target", "kind"], rows, f"{md_escape(path)}: links")
        if check.unknown_elements:
            lines += [f"Unknown elements: {md_escape(', '.join(check.unknown_elements))}", ""]
    return lines


def check_summary(result: CheckResult, options: RenderOptions) -> str:
    """The GitHub step summary of a ``check``: status first, findings folded and capped."""
    from tracecheck.report.check import summary_line

    origin = ", ".join(result.uris.get(i["path"], i["path"]) for i in result.inputs if i["role"] == "model")
    lines = [f"## tracecheck check: {summary_line(result)}", "", f"Model: `{md_escape(origin)}`.", ""]
    by_rule = result.summary()["by_rule"]
    if by_rule:
        lines += ["| rule | findings |", "|---|---:|", *[f"| `{r}` | {n} |" for r, n in by_rule.items()], ""]
    lines += _finding_table(result, result.findings, "Findings")
    lines += review_markdown(result)
    lines += [f"_{CAUTION}_", ""]
    return "\n".join(lines)
