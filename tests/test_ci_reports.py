"""SARIF, JUnit and GitHub annotations, checked against outside references."""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from click.testing import CliRunner
from lxml import etree

from tests.conftest import git, shared_file, write_thread
from tracecheck.cli import cli
from tracecheck.commands.outcome import STEP_SUMMARY_LIMIT, step_summary
from tracecheck.report import formats_for
from tracecheck.report.ci import ANNOTATION_CAP, escape_data, escape_property
from tracecheck.rules import rules

NO_DEFAULTS = "[rules]\ndefault_coverage = false\n"
WAIVER = """\
[[waiver]]
rule = "dangling-link"
link = { source = "REQ-1", target = "GONE-0", relation = "traces_to" }
reason = "Exported with the shore-side model: 50%, see note A,B."
approved_by = "Charging system lead"
expires = 2027-03-31

[[waiver]]
rule = "self-link"
element = "REQ-404"
reason = "left over"
approved_by = "Operator panel owner"
expires = 2027-03-31
"""


def run(*args: str, **env):
    return CliRunner(env=env or None).invoke(cli, list(args), catch_exceptions=False)


def dangling(n: int, source: str = "REQ-1") -> list[dict]:
    return [{"source": source, "target": f"GONE-{i}", "relation": "traces_to"} for i in range(n)]


@pytest.fixture
def sarif_validator():
    import jsonschema

    # The OASIS SARIF 2.1.0 schema (errata01), a JSON Schema draft-04 document.
    schema = json.loads(shared_file("sarif-schema-2.1.0.json").read_text("utf-8"))
    return jsonschema.Draft4Validator(schema)


@pytest.fixture
def model(tmp_path) -> Path:
    (tmp_path / "tracecheck.toml").write_text(NO_DEFAULTS)
    (tmp_path / "waivers.toml").write_text(WAIVER)
    return write_thread(tmp_path / "thread.json", [{"id": "REQ-1", "kind": "requirement"}], dangling(3))


def test_every_ci_format_is_registered_for_check_and_gate():
    for command in ("check", "gate"):
        assert {"sarif", "junit", "github", "markdown", "json", "text"} <= set(formats_for(command))


def test_check_sarif_validates_and_carries_rules_results_and_suppressions(model, sarif_validator):
    result = run("check", "--format", "sarif", "--waivers", "waivers.toml", "--today", "2026-12-01", "thread.json")
    assert result.exit_code == 1
    doc = json.loads(result.stdout)
    errors = sorted(sarif_validator.iter_errors(doc), key=str)
    assert not errors, errors[0].message
    run_ = doc["runs"][0]
    driver_rules = run_["tool"]["driver"]["rules"]
    assert [r["id"] for r in driver_rules] == sorted(rules())
    for rule in driver_rules:
        assert rule["shortDescription"]["text"] and rule["fullDescription"]["text"] and rule["help"]["text"]
    findings = json.loads(run("check", "--format", "json", "--waivers", "waivers.toml", "--today", "2026-12-01",
                              "thread.json").stdout)
    active = [r for r in run_["results"] if "suppressions" not in r]
    assert len(active) == len(findings["findings"]) == 2
    for res, finding in zip(active, findings["findings"], strict=True):
        assert res["ruleId"] == finding["rule"] and res["level"] == finding["severity"]
        assert res["message"]["text"] == finding["message"]
        assert res["partialFingerprints"]["tracecheck/v1"] == finding["fingerprint"]
        assert driver_rules[res["ruleIndex"]]["id"] == res["ruleId"]
        where = res["locations"][0]["physicalLocation"]
        assert where["artifactLocation"]["uri"] == "thread.json"
        assert where["region"]["startLine"] == finding["location"]["line"]
    (waived,) = [r for r in run_["results"] if "suppressions" in r]
    assert waived["suppressions"][0]["justification"].startswith("Exported with the shore-side model")
    assert waived["suppressions"][0]["status"] == "accepted"
    notes = run_["invocations"][0]["toolExecutionNotifications"]
    assert any("unused waiver" in n["message"]["text"] and "REQ-404" in n["message"]["text"] for n in notes)


def test_sarif_uri_is_relative_to_the_repository_root(tmp_path, sarif_validator):
    git(tmp_path, "init", "-q", "-b", "main")
    (tmp_path / "tracecheck.toml").write_text(NO_DEFAULTS)
    sub = tmp_path / "exports" / "stage"
    sub.mkdir(parents=True)
    write_thread(sub / "thread.json", [{"id": "REQ-1", "kind": "requirement"}], dangling(1))
    os.chdir(sub)
    doc = json.loads(run("check", "--format", "sarif", "thread.json").stdout)
    assert not list(sarif_validator.iter_errors(doc))
    uri = doc["runs"][0]["results"][0]["locations"][0]["physicalLocation"]["artifactLocation"]["uri"]
    assert uri == "exports/stage/thread.json"


def test_junit_parses_back_with_one_suite_per_model_file(tmp_path):
    root = tmp_path / "repo"
    (root / "model").mkdir(parents=True)
    git(root, "init", "-q", "-b", "main")
    (root / "tracecheck.toml").write_text(NO_DEFAULTS)
    (root / "waivers.toml").write_text(WAIVER)
    write_thread(root / "model" / "a.json", [{"id": "REQ-1", "kind": "requirement"}], [])
    write_thread(root / "model" / "b.json", [{"id": "REQ-1", "kind": "requirement"}], [])
    git(root, "add", "-A")
    git(root, "commit", "-qm", "base")
    write_thread(root / "model" / "a.json", [{"id": "REQ-1", "kind": "requirement"}], dangling(3))
    write_thread(root / "model" / "b.json", [{"id": "REQ-1", "kind": "requirement"}, {"id": "REQ-1", "kind": "requirement"}], [])
    os.chdir(root)
    args = ["--waivers", "waivers.toml", "--today", "2026-12-01", "model/a.json", "model/b.json"]
    result = run("gate", "--format", "junit", *args)
    assert result.exit_code == 1
    tree = etree.fromstring(result.stdout.encode("utf-8"))
    suites = tree.findall("testsuite")
    assert [s.get("name") for s in suites] == ["model/a.json", "model/b.json"]
    doc = json.loads(run("gate", "--format", "json", *args).stdout)
    for suite in suites:
        names = [case.get("name") for case in suite.findall("testcase")]
        assert names == sorted(rules())  # one test case per rule
        failures = suite.findall("testcase/failure")
        expected = [f for f in doc["findings"] if f["location"]["file"] == suite.get("name")]
        assert len(failures) == len(expected)
        assert sorted(f.get("type") for f in failures) == sorted(f["rule"] for f in expected)
        assert int(suite.get("tests")) == len(names)
    a = suites[0]
    # two dangling links fail, the third is waived: listed in the test case's output
    assert len(a.findall("testcase[@name='dangling-link']/failure")) == 2
    assert "waived" in a.find("testcase[@name='dangling-link']/system-out").text
    assert len(suites[1].findall("testcase[@name='duplicate-id']/failure")) == 1


def test_junit_marks_a_rule_with_only_waived_findings_as_skipped(tmp_path):
    (tmp_path / "tracecheck.toml").write_text(NO_DEFAULTS)
    (tmp_path / "waivers.toml").write_text(WAIVER)
    write_thread(tmp_path / "t.json", [{"id": "REQ-1", "kind": "requirement"}], dangling(1))
    result = run("check", "--format", "junit", "--waivers", "waivers.toml", "--today", "2026-12-01", "t.json")
    assert result.exit_code == 0
    tree = etree.fromstring(result.stdout.encode("utf-8"))
    case = tree.find("testsuite/testcase[@name='dangling-link']")
    assert case.find("failure") is None and case.find("skipped") is not None
    assert tree.get("skipped") == "1" and tree.get("failures") == "0"


# --- annotations ---------------------------------------------------------------------------
# Escaping from memory of GitHub's workflow-command documentation and runner toolkit:
# data escapes % CR LF as %25 %0D %0A; property values also escape : and , as %3A %2C.


def unescape(text: str) -> str:
    for code, char in (("%0D", "\r"), ("%0A", "\n"), ("%3A", ":"), ("%2C", ","), ("%25", "%")):
        text = text.replace(code, char)
    return text


def test_escaping_of_percent_colon_comma_cr_lf():
    raw = "50% done: a,b\r\nnext"
    assert escape_data(raw) == "50%25 done: a,b%0D%0Anext"
    assert escape_property(raw) == "50%25 done%3A a%2Cb%0D%0Anext"
    assert escape_data("%0A") == "%250A"  # an escape sequence in the input is not taken as one
    assert unescape(escape_property(raw)) == raw


def test_annotations_are_one_line_each_and_decode_to_the_original(tmp_path):
    (tmp_path / "tracecheck.toml").write_text(NO_DEFAULTS)
    name = "ferry,berth:2.json"
    odd = "REQ-%1\r\nB,C:D"
    write_thread(tmp_path / name, [{"id": odd, "kind": "requirement"}],
                 [{"source": odd, "target": "GONE", "relation": "traces_to"}])
    result = run("check", "--format", "github", name)
    assert result.exit_code == 1
    lines = result.stdout.splitlines()
    assert len(lines) == 2  # one annotation and the verdict: no raw CR or LF leaked
    command, _, message = lines[0][2:].partition("::")
    level, _, props = command.partition(" ")
    assert level == "error"
    fields = dict(p.split("=", 1) for p in props.split(","))
    assert unescape(fields["file"]) == name and fields["line"] == "10"  # the link's opening brace
    assert unescape(fields["title"]) == "tracecheck dangling-link"
    assert odd in unescape(message)


def test_annotations_are_capped_with_a_closing_count(tmp_path):
    (tmp_path / "tracecheck.toml").write_text(NO_DEFAULTS)
    write_thread(tmp_path / "t.json", [{"id": "REQ-1", "kind": "requirement"}], dangling(ANNOTATION_CAP + 10))
    summary = tmp_path / "summary.md"
    summary.write_text("earlier step\n")
    result = run("check", "--format", "github", "t.json", GITHUB_STEP_SUMMARY=str(summary))
    lines = result.stdout.splitlines()
    assert sum(line.startswith("::error ") for line in lines) == ANNOTATION_CAP
    assert "10 more annotations not shown" in lines[-2]
    assert lines[-1].startswith("tracecheck: FAIL: 60 findings")
    text = summary.read_text()
    assert text.startswith("earlier step\n")  # appended, not replaced
    body = text.split("earlier step\n", 1)[1]
    assert body.startswith("## tracecheck check: FAIL: 60 findings")
    assert "<details>" in body and len(body.encode()) < 1024 * 1024


def test_gate_step_summary_puts_the_status_first(tmp_path):
    git(tmp_path, "init", "-q", "-b", "main")
    (tmp_path / "tracecheck.toml").write_text(NO_DEFAULTS)
    write_thread(tmp_path / "t.json", [{"id": "REQ-1", "kind": "requirement"}], [])
    git(tmp_path, "add", "-A")
    git(tmp_path, "commit", "-qm", "base")
    write_thread(tmp_path / "t.json", [{"id": "REQ-1", "kind": "requirement"}], dangling(12))
    summary = tmp_path / "summary.md"
    run("gate", "--format", "github", "t.json", GITHUB_STEP_SUMMARY=str(summary))
    first = summary.read_text().splitlines()[0]
    assert first.startswith("## tracecheck gate: FAIL: 12 new findings")
    assert "<details>" in summary.read_text()


def test_step_summary_stays_under_the_limit(tmp_path):
    target = tmp_path / "summary.md"
    step_summary("| row |\n" * 300_000, target)  # about 2.4 MB of table
    size = target.stat().st_size
    assert size <= STEP_SUMMARY_LIMIT + 200 and size < 1024 * 1024
    assert target.read_text().rstrip().endswith("see the uploaded report._")


# --- demo ------------------------------------------------------------------------------------


def test_demo_gate_shows_one_new_and_one_resolved_finding(tmp_path, sarif_validator):
    result = CliRunner().invoke(cli, ["demo", str(tmp_path / "demo")], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    reports = tmp_path / "demo" / "reports"
    doc = json.loads((reports / "gate.sarif").read_text())
    assert not list(sarif_validator.iter_errors(doc))
    results = doc["runs"][0]["results"]
    new = [r for r in results if "suppressions" not in r]
    assert [(r["ruleId"], r["properties"]["elements"]) for r in new] == [("coverage", ["REQ-SYS-040"])]
    assert doc["runs"][0]["properties"]["summary"]["resolved"] == 1
    junit = etree.parse(str(reports / "gate.junit.xml")).getroot()
    assert junit.get("failures") == "1"
    assert "1 new finding" in result.output and "1 resolved" in result.output


def test_sarif_uris_are_uri_references(tmp_path, sarif_validator):
    (tmp_path / "tracecheck.toml").write_text(NO_DEFAULTS)
    write_thread(tmp_path / "ferry model.json", [{"id": "REQ-1", "kind": "requirement"}], dangling(1))
    doc = json.loads(run("check", "--format", "sarif", "ferry model.json").stdout)
    location = doc["runs"][0]["results"][0]["locations"][0]["physicalLocation"]
    assert location["artifactLocation"]["uri"] == "ferry%20model.json"  # RFC 3986: no raw space
    data = (tmp_path / "ferry model.json").read_bytes()
    result = CliRunner().invoke(cli, ["check", "--format", "sarif", "-"], input=data, catch_exceptions=False)
    doc = json.loads(result.stdout)
    assert not list(sarif_validator.iter_errors(doc))
    assert "locations" not in doc["runs"][0]["results"][0]  # standard input has no file to point at
