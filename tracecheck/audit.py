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
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from datetime import UTC, datetime
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np

from tracecheck import __version__
from tracecheck.config import Condition, Config, Declaration, config_from_mapping
from tracecheck.coverage import DeclarationResult, evaluate, evaluate_codes, joined_pairs, percent
from tracecheck.errors import ConfigError, UsageError
from tracecheck.model import Model
from tracecheck.profiles import PROFILE_NOTE, Profile, get_profile, merge_profile
from tracecheck.sides import Side, side_of
from tracecheck.sources import Source

__all__ = [
    "CAUTION",
    "RESULTS",
    "UNSET",
    "Settings",
    "Counts",
    "DeclarationReport",
    "MatrixRow",
    "Matrix",
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
    """The audit: ``matrix`` and ``names`` are built when first read (by the HTML
    view and the matrix CSV), so a JSON or text report reads no more of the model
    than its counts need."""

    declarations: list[DeclarationReport]
    matrix: Sequence[MatrixRow]
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


# --- the model as the audit reads it: integer codes, attributes read on demand -------

_MISSING = object()


class _Keys:
    """The group keys of one attribute per element code, read the first time an
    element is asked for (:func:`group_key`; most elements have one key).

    ``key_of[code]`` is the key's index in ``names``, ``-1`` for an element in several
    groups (its key indexes are in ``multi``) and ``-2`` for one not read yet.
    """

    def __init__(self, side: Side, attribute: str) -> None:
        self.side, self.attribute = side, attribute
        self.key_of = np.full(side.arrays.n, -2, dtype=np.int64)
        self.names: list[str] = []
        self._index: dict[str, int] = {}
        self.multi: dict[int, list[int]] = {}

    def _key(self, name: str) -> int:
        index = self._index.get(name)
        if index is None:
            index = self._index[name] = len(self.names)
            self.names.append(name)
        return index

    def of(self, codes: np.ndarray) -> np.ndarray:
        """``key_of`` for ``codes``, reading the attributes of those not read yet."""
        todo = codes[self.key_of[codes] == -2].tolist()
        if todo:
            attribute, key, unset = self.attribute, self._key, [UNSET]
            found = []
            for code, attributes in zip(todo, self.side.attributes(todo), strict=True):
                value = attributes.get(attribute, _MISSING)
                keys = [value] if isinstance(value, str) else unset if value is _MISSING else group_key(value)
                if len(keys) == 1:
                    found.append(key(keys[0]))
                else:
                    found.append(-1)
                    self.multi[code] = [key(k) for k in keys]
            self.key_of[todo] = found
        return self.key_of[codes]


class _Audit:
    """What the report reads of one model, from its integer arrays (``model.arrays``)
    and columns: Element objects are never built, and attributes are read only for the
    elements whose attributes the report uses (tests for their results, elements in
    scope for their groups, requirements for the matrix)."""

    def __init__(self, model: Model, result_attribute: str) -> None:
        self.model = model
        self.arrays = model.arrays
        self.side = side_of(model)
        self.result_attribute = result_attribute
        self._keys: dict[str, _Keys] = {}

    def codes_of(self, ids: Sequence[str]) -> np.ndarray:
        return np.fromiter(map(self.side.position.__getitem__, ids), dtype=np.int64, count=len(ids))

    def ids_of(self, codes: np.ndarray) -> list[str]:
        return list(map(self.arrays.names.__getitem__, codes.tolist()))

    def keys(self, attribute: str) -> _Keys:
        keys = self._keys.get(attribute)
        if keys is None:
            keys = self._keys[attribute] = _Keys(self.side, attribute)
        return keys

    def codes_of_kind(self, kind: str) -> np.ndarray:
        code = self.arrays.kind_code.get(kind)
        return np.zeros(0, dtype=np.int64) if code is None else np.flatnonzero(self.arrays.kind == code)

    @cached_property
    def results(self) -> tuple[np.ndarray, list[str]]:
        """Per element code, the index of its test result in the list returned beside
        (``-1`` for elements that are not tests); a value that is no string is UNSET."""
        tests = self.codes_of_kind("test")
        attribute, index, names = self.result_attribute, {}, []
        found = []
        for attributes in self.side.attributes(tests.tolist()):
            value = attributes.get(attribute)
            name = value if isinstance(value, str) else UNSET
            code = index.get(name)
            if code is None:
                code = index[name] = len(names)
                names.append(name)
            found.append(code)
        result = np.full(self.arrays.n, -1, dtype=np.int64)
        result[tests] = found
        return result, names

    def result_codes(self, name: str) -> np.ndarray:
        """Per element code, True for a test whose result is ``name``."""
        result, names = self.results
        return result == (names.index(name) if name in names else -2)

    def test_results(self) -> dict[str, int]:
        result, names = self.results
        counts = np.bincount(result[result >= 0], minlength=len(names)).tolist()
        return dict(sorted(zip(names, counts, strict=True)))

    def present_attributes(self, wanted: Sequence[str]) -> set[str] | None:
        """The attribute names the elements carry, read until every one of ``wanted``
        is seen (``None`` then); all of them when one is missing."""
        present: set[str] = set()
        missing = set(wanted)
        side, n, chunk = self.side, self.arrays.n, 4096
        for start in range(0, n, chunk):
            for attributes in side.attributes(list(range(start, min(start + chunk, n)))):
                present.update(attributes)
            if missing <= present:
                return None
        return present


def _groups(audit: _Audit, result: DeclarationResult, group_by: Sequence[str]) -> dict[str, dict[str, Counts]]:
    covered = evaluate_codes(audit.model, result.declaration)[0]
    uncovered = audit.codes_of(result.uncovered)  # in id order
    scope = np.concatenate((covered, uncovered))
    is_covered = np.arange(len(scope)) < len(covered)
    groups: dict[str, dict[str, Counts]] = {}
    for attribute in group_by:
        keys = audit.keys(attribute)
        of = keys.of(scope)
        single = of >= 0
        size = len(keys.names)
        total = np.bincount(of[single], minlength=size)
        good = np.bincount(of[single & is_covered], minlength=size)
        for code, inside in zip(scope[~single].tolist(), is_covered[~single].tolist(), strict=True):
            for k in keys.multi[code]:
                total[k] += 1
                good[k] += inside
        gaps: dict[int, list[str]] = {}
        for code, k, element_id in zip(uncovered.tolist(), of[len(covered):].tolist(), result.uncovered, strict=True):
            for index in keys.multi[code] if k == -1 else (k,):
                gaps.setdefault(index, []).append(element_id)
        present = sorted((keys.names[k], k) for k in np.flatnonzero(total).tolist())
        groups[attribute] = {
            name: Counts(int(good[k]), int(total[k]), tuple(gaps.get(k, ()))) for name, k in present
        }
    return groups


def _passing(audit: _Audit, result: DeclarationResult) -> tuple[Counts | None, tuple[str, ...]]:
    declaration = result.declaration
    need = declaration.need
    if need.kinds is None or "test" not in need.kinds:
        return None, ()
    covered, uncovered, _ = evaluate_codes(audit.model, declaration)
    scope = np.concatenate((covered, uncovered))
    arrays = audit.arrays
    mine, other = joined_pairs(arrays, need)
    test = arrays.kind_code.get("test", -1)
    is_test = arrays.kind[other] == test
    n = arrays.n
    good = np.bincount(mine[~is_test | audit.result_codes("pass")[other]], minlength=n)[scope]
    tests = np.bincount(mine[is_test], minlength=n)[scope]
    fails = np.bincount(mine[is_test & audit.result_codes("fail")[other]], minlength=n)[scope]
    passing = good >= declaration.at_least
    gaps = sorted(audit.ids_of(scope[~passing]))
    counts = Counts(int(passing.sum()), len(scope), tuple(gaps))
    return counts, tuple(sorted(audit.ids_of(scope[(tests > 0) & (fails == tests)])))


class _Ends:
    """Ids of the counterparts of every element under one condition, by code."""

    def __init__(self, audit: _Audit, direction: str, relation: str, kinds: Sequence[str]) -> None:
        mine, other = joined_pairs(audit.arrays, Condition(direction, (relation,), frozenset(kinds)))
        order = np.argsort(mine, kind="stable")
        self._bounds: list[int] = np.searchsorted(mine[order], np.arange(audit.arrays.n + 1)).tolist()
        self._others: list[str] = audit.ids_of(other[order])

    def __call__(self, code: int) -> list[str]:
        return sorted(self._others[self._bounds[code] : self._bounds[code + 1]])


def _matrix_rows(audit: _Audit, group_by: Sequence[str]) -> list[MatrixRow]:
    requirements = audit.codes_of_kind("requirement")
    order = sorted(zip(audit.ids_of(requirements), requirements.tolist(), strict=True))
    codes = np.array([code for _, code in order], dtype=np.int64)
    satisfied = _Ends(audit, "incoming", "satisfies", ("function", "component", "interface"))
    allocated = _Ends(audit, "outgoing", "allocated_to", ("component",))
    verified = _Ends(audit, "incoming", "verifies", ("test",))
    position, arrays = audit.side.position, audit.arrays
    function = arrays.kind_code.get("function", -1)
    result, result_names = audit.results
    names = audit.side.names(codes.tolist())
    attributes = audit.side.attributes(codes.tolist()) if group_by else [{}] * len(order)
    rows = []
    for (element_id, code), name, attrs in zip(order, names, attributes, strict=True):
        ends = satisfied(code)
        components = sorted({
            component for end in ends if arrays.kind[position[end]] == function
            for component in allocated(position[end])
        })
        cells = tuple("; ".join(group_key(attrs[a])) if a in attrs else "" for a in group_by)
        rows.append(MatrixRow(
            element_id, name or "", cells, tuple(ends), tuple(components),
            tuple((t, result_names[result[position[t]]]) for t in verified(code)),
        ))
    return rows


def build_matrix(model: Model, settings: Settings) -> list[MatrixRow]:
    """Requirement -> satisfying elements -> their allocated components -> verifying tests."""
    return _matrix_rows(_Audit(model, settings.result_attribute), settings.group_by)


class Matrix(Sequence[MatrixRow]):
    """The traceability matrix of a report, its rows built when first read: the JSON
    and text views never read them, and they are most of the cost of a large audit.
    Its length (one row per requirement) needs no rows."""

    def __init__(self, audit: _Audit, group_by: Sequence[str]) -> None:
        self._audit, self._group_by = audit, tuple(group_by)
        self._length = len(audit.codes_of_kind("requirement"))
        self._rows: list[MatrixRow] | None = None

    @property
    def rows(self) -> list[MatrixRow]:
        if self._rows is None:
            self._rows = _matrix_rows(self._audit, self._group_by)
            self._audit = None  # type: ignore[assignment]  # the model is no longer needed
        return self._rows

    def __len__(self) -> int:
        return self._length

    def __getitem__(self, index):  # type: ignore[override]
        return self.rows[index]

    def __iter__(self) -> Iterator[MatrixRow]:
        return iter(self.rows)


class Names(Mapping[str, str]):
    """Element id -> name, for elements that have a non-empty name, read from the
    model when first asked for (only the HTML view asks, for the ids it shows)."""

    def __init__(self, audit: _Audit) -> None:
        # The audit holds the model: a model built from objects answers from them, and
        # the side view only refers to its model weakly.
        self._audit: _Audit | None = audit
        self._position = audit.side.position
        self._names: list[str | None] | None = None

    @property
    def _by_code(self) -> list[str | None]:
        if self._names is None:
            assert self._audit is not None
            side = self._audit.side
            self._names = side.names(list(range(len(side))))
            self._audit = None
        return self._names

    def get(self, element_id: str, default: Any = None) -> Any:  # type: ignore[override]
        code = self._position.get(element_id)
        return (code is not None and self._by_code[code]) or default

    def __getitem__(self, element_id: str) -> str:
        name = self.get(element_id)
        if name is None:
            raise KeyError(element_id)
        return name

    def __iter__(self) -> Iterator[str]:
        names = self._by_code
        return (element_id for element_id, code in self._position.items() if names[code])

    def __len__(self) -> int:
        return sum(1 for name in self._by_code if name)


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
    *, now: datetime | None = None, test_results: dict[str, int] | None = None,
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
            "test_results": (_Audit(model, settings.result_attribute).test_results()
                             if test_results is None else test_results),
        },
        "caution": CAUTION,
    }
    if settings.timestamp:
        moment = now or datetime.now(UTC)
        evidence["generated"] = moment.astimezone(UTC).replace(microsecond=0).isoformat()
    return evidence


def _check_group_attributes(audit: _Audit, group_by: Sequence[str]) -> None:
    # An attribute that no element carries is almost always a typo; grouping by it
    # would silently put everything under "(unset)".
    if not group_by:
        return
    present = audit.present_attributes(group_by)
    if present is None:
        return
    missing = [a for a in group_by if a not in present]
    known = ", ".join(sorted(present)) or "none"
    raise UsageError(
        f"{audit.model.origin}: no element carries the attribute {missing[0]!r} to group by; "
        f"attributes in the model: {known}."
    )


def build_report(source: Source, model: Model, config: Config, settings: Settings,
                 profile: Profile | None = None) -> CoverageReport:
    """Evaluate every declaration of ``config`` over ``model`` with ``settings``."""
    audit = _Audit(model, settings.result_attribute)
    if settings.strict_groups:
        _check_group_attributes(audit, settings.group_by)
    clauses = profile.clauses() if profile else {}
    declarations = []
    for declaration in config.declarations:
        result = evaluate(model, declaration)
        passing, failing_only = _passing(audit, result)
        declarations.append(DeclarationReport(
            result, _direction(declaration), _groups(audit, result, settings.group_by),
            passing, failing_only, clauses.get(declaration.name),
        ))
    return CoverageReport(
        declarations,
        Matrix(audit, settings.group_by),
        settings,
        build_evidence(source, model, config, settings, profile, test_results=audit.test_results()),
        Names(audit),
    )
