"""The bad-input corpus: every file gives exit 2, a located message and no traceback."""

from __future__ import annotations

from pathlib import Path

import pytest
from click.testing import CliRunner

from tracecheck.cli import cli

BAD = Path(__file__).resolve().parents[1] / "fixtures" / "bad"
CASES = sorted(p for p in BAD.iterdir() if p.suffix == ".json")


def check(path: Path):
    return CliRunner().invoke(cli, ["check", str(path)], catch_exceptions=False)


@pytest.mark.parametrize("path", CASES, ids=[p.name for p in CASES])
def test_bad_input_is_refused_with_a_located_message(path):
    result = check(path)
    assert result.exit_code == 2, result.output
    assert "Traceback" not in result.stderr
    assert str(path) in result.stderr
    assert result.stdout == ""


def test_corpus_is_not_empty():
    assert len(CASES) >= 10


def test_fifty_megabyte_string_is_refused_with_its_json_path(tmp_path):
    path = tmp_path / "huge.json"
    text = "x" * (50 * 1024 * 1024)
    path.write_text(
        '{"format": "tracecheck-thread/1",\n "elements": [\n'
        f'  {{"id": "REQ-1", "kind": "requirement", "text": "{text}"}}\n ],\n "links": []}}\n'
    )
    result = check(path)
    assert result.exit_code == 2
    assert f"{path}:3: $.elements[0].text" in result.stderr
    assert len(result.stderr) < 2000  # the message names the problem, never echoes the data
