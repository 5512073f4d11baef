"""REV:PATH specs in real temporary repositories, and configuration discovery."""

from __future__ import annotations

import json

from click.testing import CliRunner

from tests.conftest import git, write_thread
from tracecheck.cli import cli


def run(*args):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


def test_rev_path_reads_the_blob_at_that_revision(tmp_path):
    repo = tmp_path / "repo"
    repo.mkdir()
    git(repo, "init", "-q", "-b", "main")
    model = repo / "model" / "thread.json"
    model.parent.mkdir()
    write_thread(model, [{"id": "REQ-1", "kind": "requirement"}], [{"source": "REQ-1", "target": "GONE", "relation": "traces_to"}])
    git(repo, "add", "-A")
    git(repo, "commit", "-q", "-m", "first")
    git(repo, "tag", "concept")
    write_thread(model, [{"id": "REQ-1", "kind": "requirement"}], [])
    git(repo, "commit", "-qam", "second")

    import os

    os.chdir(repo)
    old = json.loads(run("check", "--format", "json", "concept:model/thread.json").stdout)
    new = json.loads(run("check", "--format", "json", "HEAD:model/thread.json").stdout)
    assert [f["rule"] for f in old["findings"]].count("dangling-link") == 1
    assert [f["rule"] for f in new["findings"]].count("dangling-link") == 0
    assert old["inputs"][0]["path"] == "concept:model/thread.json"

    result = run("check", "no-such-tag:model/thread.json")
    assert result.exit_code == 2 and "no-such-tag" in result.stderr
    result = run("check", "concept:model/missing.json")
    assert result.exit_code == 2 and "does not exist at git revision 'concept'" in result.stderr


def test_configuration_is_found_upwards_from_the_model(tmp_path):
    (tmp_path / "tracecheck.toml").write_text('[required_attributes]\nrequirement = ["integrity"]\n')
    sub = tmp_path / "exports" / "stage"
    sub.mkdir(parents=True)
    path = write_thread(sub / "t.json", [{"id": "REQ-1", "kind": "requirement"}], [])
    doc = json.loads(run("check", "--format", "json", str(path)).stdout)
    assert "missing-attribute" in doc["summary"]["by_rule"]
    assert doc["inputs"][1]["role"] == "config"


def test_pyproject_section_is_used_and_errors_name_the_key_path(tmp_path):
    (tmp_path / "pyproject.toml").write_text(
        '[tool.tracecheck.coverage.requirement-verified]\nelements = "requirement"\nincoming = "verifies"\nat_least = 0\n'
    )
    path = write_thread(tmp_path / "t.json", [{"id": "REQ-1", "kind": "requirement"}], [])
    result = run("check", str(path))
    assert result.exit_code == 2
    assert "coverage.requirement-verified.at_least" in result.stderr


def test_malformed_toml_names_the_file_and_line(tmp_path):
    (tmp_path / "tracecheck.toml").write_text("[rules\n")
    path = write_thread(tmp_path / "t.json", [], [])
    result = run("check", str(path))
    assert result.exit_code == 2 and "tracecheck.toml: malformed TOML" in result.stderr and "line 1" in result.stderr
