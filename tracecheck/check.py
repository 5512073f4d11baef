"""The result of ``check``: findings over one model, and what decides the exit code."""

from __future__ import annotations

import hashlib
import platform
from collections import Counter
from dataclasses import dataclass, field
from typing import Any

from tracecheck import __version__
from tracecheck.config import Config
from tracecheck.model import Model
from tracecheck.rules.engine import SEVERITY_RANK, Finding, run_rules

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
        }

    def to_json(self) -> dict[str, Any]:
        return {
            "tool": self.tool,
            "inputs": self.inputs,
            "findings": [f.to_json() for f in self.findings],
            "summary": self.summary(),
        }


def check_model(model: Model, data: bytes, config: Config, *, fail_on: str = "error") -> CheckResult:
    return CheckResult(run_rules(model, config), input_info(model, data, config), fail_on)
