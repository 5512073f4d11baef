"""Structural rules: identifiers, link ends, kinds, relations, attributes.

Each rule finds its subjects with vectorised masks over ``context.arrays`` (integer
codes, see :mod:`tracecheck.arrays`) and only then touches strings and objects, for the
few items it reports. Hits come in the order a plain loop over the model would give
(file order of elements, first-seen order of distinct links).
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np

from tracecheck.rules import Hit, rule
from tracecheck.rules.engine import RuleContext

__all__ = [
    "duplicate_id",
    "dangling_link",
    "dangling_parent",
    "self_link",
    "duplicate_link",
    "unknown_kind",
    "unknown_relation",
    "relation_endpoints",
    "missing_attribute",
]


def _ends(source: str, target: str) -> tuple[str, ...]:
    return (source,) if source == target else (source, target)


def _lines(items) -> str:
    lines = [str(x.location.line) for x in items if x.location and x.location.line]
    return ", ".join(lines) if lines else "unknown"


def _triples(context: RuleContext, mask: np.ndarray) -> Iterator[tuple[int, str, str, str]]:
    """(distinct triple number, source, target, relation) where ``mask`` holds."""
    arrays = context.arrays
    names, relations = arrays.names, arrays.rel_names
    for triple in np.flatnonzero(mask).tolist():
        index = int(arrays.triple_first[triple])
        yield triple, names[arrays.src[index]], names[arrays.tgt[index]], relations[arrays.rel[index]]


def _first_link(context: RuleContext, triple: int):
    return context.model.columns.link(int(context.arrays.triple_first[triple]))


def _per_triple(context: RuleContext, column: np.ndarray) -> np.ndarray:
    return column[context.arrays.triple_first]


@rule(
    "duplicate-id",
    severity="error",
    short="Two or more elements share one id.",
    full="Element ids must be unique: links and reviews name elements by id, so a second "
    "element with the same id makes every link to it ambiguous.",
    help="Give each element its own id; if the two are one element, merge them.",
    template="id {id!r} is used by {count} elements (lines {lines})",
)
def duplicate_id(context: RuleContext) -> Iterator[Hit]:
    arrays, columns = context.arrays, context.model.columns
    ids = columns.element_ids
    if arrays.n == len(ids):
        return
    seen: dict[str, list[int]] = {}
    for index, element_id in enumerate(ids):
        seen.setdefault(element_id, []).append(index)
    for element_id, group in seen.items():
        if len(group) > 1:
            locations = [_Located(columns.element_location(i)) for i in group]
            args = {"id": element_id, "count": len(group), "lines": _lines(locations)}
            yield Hit((element_id,), args, location=locations[1].location)


class _Located:
    __slots__ = ("location",)

    def __init__(self, location) -> None:
        self.location = location


@rule(
    "dangling-link",
    severity="error",
    short="A trace link names an element that does not exist.",
    full="Both ends of a trace link must be elements of the model. A link to a missing "
    "element usually means the element was deleted or renamed without its links.",
    help="Point the link at an existing element, or remove it.",
    template="{source} {relation} {target}: {missing} does not exist",
)
def dangling_link(context: RuleContext) -> Iterator[Hit]:
    arrays = context.arrays
    n = arrays.n
    mask = (_per_triple(context, arrays.src) >= n) | (_per_triple(context, arrays.tgt) >= n)
    for triple, source, target, relation in _triples(context, mask):
        missing = [end for end in dict.fromkeys((source, target)) if end not in arrays.position]
        if missing:
            args = {
                "source": source,
                "target": target,
                "relation": relation,
                "missing": " and ".join(repr(m) for m in missing),
            }
            yield Hit(_ends(source, target), args, link=_first_link(context, triple))


@rule(
    "dangling-parent",
    severity="error",
    short="An element's parent does not exist.",
    full="The parent of an element (its containing element in the hierarchy) must be an "
    "element of the model.",
    help="Set the parent to an existing element, or remove it.",
    template="{id}: parent {parent!r} does not exist",
)
def dangling_parent(context: RuleContext) -> Iterator[Hit]:
    arrays = context.arrays
    names = arrays.names
    for code in np.flatnonzero(arrays.parent >= arrays.n).tolist():
        element_id = names[code]
        yield Hit((element_id,), {"id": element_id, "parent": names[arrays.parent[code]]})


@rule(
    "self-link",
    severity="error",
    short="A trace link joins an element to itself.",
    full="A trace link from an element to itself carries no traceability and hides a "
    "missing link to the element that was meant.",
    help="Point the link at the element that was meant, or remove it.",
    template="{source} {relation} itself",
)
def self_link(context: RuleContext) -> Iterator[Hit]:
    arrays = context.arrays
    mask = _per_triple(context, arrays.src) == _per_triple(context, arrays.tgt)
    for triple, source, _, relation in _triples(context, mask):
        args = {"source": source, "relation": relation}
        yield Hit((source,), args, link=_first_link(context, triple))


@rule(
    "duplicate-link",
    severity="error",
    short="The same trace link appears more than once.",
    full="Two links with the same source, target and relation are one trace; the copy "
    "inflates counts and confuses reviews.",
    help="Remove the extra copies.",
    template="{source} {relation} {target} appears {count} times (lines {lines})",
)
def duplicate_link(context: RuleContext) -> Iterator[Hit]:
    columns = context.model.columns
    for triple, source, target, relation in _triples(context, context.arrays.triple_count > 1):
        group = [columns.link(i) for i in context.arrays.triple_links(triple)]
        if len(group) > 1:
            args = {
                "source": source,
                "target": target,
                "relation": relation,
                "count": len(group),
                "lines": _lines(group),
            }
            yield Hit(_ends(source, target), args, link=group[1])


@rule(
    "unknown-kind",
    severity="error",
    short="An element has a kind the metamodel does not define.",
    full="Every element kind must be declared in the metamodel; an unknown kind is often "
    "a typo and escapes every coverage declaration.",
    help="Use a declared kind, or add the kind to [metamodel] kinds in the configuration.",
    template="{id}: unknown kind {kind!r} (known: {known})",
)
def unknown_kind(context: RuleContext) -> Iterator[Hit]:
    arrays = context.arrays
    kinds = context.metamodel.kinds
    known = ", ".join(sorted(kinds))
    unknown = [code for code, kind in enumerate(arrays.kind_names) if kind not in kinds]
    if not unknown:
        return
    for code in np.flatnonzero(np.isin(arrays.kind, unknown)).tolist():
        element_id, kind = arrays.names[code], arrays.kind_names[arrays.kind[code]]
        yield Hit((element_id,), {"id": element_id, "kind": kind, "known": known})


@rule(
    "unknown-relation",
    severity="error",
    short="A trace link has a relation the metamodel does not define.",
    full="Every link relation must be declared in the metamodel; an unknown relation is "
    "often a typo and counts for no coverage.",
    help="Use a declared relation, or add it under [metamodel.relations] in the configuration.",
    template="{source} {relation} {target}: unknown relation {relation!r} (known: {known})",
)
def unknown_relation(context: RuleContext) -> Iterator[Hit]:
    arrays = context.arrays
    relations = context.metamodel.relations
    known = ", ".join(sorted(relations))
    unknown = [code for code, name in enumerate(arrays.rel_names) if name not in relations]
    if not unknown:
        return
    mask = np.isin(_per_triple(context, arrays.rel), unknown)
    for triple, source, target, relation in _triples(context, mask):
        args = {"source": source, "target": target, "relation": relation, "known": known}
        yield Hit(_ends(source, target), args, link=_first_link(context, triple))


@rule(
    "relation-endpoints",
    severity="error",
    short="A trace link joins kinds its relation does not allow.",
    full="The metamodel says which kinds each relation may join (for example, only a "
    "test verifies). A link between other kinds is a modelling error.",
    help="Use the relation that fits these kinds, or correct the element kinds.",
    template="{source} ({source_kind}) {relation} {target} ({target_kind}): "
    "{relation} joins {allowed}",
)
def relation_endpoints(context: RuleContext) -> Iterator[Hit]:
    arrays = context.arrays
    relations = context.metamodel.relations
    kinds = arrays.kind_names
    if not kinds or not arrays.rel_names:
        return
    # allowed[relation code, source kind code, target kind code]; unknown relations allow
    # everything here (they are unknown-relation findings, not endpoint findings).
    allowed = np.ones((len(arrays.rel_names), len(kinds), len(kinds)), dtype=bool)
    for code, name in enumerate(arrays.rel_names):
        rule_ = relations.get(name)
        if rule_ is not None:
            allowed[code] = [[rule_.allows(a, b) for b in kinds] for a in kinds]
    src, tgt = _per_triple(context, arrays.src), _per_triple(context, arrays.tgt)
    both = (src < arrays.n) & (tgt < arrays.n)
    src, tgt = np.where(both, src, 0), np.where(both, tgt, 0)
    mask = both & ~allowed[_per_triple(context, arrays.rel), arrays.kind[src], arrays.kind[tgt]]
    for triple, source, target, relation in _triples(context, mask):
        rule_ = relations[relation]
        source_kind = kinds[arrays.kind[arrays.position[source]]]
        target_kind = kinds[arrays.kind[arrays.position[target]]]
        if not rule_.allows(source_kind, target_kind):
            args = {
                "source": source,
                "target": target,
                "relation": relation,
                "source_kind": source_kind,
                "target_kind": target_kind,
                "allowed": _allowed(rule_),
            }
            yield Hit(_ends(source, target), args, link=_first_link(context, triple))


def _allowed(rule_) -> str:
    def names(kinds):
        return "any kind" if kinds is None else "/".join(sorted(kinds))

    text = f"{names(rule_.sources)} to {names(rule_.targets)}"
    return text + " of the same kind" if rule_.same_kind else text


def _absent(value) -> bool:
    return value is None or value == "" or value == []


@rule(
    "missing-attribute",
    severity="error",
    short="An element lacks an attribute the configuration requires for its kind.",
    full="The configuration's required_attributes name the attributes every element of a "
    "kind must carry (for example integrity and status on requirements). An empty value "
    "counts as missing.",
    help="Add the attribute with its value.",
    template="{id} ({kind}): required attribute {attribute!r} is missing",
)
def missing_attribute(context: RuleContext) -> Iterator[Hit]:
    required = context.config.required_attributes
    arrays = context.arrays
    codes = arrays.kind_codes(required)
    if not codes:
        return
    for code in np.flatnonzero(np.isin(arrays.kind, codes)).tolist():
        element_id, kind = arrays.names[code], arrays.kind_names[arrays.kind[code]]
        attributes = arrays.element_attributes(code)
        for attribute in required[kind]:
            if _absent(attributes.get(attribute)):
                args = {"id": element_id, "kind": kind, "attribute": attribute}
                yield Hit((element_id,), args, key=(attribute,))
