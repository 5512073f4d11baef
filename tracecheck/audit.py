"""The coverage audit: declarations, groups, test results, matrix and evidence.

:func:`build_report` turns a model, its configuration and the report settings into one
:class:`CoverageReport`; the renderers in ``report/coverage*.py`` only format it. The
counting itself is :func:`tracecheck.coverage.evaluate`, shared with the ``coverage``
rule, so ``check`` and ``coverage`` never disagree about what is covered.
"""

from __future__ import annotations

import hashlib
import json
import platform
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path
from typing import Any

from tracecheck import __version__
from tracecheck.config import Condition, Config, Declaration, config_from_mapping
from tracecheck.coverage import DeclarationResult, counterparts, evaluate, percent
from tracecheck.errors import ConfigError, UsageError
from tracecheck.model import Element, Model
from tracecheck.profiles import PROFILE_NOTE, Profile, get_profile, merge_profile
from tracecheck.sources import Source

__all__ = [
    "CAUTION",
    "RESULTS",
    "UNSET",
    "Settings",
    "Counts",
    "DeclarationReport",
    "MatrixRow",
    "CoverageReport",
    "settings_from",
    "apply_profile",
    "build_report",
    "group_key",
]

CAUTION = (
    "This report supports, and does not replace, review by qualified people. "
    "Traceability coverage is not verification adequacy: a trace link says that a test "
    "is meant to verify a requirement, not that the test is sufficient. Qualifying the "
    "tool under the standard that applies to your product is your responsibility, and "
    "local codes and licensed practice prevail over anything this report says."
)

# The test results the report understands; any other value counts as not passing.
RESULTS = ("pass", "fail", "blocked", "not-run")
UNSET = "(unset)"

# Position of each default kind along the thread, upstream first. A declaration whose
# needed kinds lie downstream of its elements looks for forward gaps (a requirement no
# test verifies); one whose needed kinds lie upstream looks for backward gaps (a test
# that verifies nothing that exists).
_RANK = {"hazard": 0, "requirement": 1, "function": 2, "component": 3, "interface": 3, "test": 4}


@dataclass(frozen=True)
class Settings:
    """What the user asked of the report, beyond the configuration's declarations."""

    group_by: tuple[str, ...] = ()
    result_attribute: str = "result"
    profile: str | None = None
    timestamp: bool = False
    fail_under: float | None = None
    # True when the groups came from the command line: an attribute that no element
    # carries is then refused as a likely typo; from configuration it is accepted, as
    # an early stage may not carry the attribute yet.
    strict_groups: bool = False


def _names(value: Any, key: str, where: str) -> tuple[str, ...]:
    if isinstance(value, str):
        value = [value]
    if not isinstance(value, list) or not all(isinstance(v, str) and v for v in value):
        raise ConfigError(f"{where}: report.coverage.{key}: give a name or a list of names.")
    return tuple(value)


def settings_from(
    config: Config,
    *,
    group_by: Sequence[str] = (),
    result_attribute: str | None = None,
    profile: str | None = None,
    timestamp: bool = False,
    fail_under: float | None = None,
) -> Settings:
    """Command-line values over ``[report.coverage]`` of the configuration."""
    where = str(config.path) if config.path else "configuration"
    section = config.section("report").get("coverage", {})
    if not isinstance(section, Mapping):
        raise ConfigError(f"{where}: report.coverage: must be a table.")
    unknown = sorted(set(section) - {"by", "result_attribute", "profile"})
    if unknown:
        raise ConfigError(f"{where}: report.coverage: unknown key {unknown[0]!r} (known: by, profile, result_attribute).")
    by = tuple(group_by) or _names(section.get("by", []), "by", where)
    attribute = result_attribute or section.get("result_attribute", "result")
    if not isinstance(attribute, str) or not attribute:
        raise ConfigError(f"{where}: report.coverage.result_attribute: give an attribute name.")
    chosen = profile or section.get("profile")
    if chosen is not None and not isinstance(chosen, str):
        raise ConfigError(f"{where}: report.coverage.profile: give a profile name.")
    if fail_under is not None and not 0 <= fail_under <= 100:
        raise UsageError(f"--fail-under {fail_under}: give a percentage from 0 to 100.")
    return Settings(tuple(dict.fromkeys(by)), attribute, chosen, timestamp, fail_under, bool(group_by))


def apply_profile(config: Config, name: str | None) -> tuple[Config, Profile | None]:
    """The configuration with profile ``name`` beneath it (unchanged when ``None``)."""
    if name is None:
        return config, None
    profile = get_profile(name)
    where = f"{config.path} with profile {name}" if config.path else f"profile {name}"
    merged = merge_profile(profile, config.raw)
    return config_from_mapping(merged, where=where, path=config.path, sha256=config.sha256), profile


@dataclass(frozen=True)
class Counts:
    covered: int
    total: int
    uncovered: tuple[str, ...]

    @property
    def percent(self) -> float | None:
        return percent(self.covered, self.total)

    def to_json(self) -> dict[str, Any]:
        return {"covered": self.covered, "total": self.total, "percent": self.percent,
                "uncovered": list(self.uncovered)}


@dataclass(frozen=True)
class DeclarationReport:
    """One declaration: linked coverage, its groups, and coverage by passing tests.

    ``passing`` is ``None`` when the declaration does not ask for tests; otherwise a
    test counts towards it only when its result attribute is ``pass``.
    ``failing_only`` lists elements with verifying tests that all fail.
    """

    result: DeclarationResult
    direction: str
    groups: Mapping[str, Mapping[str, Counts]]
    passing: Counts | None
    failing_only: tuple[str, ...]
    clause: str | None = None

    @property
    def name(self) -> str:
        return self.result.declaration.name

    @property
    def counts(self) -> Counts:
        r = self.result
        return Counts(len(r.covered), r.total, r.uncovered)

    def to_json(self) -> dict[str, Any]:
        d = self.result.declaration
        data: dict[str, Any] = {
            "name": d.name,
            "description": d.description,
            "elements": d.kind,
            "direction": self.direction,
            "covered": len(self.result.covered),
            "total": self.result.total,
            "percent": self.result.percent,
            "uncovered": list(self.result.uncovered),
            "excluded": list(self.result.excluded),
            "groups": {
                attribute: {value: counts.to_json() for value, counts in values.items()}
                for attribute, values in self.groups.items()
            },
            "passing": None if self.passing is None else self.passing.to_json(),
            "failing_only": list(self.failing_only),
        }
        if self.clause is not None:
            data["clause"] = self.clause
        return data


@dataclass(frozen=True)
class MatrixRow:
    """One requirement of the traceability matrix and what hangs below it."""

    requirement: str
    name: str
    attributes: tuple[str, ...]
    satisfied_by: tuple[str, ...]
    allocated_to: tuple[str, ...]
    verified_by: tuple[tuple[str, str], ...]  # (test id, result or UNSET)

    @property
    def passing(self) -> int:
        return sum(1 for _, result in self.verified_by if result == "pass")

    @property
    def failing(self) -> int:
        return sum(1 for _, result in self.verified_by if result == "fail")


@dataclass(frozen=True)
class CoverageReport:
    declarations: list[DeclarationReport]
    matrix: list[MatrixRow]
    settings: Settings
    evidence: dict[str, Any]
    names: Mapping[str, str] = field(default_factory=dict)

    @property
    def below_threshold(self) -> list[DeclarationReport]:
        """Declarations whose shown percentage is below ``--fail-under``."""
        limit = self.settings.fail_under
        if limit is None:
            return []
        return [d for d in self.declarations if d.result.percent is not None and d.result.percent < limit]

    @property
    def exit_code(self) -> int:
        return 1 if self.below_threshold else 0

    def to_json(self) -> dict[str, Any]:
        return {"declarations": [d.to_json() for d in self.declarations], "evidence": self.evidence}


def group_key(value: Any) -> list[str]:
    """The group(s) an attribute value puts an element in; a list puts it in each."""
    if isinstance(value, list):
        keys = sorted({k for v in value for k in group_key(v)})
        return keys or [UNSET]
    if isinstance(value, str):
        return [value]
    return [json.dumps(value)]


def _direction(declaration: Declaration) -> str:
    need = declaration.need
    own = _RANK.get(declaration.kind)
    ranks = [_RANK[k] for k in need.kinds or () if k in _RANK]
    if own is not None and ranks:
        return "forward" if max(ranks) > own else "backward"
    # Kinds of the user's own: by the DESIGN.md reading, links point from the
    # downstream element to the upstream one, so an incoming need looks downstream.
    return "forward" if need.direction == "incoming" else "backward"


def _groups(model: Model, result: DeclarationResult, group_by: Sequence[str]) -> dict[str, dict[str, Counts]]:
    covered = set(result.covered)
    groups: dict[str, dict[str, Counts]] = {}
    for attribute in group_by:
        members: dict[str, list[str]] = {}
        for element_id in (*result.covered, *result.uncovered):
            attrs = model.by_id[element_id].attributes
            for key in group_key(attrs[attribute]) if attribute in attrs else [UNSET]:
                members.setdefault(key, []).append(element_id)
        groups[attribute] = {
            key: Counts(
                sum(1 for m in ids if m in covered),
                len(ids),
                tuple(sorted(m for m in ids if m not in covered)),
            )
            for key, ids in sorted(members.items())
        }
    return groups


def _result_of(element: Element, attribute: str) -> str:
    value = element.attributes.get(attribute)
    return value if isinstance(value, str) else UNSET


def _passing(model: Model, result: DeclarationResult, attribute: str) -> tuple[Counts | None, tuple[str, ...]]:
    declaration = result.declaration
    need = declaration.need
    if need.kinds is None or "test" not in need.kinds:
        return None, ()
    by_id = model.by_id
    covered, uncovered, failing_only = [], [], []
    for element_id in (*result.covered, *result.uncovered):
        ends = [by_id[e] for e in counterparts(model, element_id, need)]
        tests = [_result_of(e, attribute) for e in ends if e.kind == "test"]
        good = sum(1 for e in ends if e.kind != "test" or _result_of(e, attribute) == "pass")
        (covered if good >= declaration.at_least else uncovered).append(element_id)
        if tests and all(r == "fail" for r in tests):
            failing_only.append(element_id)
    counts = Counts(len(covered), len(covered) + len(uncovered), tuple(sorted(uncovered)))
    return counts, tuple(sorted(failing_only))


def _ends(model: Model, element_id: str, direction: str, relations: tuple[str, ...], kinds) -> tuple[str, ...]:
    return tuple(sorted(counterparts(model, element_id, Condition(direction, relations, frozenset(kinds)))))


def build_matrix(model: Model, settings: Settings) -> list[MatrixRow]:
    """Requirement -> satisfying elements -> their allocated components -> verifying tests."""
    rows = []
    for element in sorted(model.by_id.values(), key=lambda e: e.id):
        if element.kind != "requirement":
            continue
        satisfied = _ends(model, element.id, "incoming", ("satisfies",), ("function", "component", "interface"))
        allocated = sorted({
            component
            for fn in satisfied if model.by_id[fn].kind == "function"
            for component in _ends(model, fn, "outgoing", ("allocated_to",), ("component",))
        })
        tests = _ends(model, element.id, "incoming", ("verifies",), ("test",))
        attrs = tuple(
            "; ".join(group_key(element.attributes[a])) if a in element.attributes else ""
            for a in settings.group_by
        )
        rows.append(MatrixRow(
            element.id, element.name or "", attrs, satisfied, tuple(allocated),
            tuple((t, _result_of(model.by_id[t], settings.result_attribute)) for t in tests),
        ))
    return rows


def _canonical_sha256(value: Any) -> str:
    text = json.dumps(value, sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def _condition_json(condition: Condition | None) -> dict[str, Any] | None:
    if condition is None:
        return None
    return {
        "direction": condition.direction,
        "relations": list(condition.relations),
        "kinds": None if condition.kinds is None else sorted(condition.kinds),
    }


def declaration_json(declaration: Declaration) -> dict[str, Any]:
    """The declaration as the evidence records it: everything that decides coverage."""
    return {
        "name": declaration.name,
        "elements": declaration.kind,
        "where": {key: list(values) for key, values in declaration.where},
        "need": _condition_json(declaration.need),
        "at_least": declaration.at_least,
        "except_when": _condition_json(declaration.except_when),
    }


def _git_evidence(source: Source) -> dict[str, Any] | None:
    from tracecheck import gitsource

    if source.rev is not None:
        return {"commit": gitsource.resolve(source.rev, Path.cwd()), "path": source.repo_path,
                "dirty": False, "modified": False, "revision": source.rev}
    if source.path is None:
        return None
    return gitsource.worktree_state(source.path)


def build_evidence(
    source: Source, model: Model, config: Config, settings: Settings, profile: Profile | None,
    *, now: datetime | None = None,
) -> dict[str, Any]:
    """What an auditor needs to reproduce the numbers: inputs, tool, declaration set."""
    declarations = [declaration_json(d) for d in config.declarations]
    evidence: dict[str, Any] = {
        "tool": {"name": "tracecheck", "version": __version__, "python": platform.python_version()},
        "model": {
            "path": source.origin,
            "format": model.format,
            "sha256": hashlib.sha256(source.data).hexdigest(),
            "name": model.meta.get("name"),
            "stage": model.meta.get("stage"),
            "git": _git_evidence(source),
        },
        "config": None if config.path is None else {"path": str(config.path), "sha256": config.sha256},
        "profile": None if profile is None else {
            "name": profile.name, "title": profile.title, "standard": profile.standard,
            "sha256": profile.sha256, "note": PROFILE_NOTE,
        },
        "declarations": declarations,
        "declarations_sha256": _canonical_sha256(declarations),
        "required_attributes": {k: list(v) for k, v in sorted(config.required_attributes.items())},
        "group_by": list(settings.group_by),
        "result_attribute": settings.result_attribute,
        "fail_under": settings.fail_under,
        "counts": {
            "elements": model.element_count,
            "distinct_elements": model.arrays.n,
            "links": model.link_count,
            "by_kind": dict(sorted(model.kinds.items())),
            "declarations": len(declarations),
            "test_results": _test_results(model, settings.result_attribute),
        },
        "caution": CAUTION,
    }
    if settings.timestamp:
        moment = now or datetime.now(UTC)
        evidence["generated"] = moment.astimezone(UTC).replace(microsecond=0).isoformat()
    return evidence


def _check_group_attributes(model: Model, group_by: Sequence[str]) -> None:
    # An attribute that no element carries is almost always a typo; grouping by it
    # would silently put everything under "(unset)".
    if not group_by:
        return
    present = {key for element in model.by_id.values() for key in element.attributes}
    missing = [a for a in group_by if a not in present]
    if missing:
        known = ", ".join(sorted(present)) or "none"
        raise UsageError(
            f"{model.origin}: no element carries the attribute {missing[0]!r} to group by; "
            f"attributes in the model: {known}."
        )


def _test_results(model: Model, attribute: str) -> dict[str, int]:
    counts: dict[str, int] = {}
    for element in model.by_id.values():
        if element.kind == "test":
            key = _result_of(element, attribute)
            counts[key] = counts.get(key, 0) + 1
    return dict(sorted(counts.items()))


def build_report(source: Source, model: Model, config: Config, settings: Settings,
                 profile: Profile | None = None) -> CoverageReport:
    """Evaluate every declaration of ``config`` over ``model`` with ``settings``."""
    if settings.strict_groups:
        _check_group_attributes(model, settings.group_by)
    clauses = profile.clauses() if profile else {}
    declarations = []
    for declaration in config.declarations:
        result = evaluate(model, declaration)
        passing, failing_only = _passing(model, result, settings.result_attribute)
        declarations.append(DeclarationReport(
            result, _direction(declaration), _groups(model, result, settings.group_by),
            passing, failing_only, clauses.get(declaration.name),
        ))
    names = {e.id: e.name for e in model.by_id.values() if e.name}
    return CoverageReport(
        declarations,
        build_matrix(model, settings),
        settings,
        build_evidence(source, model, config, settings, profile),
        names,
    )
