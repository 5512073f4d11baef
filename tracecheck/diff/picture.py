"""The changed neighbourhood as positioned nodes and edges, for the HTML review page.

The layout is computed here, with the analysis, so the renderer only draws.
"""

from __future__ import annotations

from dataclasses import dataclass

import networkx as nx

from tracecheck.model import Model

__all__ = ["Picture", "neighbourhood_picture", "DRAW_LIMIT"]

# Beyond this many changed elements the picture shows the first DRAW_LIMIT (by kind,
# then id) and says how many it left out; the tables still list every change.
DRAW_LIMIT = 300
_CONTEXT_LIMIT = 300  # neighbours drawn around the changes, at most


@dataclass(frozen=True)
class Picture:
    """``nodes``: (id, status, kind, x, y) with x, y in [0, 1]; ``edges``: (source,
    target, relation, status) with status ``kept``, ``added`` or ``removed``."""

    nodes: list[tuple[str, str, str, float, float]]
    edges: list[tuple[str, str, str, str]]
    left_out: int


def _statuses(elements: dict, impact: list) -> dict[str, str]:
    status: dict[str, str] = {}
    for entry in impact:
        status[entry["element"]] = "impacted"
    for key in ("modified", "moved"):
        for entry in elements[key]:
            status[entry["id"]] = "modified"
    for entry in elements["reidentified"]:
        status.setdefault(entry["new"], "modified")
    for element_id in elements["removed"]:
        status[element_id] = "removed"
    for element_id in elements["added"]:
        status[element_id] = "added"
    return status


def neighbourhood_picture(old: Model, new: Model, elements: dict, links: dict, impact: list) -> Picture:
    """Changed elements, their immediate neighbours, and the links between them, laid
    out with :func:`networkx.spring_layout` (fixed seed, so reruns are identical)."""
    status = _statuses(elements, impact)
    kinds = {i: e.kind for i, e in old.by_id.items()} | {i: e.kind for i, e in new.by_id.items()}
    changed = sorted(status, key=lambda i: (kinds.get(i, ""), i))
    drawn, left_out = set(changed[:DRAW_LIMIT]), max(0, len(changed) - DRAW_LIMIT)
    edges: dict[tuple[str, str, str], str] = {}
    context: set[str] = set()
    removed = {(lk["source"], lk["target"], lk["relation"]) for lk in links["removed"]}
    added = {(lk["source"], lk["target"], lk["relation"]) for lk in links["added"]}
    for model, side in ((new, "new"), (old, "old")):
        for element_id in sorted(drawn):
            for link in model.outgoing.get(element_id, []) + model.incoming.get(element_id, []):
                if side == "old" and link.triple not in removed:
                    continue
                other = link.target if link.source == element_id else link.source
                if other not in drawn and (len(context) >= _CONTEXT_LIMIT and other not in context):
                    continue
                if other not in kinds:
                    continue
                if other not in drawn:
                    context.add(other)
                state = "removed" if side == "old" else "added" if link.triple in added else "kept"
                edges.setdefault(link.triple, state)
    graph = nx.Graph()
    graph.add_nodes_from(sorted(drawn | context))
    graph.add_edges_from(sorted((s, t) for s, t, _ in edges))
    positions = nx.spring_layout(graph, seed=7, iterations=60) if len(graph) > 1 else {n: (0.0, 0.0) for n in graph}
    xs = [p[0] for p in positions.values()] or [0.0]
    ys = [p[1] for p in positions.values()] or [0.0]
    span_x, span_y = (max(xs) - min(xs)) or 1.0, (max(ys) - min(ys)) or 1.0
    nodes = [
        (n, status.get(n, "context"), kinds.get(n, "?"),
         round((positions[n][0] - min(xs)) / span_x, 4), round((positions[n][1] - min(ys)) / span_y, 4))
        for n in sorted(graph)
    ]
    return Picture(nodes, sorted((s, t, r, st) for (s, t, r), st in edges.items()), left_out)
