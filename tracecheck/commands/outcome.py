"""What ``check`` and ``gate`` share after the rules ran: waivers, repository-relative
paths for CI reports, and the GitHub step summary."""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from tracecheck.config import Config
from tracecheck.errors import InputError
from tracecheck.rules.engine import Finding
from tracecheck.sources import split_rev_spec
from tracecheck.waivers import (
    WaiverReport,
    apply_waivers,
    load_waivers,
    today,
    waiver_file_from_config,
)

__all__ = ["Review", "apply_review", "ci_uri", "step_summary", "STEP_SUMMARY_LIMIT"]

# GitHub refuses a step summary above 1 MiB (from memory of its documentation); stay under.
STEP_SUMMARY_LIMIT = 1024 * 1024 - 4096


@dataclass(frozen=True)
class Review:
    findings: list[Finding]
    waivers: WaiverReport | None
    waiver_path: Path | None

    def config_inputs(self, config: Config) -> list[dict[str, Any]]:
        import hashlib

        entries = []
        if config.path is not None:
            entries.append({"role": "config", "path": str(config.path), "sha256": config.sha256})
        if self.waiver_path is not None:
            digest = hashlib.sha256(self.waiver_path.read_bytes()).hexdigest()
            entries.append({"role": "waivers", "path": self.waivers.file, "sha256": digest})
        return entries

    def uris(self, root: Path | None) -> dict[str, str]:
        if self.waivers is None or self.waiver_path is None:
            return {}
        return {self.waivers.file: ci_uri(str(self.waiver_path), root)}


def apply_review(
    findings: list[Finding],
    config: Config,
    cwd: Path,
    *,
    waivers_option: str | None = None,
    today_option: str | None = None,
    old: set[int] | None = None,
) -> Review:
    """Apply the waiver file (``--waivers``, else ``[gate] waivers`` of the configuration).

    ``old`` holds the ids of findings that are not new (the gate's pre-existing ones):
    they may use a waiver but are neither reported nor listed as waived.
    """
    old = old or set()
    path = Path(waivers_option) if waivers_option else waiver_file_from_config(config)
    if path is None:
        return Review([f for f in findings if id(f) not in old], None, None)
    display = os.path.relpath(path, cwd) if path.is_absolute() else str(path)
    on = today(today_option)
    standing, report = apply_waivers(findings, load_waivers(path, display), config, on, display)
    report = WaiverReport(
        report.file, report.as_of, tuple(p for p in report.waived if id(p[0]) not in old),
        report.unused, report.expired,
    )
    return Review([f for f in standing if id(f) not in old], report, path)


def ci_uri(origin: str, root: Path | None) -> str:
    """A display origin as a POSIX path from the repository root (CI tools want that)."""
    rev_spec = split_rev_spec(origin)
    path = Path(rev_spec[1] if rev_spec else origin)
    if root is not None:
        try:
            return (Path.cwd() / path).resolve().relative_to(root.resolve()).as_posix()
        except ValueError:
            pass
    return path.as_posix()


def step_summary(markdown: str, path: Path) -> None:
    """Append the Markdown summary to the file GitHub names in ``GITHUB_STEP_SUMMARY``."""
    data = markdown.encode("utf-8")
    if len(data) > STEP_SUMMARY_LIMIT:
        cut = data[:STEP_SUMMARY_LIMIT].decode("utf-8", "ignore").rsplit("\n", 1)[0]
        data = (cut + "\n\n_Summary cut at the 1 MiB limit; see the uploaded report._\n").encode("utf-8")
    try:
        with path.open("ab") as handle:
            handle.write(data + (b"" if data.endswith(b"\n") else b"\n"))
    except OSError as error:
        raise InputError(f"{path}: cannot append the step summary ({error.strerror or error}).") from None
