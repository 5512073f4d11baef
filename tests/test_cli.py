"""The command line: exit codes, streams, atomic output, colour, determinism."""

from __future__ import annotations

import json
from pathlib import Path

from click.testing import CliRunner

from tests.conftest import write_thread
from tracecheck.cli import cli

ROOT = Path(__file__).resolve().parents[1]
BAD = ROOT / "fixtures" / "bad"


def run(*args, input=None, env=None):
    return CliRunner().invoke(cli, list(args), input=input, env=env, catch_exceptions=False)


def sample(tmp_path: Path) -> Path:
    return write_thread(
        tmp_path / "thread.json",
        [{"id": "REQ-1", "kind": "requirement"}, {"id": "TST-1", "kind": "test"}],
        [{"source": "TST-1", "target": "REQ-1", "relation": "verifies"},
         {"source": "TST-1", "target": "REQ-9", "relation": "verifies"}],
    )


def test_findings_at_threshold_exit_1_and_json_contract(tmp_path):
    path = sample(tmp_path)
    result = run("check", "--format", "json", str(path))
    assert result.exit_code == 1
    doc = json.loads(result.stdout)
    assert set(doc) == {"tool", "inputs", "findings", "summary"}
    first = {f["rule"]: f for f in doc["findings"]}
    assert first["dangling-link"]["link"] == {"source": "TST-1", "target": "REQ-9", "relation": "verifies"}
    lines = path.read_text().splitlines()
    brace = next(n for n, line in enumerate(lines, 1) if '"REQ-9"' in line) - 2
    assert lines[brace - 1].strip() == "{"
    assert first["dangling-link"]["location"]["line"] == brace
    assert first["coverage"]["declaration"] == "requirement-satisfied"
    assert "declaration" not in first["dangling-link"]


def test_fail_on_controls_the_exit_code(tmp_path):
    path = write_thread(tmp_path / "t.json", [{"id": "REQ-1", "kind": "requirement"}], [])
    assert run("check", str(path)).exit_code == 0  # coverage gaps are warnings
    assert run("check", "--fail-on", "warning", str(path)).exit_code == 1


def test_stdin_spec(tmp_path):
    data = sample(tmp_path).read_text()
    result = run("check", "--format", "json", "-", input=data)
    assert result.exit_code == 1
    assert json.loads(result.stdout)["inputs"][0]["path"] == "<stdin>"


def test_output_file_is_written_atomically_and_kept_on_failure(tmp_path):
    out = tmp_path / "report.json"
    assert run("check", "--format", "json", "-o", str(out), str(sample(tmp_path))).exit_code == 1
    assert json.loads(out.read_text())["summary"]["findings"] == 2
    before = out.read_bytes()
    result = run("check", "--format", "json", "-o", str(out), str(BAD / "truncated.json"))
    assert result.exit_code == 2
    assert out.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".report")] == []


def test_two_runs_give_byte_identical_json(tmp_path):
    path = sample(tmp_path)
    a = run("check", "--format", "json", str(path)).stdout
    b = run("check", "--format", "json", str(path)).stdout
    assert a == b


def test_text_and_markdown_views_group_by_rule(tmp_path):
    text = run("check", str(sample(tmp_path))).stdout
    assert "dangling-link" in text and "FAIL: 2 findings" in text
    assert "\x1b[" not in text  # not a terminal: plain
    md = run("check", "--format", "markdown", str(sample(tmp_path))).stdout
    assert "## `dangling-link` (1)" in md
    quiet = run("check", "--quiet", str(sample(tmp_path))).stdout
    assert quiet.strip().startswith("FAIL")


def test_missing_file_unknown_option_and_bad_config_exit_2(tmp_path):
    result = run("check", str(tmp_path / "nope.json"))
    assert result.exit_code == 2 and "no such file" in result.stderr
    assert run("check", "--format", "xml", str(sample(tmp_path))).exit_code == 2
    config = tmp_path / "bad.toml"
    config.write_text('[rules]\ndisable = ["dangling-lnk"]\n')
    result = run("check", "--config", str(config), str(sample(tmp_path)))
    assert result.exit_code == 2 and "rules.disable" in result.stderr


def test_internal_error_is_one_line_with_a_debug_hint(tmp_path, monkeypatch):
    import tracecheck.commands.check as command

    def boom(*a, **k):
        raise ZeroDivisionError("planted")

    monkeypatch.setattr(command, "check_model", boom)
    result = run("check", str(sample(tmp_path)))
    assert result.exit_code == 3
    assert "--debug" in result.stderr and "Traceback" not in result.stderr
    result = run("check", "--debug", str(sample(tmp_path)))
    assert result.exit_code == 3 and "Traceback" in result.stderr


def test_interrupt_exits_130(tmp_path, monkeypatch):
    import tracecheck.commands.check as command

    def interrupted(*a, **k):
        raise KeyboardInterrupt

    monkeypatch.setattr(command, "check_model", interrupted)
    assert run("check", str(sample(tmp_path))).exit_code == 130
