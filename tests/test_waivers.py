"""Waivers (valid, expired, unused, malformed) and check --baseline."""

from __future__ import annotations

import json
import os

import pytest
from click.testing import CliRunner

from tests.conftest import write_thread
from tracecheck.cli import cli
from tracecheck.rules import RULE_IDS
from tracecheck.waivers import TODAY_ENV, _schema

# Complete under the default coverage declarations except for one dangling link.
ELEMENTS = [{"id": "REQ-1", "kind": "requirement"}, {"id": "TST-1", "kind": "test"},
            {"id": "CMP-1", "kind": "component"}]
LINKS = [{"source": "TST-1", "target": "REQ-1", "relation": "verifies"},
         {"source": "CMP-1", "target": "REQ-1", "relation": "satisfies"},
         {"source": "REQ-1", "target": "GONE", "relation": "traces_to"}]  # one dangling-link error

WAIVE_LINK = """\
# a comment line before the table
[[waiver]]
rule = "dangling-link"
link = { source = "REQ-1", target = "GONE", relation = "traces_to" }
reason = "GONE is exported from the shore-side model next quarter."
approved_by = "Charging system lead"
expires = 2027-03-31
"""

UNUSED = """
[[waiver]]
rule = "coverage"
element = "REQ-404"
reason = "no longer needed"
approved_by = "Operator panel owner"
expires = 2027-03-31
"""


def run(*args: str, **env):
    return CliRunner(env=env or None).invoke(cli, list(args), catch_exceptions=False)


@pytest.fixture
def model(tmp_path):
    return write_thread(tmp_path / "thread.json", ELEMENTS, LINKS)


def check_json(*args: str, **env) -> tuple[int, dict]:
    result = run("check", "--format", "json", *args, **env)
    assert result.exit_code in (0, 1), result.stderr
    return result.exit_code, json.loads(result.stdout)


def test_without_waivers_the_dangling_link_fails(model):
    code, doc = check_json(str(model))
    assert code == 1 and [f["rule"] for f in doc["findings"]] == ["dangling-link"]
    assert "waived" not in doc  # a plain check document is unchanged


def test_a_valid_waiver_keeps_the_finding_visible_but_not_failing(model, tmp_path):
    (tmp_path / "waivers.toml").write_text(WAIVE_LINK)
    code, doc = check_json("--waivers", "waivers.toml", "--today", "2026-12-01", str(model))
    assert code == 0 and doc["findings"] == []
    (waived,) = doc["waived"]
    assert waived["rule"] == "dangling-link" and waived["link"]["target"] == "GONE"
    assert waived["waiver"]["approved_by"] == "Charging system lead"
    assert waived["waiver"]["location"] == {"file": "waivers.toml", "line": 2}
    assert doc["summary"]["waived"] == 1 and doc["waivers"]["as_of"] == "2026-12-01"
    for fmt, needle in (("text", "Waived (1)"), ("markdown", "### Waived (1)"), ("github", "::notice")):
        out = run("check", "--format", fmt, "--waivers", "waivers.toml", "--today", "2026-12-01", str(model))
        assert needle in out.stdout, fmt


def test_a_waiver_holds_through_its_expiry_day_and_expires_the_next(model, tmp_path):
    (tmp_path / "waivers.toml").write_text(WAIVE_LINK)
    code, doc = check_json("--waivers", "waivers.toml", "--today", "2027-03-31", str(model))
    assert code == 0 and doc["summary"]["waived"] == 1
    code, doc = check_json("--waivers", "waivers.toml", "--today", "2027-04-01", str(model))
    assert code == 1
    rules = sorted(f["rule"] for f in doc["findings"])
    assert rules == ["dangling-link", "waiver-expired"]  # the finding counts again, and the waiver is due
    expired = next(f for f in doc["findings"] if f["rule"] == "waiver-expired")
    assert expired["location"] == {"file": "waivers.toml", "line": 2}
    assert expired["severity"] == "error" and doc["summary"]["waived"] == 0


def test_today_can_be_pinned_by_environment(model, tmp_path):
    (tmp_path / "waivers.toml").write_text(WAIVE_LINK)
    code, _ = check_json("--waivers", "waivers.toml", str(model), **{TODAY_ENV: "2030-01-01"})
    assert code == 1
    result = run("check", "--waivers", "waivers.toml", "--today", "31/03/2027", str(model))
    assert result.exit_code == 2 and "YYYY-MM-DD" in result.stderr


def test_waiver_expired_severity_follows_configuration(model, tmp_path):
    (tmp_path / "waivers.toml").write_text(WAIVE_LINK)
    (tmp_path / "tracecheck.toml").write_text('[rules]\nseverity = { "waiver-expired" = "warning" }\n')
    _, doc = check_json("--waivers", "waivers.toml", "--today", "2028-01-01", str(model))
    assert {f["rule"]: f["severity"] for f in doc["findings"]}["waiver-expired"] == "warning"


def test_an_unused_waiver_is_reported(model, tmp_path):
    (tmp_path / "waivers.toml").write_text(WAIVE_LINK + UNUSED)
    code, doc = check_json("--waivers", "waivers.toml", "--today", "2026-12-01", str(model))
    assert code == 0
    (unused,) = doc["waivers"]["unused"]
    assert unused["element"] == "REQ-404" and unused["location"]["line"] == 9  # 7 lines, a blank one, then the table
    assert "unused waiver" in run("check", "--waivers", "waivers.toml", str(model)).stdout


def test_waiver_file_is_found_through_the_configuration(model, tmp_path):
    (tmp_path / "accepted.toml").write_text(WAIVE_LINK)
    (tmp_path / "tracecheck.toml").write_text('[gate]\nwaivers = "accepted.toml"\n')
    code, doc = check_json("--today", "2026-12-01", str(model))
    assert code == 0 and doc["summary"]["waived"] == 1
    (tmp_path / "tracecheck.toml").write_text('[gate]\nwaivers = "missing.toml"\n')
    result = run("check", str(model))
    assert result.exit_code == 2 and "missing.toml" in result.stderr


@pytest.mark.parametrize("body, says", [
    (WAIVE_LINK.replace('reason = "GONE is exported from the shore-side model next quarter."\n', ""),
     "waivers.toml:2: waiver[0]: 'reason' is a required property"),
    (WAIVE_LINK.replace("2027-03-31", '"2027-02-30"'), "waiver[0].expires: '2027-02-30' is not a calendar date"),
    (WAIVE_LINK.replace("2027-03-31", "2027-02-30"), "not valid TOML"),
    (WAIVE_LINK.replace("2027-03-31", '"next spring"'), "waiver[0].expires: 'next spring' is not a date"),
    (WAIVE_LINK.replace('rule = "dangling-link"', 'rule = "dangling-links"'), "waiver[0].rule"),
    (WAIVE_LINK.replace("link = {", 'element = "REQ-1"\nlink = {'), "exactly one subject"),
    (WAIVE_LINK.replace('approved_by = "Charging system lead"', 'approved_by = "  "'), "waiver[0].approved_by"),
    (WAIVE_LINK + "[extra]\n", "unknown key"),
    ("[[waiver]\nrule = 1\n", "not valid TOML"),
])
def test_a_malformed_waiver_file_exits_2_with_the_key_path(model, tmp_path, body, says):
    (tmp_path / "waivers.toml").write_text(body)
    result = run("check", "--waivers", "waivers.toml", str(model))
    assert result.exit_code == 2
    assert says in result.stderr and "waivers.toml" in result.stderr
    assert "Traceback" not in result.stderr


def test_waiver_schema_names_every_rule_id_of_the_catalogue():
    # DESIGN.md's rule-id catalogue (RULE_IDS) is what users may write in a waiver.
    assert _schema()["$defs"]["waiver"]["properties"]["rule"]["enum"] == list(RULE_IDS)


def test_waivers_in_the_gate_cover_new_findings_too(tmp_path):
    from tests.conftest import git

    root = tmp_path / "r"
    root.mkdir()
    git(root, "init", "-q", "-b", "main")
    write_thread(root / "t.json", ELEMENTS, [link for link in LINKS if link["target"] != "GONE"])
    git(root, "add", "-A")
    git(root, "commit", "-qm", "base")
    write_thread(root / "t.json", ELEMENTS, LINKS)  # the dangling link is new in the working tree
    (root / "waivers.toml").write_text(WAIVE_LINK)
    os.chdir(root)
    result = run("gate", "--format", "json", "--waivers", "waivers.toml", "--today", "2026-12-01", "t.json")
    doc = json.loads(result.stdout)
    assert result.exit_code == 0 and doc["findings"] == [] and len(doc["waived"]) == 1
    result = run("gate", "--format", "json", "--waivers", "waivers.toml", "--today", "2027-05-01", "t.json")
    doc = json.loads(result.stdout)
    assert result.exit_code == 1
    assert sorted(f["rule"] for f in doc["findings"]) == ["dangling-link", "waiver-expired"]


# --- baseline ----------------------------------------------------------------------------


def test_baseline_reports_only_findings_it_does_not_list(model, tmp_path):
    baseline = tmp_path / "audit.json"
    baseline.write_text(run("check", "--format", "json", str(model)).stdout)
    # a new problem after the audit, and the old one moved to another line
    write_thread(model, ELEMENTS[::-1],
                 [*LINKS, {"source": "REQ-1", "target": "REQ-1", "relation": "traces_to"}])
    code, doc = check_json("--baseline", str(baseline), str(model))
    assert code == 1
    assert [f["rule"] for f in doc["findings"]] == ["self-link"]
    assert doc["baseline"] == {"file": str(baseline), "findings": 1, "matched": 1, "gone": 0}


@pytest.mark.parametrize("content, says", [
    ("{not json", "audit.json:1: the baseline is not valid JSON"),
    ("[]", "the top level is not an object"),
    ('{"findings": {}}', "$.findings"),
    ('{"findings": [{"rule": "cycle"}]}', "$.findings[0].fingerprint"),
])
def test_a_malformed_baseline_exits_2(model, tmp_path, content, says):
    (tmp_path / "audit.json").write_text(content)
    result = run("check", "--baseline", "audit.json", str(model))
    assert result.exit_code == 2 and says in result.stderr and "Traceback" not in result.stderr
    assert run("check", "--baseline", "nothing.json", str(model)).exit_code == 2
