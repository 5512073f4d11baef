"""Renderers for ``history`` results: text (rich), json, csv, markdown; html in
``history_html``."""

from __future__ import annotations

import csv
import io

from rich.table import Table
from rich.text import Text

from tracecheck.history import CAUTION, CHURN, SEVERITIES, HistoryResult, HistoryRow
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.check import dump_json, md_escape
from tracecheck.report.console import to_text

__all__ = ["history_json", "history_text", "history_csv", "history_markdown", "trend", "label", "TREND_LEGEND"]

_CHURN_MARK = {"added": "+", "removed": "-", "modified": "~", "moved": ">", "reidentified": "="}
_STATUS_STYLE = {"ok": "", "missing": "yellow", "malformed": "bold red"}
_TREND_STYLE = {"^": "green", "v": "red", "~": "yellow", "=": "", "": ""}
TREND_LEGEND = (
    "trend against the previous readable row: ^ better (coverage up or findings down, "
    "neither worse), v worse, ~ mixed, = unchanged"
)


def label(row: HistoryRow) -> str:
    """A short name for a row: its tags, else the abbreviated commit id."""
    return ", ".join(row.tags) if row.tags else row.rev[:12]


def _mean_coverage(row: HistoryRow, names: set[str]) -> float | None:
    values = [row.metrics.coverage.get(n) for n in sorted(names)] if row.metrics else []
    values = [v for v in values if v is not None]
    return sum(values) / len(values) if values else None


def trend(rows: tuple[HistoryRow, ...]) -> list[str]:
    """One glyph per row (see :data:`TREND_LEGEND`): mean coverage over the declarations
    both rows measure, and the number of findings, against the previous ``ok`` row."""
    glyphs, before = [], None
    for row in rows:
        if row.metrics is None:
            glyphs.append("")
            continue
        if before is None:
            glyphs.append("")
            before = row
            continue
        names = {n for n, v in row.metrics.coverage.items() if v is not None} & {
            n for n, v in before.metrics.coverage.items() if v is not None}
        old_cov, new_cov = _mean_coverage(before, names), _mean_coverage(row, names)
        cov = 0 if old_cov is None or new_cov is None else (new_cov > old_cov) - (new_cov < old_cov)
        old_f, new_f = sum(before.metrics.findings.values()), sum(row.metrics.findings.values())
        found = (new_f < old_f) - (new_f > old_f)  # fewer findings is better
        signs = {cov, found} - {0}
        glyphs.append("=" if not signs else "~" if len(signs) == 2 else "^" if 1 in signs else "v")
        before = row
    return glyphs


def _pct(value) -> str:
    return "n/a" if value is None else f"{value:.1f}%"


def _severities(row: HistoryRow) -> str:
    return "/".join(str(row.metrics.severities.get(s, 0)) for s in SEVERITIES) if row.metrics else ""


def _churn(row: HistoryRow) -> str:
    return " ".join(f"{_CHURN_MARK[c]}{row.churn[c]}" for c in CHURN) if row.churn else ""


def _count(row: HistoryRow, key: str) -> str:
    return "" if row.metrics is None else str(getattr(row.metrics, key))


@renderer("history", "json")
def history_json(result: HistoryResult, options: RenderOptions) -> str:
    return dump_json(result.to_json())


def _main_table(result: HistoryResult) -> Table:
    table = Table(title=None, show_edge=False, pad_edge=False, header_style="bold")
    for name, justify in (("revision", "left"), ("tags", "left"), ("status", "left"), ("elements", "right"),
                          ("links", "right"), ("findings\nE/W/N", "right"), ("churn\n+ - ~ > =", "left"),
                          ("trend", "center")):
        table.add_column(name, justify=justify, no_wrap=name != "tags", overflow="fold")
    for row, glyph in zip(result.rows, trend(result.rows), strict=True):
        table.add_row(
            row.rev[:10], ", ".join(row.tags), Text(row.status, style=_STATUS_STYLE[row.status]),
            _count(row, "elements"), _count(row, "links"), _severities(row), _churn(row),
            Text(glyph, style=_TREND_STYLE[glyph]),
        )
    return table


def _broken(name: str, width: int = 12) -> str:
    """A declaration name broken after hyphens into lines of about ``width`` characters,
    so a table of several declarations fits a terminal."""
    lines = [""]
    for part in name.split("-"):
        piece = part if not lines[-1] else "-" + part
        if lines[-1] and len(lines[-1]) + len(piece) > width:
            lines[-1] += "-"
            lines.append(part)
        else:
            lines[-1] += piece
    return "\n".join(lines)


def _coverage_table(result: HistoryResult) -> Table:
    table = Table(show_edge=False, pad_edge=False, header_style="bold")
    table.add_column("coverage", no_wrap=True)
    for name in result.declarations:
        table.add_column(_broken(name), justify="right", no_wrap=True)
    for row in result.rows:
        values = [_pct(row.metrics.coverage.get(n)) if row.metrics else "" for n in result.declarations]
        table.add_row(label(row), *values)
    return table


def _notes(result: HistoryResult) -> list[str]:
    notes = []
    for row in result.rows:
        if row.status == "malformed":
            notes.append(f"{label(row)} ({row.rev[:12]}): malformed: {row.message}")
        elif row.status == "missing":
            notes.append(f"{label(row)} ({row.rev[:12]}): {row.path} does not exist at this revision")
    return notes


def headline(result: HistoryResult) -> str:
    counts = {s: sum(1 for r in result.rows if r.status == s) for s in ("ok", "missing", "malformed")}
    return (f"{len(result.rows)} revision{'s' if len(result.rows) != 1 else ''} of {result.path}: "
            f"{counts['ok']} ok, {counts['missing']} missing, {counts['malformed']} malformed.")


@renderer("history", "text")
def history_text(result: HistoryResult, options: RenderOptions) -> str:
    items: list = []
    if not options.quiet:
        items += [Text(f"tracecheck history {result.path}", style="bold"), Text(""), _main_table(result),
                  Text(TREND_LEGEND, style="dim")]
        if result.declarations:
            items += [Text(""), _coverage_table(result)]
        notes = _notes(result)
        if notes:
            items += [Text("")] + [Text(n, style="yellow") for n in notes]
        items += [Text(""), Text(CAUTION, style="dim")]
    items.append(Text(headline(result), style="bold"))
    return to_text(items, options)


def csv_columns(result: HistoryResult) -> list[str]:
    return (["rev", "tags", "status", "elements", "links"]
            + [f"kind:{k}" for k in result.kinds]
            + [f"rule:{r}" for r in result.rules]
            + [f"severity:{s}" for s in SEVERITIES]
            + [f"coverage:{d}" for d in result.declarations]
            + [f"churn:{c}" for c in CHURN])


def _csv_row(row: HistoryRow, result: HistoryResult) -> list:
    m = row.metrics
    if m is None:
        values = [""] * (2 + len(result.kinds) + len(result.rules) + len(SEVERITIES) + len(result.declarations))
    else:
        values = ([m.elements, m.links] + [m.by_kind.get(k, 0) for k in result.kinds]
                  + [m.findings.get(r, 0) for r in result.rules] + [m.severities.get(s, 0) for s in SEVERITIES]
                  + ["" if m.coverage.get(d) is None else m.coverage[d] for d in result.declarations])
    churn = [row.churn[c] for c in CHURN] if row.churn else [""] * len(CHURN)
    return [row.rev, " ".join(row.tags), row.status, *values, *churn]


@renderer("history", "csv")
def history_csv(result: HistoryResult, options: RenderOptions) -> str:
    """One line per revision; empty cells where a row has no value (not ok, first row)."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(csv_columns(result))
    for row in result.rows:
        writer.writerow(_csv_row(row, result))
    return buffer.getvalue()


@renderer("history", "markdown")
def history_markdown(result: HistoryResult, options: RenderOptions) -> str:
    lines = [f"# History of {md_escape(result.path)}", "", f"**{md_escape(headline(result))}**", "",
             f"> {CAUTION}", "",
             "| revision | tags | status | elements | links | errors | warnings | notes | "
             + " | ".join(CHURN) + " | trend |",
             "|---|---|---|---:|---:|---:|---:|---:|" + "---:|" * len(CHURN) + "---|"]
    for row, glyph in zip(result.rows, trend(result.rows), strict=True):
        sev = [str(row.metrics.severities.get(s, 0)) if row.metrics else "" for s in SEVERITIES]
        churn = [str(row.churn[c]) if row.churn else "" for c in CHURN]
        lines.append(f"| `{row.rev[:12]}` | {md_escape(', '.join(row.tags))} | {row.status} | "
                     f"{_count(row, 'elements')} | {_count(row, 'links')} | " + " | ".join(sev + churn)
                     + f" | {md_escape(glyph)} |")
    lines += ["", md_escape(TREND_LEGEND)]
    if result.declarations:
        lines += ["", "## Coverage per declaration", "",
                  "| revision | " + " | ".join(f"`{md_escape(d)}`" for d in result.declarations) + " |",
                  "|---|" + "---:|" * len(result.declarations)]
        for row in result.rows:
            cells = [_pct(row.metrics.coverage.get(d)) if row.metrics else "" for d in result.declarations]
            lines.append(f"| {md_escape(label(row))} | " + " | ".join(cells) + " |")
    if result.rules:
        lines += ["", "## Findings by rule", "", "| revision | " + " | ".join(f"`{r}`" for r in result.rules) + " |",
                  "|---|" + "---:|" * len(result.rules)]
        for row in result.rows:
            cells = [str(row.metrics.findings.get(r, 0)) if row.metrics else "" for r in result.rules]
            lines.append(f"| {md_escape(label(row))} | " + " | ".join(cells) + " |")
    notes = _notes(result)
    if notes:
        lines += ["", "## Revisions without a readable model", ""] + [f"- {md_escape(n)}" for n in notes]
    lines.append("")
    return "\n".join(lines)


from tracecheck.report import history_html as _html  # noqa: E402,F401  (registers the html renderer)
