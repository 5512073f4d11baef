"""Renderers for ``review status``: text and json."""

from __future__ import annotations

import json

from rich.text import Text

from tracecheck.report import RenderOptions, renderer
from tracecheck.report.console import to_text

__all__ = ["status_json", "status_text"]


@renderer("review-status", "json")
def status_json(result, options: RenderOptions) -> str:
    return json.dumps(result.to_json(), indent=2, ensure_ascii=False) + "\n"


@renderer("review-status", "text")
def status_text(result, options: RenderOptions) -> str:
    data = result.data
    items: list = [Text(f"tracecheck review status {result.model}", style="bold"),
                   Text(f"ledger: {result.ledger or '(none yet)'}")]
    for item in data["stale"]:
        items.append(Text(
            f"stale: {item['source']} {item['relation']} {item['target']} "
            f"({' and '.join(item['changed'])} changed since {item['accepted_by']} accepted it on {item['accepted_on']})",
            style="yellow",
        ))
    if not options.quiet:
        for link in data["gone"]:
            items.append(Text(f"no longer in the model: {link}", style="dim"))
    items.append(Text(
        f"{len(data['stale'])} stale, {data['current']} current, {len(data['unreviewed'])} never reviewed, "
        f"{len(data['gone'])} no longer in the model.",
        style="bold",
    ))
    return to_text(items, options)
