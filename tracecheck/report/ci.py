"""Reports for CI systems, for ``check`` and ``gate`` alike: SARIF 2.1.0, JUnit XML and
GitHub workflow-command annotations.

Each is a function of the result alone. For a gate, ``findings`` are the new ones, so
these reports carry only what a change introduced (SARIF marks them
``baselineState: new``); waived findings appear as suppressed (SARIF), skipped (JUnit)
or notices (annotations), never as failures.
"""

from __future__ import annotations

import json
import re
from collections.abc import Iterable
from typing import Any
from urllib.parse import quote

from lxml import etree

from tracecheck.caution import caution
from tracecheck.check import CheckResult
from tracecheck.report import RenderOptions, renderer
from tracecheck.rules import rules
from tracecheck.rules.engine import SEVERITY_RANK, Finding, sort_key

__all__ = [
    "sarif",
    "junit",
    "github",
    "escape_data",
    "escape_property",
    "ANNOTATION_CAP",
    "SARIF_SCHEMA_URI",
    "uri_of",
]

# The schema's published address (from memory of the OASIS SARIF 2.1.0 errata01 page).
SARIF_SCHEMA_URI = "https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/sarif-schema-2.1.0.json"
FINGERPRINT_KEY = "tracecheck/v1"
# Annotations beyond this number are summarised in one closing line; CI systems show only
# a few dozen per step anyway (common practice, no source).
ANNOTATION_CAP = 50
CAUTION = caution("These results support")


def _is_gate(result: CheckResult) -> bool:
    return hasattr(result, "resolved")


def uri_of(result: CheckResult, finding: Finding) -> str | None:
    if finding.location is None:
        return None
    return result.uris.get(finding.location.file, finding.location.file)


def _rule_ids(result: CheckResult) -> list[str]:
    return sorted(result.rule_ids or rules())


def _model_uris(result: CheckResult) -> list[str]:
    uris = [result.uris.get(i["path"], i["path"]) for i in result.inputs if i["role"] == "model"]
    return list(dict.fromkeys(uris))


# --- SARIF -----------------------------------------------------------------------------


def _sarif_rule(info) -> dict[str, Any]:
    return {
        "id": info.id,
        "shortDescription": {"text": info.short},
        "fullDescription": {"text": info.full},
        "help": {"text": info.help},
        "defaultConfiguration": {"level": info.severity},
    }


def _sarif_location(uri: str | None, line: int | None) -> list[dict[str, Any]]:
    if uri is None or uri == "<stdin>":
        return []
    # A URI reference: characters outside RFC 3986's path characters are %-encoded.
    physical: dict[str, Any] = {"artifactLocation": {"uri": quote(uri, safe="/!$&'()*+,;=:@-._~")}}
    if line is not None and line >= 1:
        physical["region"] = {"startLine": line}
    return [{"physicalLocation": physical}]


def _sarif_result(result: CheckResult, finding: Finding, index: dict[str, int], waiver=None) -> dict[str, Any]:
    entry: dict[str, Any] = {
        "ruleId": finding.rule,
        "level": finding.severity,
        "message": {"text": finding.message},
        "locations": _sarif_location(uri_of(result, finding), finding.location.line if finding.location else None),
        "partialFingerprints": {FINGERPRINT_KEY: finding.fingerprint},
        "properties": {k: v for k, v in finding.to_json().items()
                       if k in ("elements", "link", "declaration") and v is not None},
    }
    if finding.rule in index:
        entry["ruleIndex"] = index[finding.rule]
    if not entry["locations"]:
        del entry["locations"]
    if _is_gate(result):
        entry["baselineState"] = "new"
    if waiver is not None:
        entry["suppressions"] = [{
            "kind": "external",
            "status": "accepted",
            "justification": waiver.reason,
            "location": _sarif_location(result.uris.get(waiver.location.file, waiver.location.file),
                                        waiver.location.line)[0],
            "properties": {"approved_by": waiver.approved_by, "expires": waiver.expires.isoformat()},
        }]
    return entry


def _notifications(result: CheckResult) -> list[dict[str, Any]]:
    notes: list[dict[str, Any]] = [{"level": "note", "message": {"text": text}} for text in result.notes]
    if result.waivers is not None:
        for waiver in result.waivers.unused:
            uri = result.uris.get(waiver.location.file, waiver.location.file)
            notes.append({
                "level": "warning",
                "message": {"text": f"unused waiver: {waiver.rule} on {waiver.subject} matches no finding"},
                "locations": _sarif_location(uri, waiver.location.line),
            })
    return notes


@renderer("check", "sarif")
@renderer("gate", "sarif")
def sarif(result: CheckResult, options: RenderOptions) -> str:
    catalogue = rules()
    ids = [r for r in _rule_ids(result) if r in catalogue]
    index = {rule_id: n for n, rule_id in enumerate(ids)}
    results = [_sarif_result(result, f, index) for f in result.findings]
    results += [_sarif_result(result, f, index, w) for f, w in result.waived]
    invocation: dict[str, Any] = {"executionSuccessful": True}
    notifications = _notifications(result)
    if notifications:
        invocation["toolExecutionNotifications"] = notifications
    run = {
        "tool": {"driver": {
            "name": "tracecheck",
            "version": result.tool["version"],
            "semanticVersion": result.tool["version"],
            "rules": [_sarif_rule(catalogue[r]) for r in ids],
        }},
        "invocations": [invocation],
        "results": results,
        "properties": {"summary": result.summary(), "caution": CAUTION},
    }
    document = {"$schema": SARIF_SCHEMA_URI, "version": "2.1.0", "runs": [run]}
    return json.dumps(document, indent=2, ensure_ascii=False) + "\n"


# --- JUnit -----------------------------------------------------------------------------

_XML_ILLEGAL = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ufffe\uffff]")


def _xml_text(text: str) -> str:
    """Characters XML 1.0 cannot carry are shown as U+FFFD."""
    return _XML_ILLEGAL.sub("\ufffd", str(text))


def _detail(finding: Finding, result: CheckResult) -> str:
    lines = [f"severity: {finding.severity}", f"message: {finding.message}"]
    if finding.location is not None:
        line = f":{finding.location.line}" if finding.location.line else ""
        lines.append(f"location: {uri_of(result, finding)}{line}")
    if finding.elements:
        lines.append(f"elements: {', '.join(finding.elements)}")
    if finding.link is not None:
        lines.append(f"link: {finding.link[0]} {finding.link[2]} {finding.link[1]}")
    if finding.declaration:
        lines.append(f"declaration: {finding.declaration}")
    lines.append(f"fingerprint: {finding.fingerprint}")
    return "\n".join(_xml_text(line) for line in lines)


def _group(result: CheckResult, pairs: Iterable[tuple[Finding, Any]], default: str) -> dict[tuple[str, str], list]:
    groups: dict[tuple[str, str], list] = {}
    for finding, waiver in pairs:
        key = (uri_of(result, finding) or default, finding.rule)
        groups.setdefault(key, []).append((finding, waiver))
    return groups


def _counts(element) -> None:
    cases = element.findall("testcase")
    element.set("tests", str(len(cases)))
    element.set("failures", str(sum(len(c.findall("failure")) > 0 for c in cases)))
    element.set("errors", "0")
    element.set("skipped", str(sum(len(c.findall("skipped")) > 0 for c in cases)))


def _testcase(suite, uri: str, rule_id: str, items: list, result: CheckResult) -> None:
    case = etree.SubElement(suite, "testcase", classname=_xml_text(uri), name=rule_id)
    failures = [f for f, w in items if w is None]
    waived = [(f, w) for f, w in items if w is not None]
    for finding in failures:
        failure = etree.SubElement(case, "failure", type=rule_id, message=_xml_text(finding.message))
        failure.text = _detail(finding, result)
    if waived:
        text = "\n\n".join(
            f"{_detail(f, result)}\nwaived: {_xml_text(w.reason)} (approved by "
            f"{_xml_text(w.approved_by)}, until {w.expires.isoformat()})" for f, w in waived)
        if failures:
            etree.SubElement(case, "system-out").text = text
        else:
            skipped = etree.SubElement(case, "skipped", message=f"{len(waived)} waived finding(s)")
            skipped.text = text


@renderer("check", "junit")
@renderer("gate", "junit")
def junit(result: CheckResult, options: RenderOptions) -> bytes:
    models = _model_uris(result) or ["(model)"]
    pairs = [(f, None) for f in result.findings] + list(result.waived)
    groups = _group(result, pairs, models[0])
    command = "gate" if _is_gate(result) else "check"
    root = etree.Element("testsuites", name=f"tracecheck {command}")
    for uri in sorted(set(models) | {u for u, _ in groups}):
        suite = etree.SubElement(root, "testsuite", name=_xml_text(uri))
        wanted = _rule_ids(result) if uri in models else []
        for rule_id in sorted(set(wanted) | {r for u, r in groups if u == uri}):
            _testcase(suite, uri, rule_id, groups.get((uri, rule_id), []), result)
        _counts(suite)
    for name in ("tests", "failures", "errors", "skipped"):
        root.set(name, str(sum(int(s.get(name)) for s in root)))
    return etree.tostring(root, xml_declaration=True, encoding="UTF-8", pretty_print=True)


# --- GitHub workflow commands ----------------------------------------------------------


def escape_data(text: str) -> str:
    """Escape the message of a workflow command: % CR LF (from memory of GitHub's
    runner toolkit, ``escapeData`` in its command module)."""
    return str(text).replace("%", "%25").replace("\r", "%0D").replace("\n", "%0A")


def escape_property(text: str) -> str:
    """Escape a property value: % CR LF, and also : and , which separate properties
    (from memory of GitHub's runner toolkit, ``escapeProperty``)."""
    return escape_data(text).replace(":", "%3A").replace(",", "%2C")


_LEVEL = {"error": "error", "warning": "warning", "note": "notice"}


def _command(level: str, message: str, *, file: str | None = None, line: int | None = None,
             title: str | None = None) -> str:
    props = []
    if file:
        props.append(f"file={escape_property(file)}")
    if file and line:
        props.append(f"line={line}")
    if title:
        props.append(f"title={escape_property(title)}")
    head = f"::{level} {','.join(props)}" if props else f"::{level}"
    return f"{head}::{escape_data(message)}"


def _annotations(result: CheckResult) -> list[str]:
    lines = []
    ordered = sorted(result.findings, key=lambda f: (-SEVERITY_RANK[f.severity], sort_key(f)))
    new = "new " if _is_gate(result) else ""
    for f in ordered:
        lines.append(_command(_LEVEL[f.severity], f.message, file=uri_of(result, f),
                              line=f.location.line if f.location else None,
                              title=f"tracecheck {new}{f.rule}"))
    for f, w in result.waived:
        lines.append(_command("notice", f"{f.message} -- waived: {w.reason} (approved by {w.approved_by}, "
                              f"until {w.expires.isoformat()})", file=uri_of(result, f),
                              line=f.location.line if f.location else None,
                              title=f"tracecheck waived {f.rule}"))
    if result.waivers is not None:
        for w in result.waivers.unused:
            lines.append(_command("warning", f"unused waiver: {w.rule} on {w.subject} matches no finding",
                                  file=result.uris.get(w.location.file, w.location.file),
                                  line=w.location.line, title="tracecheck unused waiver"))
    lines += [_command("notice", note, title="tracecheck") for note in result.notes]
    return lines


def _verdict(result: CheckResult) -> str:
    summary = result.summary()
    status = "FAIL" if summary["failed"] else "PASS"
    what = "new finding" if _is_gate(result) else "finding"
    total = summary["findings"]
    text = f"tracecheck: {status}: {total} {what}{'s' if total != 1 else ''}"
    if _is_gate(result):
        text += f", {summary['resolved']} resolved"
    if "waived" in summary:
        text += f", {summary['waived']} waived"
    return text + f"; failing at {result.fail_on} or above."


@renderer("check", "github")
@renderer("gate", "github")
def github(result: CheckResult, options: RenderOptions) -> str:
    lines = _annotations(result)
    shown = lines[:ANNOTATION_CAP]
    if len(lines) > ANNOTATION_CAP:
        more = len(lines) - ANNOTATION_CAP
        shown.append(_command("warning", f"{more} more annotation{'s' if more != 1 else ''} not shown; "
                              "see the SARIF or JSON report for all of them.", title="tracecheck"))
    shown.append(_verdict(result))
    return "\n".join(shown) + "\n"
