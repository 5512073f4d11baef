"""Baselines: an earlier ``check --format json`` report whose findings are not repeated.

For repositories outside git, or a frozen audit baseline: findings whose fingerprint
the baseline already lists are set aside, the rest are reported as usual. Fingerprints
never depend on line numbers or messages, so a baseline survives unrelated edits.
A ``gate --format json`` document is accepted too (its ``findings`` are the new ones).
"""

from __future__ import annotations

import json
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from tracecheck.errors import InputError
from tracecheck.rules.engine import Finding

__all__ = ["Baseline", "load_baseline", "parse_baseline", "apply_baseline"]


@dataclass(frozen=True)
class Baseline:
    origin: str
    fingerprints: frozenset[str]


def _fail(origin: str, where: str, what: str) -> InputError:
    return InputError(
        f"{origin}: not a tracecheck check report usable as a baseline ({where}: {what}); "
        "give a file written by 'tracecheck check --format json'."
    )


def parse_baseline(data: bytes, origin: str) -> Baseline:
    try:
        document = json.loads(data.decode("utf-8"))
    except UnicodeDecodeError:
        raise _fail(origin, "$", "not UTF-8 text") from None
    except json.JSONDecodeError as error:
        raise InputError(
            f"{origin}:{error.lineno}: the baseline is not valid JSON ({error.msg}, column {error.colno})."
        ) from None
    if not isinstance(document, dict):
        raise _fail(origin, "$", "the top level is not an object")
    findings = document.get("findings")
    if not isinstance(findings, list):
        raise _fail(origin, "$.findings", "missing or not a list")
    prints = set()
    for n, item in enumerate(findings):
        fingerprint = item.get("fingerprint") if isinstance(item, dict) else None
        if not isinstance(fingerprint, str) or not fingerprint:
            raise _fail(origin, f"$.findings[{n}].fingerprint", "missing or not a string")
        prints.add(fingerprint)
    return Baseline(origin, frozenset(prints))


def load_baseline(path: Path) -> Baseline:
    try:
        return parse_baseline(path.read_bytes(), str(path))
    except FileNotFoundError:
        raise InputError(f"{path}: no such baseline file.") from None
    except IsADirectoryError:
        raise InputError(f"{path}: is a folder; give the baseline report file.") from None
    except OSError as error:
        raise InputError(f"{path}: cannot read the baseline ({error.strerror or error}).") from None


def apply_baseline(findings: Iterable[Finding], baseline: Baseline) -> tuple[list[Finding], dict[str, Any]]:
    """The findings the baseline does not list, and a summary of the comparison."""
    findings = list(findings)
    kept = [f for f in findings if f.fingerprint not in baseline.fingerprints]
    current = {f.fingerprint for f in findings}
    summary = {
        "file": baseline.origin,
        "findings": len(baseline.fingerprints),
        "matched": len(findings) - len(kept),
        "gone": len(baseline.fingerprints - current),
    }
    return kept, summary
