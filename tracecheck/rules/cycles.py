"""The ``cycle`` rule: hierarchies that loop back on themselves.

Works on integer arrays (``context.arrays``). Most hierarchies are acyclic, and a few
vectorised rounds of Kahn's peeling prove it without labelling anything; whatever
peeling leaves (the cycles and the paths between them) is labelled by networkx's
strongly connected components, or by scipy's compiled one when it is large. networkx
also picks the example cycle inside each component.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator

import numpy as np

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
        found.append((members, _example(inner, members[0])))
    return sorted(found)


def _example(inner: list[tuple[str, str]], start: str) -> list[str]:
    """One closed walk from ``start`` over ``inner`` (edges in first-seen order)."""
    import networkx as nx

    walk = [u for u, _ in nx.find_cycle(nx.DiGraph(inner), source=start)]
    return walk + [walk[0]]


def _components(pairs: list[tuple[str, str]]):
    """Components of more than one node, with the edges inside each.

    The labelling runs on integer arrays with scipy's compiled strongly connected
    components (Pearce's variant of Tarjan's algorithm); networkx only sees the few
    edges inside a component, to pick an example cycle. On a 100k-element thread this
    takes about a tenth of the time of building the whole networkx graph.
    """
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
    arrays = context.arrays
    n = arrays.n
    firsts = arrays.triple_first
    src, tgt, rel = arrays.src[firsts], arrays.tgt[firsts], arrays.rel[firsts]
    usable = (src < n) & (tgt < n) & (src != tgt)
    columns = context.model.columns
    for relation in sorted(context.metamodel.acyclic_relations):
        code = arrays.rel_code.get(relation)
        if code is None:
            continue
        chosen = np.flatnonzero(usable & (rel == code))
        found = _array_components(arrays, src[chosen], tgt[chosen])
        if not found:
            continue
        for members, walk in found:
            # The first link of the walk's first step (distinct pairs: exactly one).
            a, b = arrays.position[walk[0]], arrays.position[walk[1]]
            step = chosen[(src[chosen] == a) & (tgt[chosen] == b)][0]
            yield _hit(relation, members, walk, location=columns.link_location(int(firsts[step])))
    yield from _parent_cycles(context)


# Peeling rounds before handing the rest to a strongly-connected-components labelling;
# a hierarchy is settled in as many rounds as its longest chain has links.
MAX_ROUNDS = 256
# Edges left after peeling above which scipy's compiled labelling replaces networkx.
SCIPY_FROM = 20_000


def peel(size: int, sources: np.ndarray, targets: np.ndarray, max_rounds: int = MAX_ROUNDS) -> np.ndarray | None:
    """Indexes of the edges that peeling cannot remove; ``None`` if not settled in time.

    Kahn's algorithm from both ends, vectorised: an edge whose source has no incoming
    edge left, or whose target has no outgoing edge left, lies on no cycle, so it goes.
    What remains holds every edge of every cycle (and any edge between cycles); an
    empty result proves the relation acyclic without labelling components.

    References
    ----------
    Kahn, A. B. (1962). Topological sorting of large networks. Communications of the
    ACM 5(11), 558-562.
    """
    index = np.arange(len(sources))
    indegree = np.bincount(targets, minlength=size)
    outdegree = np.bincount(sources, minlength=size)
    for _ in range(max_rounds):
        drop = (indegree[sources] == 0) | (outdegree[targets] == 0)
        if not drop.any() or drop.all():
            return index[~drop]
        np.subtract.at(indegree, targets[drop], 1)
        np.subtract.at(outdegree, sources[drop], 1)
        keep = ~drop
        sources, targets, index = sources[keep], targets[keep], index[keep]
    return None


def _labels(size: int, sources: np.ndarray, targets: np.ndarray) -> np.ndarray:
    """Strongly connected component label of every node (scipy or networkx by size)."""
    if len(sources) >= SCIPY_FROM:
        from scipy.sparse import coo_matrix
        from scipy.sparse.csgraph import connected_components

        ones = np.ones(len(sources), dtype=np.int8)
        matrix = coo_matrix((ones, (sources, targets)), shape=(size, size)).tocsr()
        return connected_components(matrix, directed=True, connection="strong")[1]
    import networkx as nx

    graph = nx.DiGraph()
    graph.add_edges_from(zip(sources.tolist(), targets.tolist(), strict=True))
    labels = np.arange(size, dtype=np.int64) + size  # singletons: labels of their own
    for label, component in enumerate(nx.strongly_connected_components(graph)):
        labels[list(component)] = label
    return labels


def _array_components(arrays, sources: np.ndarray, targets: np.ndarray) -> list[tuple[list[str], list[str]]]:
    """Like :func:`cyclic_components`, for edges given as element codes (first-seen order)."""
    size = arrays.n
    rest = peel(size, sources, targets, MAX_ROUNDS)
    if rest is None:
        rest = np.arange(len(sources))
    if len(rest) == 0:
        return []
    sources, targets = sources[rest], targets[rest]
    labels = _labels(size, sources, targets)
    counts = np.bincount(labels)
    source_labels, target_labels = labels[sources], labels[targets]
    inside = (source_labels == target_labels) & (counts[source_labels] > 1)
    if not inside.any():
        return []
    names = arrays.names
    groups: dict[int, tuple[set[str], list[tuple[str, str]]]] = {}
    for edge in np.flatnonzero(inside).tolist():
        u, v = names[sources[edge]], names[targets[edge]]
        group = groups.setdefault(int(source_labels[edge]), (set(), []))
        group[0].update((u, v))
        group[1].append((u, v))
    found = []
    for component, inner in groups.values():
        members = sorted(component)
        found.append((members, _example(inner, members[0])))
    return sorted(found)


def _parent_cycles(context: RuleContext) -> Iterator[Hit]:
    arrays = context.arrays
    n = arrays.n
    parent = arrays.parent
    has = (parent >= 0) & (parent < n)
    codes = np.arange(n, dtype=np.int64)
    for code in np.flatnonzero(has & (parent == codes)).tolist():  # containment of itself
        element_id = arrays.names[code]
        yield _hit(PARENT, [element_id], [element_id, element_id])
    edges = np.flatnonzero(has & (parent != codes))
    for members, walk in _array_components(arrays, edges, parent[edges]):
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
