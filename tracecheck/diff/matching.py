"""Element matching between two models: by id first, then by content.

Exports regenerate identifiers, so an element that is only renumbered must not show up
as one removal plus one addition. Elements left unmatched by id are paired by content:
same kind, similar name and text, similar attributes, and overlapping neighbourhoods
once the already-matched ids are mapped; the pairing is a one-to-one maximum-weight
assignment, and only pairs scoring at least the threshold are kept.
"""

from __future__ import annotations

import hashlib
import re
from collections import defaultdict
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

import networkx as nx

from tracecheck.model import Element, Model

__all__ = [
    "Matching",
    "match_elements",
    "similarity",
    "tokens",
    "jaccard",
    "DEFAULT_THRESHOLD",
    "MatchOptions",
]

# Measured on planted re-identifications versus distinct same-kind elements of the
# ferry demo style (tests/test_diff_matching.py::test_default_threshold_separates):
# true pairs with up to a third of their words edited score >= 0.62, distinct
# requirements of one subsystem score <= 0.41; 0.5 sits between the two.
DEFAULT_THRESHOLD = 0.5

# Tokens present in more than this many unmatched new elements of one kind are too
# common ("the", "shall") to propose candidates; they still count in the score.
_BLOCK_LIMIT = 200
# Each unmatched old element keeps at most this many best candidates.
_TOP_CANDIDATES = 8

_WORD = re.compile(r"[0-9A-Za-z\u00C0-\uFFFF]+(?:[.'_-][0-9A-Za-z\u00C0-\uFFFF]+)*")


@dataclass(frozen=True)
class MatchOptions:
    """Matching settings, from the ``[diff]`` configuration section.

    ``threshold`` (0..1): lowest score kept as a re-identification.
    ``weights``: relative weight of ``content`` (name + text), ``attributes`` and
    ``neighbourhood``; a part that is empty on both sides is left out.
    """

    threshold: float = DEFAULT_THRESHOLD
    content_weight: float = 0.6
    attribute_weight: float = 0.15
    neighbourhood_weight: float = 0.25

    @classmethod
    def from_section(cls, section: Mapping) -> MatchOptions:
        weights = section.get("weights", {})
        return cls(
            threshold=float(section.get("threshold", DEFAULT_THRESHOLD)),
            content_weight=float(weights.get("content", 0.6)),
            attribute_weight=float(weights.get("attributes", 0.15)),
            neighbourhood_weight=float(weights.get("neighbourhood", 0.25)),
        )


@dataclass(frozen=True)
class Matching:
    """``mapping``: old id -> new id for every matched element (by id or by content).

    ``reidentified``: (old id, new id, score) for the content pairs, sorted.
    """

    mapping: dict[str, str]
    reidentified: list[tuple[str, str, float]]


def tokens(text: str | None) -> frozenset[str]:
    """Lower-cased word tokens; punctuation and whitespace (reflow) do not count."""
    return frozenset(w.lower() for w in _WORD.findall(text or ""))


def jaccard(a: frozenset, b: frozenset) -> float | None:
    """|a & b| / |a | b|, or ``None`` when both are empty (nothing to compare)."""
    if not a and not b:
        return None
    return len(a & b) / len(a | b)


def _attribute_items(element: Element) -> frozenset:
    return frozenset((k, repr(v)) for k, v in element.attributes.items())


def _content(element: Element) -> frozenset[str]:
    return tokens(element.name) | tokens(element.text)


def _neighbourhood(model: Model, element_id: str, translate: Mapping[str, str]) -> frozenset:
    """(direction, relation, other end) with the other end in the common id space.

    Only ends that ``translate`` knows (matched elements) count, so a neighbour that is
    itself unmatched says nothing either way.
    """
    found = set()
    for link in model.outgoing.get(element_id, ()):
        if link.target in translate:
            found.add(("out", link.relation, translate[link.target]))
    for link in model.incoming.get(element_id, ()):
        if link.source in translate:
            found.add(("in", link.relation, translate[link.source]))
    element = model.by_id[element_id]
    if element.parent in translate:
        found.add(("parent", "", translate[element.parent]))
    return frozenset(found)


@dataclass(frozen=True)
class _Profile:
    element: Element
    content: frozenset[str]
    attributes: frozenset
    neighbourhood: frozenset


def similarity(a: _Profile, b: _Profile, options: MatchOptions) -> float:
    """Weighted mean of the Jaccard indices of content, attributes and neighbourhood.

    Parameters
    ----------
    a, b
        Profiles of an old and a new element of the same kind.
    options
        The weights; a part empty on both sides is left out of the mean.

    Returns
    -------
    float
        A score in [0, 1]; 1 for identical content, attributes and neighbours.

    Notes
    -----
    Requirement text is compared as a *set of words* (Jaccard index, Jaccard 1901):
    exports reflow lines and normalise punctuation, and review edits to a "shall"
    sentence replace or insert a few words, each of which moves the index by a small,
    predictable step. A character sequence ratio rewards long shared boilerplate
    ("The shore charger shall ...") between different requirements; word sets are also
    what the candidate index blocks on, so the score and the blocking agree.

    Examples
    --------
    >>> from tracecheck.model import Element
    >>> p = _Profile(Element("R1", "requirement", "Stop", "Stop charging"), tokens("Stop Stop charging"), frozenset(), frozenset())
    >>> similarity(p, p, MatchOptions())
    1.0
    """
    parts = [
        (options.content_weight, jaccard(a.content, b.content)),
        (options.attribute_weight, jaccard(a.attributes, b.attributes)),
        (options.neighbourhood_weight, jaccard(a.neighbourhood, b.neighbourhood)),
    ]
    used = [(w, s) for w, s in parts if s is not None and w > 0]
    total = sum(w for w, _ in used)
    if total == 0:
        return 0.0
    return round(sum(w * s for w, s in used) / total, 4)


def _profiles(model: Model, ids: Iterable[str], translate: Mapping[str, str]) -> dict[str, _Profile]:
    profiles = {}
    for element_id in ids:
        element = model.by_id[element_id]
        profiles[element_id] = _Profile(
            element, _content(element), _attribute_items(element), _neighbourhood(model, element_id, translate)
        )
    return profiles


def _candidates(old: dict[str, _Profile], new: dict[str, _Profile]) -> dict[str, set[str]]:
    """New ids worth scoring for each old id: same kind, a shared rare token or neighbour."""
    index: dict[tuple[str, object], list[str]] = defaultdict(list)
    for new_id in sorted(new):
        profile = new[new_id]
        kind = profile.element.kind
        for key in profile.content | profile.neighbourhood:
            index[(kind, key)].append(new_id)
        if not profile.content and not profile.neighbourhood:
            index[(kind, None)].append(new_id)
    found: dict[str, set[str]] = {}
    for old_id, profile in old.items():
        kind = profile.element.kind
        keys = profile.content | profile.neighbourhood or {None}
        pool: set[str] = set()
        for key in keys:
            hits = index.get((kind, key), ())
            if len(hits) <= _BLOCK_LIMIT:
                pool.update(hits)
        found[old_id] = pool
    return found


def _tie_break(a: str, b: str) -> float:
    """A tiny weight, the same for (a, b) and (b, a), that makes equal scores unequal.

    With all weights distinct the maximum-weight matching is unique, so diffing A
    against B pairs the same elements as diffing B against A.
    """
    digest = hashlib.blake2b("\0".join(sorted((a, b))).encode("utf-8"), digest_size=4).digest()
    return int.from_bytes(digest, "big") * 1e-18


def _assign(scored: list[tuple[str, str, float]]) -> list[tuple[str, str, float]]:
    """One-to-one assignment of maximum total score (Edmonds' blossom algorithm as
    implemented by :func:`networkx.max_weight_matching`) on the bipartite candidate graph."""
    graph = nx.Graph()
    for old_id, new_id, score in sorted(scored):
        graph.add_edge(("old", old_id), ("new", new_id), weight=score + _tie_break(old_id, new_id), score=score)
    pairs = []
    for component in sorted(nx.connected_components(graph), key=lambda c: min(c)):
        sub = graph.subgraph(component)
        if sub.number_of_edges() == 1:
            matched = set(sub.edges())
        else:
            matched = nx.max_weight_matching(sub)
        for u, v in matched:
            if u[0] == "new":
                u, v = v, u
            pairs.append((u[1], v[1], graph[u][v]["score"]))
    return sorted(pairs)


def match_elements(old: Model, new: Model, options: MatchOptions | None = None) -> Matching:
    """Match the elements of ``old`` to those of ``new``.

    Parameters
    ----------
    old, new
        The two models; each distinct id counts once (first occurrence).
    options
        Threshold and weights; see :class:`MatchOptions`.

    Returns
    -------
    Matching
        The id mapping and the content pairs (re-identifications) with their scores.

    Notes
    -----
    Ids shared by both models are matched first, whatever their content. The remaining
    old elements are scored against new elements of the same kind that share a token
    or a mapped neighbour (an inverted index keeps this near linear); each old element
    keeps its best few candidates; the assignment maximises the summed score
    (Edmonds 1965, via networkx) and pairs below ``options.threshold`` are dropped.

    References
    ----------
    .. [1] P. Jaccard, "Distribution de la flore alpine", 1901.
    .. [2] J. Edmonds, "Paths, trees, and flowers", Canad. J. Math. 17, 1965.
    """
    options = options or MatchOptions()
    mapping = {i: i for i in old.by_id if i in new.by_id}
    old_left = [i for i in old.by_id if i not in mapping]
    new_left = [i for i in new.by_id if i not in mapping]
    if not old_left or not new_left:
        return Matching(mapping, [])
    identity = {i: i for i in mapping}
    old_profiles = _profiles(old, old_left, identity)
    new_profiles = _profiles(new, new_left, identity)
    scored = []
    for old_id, pool in sorted(_candidates(old_profiles, new_profiles).items()):
        ranked = sorted(
            ((similarity(old_profiles[old_id], new_profiles[n], options), n) for n in pool),
            key=lambda pair: (-pair[0], pair[1]),
        )
        scored += [(old_id, n, s) for s, n in ranked[:_TOP_CANDIDATES] if s >= options.threshold]
    pairs = _assign(scored)
    mapping.update({o: n for o, n, _ in pairs})
    return Matching(mapping, pairs)
