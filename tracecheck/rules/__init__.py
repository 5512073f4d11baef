"""The integrity rule catalogue: a registry of small generators.

A rule is a function ``(context) -> Iterator[Hit]`` registered with :func:`rule`,
which records its metadata (id, default severity, descriptions, message template)
and refuses a duplicate id at import. The engine (:mod:`tracecheck.rules.engine`)
stamps severity, location and fingerprint onto every hit.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Protocol

from tracecheck.model import Link, Location

if TYPE_CHECKING:
    from tracecheck.rules.engine import RuleContext

__all__ = ["Hit", "RuleInfo", "RuleFunction", "rule", "rules", "rule_ids", "RULE_IDS"]

# Every rule id of DESIGN.md, including those whose rule lives outside this package
# (stale-link in the review ledger, waiver-expired in the waiver loader).
RULE_IDS = (
    "duplicate-id",
    "dangling-link",
    "dangling-parent",
    "self-link",
    "duplicate-link",
    "unknown-kind",
    "unknown-relation",
    "relation-endpoints",
    "cycle",
    "missing-attribute",
    "coverage",
    "stale-link",
    "waiver-expired",
)


@dataclass(frozen=True)
class Hit:
    """What a rule yields: the subject and the template arguments, nothing rendered.

    ``key`` is extra fingerprint material for rules with several findings per subject
    (the attribute name of ``missing-attribute``).
    """

    elements: tuple[str, ...]
    args: Mapping[str, Any] = field(default_factory=dict)
    link: Link | None = None
    location: Location | None = None
    declaration: str | None = None
    key: tuple[str, ...] = ()
    relation: str | None = None
    severity: str | None = None


class RuleFunction(Protocol):
    def __call__(self, context: RuleContext) -> Iterator[Hit]: ...


@dataclass(frozen=True)
class RuleInfo:
    id: str
    severity: str
    short: str
    full: str
    help: str
    template: str
    function: RuleFunction | None = None


_RULES: dict[str, RuleInfo] = {}


def rule(
    rule_id: str, *, severity: str, short: str, full: str, help: str, template: str
) -> Callable[[RuleFunction], RuleFunction]:
    """Register a rule function under ``rule_id``; a second registration is a bug."""
    if rule_id not in RULE_IDS:
        raise RuntimeError(f"rule id {rule_id!r} is not in the catalogue of DESIGN.md")

    def register(function: RuleFunction) -> RuleFunction:
        if rule_id in _RULES:
            raise RuntimeError(f"rule {rule_id!r} registered twice")
        _RULES[rule_id] = RuleInfo(rule_id, severity, short, full, help, template, function)
        return function

    return register


def describe(rule_id: str, *, severity: str, short: str, full: str, help: str, template: str) -> None:
    """Register metadata for a rule whose findings are produced outside the engine."""
    if rule_id in _RULES:
        raise RuntimeError(f"rule {rule_id!r} registered twice")
    _RULES[rule_id] = RuleInfo(rule_id, severity, short, full, help, template, None)


def rules() -> dict[str, RuleInfo]:
    """All registered rules by id (importing the rule modules on first use)."""
    from tracecheck.rules import coverage_rule, cycles, stale_link, structure, waiver_rule  # noqa: F401

    return dict(sorted(_RULES.items()))


def rule_ids() -> tuple[str, ...]:
    return RULE_IDS
