"""The changed neighbourhood as positioned nodes and edges, for the HTML review page.

The layout is computed here, with the analysis, so the renderer only draws. Elements
stand in columns by kind, in the order a trace reads (hazard, requirement, function,
component, interface, test), a layered drawing rather than a force layout: a force
layout of a few hundred changes collapses around hub elements (a component that
satisfies sixty requirements) into an unreadable knot. Within a column the elements
are ordered by the barycentre heuristic over the networkx graph of the page, so links
cross less. Every node
gets its own row, so every label stays legible however many elements changed; past
``PAGE_SIZE`` changed elements the picture is split into pages.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from tracecheck.model import Model

if TYPE_CHECKING:
    import networkx as nx

__all__ = ["Picture", "Page", "neighbourhood_picture", "PAGE_SIZE", "COLUMNS"]

# Changed elements per page: a page then stays under about 150 rows in its tallest
# column, readable on screen and on two or three printed sheets.
PAGE_SIZE = 120
_CONTEXT_LIMIT = 200  # unchanged neighbours drawn per page, at most
COLUMNS = ("hazard", "requirement", "function", "component", "interface", "test")


@dataclass(frozen=True)
class Page:
    """``nodes``: (id, status, kind, column, row); ``edges``: (source, target, relation,
    status) with status ``kept``, ``added`` or ``removed``; ``columns``: the kind
    heading of each column index used."""

    nodes: list[tuple[str, str, str, int, int]]
    edges: list[tuple[str, str, str, str]]
    columns: dict[int, str]


@dataclass(frozen=True)
class Picture:
    pages: list[Page]
    changed: int  # changed elements drawn, over all pages

    @property
    def nodes(self) -> list:
        return [n for page in self.pages for n in page.nodes]


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


def _column(kind: str) -> int:
    return COLUMNS.index(kind) if kind in COLUMNS else len(COLUMNS)


def _page_edges(old: Model, new: Model, drawn: set[str], kinds: dict, removed: set, added: set):
    """Links touching the page's changed elements (new model, plus removed old links)
    and the unchanged neighbours they bring in."""
    edges: dict[tuple[str, str, str], str] = {}
    context: set[str] = set()
    for model, side in ((new, "new"), (old, "old")):
        for element_id in sorted(drawn):
            for link in model.outgoing.get(element_id, []) + model.incoming.get(element_id, []):
                if side == "old" and link.triple not in removed:
                    continue
                other = link.target if link.source == element_id else link.source
                if other not in kinds:
                    continue
                if other not in drawn and other not in context:
                    if len(context) >= _CONTEXT_LIMIT:
                        continue
                    context.add(other)
                edges.setdefault(link.triple, "removed" if side == "old" else "added" if link.triple in added else "kept")
    return edges, context


def _centre(graph: nx.Graph, rows: dict[str, int], node: str, column: int) -> tuple[float, str]:
    others = [rows[m] for m in graph[node] if graph.nodes[m]["column"] != column]
    return (sum(others) / len(others) if others else rows[node], node)


def _order(graph: nx.Graph, columns: dict[int, list[str]]) -> dict[int, list[str]]:
    """Barycentre ordering (Sugiyama, Tagawa and Toda 1981): two sweeps in which each
    column is sorted by the mean row of its neighbours in the columns already placed."""
    rows = {n: i for nodes in columns.values() for i, n in enumerate(nodes)}
    for _ in range(2):
        for index in sorted(columns):
            columns[index] = sorted(columns[index], key=lambda node, here=index: _centre(graph, rows, node, here))
            rows.update({n: i for i, n in enumerate(columns[index])})
    return columns


def _page(old: Model, new: Model, drawn: set[str], status: dict, kinds: dict, removed: set, added: set) -> Page:
    import networkx as nx  # only the HTML view draws a picture (about 0.1 s to import)

    edges, context = _page_edges(old, new, drawn, kinds, removed, added)
    graph = nx.Graph()
    for node in sorted(drawn | context):
        graph.add_node(node, column=_column(kinds.get(node, "")))
    graph.add_edges_from(sorted((s, t) for s, t, _ in edges if s in graph and t in graph))
    columns: dict[int, list[str]] = {}
    for node in sorted(graph):
        columns.setdefault(graph.nodes[node]["column"], []).append(node)
    columns = _order(graph, columns)
    used = sorted(columns)
    nodes = []
    for index in used:
        for row, node in enumerate(columns[index]):
            nodes.append((node, status.get(node, "context"), kinds.get(node, "?"), used.index(index), row))
    heading = {used.index(i): (COLUMNS[i] if i < len(COLUMNS) else "other") for i in used}
    return Page(nodes, sorted((s, t, r, st) for (s, t, r), st in edges.items()), heading)


def neighbourhood_picture(old: Model, new: Model, elements: dict, links: dict, impact: list) -> Picture:
    """Changed elements (by kind, then id), their immediate neighbours and the links
    between them, in pages of ``PAGE_SIZE`` changed elements."""
    status = _statuses(elements, impact)
    kinds = {i: e.kind for i, e in old.by_id.items()} | {i: e.kind for i, e in new.by_id.items()}
    changed = sorted(status, key=lambda i: (_column(kinds.get(i, "")), i))
    removed = {(lk["source"], lk["target"], lk["relation"]) for lk in links["removed"]}
    added = {(lk["source"], lk["target"], lk["relation"]) for lk in links["added"]}
    pages = [
        _page(old, new, set(changed[start:start + PAGE_SIZE]), status, kinds, removed, added)
        for start in range(0, len(changed), PAGE_SIZE)
    ]
    return Picture(pages, len(changed))
