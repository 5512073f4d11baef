"""The HTML page for ``history``: one self-contained file (inline CSS and SVG charts, no
scripts, no external assets) that prints cleanly and reads in greyscale."""

from __future__ import annotations

from html import escape

from tracecheck.history import CAUTION, CHURN, SEVERITIES, HistoryResult, HistoryRow
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.svgchart import Series, bar_chart, line_chart

__all__ = ["history_html"]

_CSS = """
body{font-family:system-ui,Helvetica,Arial,sans-serif;margin:2em;color:#1a1a1a;max-width:72em}
h1{font-size:1.5em}h2{font-size:1.15em;margin-top:1.8em}
table{border-collapse:collapse;margin:.5em 0 1.5em;font-size:.9em}th,td{border:1px solid #bbb;padding:.25em .6em;text-align:left}
th{background:#f1f1f1}td.t{white-space:nowrap}td.n{text-align:right;font-variant-numeric:tabular-nums}code{font-size:.92em}
.caution{border-left:4px solid #555;padding:.5em 1em;background:#f6f6f6}
.missing,.malformed{font-style:italic;background:#f3f3f3}
figure{margin:1em 0;break-inside:avoid}svg{max-width:100%;height:auto;border:1px solid #ddd}
@media print{body{margin:0;max-width:none}h2{break-after:avoid}}
"""


def _label(row: HistoryRow) -> str:
    return ", ".join(row.tags) if row.tags else row.rev[:12]


def _notes(result: HistoryResult) -> dict[int, str]:
    return {i: row.status for i, row in enumerate(result.rows) if row.status != "ok"}


def _coverage_chart(result: HistoryResult, labels: list[str]) -> str:
    series = [Series(name, tuple(row.metrics.coverage.get(name) if row.metrics else None for row in result.rows))
              for name in result.declarations]
    return line_chart("Coverage per declaration", labels, series, y_label="covered (%)", y_top=100,
                      notes=_notes(result))


def _findings_chart(result: HistoryResult, labels: list[str]) -> str:
    series = [Series(s, tuple(row.metrics.severities.get(s, 0) if row.metrics else None for row in result.rows))
              for s in SEVERITIES]
    return line_chart("Findings by severity", labels, series, y_label="findings", notes=_notes(result))


def _churn_chart(result: HistoryResult, labels: list[str]) -> str:
    series = [Series(c, tuple(row.churn[c] if row.churn else None for row in result.rows)) for c in CHURN]
    return bar_chart("Element churn against the previous revision", labels, series, y_label="elements",
                     ident="churn", notes=_notes(result))


def _cell(value, numeric: bool = True) -> str:
    text = "" if value is None else escape(str(value))
    return f'<td class="{"n" if numeric else "t"}">{text}</td>'


def _pct(value) -> str | None:
    return None if value is None else f"{value:.1f}%"


def _main_table(result: HistoryResult) -> str:
    head = ["revision", "tags", "status", "elements", "links", *SEVERITIES, *CHURN]
    lines = ["<table><thead><tr>" + "".join(f"<th>{h}</th>" for h in head) + "</tr></thead><tbody>"]
    for row in result.rows:
        m = row.metrics
        cells = [f"<td><code>{row.rev[:12]}</code></td>", _cell(", ".join(row.tags), False), _cell(row.status, False),
                 _cell(m.elements if m else None), _cell(m.links if m else None)]
        cells += [_cell(m.severities.get(s, 0) if m else None) for s in SEVERITIES]
        cells += [_cell(row.churn[c] if row.churn else None) for c in CHURN]
        lines.append(f'<tr class="{row.status}">' + "".join(cells) + "</tr>")
    return "".join(lines) + "</tbody></table>"


def _by_row_table(result: HistoryResult, names: list[str], value) -> str:
    head = "<tr><th>revision</th>" + "".join(f"<th><code>{escape(n)}</code></th>" for n in names) + "</tr>"
    body = []
    for row in result.rows:
        cells = "".join(_cell(value(row, n) if row.metrics else None) for n in names)
        body.append(f'<tr class="{row.status}"><td>{escape(_label(row))}</td>{cells}</tr>')
    return f"<table><thead>{head}</thead><tbody>{''.join(body)}</tbody></table>"


def _problems(result: HistoryResult) -> str:
    items = []
    for row in result.rows:
        if row.status == "malformed":
            items.append(f"<li><b>{escape(_label(row))}</b> (<code>{row.rev[:12]}</code>): malformed — "
                         f"{escape(row.message or '')}</li>")
        elif row.status == "missing":
            items.append(f"<li><b>{escape(_label(row))}</b> (<code>{row.rev[:12]}</code>): "
                         f"<code>{escape(row.path)}</code> does not exist at this revision</li>")
    return f"<h2>Revisions without a readable model</h2><ul>{''.join(items)}</ul>" if items else ""


@renderer("history", "html")
def history_html(result: HistoryResult, options: RenderOptions) -> str:
    from tracecheck.report.history import headline

    labels = [_label(row) for row in result.rows]
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>History of {escape(result.path)}</title><style>{_CSS}</style></head><body>",
        f"<h1>History of <code>{escape(result.path)}</code></h1>",
        f"<p><b>{escape(headline(result))}</b> Oldest revision first; shaded columns mark revisions "
        "where the file is missing or could not be read.</p>",
        f'<p class="caution">{escape(CAUTION)}</p>',
    ]
    if result.declarations:
        parts.append(f"<figure>{_coverage_chart(result, labels)}</figure>")
    parts.append(f"<figure>{_findings_chart(result, labels)}</figure>")
    parts.append(f"<figure>{_churn_chart(result, labels)}</figure>")
    parts += ["<h2>Revisions</h2>", _main_table(result)]
    if result.declarations:
        parts += ["<h2>Coverage per declaration</h2>",
                  _by_row_table(result, list(result.declarations), lambda r, n: _pct(r.metrics.coverage.get(n)))]
    if result.rules:
        parts += ["<h2>Findings by rule</h2>",
                  _by_row_table(result, result.rules, lambda r, n: r.metrics.findings.get(n, 0))]
    parts += [_problems(result), "</body></html>", ""]
    return "\n".join(p for p in parts if p)
