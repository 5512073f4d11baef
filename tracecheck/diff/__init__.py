"""Stage diff: match two models, then compare fields, parents, links and coverage.

:func:`diff_models` is the one entry point (the ``diff`` command, ``gate`` and the demo
call it); :class:`DiffResult` is what the renderers read.
"""

from __future__ import annotations

import operator
from collections import Counter
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from itertools import chain, compress, repeat
from typing import Any

import msgspec
import numpy as np

from tracecheck.caution import caution
from tracecheck.config import Config
from tracecheck.coverage import percents
from tracecheck.diff.impact import impact_rules, impacted
from tracecheck.diff.matching import Matching, MatchOptions, match_elements
from tracecheck.diff.picture import Picture, neighbourhood_picture
from tracecheck.diff.structural import field_changes, link_changes, moves
from tracecheck.model import Element, Model
from tracecheck.rules.engine import run_rules
from tracecheck.sides import Side, side_of

__all__ = ["DiffResult", "diff_models", "CAUTION"]

CAUTION = caution("This diff supports")

_CATEGORIES = ("added", "removed", "modified", "moved", "reidentified")


@dataclass(frozen=True)
class DiffResult:
    """Everything one diff found, in the sorted form the JSON contract fixes."""

    old_origin: str
    new_origin: str
    elements: dict[str, list]
    links: dict[str, list]
    impact: list[dict[str, Any]]
    coverage: dict[str, dict[str, float | None]]
    findings: dict[str, list[dict[str, Any]]]
    kinds: dict[str, str] = field(default_factory=dict)  # id -> kind, both sides
    counts: dict[str, int] = field(default_factory=dict)  # elements/links per side
    picture: Picture | None = None  # the changed neighbourhood, laid out (HTML view)

    @property
    def changed(self) -> bool:
        return any(self.elements[c] for c in _CATEGORIES) or bool(self.links["added"] or self.links["removed"])

    def by_kind(self) -> dict[str, dict[str, int]]:
        table: dict[str, Counter] = {}
        for category in _CATEGORIES:
            for entry in self.elements[category]:
                element_id = entry if isinstance(entry, str) else entry.get("id", entry.get("new"))
                table.setdefault(self.kinds.get(element_id, "?"), Counter())[category] += 1
        return {k: {c: table[k].get(c, 0) for c in _CATEGORIES} for k in sorted(table)}

    def summary(self) -> dict[str, Any]:
        return {
            "old": self.old_origin,
            "new": self.new_origin,
            "size": dict(self.counts),
            "elements": {c: len(self.elements[c]) for c in _CATEGORIES},
            "by_kind": self.by_kind(),
            "links": {k: len(v) for k, v in self.links.items()},
            "impacted": len({entry["element"] for entry in self.impact}),
            "coverage": self.coverage,
            "findings": {k: len(v) for k, v in self.findings.items()},
            "changed": self.changed,
            "caution": CAUTION,
        }

    def to_json(self) -> dict[str, Any]:
        return {
            "elements": self.elements,
            "links": self.links,
            "impact": self.impact,
            "findings": self.findings,
            "summary": self.summary(),
        }


def _same_fields(a: Element, b: Element) -> bool:
    """Kind, name, text and attributes equal, attribute value types included (1, 1.0
    and true compare equal in Python but not in the export)."""
    if a.kind != b.kind or a.name != b.name or a.text != b.text or a.attributes != b.attributes:
        return False
    # Types in key order: a reordered but equal dict falls through to field_changes,
    # which finds nothing; this only has to be right when it answers True.
    return list(a.attributes) == list(b.attributes) and list(map(type, a.attributes.values())) == list(
        map(type, b.attributes.values()))


def _same_types(x: Mapping[str, Any], y: Mapping[str, Any]) -> bool:
    """Two equal attribute maps with keys in the same order and values of the same types."""
    return list(x) == list(y) and list(map(type, x.values())) == list(map(type, y.values()))


def _same_attribute_types(olds: list[Mapping[str, Any]], news: list[Mapping[str, Any]]) -> bool:
    """For pairwise equal items: True when every pair's attribute keys come in the same
    order with values of the same types. All pairs at once: the two lists of maps
    encoded as JSON compare equal (1, 1.0 and true encode apart; keys keep their
    order), which is one C pass each, about half the cost of listing every key and
    value type. Equal encodings answer True rightly; False, also for differences the
    diff ignores (-0.0 against 0.0, 1 against 1.0 inside a list), only sends every
    pair down the pair-by-pair comparison, which gives the same result more slowly."""
    def attributes(items):
        # Items are dicts (standard decoder) or structs (typed decoder); not mixed.
        maps = (map(dict.get, items, repeat("attributes")) if items and type(items[0]) is dict
                else map(operator.attrgetter("attributes"), items))
        return [x or {} for x in maps]

    def types(maps):
        return list(map(type, chain.from_iterable(map(dict.values, maps))))

    a, b = attributes(olds), attributes(news)
    encode = msgspec.json.Encoder().encode
    try:
        return encode(a) == encode(b)
    except (ValueError, TypeError, msgspec.EncodeError):
        # Values the standard decoder accepts and JSON encoding refuses (lone
        # surrogates): compare the keys and the value types directly.
        return list(chain.from_iterable(a)) == list(chain.from_iterable(b)) and types(a) == types(b)


def _changed_pairs(old: Side, new: Side, old_codes: list[int], new_codes: list[int]) -> list[tuple[str, str]]:
    """Matched pairs (old code, new code, pairwise) whose fields may differ, as ids
    sorted by new id.

    Most matched pairs are unchanged. When the reader kept the decoded source items, a
    pair whose items are equal (one C-level dict comparison: equal kind, name, text,
    parent and attributes) and whose attribute values have the same types is skipped
    without building an element; the others go through a cheap equality on the
    compared fields before the field-by-field one.
    """
    old_items, new_items = old.items(old_codes), new.items(new_codes)
    kept: Iterable[int] = range(len(old_codes))  # positions of the pairs still to compare
    if old_items is not None and new_items is not None:
        equal = list(map(operator.eq, old_items, new_items))
        if _same_attribute_types(list(compress(old_items, equal)), list(compress(new_items, equal))):
            kept = compress(kept, map(operator.not_, equal))
        else:
            kept = [
                i for i, same, a, b in zip(kept, equal, old_items, new_items, strict=True)
                if not (same and (not (x := a.get("attributes")) or _same_types(x, b["attributes"])))
            ]
    old_ids, new_ids = old.arrays.names, new.arrays.names
    pairs = [(old_ids[old_codes[i]], new_ids[new_codes[i]]) for i in kept]  # ids only for these
    candidates = [(o, n) for o, n in pairs if not _same_fields(old.element(o), new.element(n))]
    return sorted(candidates, key=lambda p: p[1])


def _element_lists(old: Model, new: Model, matching: Matching) -> dict[str, list]:
    # On the integer codes of the matching: no id is looked up again.
    matched, partners = matching.pairs()
    old_side, new_side = side_of(old), side_of(new)
    taken = np.zeros(len(new_side), dtype=bool)
    taken[partners] = True
    modified = []
    for old_id, new_id in _changed_pairs(old_side, new_side, matched.tolist(), partners.tolist()):
        changes = field_changes(old_side.element(old_id), new_side.element(new_id))
        if changes:
            entry: dict[str, Any] = {"id": new_id, "changes": changes}
            if old_id != new_id:
                entry["old_id"] = old_id
            modified.append(entry)
    return {
        "added": sorted(compress(new_side.ids, (~taken).tolist())),
        "removed": sorted(compress(old_side.ids, (matching.codes < 0).tolist())),
        "modified": modified,
        "moved": moves(old, new, matching),
        "reidentified": [{"old": o, "new": n, "score": s} for o, n, s in matching.reidentified],
    }


def _impact(old: Model, new: Model, elements: dict[str, list], mapping: Mapping[str, str], config: Config) -> list:
    """One entry per (impacted element, changed element), with the connecting path."""
    rules = impact_rules(config)
    # Fields whose change does not reopen a review (a review status, a test result).
    ignored = set(config.section("impact").get("ignore_fields", ()))
    causes: dict[str, set[str]] = {}
    for entry in elements["modified"]:
        if set(entry["changes"]) - ignored:
            causes.setdefault(entry["id"], set()).add("modified")
    for entry in elements["moved"]:
        causes.setdefault(entry["id"], set()).add("moved")
    entries = []
    for cause in sorted(causes):
        for element_id, path in sorted(impacted(new, cause, rules).items()):
            entries.append({"element": element_id, "because": cause, "change": sorted(causes[cause]), "path": path})
    for cause in elements["removed"]:
        for element_id, path in sorted(impacted(old, cause, rules).items()):
            if element_id in mapping:  # still there in the new model
                entries.append({"element": mapping[element_id], "because": cause, "change": ["removed"], "path": path})
    return sorted(entries, key=lambda e: (e["element"], e["because"]))


def _coverage(old: Model, new: Model, config: Config) -> dict[str, dict[str, float | None]]:
    before, after = percents(old, config.declarations), percents(new, config.declarations)
    return {name: {"old": before.get(name), "new": after.get(name)} for name in sorted(before.keys() | after.keys())}


def _findings(old: Model, new: Model, config: Config) -> dict[str, list[dict[str, Any]]]:
    """Findings new in ``new`` and resolved since ``old``, compared by fingerprint."""
    before = {f.fingerprint: f for f in run_rules(old, config)}
    after = {f.fingerprint: f for f in run_rules(new, config)}

    def ordered(findings, keys):
        return [f.to_json() for f in sorted((findings[k] for k in keys), key=lambda f: (f.rule, f.elements, f.fingerprint))]

    return {"new": ordered(after, after.keys() - before.keys()), "resolved": ordered(before, before.keys() - after.keys())}


def diff_models(
    old: Model, new: Model, config: Config | None = None, *, with_checks: bool = True, with_picture: bool = True
) -> DiffResult:
    """Diff ``old`` against ``new`` under ``config`` (its ``[diff]`` and ``[impact]``
    sections, metamodel and coverage declarations).

    ``with_checks=False`` leaves out the coverage and findings comparison (the parts
    that rerun the rule engine on both sides); ``with_picture=False`` the layout of
    the changed neighbourhood that only the HTML view draws.
    """
    config = config or Config()
    matching = match_elements(old, new, MatchOptions.from_section(config.section("diff")))
    elements = _element_lists(old, new, matching)
    changed_ids = set(elements["added"]) | set(elements["removed"]) | {
        e.get("id", e.get("new")) for c in ("modified", "moved", "reidentified") for e in elements[c]}
    old_side, new_side = side_of(old), side_of(new)
    kinds = {i: (new_side if i in new_side else old_side).kind(i) for i in changed_ids}
    links = link_changes(old, new, matching)
    impact = _impact(old, new, elements, matching.mapping, config)
    return DiffResult(
        old.origin,
        new.origin,
        elements,
        links,
        impact,
        _coverage(old, new, config) if with_checks else {},
        _findings(old, new, config) if with_checks else {"new": [], "resolved": []},
        kinds,
        {"old_elements": len(old_side), "new_elements": len(new_side),
         "old_links": old.link_count, "new_links": new.link_count},
        neighbourhood_picture(old, new, elements, links, impact) if with_picture else None,
    )
