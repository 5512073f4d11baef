"""Renderers for ``diff`` results: text (rich), json, markdown; html in ``diff_html``."""

from __future__ import annotations

import json

from rich import box
from rich.padding import Padding
from rich.table import Table
from rich.text import Text

from tracecheck.diff import CAUTION, DiffResult
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.check import md_escape
from tracecheck.report.console import to_text

__all__ = ["diff_json", "diff_text", "diff_markdown", "headline", "groups"]

CATEGORIES = ("added", "removed", "modified", "moved", "reidentified")
_MARK = {"added": "+", "removed": "-", "modified": "~", "moved": ">", "reidentified": "="}
_STYLE = {"added": "green", "removed": "red", "modified": "yellow", "moved": "cyan", "reidentified": "magenta"}


def _compact(value) -> str:
    return json.dumps(value, ensure_ascii=False, separators=(", ", ": "))


def _lines(value, indent: str = "") -> str:
    """JSON with objects laid out key by key and each list item on one line.

    Readable and line-diffable like an indented dump, but each item is written by the
    C encoder (``indent`` forces the pure-Python one: 2.8 s of a 100k-element diff).
    """
    inner = indent + "  "
    if isinstance(value, dict) and value:
        body = ",\n".join(f"{inner}{_compact(k)}: {_lines(v, inner)}" for k, v in value.items())
        return "{\n" + body + "\n" + indent + "}"
    if isinstance(value, list) and value:
        return "[\n" + ",\n".join(inner + _compact(item) for item in value) + "\n" + indent + "]"
    return _compact(value)


@renderer("diff", "json")
def diff_json(result: DiffResult, options: RenderOptions) -> str:
    return _lines(result.to_json()) + "\n"


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


def word_pieces(words: list[dict[str, str]]):
    """(gap, op, text) per run: the run's leading space, if any, kept apart so views
    can put it outside their markup."""
    for run in words:
        text = run["text"]
        gap = " " if text.startswith(" ") else ""
        yield gap, run["op"], text[len(gap):]


def _words_text(words: list[dict[str, str]], indent: str) -> Text:
    line = Text(indent)
    for gap, op, text in word_pieces(words):
        line.append(gap)
        if op == "equal":
            line.append(text)
        elif op == "delete":
            line.append("[-" + text + "-]", style="red strike")
        else:
            line.append("{+" + text + "+}", style="green underline")
    return line


def _value(value) -> str:
    return "(none)" if value is None else repr(value)


def _wrapped(label: str, ids: list[str], style: str = "") -> list:
    """A label line, then the items as one paragraph indented under it."""
    return [Text(f"  {label} ({len(ids)}):", style=style), Padding(Text(", ".join(ids)), (0, 0, 0, 6))]


def _kind_lines(entries: list[tuple[str, object]]) -> list[Text]:
    """One kind's changes: id lists for additions and removals, one line per move and
    re-identification, text edits with their inline word diff, and the other field
    edits grouped where several elements changed the same way."""
    items: list[Text] = []
    by_category: dict[str, list] = {}
    for category, entry in entries:
        by_category.setdefault(category, []).append(entry)
    for category in ("added", "removed"):
        if category in by_category:
            items += _wrapped(f"{_MARK[category]} {category}", by_category[category], _STYLE[category])
    for category in ("reidentified", "moved"):
        for entry in by_category.get(category, []):
            items.append(Text(f"  {_MARK[category]} {category:<13}{_describe(category, entry)}", style=_STYLE[category]))
    same: dict[tuple, list[str]] = {}
    for entry in by_category.get("modified", []):
        fields = {k: v for k, v in entry["changes"].items() if "words" not in v}
        texts = {k: v for k, v in entry["changes"].items() if "words" in v}
        if texts or "old_id" in entry:
            items.append(Text(f"  ~ modified     {_describe('modified', entry)}", style=_STYLE["modified"]))
            for name, change in sorted(fields.items()):
                items.append(Text(f"      {name}: {_value(change['old'])} -> {_value(change['new'])}"))
            for name, change in sorted(texts.items()):
                items.append(Text(f"      {name}:"))
                items.append(Padding(_words_text(change["words"], ""), (0, 0, 0, 8)))
            continue
        key = tuple((name, _value(c["old"]), _value(c["new"])) for name, c in sorted(fields.items()))
        same.setdefault(key, []).append(entry["id"])
    for key, ids in sorted(same.items(), key=lambda item: (item[1][0], item[0])):
        what = "; ".join(f"{name}: {old} -> {new}" for name, old, new in key)
        items += _wrapped(f"~ modified     {what}", ids, _STYLE["modified"])
    return items


def _pct(value) -> str:
    return "n/a" if value is None else f"{value:.1f}%"


def _counts_table(result: DiffResult) -> Table:
    table = Table(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False)
    table.add_column("kind")
    for category in CATEGORIES:
        table.add_column(category, justify="right")
    for kind, counts in result.by_kind().items():
        table.add_row(kind, *(str(counts[c]) for c in CATEGORIES))
    totals = result.summary()["elements"]
    table.add_row("all", *(str(totals[c]) for c in CATEGORIES), style="bold")
    return table


def _coverage_table(result: DiffResult) -> Table:
    table = Table(box=box.SIMPLE_HEAD, pad_edge=False, show_edge=False)
    for name, justify in (("coverage declaration", "left"), ("before", "right"), ("after", "right"), ("change", "right")):
        table.add_column(name, justify=justify)
    for name, pair in result.coverage.items():
        old, new = pair["old"], pair["new"]
        delta = "" if old is None or new is None or old == new else f"{new - old:+.1f}"
        table.add_row(name, _pct(old), _pct(new), delta)
    return table


def _finding_line(mark: str, finding: dict) -> Padding:
    return Padding(Text(f"{mark} {finding['rule']}: {finding['message']}", style="green" if mark == "-" else "red"),
                   (0, 0, 0, 2))


def _findings_lines(result: DiffResult) -> list[Text]:
    """New findings one by one (they are what the change brings); resolved ones too
    when few, else counted per rule."""
    new, resolved = result.findings["new"], result.findings["resolved"]
    items = [Text(""), Text(f"findings: {len(new)} new, {len(resolved)} resolved", style="bold")]
    items += [_finding_line("+", f) for f in new]
    if len(resolved) <= _LIST_LIMIT:
        items += [_finding_line("-", f) for f in resolved]
    else:
        per_rule: dict[str, int] = {}
        for f in resolved:
            per_rule[f["rule"]] = per_rule.get(f["rule"], 0) + 1
        items.append(Text("  - resolved by rule: " + ", ".join(f"{r} {n}" for r, n in sorted(per_rule.items())),
                          style="green"))
    return items


_LIST_LIMIT = 10  # resolved findings listed one by one up to this many


def summary_text(result: DiffResult, options: RenderOptions) -> str:
    """The stage summary alone: counts, coverage, findings, re-identifications and
    text edits, needs-re-review count, headline (the demo prints this)."""
    items: list = [_counts_table(result)]
    if result.coverage:
        items.append(_coverage_table(result))
    items += _findings_lines(result)
    for entry in result.elements["reidentified"]:
        items.append(Text(f"  = {_describe('reidentified', entry)}", style=_STYLE["reidentified"]))
    for entry in result.elements["modified"]:
        for name, change in entry["changes"].items():
            if "words" in change:
                items.append(Text(f"  ~ {entry['id']} {name}:", style=_STYLE["modified"]))
                items.append(Padding(_words_text(change["words"], ""), (0, 0, 0, 6)))
    items.append(Text(headline(result), style="bold"))
    return to_text(items, options)


@renderer("diff", "text")
def diff_text(result: DiffResult, options: RenderOptions) -> str:
    items: list = []
    if not options.quiet:
        items.append(Text(f"tracecheck diff {result.old_origin} -> {result.new_origin}", style="bold"))
        items.append(Text(""))
        items.append(_counts_table(result))
        if result.coverage:
            items.append(_coverage_table(result))
        items += _findings_lines(result)
        for kind, entries in groups(result):
            items.append(Text(""))
            items.append(Text(f"{kind} ({len(entries)} changed)", style="bold"))
            items += _kind_lines(entries)
        items += _links_text(result)
        items += _impact_text(result)
        items.append(Text(""))
        items.append(Text(CAUTION, style="dim"))
    items.append(Text(headline(result), style="bold"))
    return to_text(items, options)


def _links_text(result: DiffResult) -> list[Text]:
    """Links grouped by change and relation, each group one wrapped line."""
    links = result.links
    if not (links["added"] or links["removed"]):
        return []
    items = [Text(""), Text(f"links ({len(links['added'])} added, {len(links['removed'])} removed)", style="bold")]
    for mark, key in (("+", "added"), ("-", "removed")):
        by_relation: dict[str, list[str]] = {}
        for link in links[key]:
            by_relation.setdefault(link["relation"], []).append(f"{link['source']} -> {link['target']}")
        for relation, pairs in sorted(by_relation.items()):
            items += _wrapped(f"{mark} {relation}", pairs, "green" if mark == "+" else "red")
    for c in links["relation_changed"]:
        items.append(Text(f"  ~ relation changed: {c['source']} -> {c['target']}: {c['old_relation']} became {c['new_relation']}",
                          style="yellow"))
    return items


def _impact_text(result: DiffResult) -> list[Text]:
    """One block per changed element: the elements it puts back under review, each
    with the relations that connect them."""
    if not result.impact:
        return [Text(""), Text("needs re-review: nothing", style="bold")]
    count = len({e["element"] for e in result.impact})
    items = [Text(""), Text(f"needs re-review ({count} elements)", style="bold")]
    by_cause: dict[tuple[str, str], list[str]] = {}
    for e in result.impact:
        via = " > ".join(link["relation"] for link in e["path"])
        by_cause.setdefault((e["because"], "/".join(e["change"])), []).append(f"{e['element']} (via {via})")
    for (cause, change), reached in sorted(by_cause.items()):
        items.append(Text(f"  {cause} ({change}):"))
        items.append(Padding(Text(", ".join(reached)), (0, 0, 0, 6)))
    return items


def _path_text(path: list[dict]) -> str:
    return "; ".join(f"{p['source']} {p['relation']} {p['target']}" for p in path)


def _md_words(words: list[dict[str, str]]) -> str:
    out = []
    for gap, op, text in word_pieces(words):
        text = md_escape(text)
        out.append(gap + (text if op == "equal" else f"~~{text}~~" if op == "delete" else f"**{text}**"))
    return "".join(out)


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
