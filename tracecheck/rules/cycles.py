"""The ``cycle`` rule: hierarchies that loop back on themselves."""

from __future__ import annotations

from collections.abc import Iterable, Iterator

import networkx as nx

from tracecheck.rules import Hit, rule
from tracecheck.rules.engine import RuleContext

__all__ = ["cycle", "cyclic_components"]

PARENT = "parent"


def cyclic_components(edges: Iterable[tuple[str, str]]) -> list[tuple[list[str], list[str]]]:
    """Strongly connected components with more than one member, each with one cycle.

    Parameters
    ----------
    edges
        Directed pairs; self-loops are ignored (they are ``self-link`` findings).

    Returns
    -------
    list of (members, cycle)
        ``members`` sorted; ``cycle`` a closed walk ``[a, b, ..., a]`` inside the component.

    References
    ----------
    Tarjan, R. E. (1972). Depth-first search and linear graph algorithms. SIAM Journal on
    Computing 1(2), 146-160 (networkx's ``strongly_connected_components``).
    """
    pairs = [(u, v) for u, v in edges if u != v]
    if not pairs:
        return []
    found = []
    for component, inner in _components(pairs):
        members = sorted(component)
        sub = nx.DiGraph(inner)
        walk = [u for u, _ in nx.find_cycle(sub, source=members[0])]
        found.append((members, walk + [walk[0]]))
    return sorted(found)


def _components(pairs: list[tuple[str, str]]):
    """Components of more than one node, with the edges inside each.

    The labelling runs on integer arrays with scipy's compiled strongly connected
    components (Pearce's variant of Tarjan's algorithm); networkx only sees the few
    edges inside a component, to pick an example cycle. On a 100k-element thread this
    takes about a tenth of the time of building the whole networkx graph.
    """
    import numpy as np
    from scipy.sparse import coo_matrix
    from scipy.sparse.csgraph import connected_components

    index: dict[str, int] = {}
    sources = np.fromiter((index.setdefault(u, len(index)) for u, _ in pairs), dtype=np.int64, count=len(pairs))
    targets = np.fromiter((index.setdefault(v, len(index)) for _, v in pairs), dtype=np.int64, count=len(pairs))
    size = len(index)
    matrix = coo_matrix((np.ones(len(pairs), dtype=np.int8), (sources, targets)), shape=(size, size)).tocsr()
    _, labels = connected_components(matrix, directed=True, connection="strong")
    counts = np.bincount(labels)
    cyclic = set(np.flatnonzero(counts > 1).tolist())
    if not cyclic:
        return []
    names = list(index)
    groups: dict[int, tuple[set[str], list[tuple[str, str]]]] = {}
    for (u, v), a, b in zip(pairs, sources.tolist(), targets.tolist(), strict=True):
        label = int(labels[a])
        if label in cyclic and label == labels[b]:
            group = groups.setdefault(label, (set(), []))
            group[0].update((names[a], names[b]))
            group[1].append((u, v))
    return list(groups.values())


@rule(
    "cycle",
    severity="error",
    short="A relation that must be a hierarchy loops back on itself.",
    full="derives_from, refines and part_of (and the parent containment) must be acyclic: "
    "a requirement cannot derive, even indirectly, from itself. One finding per strongly "
    "connected component, listing every member and one example cycle.",
    help="Break the loop: decide which element is the source and remove the link back.",
    template="{relation} cycle among {count} elements ({members}); for example {example}",
)
def cycle(context: RuleContext) -> Iterator[Hit]:
    ids = context.ids
    by_relation: dict[str, list[tuple[str, str]]] = {
        name: [] for name in context.metamodel.acyclic_relations
    }
    for source, target, relation in context.distinct_links:
        if relation in by_relation and source in ids and target in ids:
            by_relation[relation].append((source, target))
    for relation, edges in sorted(by_relation.items()):
        for members, walk in cyclic_components(edges):
            link = context.distinct_links[(walk[0], walk[1], relation)][0]
            yield _hit(relation, members, walk, location=link.location)
    yield from _parent_cycles(context)


def _parent_cycles(context: RuleContext) -> Iterator[Hit]:
    ids = context.ids
    edges = []
    for element in context.model.by_id.values():
        if element.parent is None or element.parent not in ids:
            continue
        if element.parent == element.id:  # containment of itself: a cycle of one
            yield _hit(PARENT, [element.id], [element.id, element.id])
        else:
            edges.append((element.id, element.parent))
    for members, walk in cyclic_components(edges):
        yield _hit(PARENT, members, walk)


def _hit(relation: str, members: list[str], walk: list[str], location=None) -> Hit:
    arrow = f" -{relation}-> "
    args = {
        "relation": relation,
        "count": len(members),
        "members": ", ".join(members),
        "example": arrow.join(walk),
    }
    return Hit(tuple(members), args, location=location, relation=relation)
