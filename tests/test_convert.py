"""``tracecheck convert``: round trips through every writable format, atomic output,
findings located in the converted files."""

from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from tracecheck.cli import cli
from tracecheck.demo import STAGES
from tracecheck.demo.stages import stage_bytes


def run(*args: str):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


@pytest.fixture
def stage_file(tmp_path):
    def make(stage: str = "qualification"):
        path = tmp_path / f"{stage}.json"
        path.write_bytes(stage_bytes(stage))
        return path

    return make


@pytest.mark.parametrize("stage", STAGES)
@pytest.mark.parametrize("via", ["reqif", "graphml"])
def test_thread_json_through_a_format_and_back_is_byte_identical(tmp_path, stage_file, stage, via):
    source = stage_file(stage)
    assert run("convert", str(source), "-o", "canonical.json").exit_code == 0
    assert run("convert", str(source), "-o", f"model.{via}").exit_code == 0
    result = run("convert", f"model.{via}", "-o", "back.json")
    assert result.exit_code == 0, result.output
    assert (tmp_path / "back.json").read_bytes() == (tmp_path / "canonical.json").read_bytes()


def test_csv_pair_round_trip_keeps_elements_and_links(tmp_path, stage_file):
    source = stage_file()
    assert run("convert", str(source), "-o", "pair/").exit_code == 0
    assert sorted(p.name for p in (tmp_path / "pair").iterdir()) == ["elements.csv", "links.csv"]
    assert run("convert", "pair", "-o", "back.json").exit_code == 0
    original = json.loads(source.read_bytes())
    back = json.loads((tmp_path / "back.json").read_bytes())
    original.pop("model")
    assert back == original


def test_format_from_to_option_and_unknown_names(tmp_path, stage_file):
    source = stage_file("concept")
    result = run("convert", str(source), "-o", "-", "--to", "graphml")
    assert result.exit_code == 0 and result.stdout.startswith("<?xml")
    result = run("convert", str(source), "-o", "model.txt")
    assert result.exit_code == 2 and "give --to" in result.stderr
    result = run("convert", str(source), "-o", "x.reqifz", "--to", "reqifz")
    assert result.exit_code == 2 and "does not write it" in result.stderr
    result = run("convert", str(source), "-o", "x.bin", "--to", "yaml")
    assert result.exit_code == 2 and "unknown format 'yaml'" in result.stderr


def test_a_failed_conversion_leaves_the_existing_output_alone(tmp_path):
    source = tmp_path / "bell.json"
    source.write_text(json.dumps({
        "format": "tracecheck-thread/1",
        "elements": [{"id": "REQ-1", "kind": "requirement", "text": "ring \u0007 bell"}],
        "links": [],
    }))
    out = tmp_path / "out.reqif"
    out.write_text("precious")
    result = run("convert", str(source), "-o", str(out))
    assert result.exit_code == 2
    assert f"{source}: cannot be written as reqif" in result.stderr and "U+0007" in result.stderr
    assert out.read_text() == "precious"
    assert [p.name for p in tmp_path.iterdir() if p.name.startswith(".out")] == []


def test_hostile_input_is_not_converted(tmp_path):
    token = "FERRY-SECRET-1b2c"
    (tmp_path / "secret.txt").write_text(token)
    doc = tmp_path / "leak.reqif"
    doc.write_text(
        f'<!DOCTYPE REQ-IF [<!ENTITY s SYSTEM "{(tmp_path / "secret.txt").as_uri()}">]>\n'
        '<REQ-IF xmlns="http://www.omg.org/spec/ReqIF/20110401/reqif.xsd"><THE-HEADER>&s;</THE-HEADER></REQ-IF>'
    )
    result = run("convert", str(doc), "-o", "out.json")
    assert result.exit_code == 2 and token not in result.output
    assert not (tmp_path / "out.json").exists()


@pytest.mark.parametrize("suffix, starts", [(".reqif", ("<SPEC-OBJECT ", "<SPEC-RELATION ")),
                                            (".graphml", ("<node ", "<edge "))])
def test_findings_point_at_the_line_in_the_converted_file(tmp_path, stage_file, suffix, starts):
    target = tmp_path / f"model{suffix}"
    assert run("convert", str(stage_file()), "-o", str(target)).exit_code == 0
    result = run("check", "--format", "json", str(target))
    assert result.exit_code == 1
    located = [f for f in json.loads(result.stdout)["findings"] if f["location"]]
    assert located
    lines = target.read_text().splitlines()
    for finding in located:
        assert finding["location"]["file"] == str(target)
        line = lines[finding["location"]["line"] - 1]
        assert line.startswith(starts)
        if finding["link"] is None:
            assert any(f'"{element}"' in line for element in finding["elements"]), (finding, line)
        elif suffix == ".graphml":
            assert f'source="{finding["link"]["source"]}"' in line


@pytest.mark.parametrize("suffix", [".reqif", ".graphml"])
def test_diff_sees_no_change_between_a_model_and_its_conversion(tmp_path, stage_file, suffix):
    source = stage_file("detailed-design")
    target = tmp_path / f"model{suffix}"
    assert run("convert", str(source), "-o", str(target)).exit_code == 0
    result = run("diff", "--fail-on-change", "--format", "json", str(source), str(target))
    assert result.exit_code == 0, result.output
    summary = json.loads(result.stdout)["elements"]
    assert summary["added"] == summary["removed"] == summary["modified"] == []
