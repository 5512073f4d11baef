"""Run the registered rules over a model and stamp what they yield.

Rules only say *what* is wrong and about *whom*; the engine decides the severity
(configuration over default), the location (explicit, else the link's, else the
first element's) and the fingerprint (rule, subjects, relation, declaration — never
a line number or a message), renders the message from the rule's template, and
sorts the findings with one deterministic key.
"""

from __future__ import annotations

import hashlib
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING, Any

from tracecheck.config import Config
from tracecheck.model import Location, Model
from tracecheck.rules import Hit, RuleInfo, rules

if TYPE_CHECKING:
    from tracecheck.arrays import ModelArrays

__all__ = ["Finding", "RuleContext", "run_rules", "fingerprint", "sort_key", "make_finding"]

SEVERITY_RANK = {"error": 3, "warning": 2, "note": 1}


@dataclass(frozen=True)
class Finding:
    rule: str
    severity: str
    message: str
    elements: tuple[str, ...]
    link: tuple[str, str, str] | None
    location: Location | None
    fingerprint: str
    declaration: str | None = None

    def to_json(self) -> dict[str, Any]:
        data: dict[str, Any] = {
            "rule": self.rule,
            "severity": self.severity,
            "message": self.message,
            "elements": list(self.elements),
            "link": None
            if self.link is None
            else {"source": self.link[0], "target": self.link[1], "relation": self.link[2]},
            "location": None
            if self.location is None
            else {"file": self.location.file, "line": self.location.line},
            "fingerprint": self.fingerprint,
        }
        if self.rule == "coverage":
            data["declaration"] = self.declaration
        return data


class RuleContext:
    """What a rule may read: the model, the configuration, and shared derived indexes.

    The built-in rules read ``arrays``; ``ids`` and ``distinct_links`` stay for rules
    that prefer strings and objects (they materialise the model's objects).
    """

    def __init__(self, model: Model, config: Config) -> None:
        self.model = model
        self.config = config
        self.metamodel = config.metamodel

    @property
    def arrays(self) -> ModelArrays:
        """Integer-coded columns of the model (see :mod:`tracecheck.arrays`)."""
        return self.model.arrays

    @cached_property
    def ids(self) -> frozenset[str]:
        return frozenset(self.model.by_id)

    @cached_property
    def distinct_links(self) -> dict[tuple[str, str, str], list[Any]]:
        """Each (source, target, relation) with every link that has it, in file order."""
        groups: dict[tuple[str, str, str], list[Any]] = {}
        for link in self.model.links:
            key = (link.source, link.target, link.relation)
            group = groups.get(key)
            if group is None:
                groups[key] = [link]
            else:
                group.append(link)
        return groups


def fingerprint(
    rule_id: str,
    elements: Iterable[str],
    relation: str | None = None,
    declaration: str | None = None,
    key: Iterable[str] = (),
) -> str:
    """Stable identity of a finding; survives re-ordering and unrelated edits."""
    parts = [rule_id, "\x1e".join(elements), relation or "", declaration or "", *key]
    return hashlib.sha256("\x1f".join(parts).encode("utf-8")).hexdigest()[:32]


def sort_key(finding: Finding) -> tuple:
    location = finding.location
    return (
        location.file if location else "",
        location.line if location and location.line is not None else 0,
        finding.rule,
        finding.elements,
        finding.link or ("", "", ""),
        finding.fingerprint,
    )


def make_finding(info: RuleInfo, hit: Hit, model: Model, severity: str) -> Finding:
    location = hit.location
    if location is None and hit.link is not None:
        location = hit.link.location
    if location is None and hit.elements:
        location = model.location_of(hit.elements[0])
    relation = hit.relation or (hit.link.relation if hit.link is not None else None)
    return Finding(
        rule=info.id,
        severity=severity,
        message=info.template.format(**hit.args),
        elements=hit.elements,
        link=hit.link.triple if hit.link is not None else None,
        location=location,
        fingerprint=fingerprint(info.id, hit.elements, relation, hit.declaration, hit.key),
        declaration=hit.declaration,
    )


def run_rules(
    model: Model,
    config: Config,
    *,
    progress: Callable[[str], None] | None = None,
) -> list[Finding]:
    """Every finding of every enabled rule, deduplicated by fingerprint and sorted."""
    context = RuleContext(model, config)
    findings: dict[str, Finding] = {}
    for rule_id, info in rules().items():
        if info.function is None or rule_id in config.disabled:
            continue
        if progress is not None:
            progress(rule_id)
        for hit in info.function(context):
            severity = hit.severity or config.severities.get(rule_id, info.severity)
            finding = make_finding(info, hit, model, severity)
            findings.setdefault(finding.fingerprint, finding)
    return sorted(findings.values(), key=sort_key)
