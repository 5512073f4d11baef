"""A straightforward reference implementation of the rule catalogue, for differential tests.

It works on the public objects only (``model.elements`` / ``model.links``, Element and
Link fields), with plain dictionaries and sets, and networkx for strongly connected
components and example cycles: the way the rules read in DESIGN.md, with no integer
arrays, no scipy and nothing shared with the fast path except the rule metadata
(message templates, default severities) and the configuration objects.

Oracle for the cycle rule: networkx.strongly_connected_components (Tarjan, 1972) and
networkx.find_cycle.
"""

from __future__ import annotations

import hashlib

import networkx as nx

from tracecheck.config import Config
from tracecheck.model import Model
from tracecheck.rules import rules
from tracecheck.rules.engine import Finding

__all__ = ["reference_findings", "reference_coverage"]


def _fingerprint(rule_id, elements, relation=None, declaration=None, key=()):
    # The fingerprint contract: rule, subject ids, relation, declaration (+ extra key),
    # never a line number (DESIGN.md "Fingerprints").
    parts = [rule_id, "\x1e".join(elements), relation or "", declaration or "", *key]
    return hashlib.sha256("\x1f".join(parts).encode("utf-8")).hexdigest()[:32]


def _ends(source, target):
    return (source,) if source == target else (source, target)


def _lines(items):
    lines = [str(x.location.line) for x in items if x.location and x.location.line]
    return ", ".join(lines) if lines else "unknown"


def _first_by_id(model):
    first = {}
    for element in model.elements:
        first.setdefault(element.id, element)
    return first


def _groups(model):
    groups = {}
    for link in model.links:
        groups.setdefault(link.triple, []).append(link)
    return groups


def _hits(model: Model, config: Config):
    """Yield (rule, elements, args, link, location, relation, declaration, key, severity)."""
    first = _first_by_id(model)
    groups = _groups(model)
    meta = config.metamodel
    seen = {}
    for element in model.elements:
        seen.setdefault(element.id, []).append(element)
    for element_id, group in seen.items():
        if len(group) > 1:
            args = {"id": element_id, "count": len(group), "lines": _lines(group)}
            yield "duplicate-id", (element_id,), args, None, group[1].location, None, None, (), None
    for (s, t, r), group in groups.items():
        missing = [end for end in dict.fromkeys((s, t)) if end not in first]
        if missing:
            args = {"source": s, "target": t, "relation": r, "missing": " and ".join(repr(m) for m in missing)}
            yield "dangling-link", _ends(s, t), args, group[0], None, None, None, (), None
        if s == t:
            yield "self-link", (s,), {"source": s, "relation": r}, group[0], None, None, None, (), None
        if len(group) > 1:
            args = {"source": s, "target": t, "relation": r, "count": len(group), "lines": _lines(group)}
            yield "duplicate-link", _ends(s, t), args, group[1], None, None, None, (), None
        if r not in meta.relations:
            args = {"source": s, "target": t, "relation": r, "known": ", ".join(sorted(meta.relations))}
            yield "unknown-relation", _ends(s, t), args, group[0], None, None, None, (), None
        elif s in first and t in first:
            rule_ = meta.relations[r]
            sk, tk = first[s].kind, first[t].kind
            ok = (rule_.sources is None or sk in rule_.sources) and (
                rule_.targets is None or tk in rule_.targets) and (not rule_.same_kind or sk == tk)
            if not ok:
                def names(kinds):
                    return "any kind" if kinds is None else "/".join(sorted(kinds))
                allowed = f"{names(rule_.sources)} to {names(rule_.targets)}"
                if rule_.same_kind:
                    allowed += " of the same kind"
                args = {"source": s, "target": t, "relation": r, "source_kind": sk,
                        "target_kind": tk, "allowed": allowed}
                yield "relation-endpoints", _ends(s, t), args, group[0], None, None, None, (), None
    known = ", ".join(sorted(meta.kinds))
    for element in first.values():
        if element.parent is not None and element.parent not in first:
            yield "dangling-parent", (element.id,), {"id": element.id, "parent": element.parent}, None, None, None, None, (), None
        if element.kind not in meta.kinds:
            args = {"id": element.id, "kind": element.kind, "known": known}
            yield "unknown-kind", (element.id,), args, None, None, None, None, (), None
        for attribute in config.required_attributes.get(element.kind, ()):
            value = element.attributes.get(attribute)
            if value is None or value == "" or value == []:
                args = {"id": element.id, "kind": element.kind, "attribute": attribute}
                yield "missing-attribute", (element.id,), args, None, None, None, None, (attribute,), None
    yield from _cycle_hits(model, config, first, groups)
    yield from _coverage_hits(model, config, first)


def _components(edges):
    """Cyclic components with one example cycle each, by networkx alone."""
    graph = nx.DiGraph()
    graph.add_edges_from(edges)
    found = []
    for component in nx.strongly_connected_components(graph):
        if len(component) < 2:
            continue
        members = sorted(component)
        inner = nx.DiGraph([(u, v) for u, v in edges if u in component and v in component])
        walk = [u for u, _ in nx.find_cycle(inner, source=members[0])]
        found.append((members, walk + [walk[0]]))
    return found


def _cycle_hit(relation, members, walk, location):
    args = {"relation": relation, "count": len(members), "members": ", ".join(members),
            "example": f" -{relation}-> ".join(walk)}
    return "cycle", tuple(members), args, None, location, relation, None, (), None


def _cycle_hits(model, config, first, groups):
    for relation in config.metamodel.acyclic_relations:
        edges = [(s, t) for (s, t, r) in groups if r == relation and s != t and s in first and t in first]
        for members, walk in _components(edges):
            yield _cycle_hit(relation, members, walk, groups[(walk[0], walk[1], relation)][0].location)
    edges = []
    for element in first.values():
        if element.parent is None or element.parent not in first:
            continue
        if element.parent == element.id:
            yield _cycle_hit("parent", [element.id], [element.id, element.id], None)
        else:
            edges.append((element.id, element.parent))
    for members, walk in _components(edges):
        yield _cycle_hit("parent", members, walk, None)


def _matches(value, allowed):
    if isinstance(value, list):
        return any(_matches(v, allowed) for v in value)
    for a in allowed:
        if type(value) is type(a) and value == a:
            return True
        if (isinstance(value, int | float) and not isinstance(value, bool)
                and isinstance(a, int | float) and not isinstance(a, bool) and value == a):
            return True
    return False


def _joined(model, first, element_id, condition):
    found = set()
    for link in model.links:
        if link.relation not in condition.relations:
            continue
        if condition.direction == "incoming" and link.target == element_id:
            other = link.source
        elif condition.direction == "outgoing" and link.source == element_id:
            other = link.target
        else:
            continue
        if other != element_id and other in first and (
                condition.kinds is None or first[other].kind in condition.kinds):
            found.add(other)
    return found


def reference_coverage(model: Model, declaration):
    """(covered, uncovered, excluded) sorted id tuples, by a loop over every link."""
    first = _first_by_id(model)
    covered, uncovered, excluded = [], [], []
    for element in first.values():
        if element.kind != declaration.kind:
            continue
        if not all(k in element.attributes and _matches(element.attributes[k], allowed)
                   for k, allowed in declaration.where):
            continue
        if declaration.except_when is not None and _joined(model, first, element.id, declaration.except_when):
            excluded.append(element.id)
        elif len(_joined(model, first, element.id, declaration.need)) >= declaration.at_least:
            covered.append(element.id)
        else:
            uncovered.append(element.id)
    return tuple(sorted(covered)), tuple(sorted(uncovered)), tuple(sorted(excluded))


def _need(declaration) -> str:
    need = declaration.need
    relations = "/".join(need.relations)
    kinds = "any kind" if need.kinds is None else "/".join(sorted(need.kinds))
    way, word = ("incoming", "from") if need.direction == "incoming" else ("outgoing", "to")
    if declaration.at_least == 1:
        return f"no {way} {relations} {word} {kinds}"
    return f"fewer than {declaration.at_least} {way} {relations} {word} {kinds}"


def _coverage_hits(model, config, first):
    for declaration in config.declarations:
        _, uncovered, _ = reference_coverage(model, declaration)
        for element_id in uncovered:
            args = {"id": element_id, "kind": first[element_id].kind,
                    "declaration": declaration.name, "need": _need(declaration)}
            severity = declaration.severity or config.severities.get("coverage")
            yield "coverage", (element_id,), args, None, None, None, declaration.name, (), severity


def reference_findings(model: Model, config: Config) -> list[Finding]:
    """Every finding, stamped and sorted the way DESIGN.md and the engine describe."""
    info = rules()
    first = _first_by_id(model)
    out = {}
    for rule_id, elements, args, link, location, relation, declaration, key, severity in _hits(model, config):
        if rule_id in config.disabled:
            continue
        if location is None and link is not None:
            location = link.location
        if location is None and elements and elements[0] in first:
            location = first[elements[0]].location
        relation = relation or (link.relation if link is not None else None)
        finding = Finding(
            rule=rule_id,
            severity=severity or config.severities.get(rule_id, info[rule_id].severity),
            message=info[rule_id].template.format(**args),
            elements=tuple(elements),
            link=link.triple if link is not None else None,
            location=location,
            fingerprint=_fingerprint(rule_id, elements, relation, declaration, key),
            declaration=declaration,
        )
        out.setdefault(finding.fingerprint, finding)

    def order(f):
        loc = f.location
        return (loc.file if loc else "", loc.line if loc and loc.line is not None else 0,
                f.rule, f.elements, f.link or ("", "", ""), f.fingerprint)

    return sorted(out.values(), key=order)
