"""Coverage profiles: declaration sets that follow a standard's traceability obligations.

A profile is configuration in the shape of ``tracecheck.toml`` (``coverage`` and
``required_attributes`` tables), merged under the user's own configuration: the
profile replaces the five default declarations, the user's declarations of the same
name replace the profile's, and required attributes are joined.

Every declaration names the clause it follows. The clause numbers and their wording
were written down **from memory** of the published standards, not copied from them;
check them against your copy before relying on a profile. A profile is an aid for
arranging evidence; it is not a compliance claim and does not make a project
conform to any standard.

Attribute conventions the profiles share: ``level`` says where a requirement sits in
the hierarchy, ``status`` its review state, ``integrity`` the integrity level the
standard assigns (an ASIL for road vehicles).
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from tracecheck.errors import UsageError

__all__ = ["Profile", "PROFILES", "get_profile", "merge_profile", "PROFILE_NOTE"]

PROFILE_NOTE = (
    "A profile is an aid for arranging traceability evidence, not a compliance claim: "
    "meeting its declarations does not show conformity to the standard it follows. "
    "Its clause references were written from memory; check them against the standard."
)

_UP = ["derives_from", "refines"]
_REALISERS = ["function", "component", "interface"]


@dataclass(frozen=True)
class Profile:
    name: str
    title: str
    standard: str
    settings: Mapping[str, Any]

    @property
    def sha256(self) -> str:
        """Hash of the profile's content, so the evidence pins what was applied."""
        text = json.dumps(self.settings, sort_keys=True, separators=(",", ":"))
        return hashlib.sha256(text.encode("utf-8")).hexdigest()

    def clauses(self) -> dict[str, str]:
        return {name: spec["clause"] for name, spec in self.settings["coverage"].items()}


def _declaration(clause: str, description: str, **spec: Any) -> dict[str, Any]:
    # "clause" travels with the declaration for the reports; it is stripped before the
    # mapping reaches the configuration schema.
    return {"clause": clause, "description": description, **spec}


AIRBORNE = Profile(
    "airborne-software",
    "Airborne software: bidirectional trace system -> high-level -> low-level requirements -> tests",
    "DO-178C (from memory: 5.5 development traceability, 6.5 verification traceability, "
    "6.4.4.1 requirements-based test coverage)",
    {
        "required_attributes": {"requirement": ["level"]},
        "coverage": {
            "system-to-high-level": _declaration(
                "DO-178C 5.5 a (from memory)",
                "Every system requirement allocated to software is developed into high-level requirements.",
                elements="requirement", where={"level": "system"}, incoming=_UP, **{"from": ["requirement"]},
            ),
            "high-level-to-system": _declaration(
                "DO-178C 5.5 a (from memory)",
                "Every high-level requirement traces up to a system requirement (derived ones are reported here for the safety assessment).",
                elements="requirement", where={"level": "high"}, outgoing=_UP, to=["requirement"],
            ),
            "high-level-to-low-level": _declaration(
                "DO-178C 5.5 b (from memory)",
                "Every high-level requirement is developed into low-level requirements.",
                elements="requirement", where={"level": "high"}, incoming=_UP, **{"from": ["requirement"]},
            ),
            "low-level-to-high-level": _declaration(
                "DO-178C 5.5 b (from memory)",
                "Every low-level requirement traces up to a high-level requirement.",
                elements="requirement", where={"level": "low"}, outgoing=_UP, to=["requirement"],
            ),
            "high-level-tested": _declaration(
                "DO-178C 6.4.4.1 a and 6.5 a (from memory)",
                "Every high-level requirement has test cases.",
                elements="requirement", where={"level": "high"}, incoming="verifies", **{"from": ["test"]},
            ),
            "low-level-tested": _declaration(
                "DO-178C 6.4.4.1 a and 6.5 a (from memory)",
                "Every low-level requirement has test cases.",
                elements="requirement", where={"level": "low"}, incoming="verifies", **{"from": ["test"]},
            ),
            "test-to-requirement": _declaration(
                "DO-178C 6.5 a (from memory)",
                "Every test case traces to a requirement.",
                elements="test", outgoing="verifies", to=["requirement"],
            ),
        },
    },
)

ROAD = Profile(
    "road-vehicles",
    "Road vehicles: safety requirements with id, status and ASIL, traced to source, derivation and verification",
    "ISO 26262-8:2018 clause 6 (from memory: 6.4.2 attributes, 6.4.3 traceability)",
    {
        "required_attributes": {"requirement": ["status", "integrity"]},
        "coverage": {
            "safety-requirement-source": _declaration(
                "ISO 26262-8 6.4.3 a (from memory)",
                "Every safety requirement below the top level traces to its source at the level above.",
                elements="requirement", where={"level": ["subsystem", "software", "hardware"]},
                outgoing=_UP, to=["requirement"],
            ),
            "safety-requirement-realised": _declaration(
                "ISO 26262-8 6.4.3 b (from memory)",
                "Every safety requirement traces to derived requirements below it or to its realisation in the design.",
                elements="requirement", incoming=[*_UP, "satisfies"], **{"from": ["requirement", *_REALISERS]},
            ),
            "safety-requirement-verified": _declaration(
                "ISO 26262-8 6.4.3 c (from memory)",
                "Every safety requirement traces to its verification.",
                elements="requirement", incoming="verifies", **{"from": ["test"]},
            ),
            "hazard-mitigated": _declaration(
                "ISO 26262-3 clause 6 safety goals, via ISO 26262-8 6.4.3 a (from memory)",
                "Every hazard is addressed by a safety requirement or design element.",
                elements="hazard", incoming="mitigates", **{"from": ["requirement", "function", "component"]},
            ),
            "test-verifies": _declaration(
                "ISO 26262-8 6.4.3 c, the other direction (from memory)",
                "Every verification traces to something that exists.",
                elements="test", outgoing="verifies", to=["requirement", *_REALISERS],
            ),
        },
    },
)

MEDICAL = Profile(
    "medical-software",
    "Medical device software: software requirements traced to system requirements, risk controls and system tests",
    "IEC 62304:2006+A1:2015 (from memory: 5.1.1 planning of traceability, 5.2.6 verifying software requirements)",
    {
        "required_attributes": {"requirement": ["level"]},
        "coverage": {
            "software-requirement-to-system": _declaration(
                "IEC 62304 5.2.6 and 5.1.1 (from memory)",
                "Every software requirement traces to a system requirement or other source.",
                elements="requirement", where={"level": "software"}, outgoing=_UP, to=["requirement"],
            ),
            "software-requirement-system-tested": _declaration(
                "IEC 62304 5.1.1 (from memory)",
                "Every software requirement traces to a software system test.",
                elements="requirement", where={"level": "software"}, incoming="verifies", **{"from": ["test"]},
            ),
            "risk-control-traced": _declaration(
                "IEC 62304 5.1.1 and 5.2.6 (from memory)",
                "Every hazard traces to a risk control measure (a requirement, function or component).",
                elements="hazard", incoming="mitigates", **{"from": ["requirement", "function", "component"]},
            ),
            "system-test-traced": _declaration(
                "IEC 62304 5.1.1 (from memory)",
                "Every software system test traces to a requirement.",
                elements="test", outgoing="verifies", to=["requirement"],
            ),
        },
    },
)

PROFILES: dict[str, Profile] = {p.name: p for p in (AIRBORNE, ROAD, MEDICAL)}


def get_profile(name: str) -> Profile:
    try:
        return PROFILES[name]
    except KeyError:
        raise UsageError(
            f"unknown profile {name!r}; known profiles: {', '.join(sorted(PROFILES))}."
        ) from None


def merge_profile(profile: Profile, user: Mapping[str, Any]) -> dict[str, Any]:
    """The user's configuration mapping with ``profile`` beneath it.

    The profile's declarations replace the five defaults unless the user's
    ``[rules] default_coverage`` says otherwise; a user declaration of the same name
    wins; required attributes are joined (sorted, each once).
    """
    merged: dict[str, Any] = {k: v for k, v in user.items()}
    coverage = {
        name: {k: v for k, v in spec.items() if k != "clause"}
        for name, spec in profile.settings["coverage"].items()
    }
    coverage.update(user.get("coverage", {}))
    merged["coverage"] = coverage
    required: dict[str, list[str]] = {}
    for source in (profile.settings.get("required_attributes", {}), user.get("required_attributes", {})):
        for kind, names in source.items():
            required[kind] = sorted({*required.get(kind, []), *names})
    merged["required_attributes"] = required
    rules = dict(user.get("rules", {}))
    rules.setdefault("default_coverage", False)
    merged["rules"] = rules
    return merged
