"""The pre-merge gate in real temporary git repositories (identity pinned in conftest).

Each test builds a small repository whose findings are known by construction: a
dangling link is a link to an id that no element has, an uncovered requirement is one
with no incoming ``verifies`` (the only coverage declaration configured here). The
expected new/resolved sets are written out by hand from that construction.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from click.testing import CliRunner

from tests.conftest import git, write_thread
from tracecheck.cli import cli

CONFIG = """\
[rules]
default_coverage = false
[coverage.requirement-verified]
elements = "requirement"
incoming = "verifies"
from = ["test"]
"""

REQS = [{"id": "REQ-1", "kind": "requirement"}, {"id": "REQ-2", "kind": "requirement"},
        {"id": "TST-1", "kind": "test"}]
BASE_LINKS = [{"source": "TST-1", "target": "REQ-1", "relation": "verifies"},
              {"source": "REQ-1", "target": "GONE", "relation": "traces_to"}]


def run(*args: str):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


def gate_json(*args: str) -> tuple[int, dict, str]:
    result = run("gate", "--format", "json", *args)
    assert result.exit_code in (0, 1), result.stderr
    return result.exit_code, json.loads(result.stdout), result.stderr


def subjects(findings) -> set[tuple]:
    """(rule, elements, link relation) of each finding: what a reviewer would compare."""
    return {(f["rule"], tuple(f["elements"]), (f["link"] or {}).get("relation")) for f in findings}


def line_of(path: Path, needle: str) -> int:
    """1-based line of the object that holds ``needle`` (json.dumps(indent=2) puts the
    opening brace on the line before the first key)."""
    lines = path.read_text("utf-8").splitlines()
    return next(n for n, line in enumerate(lines, 1) if needle in line) - 1


@pytest.fixture
def repo(tmp_path: Path) -> Path:
    """main: C1 (base thread) -> C2 (REQ-9 added, unverified); feature branches at C1 and
    adds a dangling derives_from (new error) and verifies REQ-2 (resolves its gap)."""
    root = tmp_path / "repo"
    (root / "model").mkdir(parents=True)
    git(root, "init", "-q", "-b", "main")
    (root / "tracecheck.toml").write_text(CONFIG, encoding="utf-8")
    model = root / "model" / "thread.json"
    write_thread(model, REQS, BASE_LINKS)
    git(root, "add", "-A")
    git(root, "commit", "-qm", "C1")
    git(root, "branch", "feature")
    write_thread(model, [*REQS, {"id": "REQ-9", "kind": "requirement"}], BASE_LINKS)
    git(root, "commit", "-qam", "C2 on main")
    git(root, "checkout", "-q", "feature")
    write_thread(model, [*REQS, {"id": "REQ-3", "kind": "requirement"}], [
        *BASE_LINKS,
        {"source": "TST-1", "target": "REQ-2", "relation": "verifies"},
        {"source": "TST-1", "target": "REQ-3", "relation": "verifies"},
        {"source": "REQ-3", "target": "MISSING", "relation": "derives_from"},
    ])
    git(root, "commit", "-qam", "feature work")
    os.chdir(root)
    return root


NEW = {("dangling-link", ("REQ-3", "MISSING"), "derives_from")}
RESOLVED = {("coverage", ("REQ-2",), None)}


def test_diverged_branches_compare_with_the_merge_base(repo):
    code, doc, stderr = gate_json("model/thread.json")
    assert code == 1  # the new dangling link is an error
    assert subjects(doc["findings"]) == NEW
    assert subjects(doc["resolved"]) == RESOLVED  # REQ-9 (only on main after the fork) plays no part
    merge_base = git(repo, "merge-base", "main", "feature").strip()
    assert doc["gate"]["base"]["commit"] == merge_base
    assert "main (default branch)" in stderr and merge_base[:12] in stderr
    assert doc["gate"]["files"] == [{"path": "model/thread.json", "status": "modified", "new": 1,
                                     "resolved": 1, "diff": doc["gate"]["files"][0]["diff"]}]
    assert doc["gate"]["files"][0]["diff"]["elements"]["added"] == 1
    assert "findings" not in doc["gate"]["files"][0]["diff"]  # the gate's own comparison is the one
    assert doc["summary"]["new"] == 1 and doc["summary"]["resolved"] == 1


def test_exact_base_compares_with_the_branch_tip_itself(repo):
    code, doc, _ = gate_json("--base", "main", "--exact-base", "model/thread.json")
    assert subjects(doc["findings"]) == NEW
    # REQ-9 exists only at main's tip: compared with it, its gap is gone on head.
    assert subjects(doc["resolved"]) == RESOLVED | {("coverage", ("REQ-9",), None)}
    assert doc["gate"]["base"]["commit"] == git(repo, "rev-parse", "main").strip()


def test_fail_on_threshold_and_warning_only_changes(repo):
    # Only a warning-level finding is new when the dangling link is fixed.
    model = repo / "model" / "thread.json"
    doc = json.loads(model.read_text())
    doc["links"] = [link for link in doc["links"] if link["target"] != "MISSING"]
    doc["links"] = [link for link in doc["links"] if link["target"] != "REQ-3"]
    model.write_text(json.dumps(doc, indent=2))  # working tree: REQ-3 now unverified
    code, out, _ = gate_json("model/thread.json")
    assert code == 0 and subjects(out["findings"]) == {("coverage", ("REQ-3",), None)}
    code, _, _ = gate_json("--fail-on", "warning", "model/thread.json")
    assert code == 1


def test_head_equal_to_base_has_nothing_new_or_resolved(repo):
    git(repo, "checkout", "-q", "main")
    code, doc, stderr = gate_json("model/thread.json")
    assert code == 0
    assert doc["findings"] == [] and doc["resolved"] == []
    assert doc["gate"]["files"][0]["status"] == "unchanged"
    assert doc["gate"]["base"]["commit"] == git(repo, "rev-parse", "HEAD").strip()
    # the pre-existing dangling link stays out of the way of unrelated work
    assert "dangling-link" not in doc["summary"]["by_rule"]


def test_working_tree_head_sees_uncommitted_changes(repo):
    git(repo, "checkout", "-q", "main")
    model = repo / "model" / "thread.json"
    write_thread(model, REQS, [*BASE_LINKS, {"source": "REQ-2", "target": "REQ-2", "relation": "traces_to"}])
    code, doc, _ = gate_json("model/thread.json")
    assert code == 1 and subjects(doc["findings"]) == {("self-link", ("REQ-2",), "traces_to")}
    assert doc["gate"]["head"]["worktree"] is True


def test_head_revision_is_read_from_git_not_the_working_tree(repo):
    git(repo, "checkout", "-q", "main")
    code, doc, _ = gate_json("--head", "feature", "model/thread.json")
    assert code == 1 and subjects(doc["findings"]) == NEW and subjects(doc["resolved"]) == RESOLVED


def test_file_new_on_head_has_every_finding_new(repo):
    second = repo / "model" / "second.json"
    write_thread(second, [{"id": "REQ-50", "kind": "requirement"}],
                 [{"source": "REQ-50", "target": "NOWHERE", "relation": "traces_to"}])
    git(repo, "add", "-A")
    git(repo, "commit", "-qm", "second model")
    code, doc, _ = gate_json("model/second.json", "model/thread.json")
    assert code == 1
    files = {f["path"]: f for f in doc["gate"]["files"]}
    assert files["model/second.json"]["status"] == "added"
    assert files["model/second.json"]["diff"]["elements"]["added"] == 1
    # every finding of the new file, plus the new one of the changed file
    assert subjects(doc["findings"]) == NEW | {("dangling-link", ("REQ-50", "NOWHERE"), "traces_to"),
                                               ("coverage", ("REQ-50",), None)}


def test_file_deleted_on_head_resolves_nothing_and_says_so(repo):
    git(repo, "rm", "-q", "model/thread.json")
    git(repo, "commit", "-qm", "remove the export")
    code, doc, _ = gate_json("model/thread.json")
    assert code == 0
    assert doc["findings"] == [] and doc["resolved"] == []
    assert doc["gate"]["files"][0]["status"] == "deleted"
    assert any("deleted on head" in note and "not counted as resolved" in note for note in doc["notes"])
    text = run("gate", "model/thread.json").stdout
    assert "deleted on head" in text


def test_origin_head_is_the_first_choice_for_the_default_branch(repo, tmp_path):
    clone = tmp_path / "clone"
    git(tmp_path, "clone", "-q", str(repo), str(clone))  # origin/HEAD -> origin/feature (checked out)
    git(clone, "remote", "set-head", "origin", "main")
    git(clone, "checkout", "-q", "-b", "work", "origin/feature")
    os.chdir(clone)
    code, doc, stderr = gate_json("model/thread.json")
    assert "origin/main (default branch)" in stderr
    assert subjects(doc["findings"]) == NEW


@pytest.mark.parametrize("args, says", [
    (["--base", "no-such-rev", "model/thread.json"], "no-such-rev"),
    (["--head", "nope", "model/thread.json"], "nope"),
    (["model/absent.json"], "model/absent.json"),
])
def test_bad_revisions_and_paths_exit_2_with_one_message(repo, args, says):
    result = run("gate", *args)
    assert result.exit_code == 2 and says in result.stderr
    assert "Traceback" not in result.stderr


def test_no_default_branch_asks_for_base(tmp_path):
    root = tmp_path / "r"
    root.mkdir()
    git(root, "init", "-q", "-b", "trunk")
    write_thread(root / "t.json", REQS, [])
    git(root, "add", "-A")
    git(root, "commit", "-qm", "x")
    os.chdir(root)
    result = run("gate", "t.json")
    assert result.exit_code == 2 and "--base" in result.stderr
    assert run("gate", "--base", "trunk", "t.json").exit_code == 0


def test_outside_a_repository_exits_2(tmp_path):
    write_thread(tmp_path / "t.json", REQS, [])
    result = run("gate", "t.json")
    assert result.exit_code == 2 and "not inside a git repository" in result.stderr


def test_sarif_of_the_gate_has_a_result_per_new_finding_at_file_and_line(repo):
    result = run("gate", "--format", "sarif", "model/thread.json")
    assert result.exit_code == 1
    doc = json.loads(result.stdout)
    (res,) = doc["runs"][0]["results"]
    assert res["ruleId"] == "dangling-link" and res["baselineState"] == "new"
    where = res["locations"][0]["physicalLocation"]
    assert where["artifactLocation"]["uri"] == "model/thread.json"
    assert where["region"]["startLine"] == line_of(repo / "model" / "thread.json", '"source": "REQ-3"')


def test_gate_reports_are_byte_identical_on_rerun(repo):
    for fmt in ("json", "sarif", "junit", "github", "markdown", "text"):
        first = run("gate", "--format", fmt, "model/thread.json").stdout
        assert first == run("gate", "--format", fmt, "model/thread.json").stdout, fmt


def test_gate_run_from_a_subfolder_uses_repository_paths(repo):
    os.chdir(repo / "model")
    code, doc, _ = gate_json("thread.json")
    assert doc["gate"]["files"][0]["path"] == "model/thread.json"
    assert subjects(doc["findings"]) == NEW


def test_forked_base_check_gives_the_same_report(repo, monkeypatch):
    import tracecheck.gate

    sequential = run("gate", "--format", "json", "model/thread.json").stdout
    monkeypatch.setattr(tracecheck.gate, "FORK_MIN", 0)  # every modified model forks now
    assert run("gate", "--format", "json", "model/thread.json").stdout == sequential


def test_background_runs_in_a_child_and_falls_back_in_the_parent():
    from tracecheck import background

    if not hasattr(os, "fork") or (os.cpu_count() or 1) < 2:
        pytest.skip("needs fork and two cores")
    assert background.start(os.getpid).result() != os.getpid()
    assert background.start(os.getpid, fork=False).result() == os.getpid()
    # a child that cannot send its result (a lambda's closure over a pipe) is redone here
    import threading

    lock = threading.Lock()
    assert background.start(lambda: lock).result() is lock
