"""The HTML review page for ``diff``: one self-contained file (inline CSS and SVG, no
scripts, no external assets) that prints cleanly."""

from __future__ import annotations

from html import escape

from tracecheck.diff import CAUTION, DiffResult
from tracecheck.report import RenderOptions, renderer

__all__ = ["diff_html", "svg"]

CATEGORIES = ("added", "removed", "modified", "moved", "reidentified")
# Status -> (fill colour, shape). Colour and shape both differ, so the picture reads in
# greyscale print and for colour-blind readers.
_LOOK = {
    "added": ("#1b7f3b", "triangle"),
    "removed": ("#b3261e", "square"),
    "modified": ("#c77700", "diamond"),
    "impacted": ("#1f5fae", "ring"),
    "context": ("#9a9a9a", "dot"),
}
_EDGE = {"kept": ("#888", ""), "added": ("#1b7f3b", ""), "removed": ("#b3261e", "6 4")}
_CSS = """
body{font-family:system-ui,sans-serif;margin:2em;color:#1a1a1a;max-width:80em}
table{border-collapse:collapse;margin:.5em 0 1.5em}th,td{border:1px solid #ccc;padding:.25em .6em;text-align:left;vertical-align:top}
code{white-space:nowrap}th{background:#f1f1f1}td.n{text-align:right}.caution{border-left:4px solid #c77700;padding:.5em 1em;background:#fff7e6}
del{background:#fbe3e1;color:#b3261e}ins{background:#e3f4e8;color:#1b7f3b;text-decoration:underline}
details{margin:.3em 0}summary{font-weight:600;cursor:pointer}svg{border:1px solid #ddd;max-width:100%;height:auto}
.page{margin-bottom:1em}.side{display:flex;gap:2em;flex-wrap:wrap}
@media print{body{margin:0;max-width:none}.page{break-before:page}h2{break-after:avoid}tr{break-inside:avoid}svg{border:0}}
"""


def _shape(status: str, x: float, y: float, r: float = 6) -> str:
    fill, shape = _LOOK[status]
    if shape == "triangle":
        points = f"{x:.1f},{y - r:.1f} {x + r:.1f},{y + r * 0.8:.1f} {x - r:.1f},{y + r * 0.8:.1f}"
        return f'<polygon points="{points}" fill="{fill}"/>'
    if shape == "square":
        return f'<rect x="{x - r * 0.8:.1f}" y="{y - r * 0.8:.1f}" width="{r * 1.6:.1f}" height="{r * 1.6:.1f}" fill="{fill}"/>'
    if shape == "diamond":
        points = f"{x:.1f},{y - r:.1f} {x + r:.1f},{y:.1f} {x:.1f},{y + r:.1f} {x - r:.1f},{y:.1f}"
        return f'<polygon points="{points}" fill="{fill}"/>'
    if shape == "ring":
        return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{r * 0.8:.1f}" fill="white" stroke="{fill}" stroke-width="3"/>'
    return f'<circle cx="{x:.1f}" cy="{y:.1f}" r="{r * 0.5:.1f}" fill="{fill}"/>'


_LEGEND_LABEL = {"modified": "modified, moved or re-identified", "impacted": "needs re-review",
                 "context": "unchanged neighbour"}


def _legend() -> str:
    items, x = [], 14
    for status in _LOOK:
        label = _LEGEND_LABEL.get(status, status)
        items.append(_shape(status, x, 16) + f'<text x="{x + 12}" y="20" font-size="12">{escape(label)}</text>')
        x += 40 + 7 * len(label)
    for state, (colour, dash) in _EDGE.items():
        dashed = f' stroke-dasharray="{dash}"' if dash else ""
        items.append(f'<line x1="{x - 6}" y1="16" x2="{x + 24}" y2="16" stroke="{colour}" stroke-width="1.5"{dashed}/>'
                     f'<text x="{x + 30}" y="20" font-size="12">{"unchanged" if state == "kept" else state} link</text>')
        x += 130
    return (f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {x} 32" width="{x}" height="32" role="img" '
            f'aria-label="legend" font-family="sans-serif">{"".join(items)}</svg>')


_COLUMN_WIDTH, _ROW, _TOP, _LEFT = 230, 16, 34, 14
_LABEL_EM = 6.2  # average width of a character of an 11 px label


def _page_svg(page, number: int, total: int) -> str:
    """One page of the picture: a column per kind, a row per element, links between."""
    columns = max((c for _, _, _, c, _ in page.nodes), default=0) + 1
    rows = max((r for _, _, _, _, r in page.nodes), default=0) + 1
    width, height = _LEFT * 2 + columns * _COLUMN_WIDTH, _TOP + rows * _ROW + 10
    place = {n: (_LEFT + 10 + c * _COLUMN_WIDTH, _TOP + r * _ROW + _ROW / 2) for n, _, _, c, r in page.nodes}
    label = f"changed neighbourhood, page {number} of {total}"
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" width="{width}" '
             f'height="{height}" role="img" aria-label="{label}" font-family="sans-serif">']
    for column, kind in sorted(page.columns.items()):
        parts.append(f'<text x="{_LEFT + column * _COLUMN_WIDTH}" y="18" font-size="13" font-weight="bold">{escape(kind)}</text>')
    for s, t, relation, state in page.edges:
        if s not in place or t not in place:
            continue
        (x1, y1), (x2, y2) = place[s], place[t]
        colour, dash = _EDGE[state]
        dashed = f' stroke-dasharray="{dash}"' if dash else ""
        if x1 == x2:  # same column (derives_from, part_of): an arc on the free left side
            bend = x1 - 16 - min(abs(y2 - y1) / 5, 90)
            shape = f'<path d="M{x1:.1f},{y1:.1f} Q{bend:.1f},{(y1 + y2) / 2:.1f} {x2:.1f},{y2:.1f}" fill="none"'
        else:  # from the end of the left label to just before the right marker
            (x1, y1, left), (x2, y2) = sorted([(x1, y1, s), (x2, y2, t)])[0], sorted([(x1, y1), (x2, y2)])[1]
            x1, x2 = x1 + 12 + _LABEL_EM * len(left), x2 - 8
            shape = f'<line x1="{x1:.1f}" y1="{y1:.1f}" x2="{x2:.1f}" y2="{y2:.1f}"'
        parts.append(f'{shape} stroke="{colour}" stroke-width="1" stroke-opacity="0.7"{dashed}>'
                     f"<title>{escape(s)} {escape(relation)} {escape(t)} ({state})</title></{'path' if x1 == x2 else 'line'}>")
    for node, status, kind, _, _ in page.nodes:
        x, y = place[node]
        weight = "" if status == "context" else ' font-weight="bold"'
        parts.append(f"<g><title>{escape(node)} ({escape(kind)}, {status})</title>{_shape(status, x, y)}"
                     f'<text x="{x + 9:.1f}" y="{y + 4:.1f}" font-size="11"{weight}>{escape(node)}</text></g>')
    parts.append("</svg>")
    return "".join(parts)


def svg(result: DiffResult) -> str:
    """The changed neighbourhood, drawn from the layout the analysis computed."""
    picture = result.picture
    if picture is None or not picture.pages:
        return "<p>No changed elements to draw.</p>"
    total = len(picture.pages)
    out = []
    for number, page in enumerate(picture.pages, 1):
        changed = sum(1 for n in page.nodes if n[1] != "context")
        heading = f"<h3>Page {number} of {total} ({changed} elements)</h3>" if total > 1 else ""
        out.append(f'<div class="page">{heading}{_page_svg(page, number, total)}</div>')
    return "".join(out)


def _words(words: list[dict[str, str]]) -> str:
    from tracecheck.report.diff import word_pieces

    tag = {"equal": "{}", "delete": "<del>{}</del>", "insert": "<ins>{}</ins>"}
    return "".join(gap + tag[op].format(escape(text)) for gap, op, text in word_pieces(words))


def _value(value) -> str:
    return "<em>(none)</em>" if value is None else f"<code>{escape(str(value))}</code>"


def _detail(category: str, entry) -> str:
    if category == "moved":
        return f"parent {_value(entry['old_parent'])} → {_value(entry['new_parent'])}"
    if category == "reidentified":
        return f"was <code>{escape(entry['old'])}</code>, score {entry['score']:.2f}"
    if category != "modified":
        return ""
    rows = []
    for name, change in entry["changes"].items():
        body = _words(change["words"]) if "words" in change else f"{_value(change['old'])} → {_value(change['new'])}"
        rows.append(f"<b>{escape(name)}</b>: {body}")
    return "<br>".join(rows)


def _groups(result: DiffResult) -> str:
    from tracecheck.report.diff import groups

    parts = []
    for kind, entries in groups(result):
        rows = "".join(
            f"<tr><td>{category}</td><td><code>{escape(_id(category, entry))}</code></td><td>{_detail(category, entry)}</td></tr>"
            for category, entry in entries
        )
        parts.append(f"<details open><summary>{escape(kind)} ({len(entries)})</summary>"
                     f"<table><tr><th>change</th><th>element</th><th>detail</th></tr>{rows}</table></details>")
    return "".join(parts)


def _id(category: str, entry) -> str:
    if category in ("added", "removed"):
        return entry
    return entry["new"] if category == "reidentified" else entry["id"]


def _counts(result: DiffResult) -> str:
    head = "".join(f"<th>{c}</th>" for c in CATEGORIES)
    rows = "".join(
        f"<tr><td>{escape(kind)}</td>" + "".join(f'<td class="n">{counts[c]}</td>' for c in CATEGORIES) + "</tr>"
        for kind, counts in result.by_kind().items()
    )
    return f"<table><tr><th>kind</th>{head}</tr>{rows}</table>"


def _coverage(result: DiffResult) -> str:
    if not result.coverage:
        return ""

    def pct(v):
        return "n/a" if v is None else f"{v:.1f}%"

    def delta(p):
        return "" if p["old"] is None or p["new"] is None or p["old"] == p["new"] else f"{p['new'] - p['old']:+.1f}"

    rows = "".join(f'<tr><td><code>{escape(n)}</code></td><td class="n">{pct(p["old"])}</td><td class="n">{pct(p["new"])}</td>'
                   f'<td class="n">{delta(p)}</td></tr>' for n, p in result.coverage.items())
    return f"<h2>Coverage</h2><table><tr><th>declaration</th><th>before</th><th>after</th><th>change</th></tr>{rows}</table>"


def _finding_rows(findings: list, state: str) -> str:
    return "".join(f"<tr><td>{state}</td><td><code>{escape(f['rule'])}</code></td><td>{escape(f['message'])}</td></tr>"
                   for f in findings)


def _findings(result: DiffResult) -> str:
    """New findings in an open table; resolved ones folded when there are many (the
    summary line still counts them by rule)."""
    new, resolved = result.findings["new"], result.findings["resolved"]
    head = "<tr><th></th><th>rule</th><th>message</th></tr>"
    out = [f"<h2>Findings: {len(new)} new, {len(resolved)} resolved</h2>"]
    if new:
        out.append(f"<table>{head}{_finding_rows(new, 'new')}</table>")
    if resolved:
        per_rule: dict[str, int] = {}
        for f in resolved:
            per_rule[f["rule"]] = per_rule.get(f["rule"], 0) + 1
        counts = ", ".join(f"{escape(r)} {n}" for r, n in sorted(per_rule.items()))
        out.append(f"<details{' open' if len(resolved) <= 10 else ''}><summary>{len(resolved)} resolved: {counts}</summary>"
                   f"<table>{head}{_finding_rows(resolved, 'resolved')}</table></details>")
    return "".join(out)


def _links(result: DiffResult) -> str:
    rows = [f"<tr><td>{state}</td><td><code>{escape(lk['source'])}</code></td><td>{escape(lk['relation'])}</td><td><code>{escape(lk['target'])}</code></td></tr>"
            for state in ("added", "removed") for lk in result.links[state]]
    rows += [f"<tr><td>relation changed</td><td><code>{escape(c['source'])}</code></td><td>{escape(c['old_relation'])} → {escape(c['new_relation'])}</td><td><code>{escape(c['target'])}</code></td></tr>"
             for c in result.links["relation_changed"]]
    if not rows:
        return ""
    return f"<h2>Links</h2><details open><summary>{len(rows)} link changes</summary><table><tr><th>change</th><th>source</th><th>relation</th><th>target</th></tr>{''.join(rows)}</table></details>"


def _impact(result: DiffResult) -> str:
    if not result.impact:
        return "<h2>Needs re-review</h2><p>Nothing.</p>"
    rows = "".join(
        f"<tr><td><code>{escape(e['element'])}</code></td><td><code>{escape(e['because'])}</code></td><td>{'/'.join(e['change'])}</td>"
        f"<td>{escape('; '.join(p['source'] + ' ' + p['relation'] + ' ' + p['target'] for p in e['path']))}</td></tr>"
        for e in result.impact
    )
    return ("<h2>Needs re-review</h2><table><tr><th>element</th><th>because</th><th>change</th><th>path</th></tr>"
            f"{rows}</table>")


@renderer("diff", "html")
def diff_html(result: DiffResult, options: RenderOptions) -> str:
    from tracecheck.report.diff import headline

    title = f"Stage diff: {result.old_origin} → {result.new_origin}"
    return (
        '<!DOCTYPE html>\n<html lang="en"><head><meta charset="utf-8">'
        f"<title>{escape(title)}</title><style>{_CSS}</style></head><body>"
        f"<h1>{escape(title)}</h1><p><b>{escape(headline(result))}</b></p>"
        f'<p class="caution">{escape(CAUTION)}</p>'
        f'<div class="side"><div><h2>Counts by kind</h2>{_counts(result)}</div><div>{_coverage(result)}</div></div>'
        f"{_impact(result)}<h2>Changes by kind</h2>{_groups(result)}{_links(result)}{_findings(result)}"
        f"<h2>Changed neighbourhood</h2>{_legend()}{svg(result)}"
        "</body></html>\n"
    )
