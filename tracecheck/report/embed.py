"""Renderers for ``embed fit``, ``embed verify`` and ``embed suggest``: text, json, markdown.

Each is a function of its result object alone; the wording of the cautions lives here.
"""

from __future__ import annotations

import json

from rich.table import Table
from rich.text import Text

from tracecheck.embedding.fit import FitResult
from tracecheck.embedding.suggest import Suggestion, SuggestResult
from tracecheck.embedding.verify import LinkRef, VerifyResult
from tracecheck.report import RenderOptions, renderer
from tracecheck.report.console import to_text

__all__ = ["CAUTION", "UPPER_BOUND", "SUGGESTION_NOTE"]

CAUTION = (
    "This report supports and does not replace review by qualified people; tool "
    "qualification under the applicable standard is the user's responsibility; local codes "
    "and licensed practice prevail."
)
UPPER_BOUND = (
    "The dimension found is an upper bound on the smallest exact dimension, not a proven "
    "minimum: a smaller exact embedding may exist that the search did not find."
)
SUGGESTION_NOTE = (
    "Suggestions for a human reviewer, ranked by a learned model; none is applied to the "
    "model. A score ranks pairs (it is not a calibrated probability); a high one means the "
    "link resembles existing ones, not that it is correct."
)
_LIST_LIMIT = 50  # text and markdown show this many links per list; json shows all


def _dump(document) -> str:
    return json.dumps(document, indent=2, ensure_ascii=False) + "\n"


def _link(link: LinkRef) -> str:
    relation = link.relation if link.relation is not None else "(any relation)"
    return f"{link.source} {relation} {link.target}"


def _link_table(title: str, links: list[LinkRef], style: str) -> list:
    if not links:
        return []
    table = Table.grid(padding=(0, 2))
    table.add_column(overflow="fold")
    for link in links[:_LIST_LIMIT]:
        table.add_row(_link(link))
    more = [Text(f"  ... and {len(links) - _LIST_LIMIT} more (see --format json)")] if len(links) > _LIST_LIMIT else []
    return [Text(""), Text(f"{title} ({len(links)})", style=style), table, *more]


def _md_links(title: str, links: list[LinkRef]) -> list[str]:
    if not links:
        return []
    lines = [f"## {title} ({len(links)})", "", "| source | relation | target |", "|---|---|---|"]
    for link in links[:_LIST_LIMIT]:
        relation = link.relation if link.relation is not None else "(any)"
        lines.append(f"| `{_md(link.source)}` | {_md(relation)} | `{_md(link.target)}` |")
    if len(links) > _LIST_LIMIT:
        lines.append(f"\n... and {len(links) - _LIST_LIMIT} more (see `--format json`).")
    return lines + [""]


def _md(text: str) -> str:
    return str(text).replace("\\", "\\\\").replace("|", "\\|").replace("`", "'").replace("\n", " ")


# --- verify -----------------------------------------------------------------------------

def verify_verdict(result: VerifyResult) -> str:
    if result.exact:
        return (f"EXACT: the {result.dimension}-dimensional embedding reproduces all "
                f"{result.links} links of {result.elements} elements.")
    parts = [f"{len(result.missing)} missing", f"{len(result.spurious)} spurious"]
    if result.unknown_elements:
        parts.append(f"{len(result.unknown_elements)} unknown elements")
    return f"NOT EXACT: {', '.join(parts)} (dimension {result.dimension})."


def _scope(relations) -> str:
    return "all relations (their union)" if relations is None else ", ".join(relations)


@renderer("embed verify", "json")
def verify_json(result: VerifyResult, options: RenderOptions) -> str:
    return _dump(result.to_json())


@renderer("embed verify", "text")
def verify_text(result: VerifyResult, options: RenderOptions) -> str:
    items: list = []
    if not options.quiet:
        items.append(Text(f"tracecheck embed verify {result.model} --embedding {result.embedding}", style="bold"))
        items.append(Text(f"relations: {_scope(result.relations)}; certification margin {result.margin:.3g}"))
        if not result.fingerprint_match:
            items.append(Text("The model's links differ from those the embedding was fitted to (fingerprint)."))
        items += _link_table("missing: links of the model the embedding does not reproduce", result.missing, "red")
        items += _link_table("spurious: links the embedding predicts that the model lacks", result.spurious, "red")
        for title, ids in (("unknown elements (not in the embedding)", result.unknown_elements),
                           ("elements no longer in the model", result.removed_elements)):
            if ids:
                items += [Text(""), Text(f"{title} ({len(ids)})", style="yellow"),
                          Text(", ".join(ids[:_LIST_LIMIT]) + (" ..." if len(ids) > _LIST_LIMIT else ""))]
        items += [Text(""), Text(CAUTION, style="dim")]
    items.append(Text(verify_verdict(result), style="bold green" if result.exact else "bold red"))
    return to_text(items, options)


@renderer("embed verify", "markdown")
def verify_markdown(result: VerifyResult, options: RenderOptions) -> str:
    lines = [f"# tracecheck embed verify: {_md(result.model)}", "", f"**{verify_verdict(result)}**", "",
             f"Embedding `{_md(result.embedding)}`, relations: {_md(_scope(result.relations))}, "
             f"certification margin {result.margin:.3g}.", ""]
    lines += _md_links("Missing: links of the model the embedding does not reproduce", result.missing)
    lines += _md_links("Spurious: links the embedding predicts that the model lacks", result.spurious)
    for title, ids in (("Unknown elements", result.unknown_elements), ("Elements no longer in the model", result.removed_elements)):
        if ids:
            lines += [f"## {title} ({len(ids)})", "", ", ".join(f"`{_md(i)}`" for i in ids[:_LIST_LIMIT]), ""]
    lines += [f"_{CAUTION}_", ""]
    return "\n".join(lines)


# --- fit --------------------------------------------------------------------------------

def fit_verdict(result: FitResult) -> str:
    d = result.outcome.embedding.dimension
    if result.exact:
        found = "smallest exact dimension found" if result.outcome.searched else "requested dimension"
        return f"EXACT at dimension {d} ({found}); written to {result.output or '(not written)'}."
    return (f"NOT EXACT at dimension {d}: {len(result.check.missing)} missing and "
            f"{len(result.check.spurious)} spurious links; written to {result.output or '(not written)'}.")


def _attempt_rows(result: FitResult) -> list[tuple[str, ...]]:
    return [(str(a.dimension), a.start, "yes" if a.exact else "no", str(a.errors), str(a.iterations), a.stopped)
            for a in result.outcome.attempts]


_ATTEMPT_HEADER = ("dim", "start", "exact", "wrong pairs", "iterations", "stopped")


def _fit_notes(result: FitResult) -> list[str]:
    notes = []
    if result.outcome.searched and result.exact:
        notes.append(UPPER_BOUND)
    if result.outcome.timed_out:
        notes.append("The --max-seconds bound ended the search; the best fit so far was kept.")
    if result.skipped_self or result.skipped_dangling:
        notes.append(f"Left out: {result.skipped_self} self-links and {result.skipped_dangling} links to "
                     "missing elements (an embedding has no row for them).")
    return notes + [CAUTION]


@renderer("embed fit", "json")
def fit_json(result: FitResult, options: RenderOptions) -> str:
    return _dump(result.to_json())


@renderer("embed fit", "text")
def fit_text(result: FitResult, options: RenderOptions) -> str:
    items: list = []
    if not options.quiet:
        items.append(Text(f"tracecheck embed fit {result.check.model}", style="bold"))
        items.append(Text(f"{result.graph_elements} elements, {result.graph_links} directed links; "
                          f"relations: {_scope(result.outcome.embedding.relations)}"))
        table = Table(*_ATTEMPT_HEADER, box=None, pad_edge=False)
        for row in _attempt_rows(result):
            table.add_row(*row)
        items += [Text(""), Text("attempts", style="bold"), table]
        items += _link_table("missing (not reproduced)", result.check.missing, "red")
        items += _link_table("spurious (predicted, absent)", result.check.spurious, "red")
        items += [Text("")] + [Text(note, style="dim") for note in _fit_notes(result)]
    items.append(Text(fit_verdict(result), style="bold green" if result.exact else "bold red"))
    return to_text(items, options)


@renderer("embed fit", "markdown")
def fit_markdown(result: FitResult, options: RenderOptions) -> str:
    lines = [f"# tracecheck embed fit: {_md(result.check.model)}", "", f"**{_md(fit_verdict(result))}**", "",
             f"{result.graph_elements} elements, {result.graph_links} directed links; relations: "
             f"{_md(_scope(result.outcome.embedding.relations))}.", "",
             "| " + " | ".join(_ATTEMPT_HEADER) + " |", "|---:|---|---|---:|---:|---|"]
    lines += ["| " + " | ".join(_md(c) for c in row) + " |" for row in _attempt_rows(result)]
    lines.append("")
    lines += _md_links("Missing (not reproduced)", result.check.missing)
    lines += _md_links("Spurious (predicted, absent)", result.check.spurious)
    lines += [f"_{_md(note)}_\n" for note in _fit_notes(result)]
    return "\n".join(lines)


# --- suggest ----------------------------------------------------------------------------

def _evaluation(result: SuggestResult) -> str:
    if result.roc_auc is None:
        return "Held-out evaluation: not possible (too few links to hold any out)."
    return (f"Held-out evaluation ({result.held_out} links held out, seed {result.settings.seed}, "
            f"{result.negatives} sampled non-links): ROC-AUC {result.roc_auc:.3f}, "
            f"average precision {result.average_precision:.3f}.")


def _suggestion_rows(items: list[Suggestion]) -> list[tuple[str, ...]]:
    return [(s.source, "/".join(s.relations) or "-", s.target, f"{s.score:.3f}", f"{s.source_kind} -> {s.target_kind}")
            for s in items]


_SUGGEST_HEADER = ("source", "relation", "target", "score", "kinds")


@renderer("embed suggest", "json")
def suggest_json(result: SuggestResult, options: RenderOptions) -> str:
    document = result.to_json()
    document["note"] = SUGGESTION_NOTE + " " + CAUTION
    return _dump(document)


@renderer("embed suggest", "text")
def suggest_text(result: SuggestResult, options: RenderOptions) -> str:
    items: list = [Text(f"tracecheck embed suggest {result.model}", style="bold"), Text(_evaluation(result))]
    if not options.quiet:
        for title, rows in (("likely missing links (for review)", result.likely_missing),
                            ("least plausible existing links (for review)", result.least_plausible)):
            table = Table(*_SUGGEST_HEADER, box=None, pad_edge=False)
            for row in _suggestion_rows(rows):
                table.add_row(*row)
            items += [Text(""), Text(f"{title}: top {len(rows)}", style="bold"), table]
        items += [Text(""), Text(SUGGESTION_NOTE, style="dim"), Text(CAUTION, style="dim")]
    return to_text(items, options)


@renderer("embed suggest", "markdown")
def suggest_markdown(result: SuggestResult, options: RenderOptions) -> str:
    lines = [f"# tracecheck embed suggest: {_md(result.model)}", "", _md(_evaluation(result)), "",
             f"_{SUGGESTION_NOTE}_", ""]
    for title, rows in (("Likely missing links (for review)", result.likely_missing),
                        ("Least plausible existing links (for review)", result.least_plausible)):
        lines += [f"## {title}", "", "| " + " | ".join(_SUGGEST_HEADER) + " |", "|---|---|---|---:|---|"]
        lines += ["| " + " | ".join(_md(c) for c in row) + " |" for row in _suggestion_rows(rows)]
        lines.append("")
    lines += [f"_{CAUTION}_", ""]
    return "\n".join(lines)
