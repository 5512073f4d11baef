"""The HTML audit report for ``coverage``: one self-contained file.

Inline CSS and one small inline script (sortable tables, a filter box for the matrix
and the gap lists), no external assets, a print stylesheet. The caution and the
evidence come first, then the summary bars, the groups, the gaps and the matrix.
The script marks the page when it has run (``data-ready``), counts script errors
(``data-script-errors``) and whether the summary shows in the first screen
(``data-summary-visible``), so a headless browser can check the page.
"""

from __future__ import annotations

from html import escape

from tracecheck.audit import Counts, CoverageReport, DeclarationReport
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.coverage import (
    evidence_lines,
    fmt_percent,
    matrix_header,
    shown_groups,
    verdict,
)

__all__ = ["coverage_html"]

_CSS = """
*{box-sizing:border-box}
body{font-family:system-ui,-apple-system,"Segoe UI",sans-serif;margin:1.5em 2em;color:#1d232a;max-width:90em;line-height:1.35}
h1{font-size:1.45em;margin:.2em 0 .5em}h2{font-size:1.1em;margin:1.1em 0 .35em;border-bottom:1px solid #d5dae0}
h3{font-size:1em;margin:1em 0 .3em}
.caution{border-left:5px solid #8a5a00;background:#fdf6e7;padding:.35em .8em;margin:.4em 0;font-size:.92em}
.profile{border-left:5px solid #3d5a80;background:#eef3f8;padding:.35em .8em;margin:.4em 0;font-size:.92em}
.verdict{font-weight:700;padding:.3em .6em;display:inline-block}.verdict.fail{background:#fbe4e1;color:#8f1d12}
.verdict.pass{background:#e2f2e6;color:#175c2c}
table{border-collapse:collapse;margin:.4em 0 1em}th,td{border:1px solid #cfd6dd;padding:.2em .55em;text-align:left;vertical-align:top}
th{background:#eef1f4;white-space:nowrap}td.decl{min-width:16em}#summary-table{width:100%}#summary-table th{white-space:normal}.small{font-size:.85em}td.n{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
table.evidence{font-size:.8em;line-height:1.2;width:100%}table.evidence td{padding:.1em .5em}table.evidence td.k{color:#52606d;white-space:nowrap}table.evidence td{width:40%}table.evidence td.k{width:10%}
table.evidence td{word-break:break-all}
th.sort{cursor:pointer}th.sort:after{content:" \\2195";color:#8795a1}
.bar{width:9em;height:1em;background:#e4e8ec;border:1px solid #b8c2cc;position:relative}
.bar>span{display:block;height:100%;background:#3d5a80}
.bar.passing>span{background:#5b8c5a}
code,.id{font-family:ui-monospace,Menlo,Consolas,monospace;font-size:.92em}
ul.ids{columns:16em;margin:.2em 0 .8em;padding-left:1.2em}
.r-pass{color:#175c2c}.r-fail{color:#8f1d12;font-weight:600}.r-blocked,.r-not-run,.r-unset{color:#6b5200}
input.filter{font:inherit;padding:.2em .4em;width:22em;margin:.3em 0}
.muted{color:#52606d}.t{white-space:nowrap}
@media print{
 body{margin:0;max-width:none;font-size:9.5pt}input.filter{display:none}th.sort:after{content:""}
 tr{break-inside:avoid}h2{break-after:avoid}.hidden-by-filter{display:table-row !important}
 .bar,.bar>span{-webkit-print-color-adjust:exact;print-color-adjust:exact}
 ul.ids li{display:list-item !important}
}
"""

_SCRIPT = """
(function(){
 var root=document.documentElement,errors=0;
 window.addEventListener('error',function(){errors+=1;root.setAttribute('data-script-errors',String(errors));});
 root.setAttribute('data-script-errors','0');
 function key(cell){var t=cell.getAttribute('data-sort')||cell.textContent.trim();
  var n=parseFloat(t);return isNaN(n)||!/^-?[0-9.]+%?$/.test(t)?[1,t.toLowerCase()]:[0,n];}
 function cmp(a,b){return a[0]-b[0]||(a[1]<b[1]?-1:a[1]>b[1]?1:0);}
 document.querySelectorAll('table.sortable').forEach(function(table){
  table.querySelectorAll('th').forEach(function(th,col){
   th.classList.add('sort');th.setAttribute('title','Sort by this column');
   th.addEventListener('click',function(){
    var body=table.tBodies[0],rows=Array.prototype.slice.call(body.rows);
    var up=th.getAttribute('data-dir')!=='asc';
    table.querySelectorAll('th').forEach(function(h){h.removeAttribute('data-dir');});
    th.setAttribute('data-dir',up?'asc':'desc');
    rows.sort(function(a,b){var r=cmp(key(a.cells[col]),key(b.cells[col]));return up?r:-r;});
    rows.forEach(function(r){body.appendChild(r);});
   });
  });
 });
 document.querySelectorAll('input.filter').forEach(function(input){
  var target=document.getElementById(input.getAttribute('data-target'));
  input.addEventListener('input',function(){
   var q=input.value.toLowerCase();
   target.querySelectorAll('tbody tr, li').forEach(function(item){
    var hide=q&&item.textContent.toLowerCase().indexOf(q)<0;
    item.style.display=hide?'none':'';item.classList.toggle('hidden-by-filter',!!hide);
   });
  });
 });
 var first=document.querySelector('#summary-table tbody tr');
 if(first){var box=first.getBoundingClientRect();
  root.setAttribute('data-summary-visible',box.top>=0&&box.bottom<=window.innerHeight&&box.height>0?'1':'0');}
 if(location.hash==='#selftest'){
  // Exercised by the browser test: filter the matrix, sort the summary by percent.
  var input=document.querySelector('input.filter[data-target="matrix"]'),rows=document.querySelectorAll('#matrix tbody tr');
  input.value=rows.length?rows[0].cells[0].textContent:'';input.dispatchEvent(new Event('input'));
  var shown=Array.prototype.filter.call(rows,function(r){return r.style.display!=='none';}).length;
  var th=document.querySelectorAll('#summary-table th')[4];th.click();
  var order=Array.prototype.map.call(document.querySelectorAll('#summary-table tbody tr'),function(r){return r.cells[4].textContent;});
  root.setAttribute('data-selftest','shown='+shown+';order='+order.join(','));
 }
 root.setAttribute('data-ready','1');
})();
"""


def _bar(counts: Counts, kind: str = "") -> str:
    value = counts.percent
    width = 0.0 if value is None else value
    label = f"{counts.covered} of {counts.total} covered ({fmt_percent(value)})"
    return (f'<div class="bar {kind}" role="img" aria-label="{escape(label)}" title="{escape(label)}">'
            f'<span style="width:{width:.1f}%"></span></div>')


def _id(report: CoverageReport, element_id: str) -> str:
    name = report.names.get(element_id)
    title = f' title="{escape(name)}"' if name else ""
    return f'<span class="id"{title}>{escape(element_id)}</span>'


def _evidence(report: CoverageReport) -> str:
    # Two label/value pairs per row keep the block short enough that the summary
    # below it still shows in the first screen.
    cells = [f'<td class="k">{escape(label)}</td><td>{escape(value)}</td>' for label, value in evidence_lines(report)]
    if len(cells) % 2:
        cells.append('<td class="k"></td><td></td>')
    rows = "".join(f"<tr>{cells[n]}{cells[n + 1]}</tr>" for n in range(0, len(cells), 2))
    return f'<table class="evidence" id="evidence"><tbody>{rows}</tbody></table>'


def _summary(report: CoverageReport) -> str:
    head = ("<thead><tr><th>declaration</th><th>direction</th><th>covered</th><th>total</th><th>percent</th>"
            "<th>linked coverage</th><th>passing tests</th><th>coverage by passing tests</th></tr></thead>")
    rows = []
    for d in report.declarations:
        c = d.counts
        passing = ('<td class="n" data-sort="-1">-</td><td></td>' if d.passing is None else
                   f'<td class="n">{fmt_percent(d.passing.percent)}</td><td>{_bar(d.passing, "passing")}</td>')
        clause = f'<br><span class="muted small">{escape(d.clause)}</span>' if d.clause else ""
        rows.append(
            f'<tr><td class="decl"><code>{escape(d.name)}</code><br><span class="muted small">{escape(d.result.declaration.description)}</span>{clause}</td>'
            f'<td>{d.direction}</td><td class="n">{c.covered}</td><td class="n">{c.total}</td>'
            f'<td class="n">{fmt_percent(c.percent)}</td><td>{_bar(c)}</td>{passing}</tr>'
        )
    return f'<table class="sortable" id="summary-table">{head}<tbody>{"".join(rows)}</tbody></table>'


def _groups(report: CoverageReport) -> str:
    parts = []
    for d in report.declarations:
        for attribute, values in shown_groups(d):
            rows = "".join(
                f'<tr><td>{escape(value)}</td><td class="n">{c.covered}</td><td class="n">{c.total}</td>'
                f'<td class="n">{fmt_percent(c.percent)}</td><td>{_bar(c)}</td></tr>'
                for value, c in values.items()
            )
            parts.append(
                f"<h3><code>{escape(d.name)}</code> by {escape(attribute)}</h3>"
                '<table class="sortable"><thead><tr><th>value</th><th>covered</th><th>total</th><th>percent</th>'
                f"<th>coverage</th></tr></thead><tbody>{rows}</tbody></table>"
            )
    if not parts:
        return ""
    return "<h2>Coverage by group</h2>" + "".join(parts)


def _id_list(report: CoverageReport, ids) -> str:
    return '<ul class="ids">' + "".join(f"<li>{_id(report, i)}</li>" for i in ids) + "</ul>"


def _gaps(report: CoverageReport) -> str:
    parts = ['<h2>Gaps</h2><input class="filter" type="search" data-target="gaps" placeholder="Filter the gap lists" aria-label="Filter the gap lists"><div id="gaps">']
    found = False
    for direction, meaning in (("forward", "elements lacking the trace to what realises or verifies them"),
                               ("backward", "elements lacking the trace to what they come from or verify")):
        chosen: list[DeclarationReport] = [d for d in report.declarations if d.direction == direction and d.counts.uncovered]
        if chosen:
            found = True
            parts.append(f"<h3>{direction.capitalize()} gaps: {meaning}</h3>")
            for d in chosen:
                parts.append(f"<p><code>{escape(d.name)}</code> ({len(d.counts.uncovered)})</p>{_id_list(report, d.counts.uncovered)}")
    failing = [d for d in report.declarations if d.failing_only]
    if failing:
        found = True
        parts.append("<h3>Only failing tests: every verifying test has the result fail</h3>")
        for d in failing:
            parts.append(f"<p><code>{escape(d.name)}</code> ({len(d.failing_only)})</p>{_id_list(report, d.failing_only)}")
    if not found:
        parts.append("<p>No gaps: every declaration is fully covered.</p>")
    parts.append("</div>")
    return "".join(parts)


def _matrix(report: CoverageReport) -> str:
    header = "".join(f"<th>{escape(c)}</th>" for c in matrix_header(report))
    rows = []
    for row in report.matrix:
        tests = "<br>".join(f'<span class="t">{_id(report, t)} <span class="r-{escape(r.strip("()"))}">{escape(r)}</span></span>'
                            for t, r in row.verified_by)
        cells = [_id(report, row.requirement), escape(row.name), *(escape(a) for a in row.attributes),
                 "<br>".join(_id(report, s) for s in row.satisfied_by),
                 "<br>".join(_id(report, a) for a in row.allocated_to), tests]
        numbers = "".join(f'<td class="n">{n}</td>' for n in (len(row.verified_by), row.passing, row.failing))
        rows.append("<tr>" + "".join(f"<td>{c}</td>" for c in cells) + numbers + "</tr>")
    return (f"<h2>Traceability matrix ({len(report.matrix)} requirements)</h2>"
            '<p class="muted">Requirement &rarr; satisfying functions, components and interfaces &rarr; '
            "components the satisfying functions are allocated to &rarr; verifying tests with their results.</p>"
            '<input class="filter" type="search" data-target="matrix" placeholder="Filter the matrix" aria-label="Filter the matrix">'
            f'<table class="sortable" id="matrix"><thead><tr>{header}</tr></thead><tbody>{"".join(rows)}</tbody></table>')


@renderer("coverage", "html")
def coverage_html(report: CoverageReport, options: RenderOptions) -> str:
    e = report.evidence
    title = f"Coverage audit: {e['model']['path']}"
    profile = ""
    if e["profile"] is not None:
        p = e["profile"]
        profile = f'<div class="profile"><strong>Profile {escape(p["name"])}.</strong> {escape(p["note"])}</div>'
    result = verdict(report)
    verdict_html = f'<p class="verdict {"fail" if report.exit_code else "pass"}">{escape(result)}</p>' if result else ""
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{escape(title)}</title><style>{_CSS}</style></head><body>"
        f"<h1>{escape(title)}</h1>"
        f'<div class="caution"><strong>Caution.</strong> {escape(e["caution"])}</div>{profile}'
        f"<h2>Evidence</h2>{_evidence(report)}"
        f'<section id="summary"><h2>Summary</h2>{verdict_html}{_summary(report)}</section>'
        f"{_groups(report)}{_gaps(report)}{_matrix(report)}"
        f"<script>{_SCRIPT}</script></body></html>\n"
    )
