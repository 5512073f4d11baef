"""Change impact: the elements whose review a change puts back on the table.

A rule says which links carry the impact of a change from one element to another:
``relation`` and ``direction`` (``incoming``: from the changed element to the sources
of links that point at it, e.g. the tests that verify it; ``outgoing``: to the targets
of its links, e.g. the hazards it mitigates), and whether the walk continues from the
reached element (``transitive``, e.g. requirements derived from derived ones).
"""

from __future__ import annotations

from collections import deque
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from tracecheck.config import Config
from tracecheck.errors import ConfigError
from tracecheck.model import Model
from tracecheck.sides import Side, side_of

__all__ = ["ImpactRule", "impact_rules", "impacted", "DEFAULT_RULES"]


@dataclass(frozen=True, order=True)
class ImpactRule:
    relation: str
    direction: str  # "incoming" | "outgoing"
    transitive: bool = False


# Common practice, no source: a changed requirement invalidates the tests that verify
# it, the design elements that satisfy it, the requirements derived from or refining it
# (all the way down) and the hazard analysis entries it mitigates.
DEFAULT_RULES = (
    ImpactRule("verifies", "incoming"),
    ImpactRule("satisfies", "incoming"),
    ImpactRule("derives_from", "incoming", transitive=True),
    ImpactRule("refines", "incoming", transitive=True),
    ImpactRule("mitigates", "outgoing"),
)


def impact_rules(config: Config) -> tuple[ImpactRule, ...]:
    """Rules from ``[impact] rules = [{relation, direction, transitive}]``, else the
    defaults whose relation the metamodel declares."""
    section = config.section("impact")
    if "rules" not in section:
        known = config.metamodel.relations
        return tuple(r for r in DEFAULT_RULES if r.relation in known)
    rules = []
    for n, spec in enumerate(section["rules"]):
        where = f"impact.rules[{n}]"
        if not isinstance(spec, Mapping) or not isinstance(spec.get("relation"), str):
            raise ConfigError(f"{where}: each impact rule needs a 'relation' string.")
        direction = spec.get("direction", "incoming")
        if direction not in ("incoming", "outgoing"):
            raise ConfigError(f"{where}.direction: must be 'incoming' or 'outgoing', not {direction!r}.")
        unknown = set(spec) - {"relation", "direction", "transitive"}
        if unknown:
            raise ConfigError(f"{where}: unknown key {sorted(unknown)[0]!r}.")
        rules.append(ImpactRule(spec["relation"], direction, bool(spec.get("transitive", False))))
    return tuple(rules)


def _steps(side: Side, element_id: str, rules: Iterable[ImpactRule]):
    incoming = outgoing = None
    for rule in rules:
        if rule.direction == "incoming":
            incoming = side.incoming(element_id) if incoming is None else incoming
            for link in incoming:
                if link[2] == rule.relation:
                    yield rule, link[0], link
        else:
            outgoing = side.outgoing(element_id) if outgoing is None else outgoing
            for link in outgoing:
                if link[2] == rule.relation:
                    yield rule, link[1], link


def impacted(model: Model, start: str, rules: tuple[ImpactRule, ...]) -> dict[str, list]:
    """Elements of ``model`` reached from ``start`` under ``rules``, each with its path.

    Breadth first, so every path is a shortest one; neighbours are visited in sorted
    order, so ties resolve the same way on every run. Non-transitive rules apply at
    every reached element but the walk does not continue through them. ``start`` is
    not included, nor ends that are not elements of ``model``.

    Returns
    -------
    dict
        impacted id -> path, a list of links ``{"source","target","relation"}`` in the
        order walked.
    """
    side = side_of(model)  # links by end from the integer codes, no Link objects
    paths: dict[str, list] = {start: []}
    queue = deque([start])
    while queue:
        here = queue.popleft()
        steps = sorted(_steps(side, here, rules), key=lambda s: (s[1], s[0]))
        for rule, other, link in steps:
            if other in paths or other not in side:
                continue
            paths[other] = paths[here] + [{"source": link[0], "target": link[1], "relation": link[2]}]
            if rule.transitive:
                queue.append(other)
    del paths[start]
    return paths
