"""The demo: stages with the planted defects it documents, and the demo command."""

from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from tests.conftest import git
from tracecheck.check import check_model
from tracecheck.cli import cli
from tracecheck.config import Config
from tracecheck.demo.stages import STAGE_NAMES, stage_bytes
from tracecheck.formats.thread_json import parse


def _findings(name):
    data = stage_bytes(name)
    return check_model(parse(data, name), data, Config()).findings


def _rules(name):
    return {f.rule for f in _findings(name)}


@pytest.mark.parametrize("name", STAGE_NAMES)
def test_every_stage_is_valid_thread_json(name):
    assert parse(stage_bytes(name), name).elements


def test_stage_sizes_grow_roughly_as_documented():
    sizes = [len(parse(stage_bytes(n), n).elements) for n in STAGE_NAMES[:4]]
    assert sizes == sorted(sizes) and sizes[0] >= 40 and sizes[3] >= 400


def test_planted_defects_come_and_go():
    assert "dangling-link" in _rules("preliminary-design")
    assert "dangling-link" not in _rules("detailed-design")
    assert {"cycle", "duplicate-id", "duplicate-link"} <= _rules("detailed-design")
    assert not {"cycle", "duplicate-id", "duplicate-link"} & _rules("qualification")


def test_proposed_change_adds_one_finding_and_resolves_one():
    before = {f.fingerprint: f for f in _findings("qualification")}
    after = {f.fingerprint: f for f in _findings("proposed-change")}
    new = [after[k] for k in after.keys() - before.keys()]
    resolved = [before[k] for k in before.keys() - after.keys()]
    assert [(f.rule, f.elements) for f in new] == [("coverage", ("REQ-SYS-040",))]
    assert [(f.rule, f.elements) for f in resolved] == [("coverage", ("HAZ-006",))]


def test_demo_builds_the_repository_and_writes_reports(tmp_path):
    target = tmp_path / "demo"
    result = CliRunner().invoke(cli, ["demo", str(target)], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    tags = git(target, "tag").split()
    assert sorted(tags) == sorted(["concept", "preliminary-design", "detailed-design", "qualification"])
    assert "proposed-change" in git(target, "branch")
    report = json.loads((target / "reports" / "check.json").read_text())
    assert report["summary"]["findings"] > 0
    assert "qualification" in result.stdout


def test_demo_refuses_a_folder_with_content(tmp_path):
    (tmp_path / "mine.txt").write_text("keep me")
    result = CliRunner().invoke(cli, ["demo", str(tmp_path)], catch_exceptions=False)
    assert result.exit_code == 2
    assert (tmp_path / "mine.txt").read_text() == "keep me"
