"""Structural rules: identifiers, link ends, kinds, relations, attributes."""

from __future__ import annotations

from collections.abc import Iterator

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
    seen: dict[str, list] = {}
    for element in context.model.elements:
        seen.setdefault(element.id, []).append(element)
    for element_id, group in seen.items():
        if len(group) > 1:
            args = {"id": element_id, "count": len(group), "lines": _lines(group)}
            yield Hit((element_id,), args, location=group[1].location)


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
    ids = context.ids
    for (source, target, relation), group in context.distinct_links.items():
        missing = [end for end in dict.fromkeys((source, target)) if end not in ids]
        if missing:
            args = {
                "source": source,
                "target": target,
                "relation": relation,
                "missing": " and ".join(repr(m) for m in missing),
            }
            yield Hit(_ends(source, target), args, link=group[0])


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
    ids = context.ids
    for element in context.model.by_id.values():
        if element.parent is not None and element.parent not in ids:
            yield Hit((element.id,), {"id": element.id, "parent": element.parent})


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
    for (source, target, relation), group in context.distinct_links.items():
        if source == target:
            yield Hit((source,), {"source": source, "relation": relation}, link=group[0])


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
    for (source, target, relation), group in context.distinct_links.items():
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
    kinds = context.metamodel.kinds
    known = ", ".join(sorted(kinds))
    for element in context.model.by_id.values():
        if element.kind not in kinds:
            yield Hit((element.id,), {"id": element.id, "kind": element.kind, "known": known})


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
    relations = context.metamodel.relations
    known = ", ".join(sorted(relations))
    for (source, target, relation), group in context.distinct_links.items():
        if relation not in relations:
            args = {"source": source, "target": target, "relation": relation, "known": known}
            yield Hit(_ends(source, target), args, link=group[0])


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
    relations = context.metamodel.relations
    by_id = context.model.by_id
    for (source, target, relation), group in context.distinct_links.items():
        rule_ = relations.get(relation)
        if rule_ is None or source not in by_id or target not in by_id:
            continue
        source_kind, target_kind = by_id[source].kind, by_id[target].kind
        if not rule_.allows(source_kind, target_kind):
            args = {
                "source": source,
                "target": target,
                "relation": relation,
                "source_kind": source_kind,
                "target_kind": target_kind,
                "allowed": _allowed(rule_),
            }
            yield Hit(_ends(source, target), args, link=group[0])


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
    if not required:
        return
    for element in context.model.by_id.values():
        for attribute in required.get(element.kind, ()):
            if _absent(element.attributes.get(attribute)):
                args = {"id": element.id, "kind": element.kind, "attribute": attribute}
                yield Hit((element.id,), args, key=(attribute,))
