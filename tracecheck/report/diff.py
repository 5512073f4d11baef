"""Renderers for ``diff`` results: text (rich), json, markdown; html in ``diff_html``."""

from __future__ import annotations

from rich.text import Text

from tracecheck.diff import CAUTION, DiffResult
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.check import dump_json, md_escape
from tracecheck.report.console import to_text

__all__ = ["diff_json", "diff_text", "diff_markdown", "headline", "groups"]

CATEGORIES = ("added", "removed", "modified", "moved", "reidentified")
_MARK = {"added": "+", "removed": "-", "modified": "~", "moved": ">", "reidentified": "="}
_STYLE = {"added": "green", "removed": "red", "modified": "yellow", "moved": "cyan", "reidentified": "magenta"}


@renderer("diff", "json")
def diff_json(result: DiffResult, options: RenderOptions) -> str:
    return dump_json(result.to_json())


def headline(result: DiffResult) -> str:
    e = result.summary()["elements"]
    links = result.links
    parts = ", ".join(f"{e[c]} {c}" for c in CATEGORIES)
    impacted = result.summary()["impacted"]
    return (
        f"{'CHANGED' if result.changed else 'UNCHANGED'}: elements {parts}; links "
        f"{len(links['added'])} added, {len(links['removed'])} removed, "
        f"{len(links['relation_changed'])} relation changed; {impacted} need re-review."
    )


def _entry_id(category: str, entry) -> str:
    if category in ("added", "removed"):
        return entry
    return entry["new"] if category == "reidentified" else entry["id"]


def groups(result: DiffResult) -> list[tuple[str, list[tuple[str, object]]]]:
    """Changes grouped by kind (sorted), each group in category order then id."""
    table: dict[str, list[tuple[str, object]]] = {}
    for category in CATEGORIES:
        for entry in result.elements[category]:
            kind = result.kinds.get(_entry_id(category, entry), "?")
            table.setdefault(kind, []).append((category, entry))
    return sorted(table.items())


def _describe(category: str, entry) -> str:
    if category in ("added", "removed"):
        return entry
    if category == "moved":
        return f"{entry['id']}: parent {entry['old_parent'] or '(none)'} -> {entry['new_parent'] or '(none)'}"
    if category == "reidentified":
        return f"{entry['old']} is now {entry['new']} (score {entry['score']:.2f})"
    return f"{entry['id']}" + (f" (was {entry['old_id']})" if "old_id" in entry else "")


def _words_text(words: list[dict[str, str]]) -> Text:
    line = Text("      ")
    for run in words:
        if run["op"] == "equal":
            line.append(run["text"] + " ")
        elif run["op"] == "delete":
            line.append("[-" + run["text"] + "-]", style="red strike")
            line.append(" ")
        else:
            line.append("{+" + run["text"] + "+}", style="green underline")
            line.append(" ")
    return line


def _field_lines(entry) -> list[Text]:
    lines = []
    for name, change in entry["changes"].items():
        if "words" in change:
            lines.append(Text(f"    {name}:"))
            lines.append(_words_text(change["words"]))
        else:
            lines.append(Text(f"    {name}: {change['old']!r} -> {change['new']!r}"))
    return lines


def _link_line(mark: str, link: dict) -> str:
    return f"  {mark} {link['source']} {link['relation']} {link['target']}"


def _path_text(path: list[dict]) -> str:
    return "; ".join(f"{p['source']} {p['relation']} {p['target']}" for p in path)


def _summary_lines(result: DiffResult) -> list[Text]:
    items = [Text("counts by kind", style="bold")]
    for kind, counts in result.by_kind().items():
        items.append(Text(f"  {kind:<14}" + "  ".join(f"{_MARK[c]}{counts[c]}" for c in CATEGORIES)))
    if result.coverage:
        items.append(Text("coverage (before -> after)", style="bold"))
        for name, pair in result.coverage.items():
            items.append(Text(f"  {name:<24}{_pct(pair['old'])} -> {_pct(pair['new'])}"))
    findings = result.findings
    items.append(Text(f"findings: {len(findings['new'])} new, {len(findings['resolved'])} resolved", style="bold"))
    for f in findings["new"]:
        items.append(Text(f"  + {f['rule']}: {f['message']}"))
    for f in findings["resolved"]:
        items.append(Text(f"  - {f['rule']}: {f['message']}"))
    return items


def _pct(value) -> str:
    return "n/a" if value is None else f"{value:.1f}%"


@renderer("diff", "text")
def diff_text(result: DiffResult, options: RenderOptions) -> str:
    items: list = []
    if not options.quiet:
        items.append(Text(f"tracecheck diff {result.old_origin} -> {result.new_origin}", style="bold"))
        items += _summary_lines(result)
        for kind, entries in groups(result):
            items.append(Text(""))
            items.append(Text(f"{kind} ({len(entries)})", style="bold"))
            for category, entry in entries:
                items.append(Text(f"  {_MARK[category]} {category:<13}{_describe(category, entry)}", style=_STYLE[category]))
                if category == "modified":
                    items += _field_lines(entry)
        items += _links_text(result)
        items += _impact_text(result)
        items.append(Text(""))
        items.append(Text(CAUTION, style="dim"))
    items.append(Text(headline(result), style="bold"))
    return to_text(items, options)


def _links_text(result: DiffResult) -> list[Text]:
    links = result.links
    if not (links["added"] or links["removed"]):
        return []
    items = [Text(""), Text("links", style="bold")]
    items += [Text(_link_line("+", link), style="green") for link in links["added"]]
    items += [Text(_link_line("-", link), style="red") for link in links["removed"]]
    for c in links["relation_changed"]:
        items.append(Text(f"  ~ {c['source']} -> {c['target']}: {c['old_relation']} became {c['new_relation']}"))
    return items


def _impact_text(result: DiffResult) -> list[Text]:
    if not result.impact:
        return []
    items = [Text(""), Text(f"needs re-review ({len({e['element'] for e in result.impact})})", style="bold")]
    for e in result.impact:
        items.append(Text(f"  {e['element']} because {e['because']} {'/'.join(e['change'])}: {_path_text(e['path'])}"))
    return items


def _md_words(words: list[dict[str, str]]) -> str:
    out = []
    for run in words:
        text = md_escape(run["text"])
        out.append(text if run["op"] == "equal" else f"~~{text}~~" if run["op"] == "delete" else f"**{text}**")
    return " ".join(out)


def _md_value(value) -> str:
    return "(none)" if value is None else f"`{md_escape(value)}`"


@renderer("diff", "markdown")
def diff_markdown(result: DiffResult, options: RenderOptions) -> str:
    lines = [
        f"# Stage diff: {md_escape(result.old_origin)} → {md_escape(result.new_origin)}",
        "",
        f"**{md_escape(headline(result))}**",
        "",
        f"> {CAUTION}",
        "",
        "## Counts by kind",
        "",
        "| kind | " + " | ".join(CATEGORIES) + " |",
        "|---|" + "---:|" * len(CATEGORIES),
    ]
    for kind, counts in result.by_kind().items():
        lines.append(f"| {md_escape(kind)} | " + " | ".join(str(counts[c]) for c in CATEGORIES) + " |")
    if result.coverage:
        lines += ["", "## Coverage", "", "| declaration | before | after |", "|---|---:|---:|"]
        lines += [f"| `{n}` | {_pct(p['old'])} | {_pct(p['new'])} |" for n, p in result.coverage.items()]
    lines += _md_findings(result)
    for kind, entries in groups(result):
        lines += ["", f"## {md_escape(kind)} ({len(entries)})", "", "| change | element | detail |", "|---|---|---|"]
        for category, entry in entries:
            lines.append(f"| {category} | {md_escape(_describe(category, entry))} | {_md_detail(category, entry)} |")
    lines += _md_links(result)
    if result.impact:
        lines += ["", "## Needs re-review", "", "| element | because | change | path |", "|---|---|---|---|"]
        for e in result.impact:
            lines.append(f"| `{md_escape(e['element'])}` | `{md_escape(e['because'])}` | {'/'.join(e['change'])} | {md_escape(_path_text(e['path']))} |")
    lines.append("")
    return "\n".join(lines)


def _md_detail(category: str, entry) -> str:
    if category != "modified":
        return ""
    parts = []
    for name, change in entry["changes"].items():
        if "words" in change:
            parts.append(f"{md_escape(name)}: {_md_words(change['words'])}")
        else:
            parts.append(f"{md_escape(name)}: {_md_value(change['old'])} → {_md_value(change['new'])}")
    return "<br>".join(parts)


def _md_findings(result: DiffResult) -> list[str]:
    new, resolved = result.findings["new"], result.findings["resolved"]
    lines = ["", f"## Findings: {len(new)} new, {len(resolved)} resolved", ""]
    if new or resolved:
        lines += ["| | rule | message |", "|---|---|---|"]
        lines += [f"| new | `{f['rule']}` | {md_escape(f['message'])} |" for f in new]
        lines += [f"| resolved | `{f['rule']}` | {md_escape(f['message'])} |" for f in resolved]
    return lines


def _md_links(result: DiffResult) -> list[str]:
    links = result.links
    if not (links["added"] or links["removed"]):
        return []
    lines = ["", "## Links", "", "| change | source | relation | target |", "|---|---|---|---|"]
    for mark, key in (("added", "added"), ("removed", "removed")):
        for link in links[key]:
            lines.append(f"| {mark} | `{md_escape(link['source'])}` | {link['relation']} | `{md_escape(link['target'])}` |")
    for c in links["relation_changed"]:
        lines.append(f"| relation changed | `{md_escape(c['source'])}` | {c['old_relation']} → {c['new_relation']} | `{md_escape(c['target'])}` |")
    return lines


from tracecheck.report import diff_html as _html  # noqa: E402,F401  (registers the html renderer)
