"""Adoption files: the pre-commit manifest, the example workflow, the README's waiver
example, and the hook entry point."""

from __future__ import annotations

import json
import re
from pathlib import Path

from tests.conftest import write_thread
from tracecheck import hooks
from tracecheck.waivers import parse_waivers

ROOT = Path(__file__).resolve().parents[1]


def test_pre_commit_manifest_declares_the_two_hooks():
    import yaml  # in the test extra
    hooks_ = yaml.safe_load((ROOT / ".pre-commit-hooks.yaml").read_text("utf-8"))
    by_id = {h["id"]: h for h in hooks_}
    assert set(by_id) == {"tracecheck-check", "tracecheck-gate"}
    # keys every pre-commit hook needs (pre-commit's manifest format, from memory)
    for hook in hooks_:
        assert {"id", "name", "entry", "language"} <= set(hook)
    assert by_id["tracecheck-gate"]["pass_filenames"] is False
    assert by_id["tracecheck-check"]["entry"] == "python -m tracecheck.hooks check"


def test_example_workflow_is_shown_in_the_readme_and_not_run_here():
    workflow = (ROOT / "examples" / "model-repository-gate.yml").read_text("utf-8")
    body = workflow.split("\nname: model gate", 1)[1]
    assert "name: model gate" + body in (ROOT / "README.md").read_text("utf-8")
    assert not (ROOT / ".github" / "workflows" / "model-repository-gate.yml").exists()
    assert "--format sarif" in body and "upload-sarif" in body and "fetch-depth: 0" in body


def test_readme_waiver_example_is_valid():
    (block,) = re.findall(r"~~~toml\n(.*?)~~~", (ROOT / "README.md").read_text("utf-8"), flags=re.S)
    (waiver,) = parse_waivers(block.encode("utf-8"), "README.md")
    assert waiver.rule == "coverage" and waiver.expires.isoformat() == "2027-03-31"


def test_hook_checks_every_file_and_exits_with_the_worst_code(tmp_path):
    good = write_thread(tmp_path / "good.json", [{"id": "TST-1", "kind": "test"}, {"id": "CMP-1", "kind": "component"}],
                        [{"source": "TST-1", "target": "CMP-1", "relation": "verifies"}])
    bad = write_thread(tmp_path / "bad.json", [{"id": "TST-1", "kind": "test"}],
                       [{"source": "TST-1", "target": "GONE", "relation": "verifies"}])
    assert hooks.main(["check", str(good)]) == 0
    assert hooks.main(["check", "--format=json", str(good), str(bad)]) == 1
    assert hooks.main(["check", "--fail-on=note", str(good)]) == 0
    assert hooks.main(["nonsense"]) == 2
    (tmp_path / "broken.json").write_text(json.dumps({"format": "x"}))
    assert hooks.main(["check", str(good), str(tmp_path / "broken.json")]) == 2
