"""The result of ``check``: findings over one model, and what decides the exit code."""

from __future__ import annotations

import hashlib
import platform
from collections import Counter
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from tracecheck import __version__
from tracecheck.config import Config
from tracecheck.model import Model
from tracecheck.rules.engine import SEVERITY_RANK, Finding, run_rules

if TYPE_CHECKING:
    from tracecheck.waivers import WaiverReport

__all__ = ["CheckResult", "check_model", "tool_info", "input_info", "at_or_above"]


def tool_info() -> dict[str, Any]:
    return {"name": "tracecheck", "version": __version__, "python": platform.python_version()}


def input_info(model: Model, data: bytes, config: Config) -> list[dict[str, Any]]:
    """The evidence of what was read: model file hash and counts, configuration hash."""
    inputs: list[dict[str, Any]] = [
        {
            "role": "model",
            "path": model.origin,
            "format": model.format,
            "sha256": hashlib.sha256(data).hexdigest(),
            "elements": model.element_count,
            "links": model.link_count,
        }
    ]
    if config.path is not None:
        inputs.append({"role": "config", "path": str(config.path), "sha256": config.sha256})
    return inputs


def at_or_above(severity: str, threshold: str) -> bool:
    return SEVERITY_RANK[severity] >= SEVERITY_RANK[threshold]


@dataclass(frozen=True)
class CheckResult:
    """Findings of one check run and the threshold that decides failure."""

    findings: list[Finding]
    inputs: list[dict[str, Any]]
    fail_on: str = "error"
    tool: dict[str, Any] = field(default_factory=tool_info)
    # Added by the gate capability; all optional so a plain check is unchanged.
    waivers: WaiverReport | None = None  # what a waiver file accepted (waived findings)
    baseline: dict[str, Any] | None = None  # an earlier report whose findings are not repeated
    rule_ids: tuple[str, ...] = ()  # the rules that ran (SARIF and JUnit list them)
    uris: dict[str, str] = field(default_factory=dict)  # origin -> path from the repository root
    notes: tuple[str, ...] = ()  # things the user must know that are not findings

    @property
    def waived(self) -> list[tuple[Finding, Any]]:
        return list(self.waivers.waived) if self.waivers else []

    @property
    def failing(self) -> list[Finding]:
        return [f for f in self.findings if at_or_above(f.severity, self.fail_on)]

    @property
    def exit_code(self) -> int:
        return 1 if self.failing else 0

    def summary(self) -> dict[str, Any]:
        severities = Counter(f.severity for f in self.findings)
        return {
            "findings": len(self.findings),
            "by_severity": {s: severities.get(s, 0) for s in ("error", "warning", "note")},
            "by_rule": dict(sorted(Counter(f.rule for f in self.findings).items())),
            "fail_on": self.fail_on,
            "failed": bool(self.failing),
        } | self._extra_summary()

    def _extra_summary(self) -> dict[str, Any]:
        extra: dict[str, Any] = {}
        if self.waivers is not None:
            extra["waived"] = len(self.waivers.waived)
            extra["unused_waivers"] = len(self.waivers.unused)
        if self.baseline is not None:
            extra["in_baseline"] = self.baseline["matched"]
        return extra

    def to_json(self) -> dict[str, Any]:
        return {
            "tool": self.tool,
            "inputs": self.inputs,
            "findings": [f.to_json() for f in self.findings],
            "summary": self.summary(),
        } | self._extra_json()

    def _extra_json(self) -> dict[str, Any]:
        from tracecheck.waivers import waived_json

        extra: dict[str, Any] = {}
        if self.waivers is not None:
            extra["waived"] = [waived_json(f, w) for f, w in self.waivers.waived]
            extra["waivers"] = self.waivers.to_json()
        if self.baseline is not None:
            extra["baseline"] = self.baseline
        if self.notes:
            extra["notes"] = list(self.notes)
        return extra


def check_model(model: Model, data: bytes, config: Config, *, fail_on: str = "error") -> CheckResult:
    return CheckResult(run_rules(model, config), input_info(model, data, config), fail_on)
