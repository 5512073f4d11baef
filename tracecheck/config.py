"""Configuration: ``tracecheck.toml`` or ``[tool.tracecheck]`` in ``pyproject.toml``.

TOML is parsed with :mod:`tomllib`, validated against ``schemas/config.schema.json``
(every error names its key path), then turned into a frozen :class:`Config` holding
the metamodel, required attributes, rule severities and coverage declarations.
"""

from __future__ import annotations

import hashlib
import json
import tomllib
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import lru_cache
from importlib import resources
from pathlib import Path
from typing import Any

from tracecheck.errors import ConfigError

__all__ = [
    "RelationRule",
    "Metamodel",
    "Condition",
    "Declaration",
    "Config",
    "DEFAULT_KINDS",
    "default_metamodel",
    "default_declarations",
    "load_config",
    "find_config",
    "config_from_mapping",
]

SEVERITIES = ("error", "warning", "note")
DEFAULT_KINDS = ("requirement", "function", "component", "interface", "test", "hazard")


@dataclass(frozen=True)
class RelationRule:
    """Which kinds a relation may join; ``None`` means any kind."""

    name: str
    sources: frozenset[str] | None
    targets: frozenset[str] | None
    acyclic: bool = False
    same_kind: bool = False

    def allows(self, source_kind: str, target_kind: str) -> bool:
        if self.sources is not None and source_kind not in self.sources:
            return False
        if self.targets is not None and target_kind not in self.targets:
            return False
        return not self.same_kind or source_kind == target_kind


@dataclass(frozen=True)
class Metamodel:
    kinds: frozenset[str]
    relations: Mapping[str, RelationRule]

    @property
    def acyclic_relations(self) -> list[str]:
        return sorted(name for name, rule in self.relations.items() if rule.acyclic)


def _rel(name, sources, targets, acyclic=False, same_kind=False) -> RelationRule:
    return RelationRule(
        name,
        None if sources is None else frozenset(sources),
        None if targets is None else frozenset(targets),
        acyclic,
        same_kind,
    )


def default_metamodel() -> Metamodel:
    """The default metamodel of DESIGN.md."""
    relations = [
        _rel("derives_from", ["requirement"], ["requirement"], acyclic=True),
        _rel("refines", ["requirement", "function"], ["requirement"], acyclic=True),
        _rel("satisfies", ["function", "component", "interface"], ["requirement"]),
        _rel("allocated_to", ["function"], ["component"]),
        _rel("part_of", ["component", "function"], ["component", "function"], True, True),
        _rel("verifies", ["test"], ["requirement", "function", "component", "interface"]),
        _rel("mitigates", ["requirement", "function", "component"], ["hazard"]),
        _rel("traces_to", None, None),
    ]
    return Metamodel(frozenset(DEFAULT_KINDS), {r.name: r for r in relations})


@dataclass(frozen=True)
class Condition:
    """Links of ``relations`` in ``direction`` whose other end has one of ``kinds``."""

    direction: str  # "incoming" | "outgoing"
    relations: tuple[str, ...]
    kinds: frozenset[str] | None


@dataclass(frozen=True)
class Declaration:
    """A coverage obligation: which elements need which links, at least how many.

    An element of ``kind`` whose attributes match ``where`` is covered when at least
    ``at_least`` distinct existing elements of the ``need`` kinds are joined to it by
    ``need`` links, unless ``except_when`` holds for it (then it is out of scope).
    """

    name: str
    kind: str
    need: Condition
    description: str = ""
    where: tuple[tuple[str, tuple[Any, ...]], ...] = ()
    at_least: int = 1
    except_when: Condition | None = None
    severity: str | None = None


def default_declarations() -> tuple[Declaration, ...]:
    """The five default coverage declarations of DESIGN.md."""
    verified_kinds = frozenset({"requirement", "function", "component", "interface"})
    return (
        Declaration(
            "requirement-verified",
            "requirement",
            Condition("incoming", ("verifies",), frozenset({"test"})),
            "Every requirement is verified by at least one test.",
        ),
        Declaration(
            "requirement-satisfied",
            "requirement",
            Condition("incoming", ("satisfies",), frozenset({"function", "component", "interface"})),
            "Every leaf requirement is satisfied by a function, component or interface.",
            except_when=Condition("incoming", ("derives_from",), frozenset({"requirement"})),
        ),
        Declaration(
            "function-allocated",
            "function",
            Condition("outgoing", ("allocated_to",), frozenset({"component"})),
            "Every function is allocated to a component.",
        ),
        Declaration(
            "test-verifies",
            "test",
            Condition("outgoing", ("verifies",), verified_kinds),
            "Every test verifies an element that exists.",
        ),
        Declaration(
            "hazard-mitigated",
            "hazard",
            Condition("incoming", ("mitigates",), frozenset({"requirement", "function", "component"})),
            "Every hazard is mitigated by a requirement, function or component.",
        ),
    )


@dataclass(frozen=True)
class Config:
    """Everything the analyses need to know from the configuration file."""

    metamodel: Metamodel = field(default_factory=default_metamodel)
    required_attributes: Mapping[str, tuple[str, ...]] = field(default_factory=dict)
    severities: Mapping[str, str] = field(default_factory=dict)
    disabled: frozenset[str] = frozenset()
    declarations: tuple[Declaration, ...] = field(default_factory=default_declarations)
    path: Path | None = None
    sha256: str | None = None
    raw: Mapping[str, Any] = field(default_factory=dict)

    def section(self, name: str) -> Mapping[str, Any]:
        """A free-form section (``diff``, ``formats`` ...) for the module that owns it."""
        return self.raw.get(name, {})


@lru_cache(maxsize=1)
def _schema() -> dict[str, Any]:
    text = resources.files("tracecheck").joinpath("schemas/config.schema.json").read_text("utf-8")
    return json.loads(text)


def _key_path(parts) -> str:
    return ".".join(str(p) for p in parts) or "(top level)"


def _validate(data: Mapping[str, Any], where: str) -> None:
    import jsonschema

    validator = jsonschema.Draft202012Validator(_schema())
    errors = sorted(validator.iter_errors(data), key=lambda e: [str(p) for p in e.path])
    if errors:
        details = []
        for error in errors:
            message = error.message
            if error.validator == "additionalProperties":
                message = message.replace("Additional properties are not allowed", "unknown key")
            details.append(f"{_key_path(error.absolute_path)}: {message}")
        raise ConfigError(f"{where}: invalid configuration:", details=details)


def _names(value: Any) -> tuple[str, ...]:
    return (value,) if isinstance(value, str) else tuple(value)


def _build_metamodel(section: Mapping[str, Any]) -> Metamodel:
    base = Metamodel(frozenset(), {}) if section.get("replace") else default_metamodel()
    kinds = set(base.kinds) | set(section.get("kinds", ()))
    relations = dict(base.relations)
    for name, spec in section.get("relations", {}).items():
        old = relations.get(name)
        sources = spec.get("from", None if old is None else old.sources)
        targets = spec.get("to", None if old is None else old.targets)
        relations[name] = _rel(
            name,
            sources,
            targets,
            spec.get("acyclic", old.acyclic if old else False),
            spec.get("same_kind", old.same_kind if old else False),
        )
    return Metamodel(frozenset(kinds), relations)


def _condition(spec: Mapping[str, Any], path: str, metamodel: Metamodel) -> Condition:
    if ("incoming" in spec) == ("outgoing" in spec):
        raise ConfigError(f"{path}: give exactly one of 'incoming' or 'outgoing'.")
    direction = "incoming" if "incoming" in spec else "outgoing"
    other = "from" if direction == "incoming" else "to"
    wrong = "to" if direction == "incoming" else "from"
    if wrong in spec:
        raise ConfigError(f"{path}.{wrong}: with '{direction}' the other end is named by '{other}'.")
    relations = _names(spec[direction])
    for relation in relations:
        if relation not in metamodel.relations:
            raise ConfigError(f"{path}.{direction}: unknown relation {relation!r}.")
    kinds = spec.get(other)
    for kind in kinds or ():
        if kind not in metamodel.kinds:
            raise ConfigError(f"{path}.{other}: unknown kind {kind!r}.")
    return Condition(direction, relations, None if kinds is None else frozenset(kinds))


def _declaration(name: str, spec: Mapping[str, Any], metamodel: Metamodel) -> Declaration:
    path = f"coverage.{name}"
    if "elements" not in spec:
        raise ConfigError(f"{path}.elements: required (the kind of element that needs coverage).")
    if spec["elements"] not in metamodel.kinds:
        raise ConfigError(f"{path}.elements: unknown kind {spec['elements']!r}.")
    except_when = spec.get("except_when")
    return Declaration(
        name=name,
        kind=spec["elements"],
        need=_condition(spec, path, metamodel),
        description=spec.get("description", ""),
        where=tuple(
            (key, tuple(v) if isinstance(v, list) else (v,))
            for key, v in sorted(spec.get("where", {}).items())
        ),
        at_least=spec.get("at_least", 1),
        except_when=None
        if except_when is None
        else _condition(except_when, f"{path}.except_when", metamodel),
        severity=spec.get("severity"),
    )


def _declarations(data: Mapping[str, Any], metamodel: Metamodel) -> tuple[Declaration, ...]:
    use_defaults = data.get("rules", {}).get("default_coverage", True)
    declared = {d.name: d for d in default_declarations()} if use_defaults else {}
    for name, spec in data.get("coverage", {}).items():
        if spec.get("enabled", True) is False:
            declared.pop(name, None)
            continue
        if set(spec) <= {"enabled", "severity"} and name in declared:
            old = declared[name]
            declared[name] = Declaration(**{**old.__dict__, "severity": spec.get("severity")})
            continue
        declared[name] = _declaration(name, spec, metamodel)
    return tuple(declared[name] for name in sorted(declared))


def config_from_mapping(
    data: Mapping[str, Any], *, where: str = "configuration", path: Path | None = None,
    sha256: str | None = None,
) -> Config:
    """Validate a parsed TOML mapping and build the :class:`Config`."""
    from tracecheck.rules import rule_ids

    _validate(data, where)
    known = set(rule_ids())
    rules = data.get("rules", {})
    for key, ids in (("disable", rules.get("disable", ())), ("severity", rules.get("severity", {}))):
        for rule_id in ids:
            if rule_id not in known:
                raise ConfigError(
                    f"{where}: rules.{key}: unknown rule id {rule_id!r}; known: {', '.join(sorted(known))}."
                )
    metamodel = _build_metamodel(data.get("metamodel", {}))
    required = {k: tuple(v) for k, v in sorted(data.get("required_attributes", {}).items())}
    for kind in required:
        if kind not in metamodel.kinds:
            raise ConfigError(f"{where}: required_attributes.{kind}: unknown kind {kind!r}.")
    try:
        declarations = _declarations(data, metamodel)
    except ConfigError as error:
        raise ConfigError(f"{where}: {error.message}") from None
    return Config(
        metamodel=metamodel,
        required_attributes=required,
        severities=dict(rules.get("severity", {})),
        disabled=frozenset(rules.get("disable", ())),
        declarations=declarations,
        path=path,
        sha256=sha256,
        raw=data,
    )


def load_config(path: Path) -> Config:
    """Read, validate and build the configuration in ``path``."""
    try:
        data = path.read_bytes()
    except OSError as error:
        raise ConfigError(f"{path}: cannot read the configuration ({error.strerror or error}).") from None
    try:
        document = tomllib.loads(data.decode("utf-8"))
    except UnicodeDecodeError:
        raise ConfigError(f"{path}: the configuration is not UTF-8 text.") from None
    except tomllib.TOMLDecodeError as error:
        raise ConfigError(f"{path}: malformed TOML: {error}.") from None
    if path.name == "pyproject.toml":
        document = document.get("tool", {}).get("tracecheck", {})
    return config_from_mapping(
        document, where=str(path), path=path, sha256=hashlib.sha256(data).hexdigest()
    )


def _declares_tracecheck(pyproject: Path) -> bool:
    try:
        return "tracecheck" in tomllib.loads(pyproject.read_text("utf-8")).get("tool", {})
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
        return False


def find_config(start: Path) -> Path | None:
    """Nearest ``tracecheck.toml`` (or ``pyproject.toml`` with ``[tool.tracecheck]``) upwards."""
    folder = start.resolve()
    if folder.is_file():
        folder = folder.parent
    for candidate in (folder, *folder.parents):
        own = candidate / "tracecheck.toml"
        if own.is_file():
            return own
        pyproject = candidate / "pyproject.toml"
        if pyproject.is_file() and _declares_tracecheck(pyproject):
            return pyproject
    return None
