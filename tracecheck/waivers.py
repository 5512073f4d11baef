"""Waivers: findings a named person accepted, for a reason, until a date.

A waiver file is TOML with one ``[[waiver]]`` table per accepted finding, checked
against ``schemas/waivers.schema.json``. A waiver names a rule id and a subject (an
element id, or a link by source, target and relation; coverage waivers may narrow to
one declaration). A finding it matches does not fail the run but is listed as waived;
a waiver past its ``expires`` date waives nothing and yields a ``waiver-expired``
finding; a waiver that matches no finding is reported as unused.

"Today" is the date expiry is judged against: ``--today``, else the environment
variable ``TRACECHECK_TODAY``, else the system date. A waiver holds through its
``expires`` day and is expired from the next day on.
"""

from __future__ import annotations

import datetime as dt
import json
import os
import re
import tomllib
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from functools import lru_cache
from importlib import resources
from pathlib import Path
from types import SimpleNamespace
from typing import Any

from tracecheck.config import Config
from tracecheck.errors import InputError, UsageError
from tracecheck.model import Location, Model
from tracecheck.rules.engine import Finding, make_finding, sort_key

__all__ = [
    "Waiver",
    "WaiverReport",
    "load_waivers",
    "parse_waivers",
    "apply_waivers",
    "today",
    "waiver_file_from_config",
    "TODAY_ENV",
]

TODAY_ENV = "TRACECHECK_TODAY"
_HEADER = re.compile(r"^\s*\[\[\s*waiver\s*\]\]")


@dataclass(frozen=True)
class Waiver:
    """One accepted finding: rule, subject, reason, approver, last valid day."""

    rule: str
    element: str | None
    link: tuple[str, str, str] | None
    declaration: str | None
    reason: str
    approved_by: str
    expires: dt.date
    location: Location

    @property
    def subject(self) -> str:
        if self.link is not None:
            return f"{self.link[0]} {self.link[2]} {self.link[1]}"
        return str(self.element)

    @property
    def subject_ids(self) -> tuple[str, ...]:
        if self.link is not None:
            return (self.link[0],) if self.link[0] == self.link[1] else self.link[:2]
        return (str(self.element),)

    def matches(self, finding: Finding) -> bool:
        if finding.rule != self.rule:
            return False
        if self.declaration is not None and finding.declaration != self.declaration:
            return False
        if self.link is not None:
            return finding.link == self.link
        return self.element in finding.elements

    def expired(self, on: dt.date) -> bool:
        return self.expires < on

    def to_json(self) -> dict[str, Any]:
        data: dict[str, Any] = {"rule": self.rule}
        if self.link is not None:
            data["link"] = {"source": self.link[0], "target": self.link[1], "relation": self.link[2]}
        else:
            data["element"] = self.element
        if self.declaration is not None:
            data["declaration"] = self.declaration
        data |= {
            "reason": self.reason,
            "approved_by": self.approved_by,
            "expires": self.expires.isoformat(),
            "location": {"file": self.location.file, "line": self.location.line},
        }
        return data


@dataclass(frozen=True)
class WaiverReport:
    """What a waiver file did to one run's findings."""

    file: str
    as_of: dt.date
    waived: tuple[tuple[Finding, Waiver], ...]
    unused: tuple[Waiver, ...]
    expired: tuple[Waiver, ...]

    def to_json(self) -> dict[str, Any]:
        return {
            "file": self.file,
            "as_of": self.as_of.isoformat(),
            "waived": len(self.waived),
            "unused": [w.to_json() for w in self.unused],
            "expired": [w.to_json() for w in self.expired],
        }


def waived_json(finding: Finding, waiver: Waiver) -> dict[str, Any]:
    return finding.to_json() | {"waiver": waiver.to_json()}


# --- reading ---------------------------------------------------------------------------


@lru_cache(maxsize=1)
def _schema() -> dict[str, Any]:
    text = resources.files("tracecheck").joinpath("schemas/waivers.schema.json").read_text("utf-8")
    return json.loads(text)


def _dates_as_text(value: Any) -> Any:
    """TOML dates become ``YYYY-MM-DD`` strings; a date-time stays recognisably wrong."""
    if isinstance(value, dt.datetime):
        return value.isoformat()
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, Mapping):
        return {k: _dates_as_text(v) for k, v in value.items()}
    if isinstance(value, list):
        return [_dates_as_text(v) for v in value]
    return value


def _header_lines(text: str) -> list[int]:
    return [n for n, line in enumerate(text.splitlines(), 1) if _HEADER.match(line)]


def _where(origin: str, path: Iterable[Any], lines: list[int]) -> str:
    parts = list(path)
    key = ""
    for part in parts:
        key += f"[{part}]" if isinstance(part, int) else (f".{part}" if key else str(part))
    line = None
    if len(parts) >= 2 and parts[0] == "waiver" and isinstance(parts[1], int) and parts[1] < len(lines):
        line = lines[parts[1]]
    return f"{origin}:{line}: {key}" if line else f"{origin}: {key or '(top level)'}"


def _schema_errors(document: Mapping[str, Any], origin: str, lines: list[int]) -> list[str]:
    import jsonschema

    validator = jsonschema.Draft202012Validator(_schema())
    details = []
    for error in sorted(validator.iter_errors(document), key=lambda e: [str(p) for p in e.absolute_path]):
        message = error.message
        if error.validator == "additionalProperties":
            message = message.replace("Additional properties are not allowed", "unknown key")
        elif error.validator == "oneOf":
            message = "give exactly one subject: 'element' or 'link'"
        elif error.validator == "pattern" and list(error.absolute_path)[-1:] == ["expires"]:
            message = f"{error.instance!r} is not a date (write YYYY-MM-DD)"
        details.append(f"{_where(origin, error.absolute_path, lines)}: {message}")
    return details


def _waiver(entry: Mapping[str, Any], location: Location, key: str) -> Waiver:
    try:
        expires = dt.date.fromisoformat(entry["expires"])
    except ValueError:
        raise InputError(
            f"{location}: {key}.expires: {entry['expires']!r} is not a calendar date."
        ) from None
    link = entry.get("link")
    return Waiver(
        rule=entry["rule"],
        element=entry.get("element"),
        link=None if link is None else (link["source"], link["target"], link["relation"]),
        declaration=entry.get("declaration"),
        reason=entry["reason"].strip(),
        approved_by=entry["approved_by"].strip(),
        expires=expires,
        location=location,
    )


def parse_waivers(data: bytes, origin: str) -> tuple[Waiver, ...]:
    """Validate a waiver file's bytes and build its waivers, in file order.

    Raises
    ------
    InputError
        Not UTF-8, not TOML, or against the schema; the message names the file, the
        line of the ``[[waiver]]`` table where known, and the key path.
    """
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(f"{origin}: the waiver file is not UTF-8 text.") from None
    try:
        document = _dates_as_text(tomllib.loads(text))
    except tomllib.TOMLDecodeError as error:
        raise InputError(f"{origin}: the waiver file is not valid TOML: {error}.") from None
    lines = _header_lines(text)
    details = _schema_errors(document, origin, lines)
    if details:
        raise InputError(f"{origin}: invalid waiver file:", details=details)
    waivers = []
    for n, entry in enumerate(document.get("waiver", [])):
        line = lines[n] if n < len(lines) else None
        waivers.append(_waiver(entry, Location(origin, line), f"waiver[{n}]"))
    return tuple(waivers)


def load_waivers(path: Path, origin: str | None = None) -> tuple[Waiver, ...]:
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"{path}: no such waiver file.") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a folder; give the waiver file.") from None
    except OSError as error:
        raise InputError(f"{path}: cannot read the waiver file ({error.strerror or error}).") from None
    return parse_waivers(data, origin or str(path))


def waiver_file_from_config(config: Config) -> Path | None:
    """``[gate] waivers = "FILE"`` in the configuration, relative to its folder."""
    name = config.section("gate").get("waivers")
    if name is None:
        return None
    if not isinstance(name, str) or not name:
        where = config.path or "configuration"
        raise InputError(f"{where}: gate.waivers: give the waiver file name as a string.")
    base = config.path.parent if config.path is not None else Path.cwd()
    return base / name


def today(option: str | None = None) -> dt.date:
    """The date expiry is judged against: the option, ``TRACECHECK_TODAY``, or the system date."""
    value = option or os.environ.get(TODAY_ENV)
    if not value:
        return dt.date.today()
    try:
        return dt.date.fromisoformat(value)
    except ValueError:
        source = "--today" if option else TODAY_ENV
        raise UsageError(f"{source}: {value!r} is not a date; write YYYY-MM-DD.") from None


# --- applying --------------------------------------------------------------------------


def _expired_findings(expired: list[Waiver], config: Config, on: dt.date) -> list[Finding]:
    from tracecheck.rules import rules

    info = rules()["waiver-expired"]
    if info.function is None or info.id in config.disabled or not expired:
        return []
    context = SimpleNamespace(model=Model([], []), config=config, waivers=expired, today=on)
    findings = []
    for hit in info.function(context):
        severity = hit.severity or config.severities.get(info.id, info.severity)
        findings.append(make_finding(info, hit, context.model, severity))
    return findings


def apply_waivers(
    findings: Iterable[Finding], waivers: Iterable[Waiver], config: Config, on: dt.date, file: str
) -> tuple[list[Finding], WaiverReport]:
    """Split findings into those still standing and those waived.

    Returns the standing findings (unwaived ones plus one ``waiver-expired`` finding per
    expired waiver), sorted, and the report of what was waived, unused and expired. An
    expired waiver waives nothing; it is not also reported as unused.
    """
    waivers = list(waivers)
    live = [w for w in waivers if not w.expired(on)]
    expired = [w for w in waivers if w.expired(on)]
    used: set[int] = set()
    standing, waived = [], []
    for finding in findings:
        match = next((n for n, w in enumerate(live) if w.matches(finding)), None)
        if match is None:
            standing.append(finding)
        else:
            used.add(match)
            waived.append((finding, live[match]))
    standing += _expired_findings(expired, config, on)
    unused = tuple(w for n, w in enumerate(live) if n not in used)
    report = WaiverReport(file, on, tuple(sorted(waived, key=lambda p: sort_key(p[0]))), unused, tuple(expired))
    return sorted(standing, key=sort_key), report
