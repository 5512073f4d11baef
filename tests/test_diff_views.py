"""Diff views: golden files for every format on the demo stages, REV1..REV2 in a real
git repository, configuration of matching and impact, and the HTML page's contract.

Regenerate the goldens after an intended change of a view with

    TRACECHECK_UPDATE_GOLDENS=1 PYTHONPATH=$PWD python -m pytest -q -p no:cacheprovider tests/test_diff_views.py

and review the diff of tests/golden/diff/ before committing it.
"""

from __future__ import annotations

import json
import os
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from tests.conftest import write_thread
from tracecheck.cli import cli
from tracecheck.demo import DEMO_CONFIG, build_repository
from tracecheck.demo.stages import stage_bytes
from tracecheck.diff import diff_models
from tracecheck.diff.picture import PAGE_SIZE
from tracecheck.model import Element, Link, Model

GOLDEN = Path(__file__).parent / "golden" / "diff"
FORMATS = {"text": "txt", "json": "json", "markdown": "md", "html": "html"}


def run(*args):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


@pytest.fixture
def stages(tmp_path):
    """The two demo stage exports and the demo configuration, in the working folder."""
    for stage in ("detailed-design", "qualification"):
        (tmp_path / f"{stage}.json").write_bytes(stage_bytes(stage))
    (tmp_path / "tracecheck.toml").write_text(DEMO_CONFIG, encoding="utf-8")
    return tmp_path


@pytest.mark.parametrize("fmt", sorted(FORMATS))
def test_every_format_matches_its_golden_file(stages, fmt):
    result = run("diff", "--format", fmt, "--no-color", "detailed-design.json", "qualification.json")
    assert result.exit_code == 0, result.stderr
    golden = GOLDEN / f"detailed-design..qualification.{FORMATS[fmt]}"
    if os.environ.get("TRACECHECK_UPDATE_GOLDENS"):
        golden.parent.mkdir(parents=True, exist_ok=True)
        golden.write_text(result.stdout, encoding="utf-8")
    assert result.stdout == golden.read_text(encoding="utf-8")


def test_json_golden_holds_the_documented_renumbering(stages):
    # Guard against blessing a wrong golden: the demo documents these two renumberings
    # (tracecheck/demo/stages.py) and the one text edit of REQ-SW-012.
    doc = json.loads((GOLDEN / "detailed-design..qualification.json").read_text(encoding="utf-8"))
    assert [(r["old"], r["new"]) for r in doc["elements"]["reidentified"]] == [
        ("REQ-SW-031", "REQ-SW-131"), ("REQ-SW-032", "REQ-SW-132")]
    assert [m["id"] for m in doc["elements"]["modified"] if "text" in m["changes"]] == ["REQ-SW-012"]
    assert doc["elements"]["removed"] == [] and doc["elements"]["moved"] == []


def test_revision_range_in_the_demo_repository_equals_the_file_diff(stages, tmp_path):
    repo = tmp_path / "repo"
    build_repository(repo)
    os.chdir(repo)
    ranged = run("diff", "--format", "json", "detailed-design..qualification", "model/thread.json")
    assert ranged.exit_code == 0, ranged.stderr
    os.chdir(stages)
    files = run("diff", "--format", "json", "detailed-design.json", "qualification.json")
    a, b = json.loads(ranged.stdout), json.loads(files.stdout)
    assert a["elements"] == b["elements"] and a["links"] == b["links"] and a["impact"] == b["impact"]
    assert a["summary"]["old"] == "detailed-design:model/thread.json"


def test_threshold_and_impact_rules_come_from_the_configuration(stages):
    (stages / "strict.toml").write_text("[diff]\nthreshold = 0.99\n[impact]\nrules = [{relation = \"verifies\"}]\n")
    doc = json.loads(run("diff", "--format", "json", "--config", "strict.toml",
                         "detailed-design.json", "qualification.json").stdout)
    # Both renumbered requirements changed status too (score 0.93 < 0.99): now removed + added.
    assert doc["elements"]["reidentified"] == []
    assert {"REQ-SW-031", "REQ-SW-032"} <= set(doc["elements"]["removed"])
    assert {step["relation"] for e in doc["impact"] for step in e["path"]} == {"verifies"}


@pytest.mark.parametrize("setting", ["[diff]\nthreshold = 1.5\n", "[diff]\nthreshhold = 0.5\n",
                                     "[impact]\nrules = [{relation = \"verifies\", direction = \"up\"}]\n"])
def test_bad_diff_configuration_is_exit_2_with_its_key(stages, setting):
    (stages / "bad.toml").write_text(setting)
    result = run("diff", "--config", "bad.toml", "detailed-design.json", "qualification.json")
    assert result.exit_code == 2
    assert "bad.toml" in result.stderr and "Traceback" not in result.stderr
    assert re.search(r"diff|impact", result.stderr)


def test_bad_inputs_are_exit_2(tmp_path):
    good = write_thread(tmp_path / "good.json", [{"id": "REQ-1", "kind": "requirement"}], [])
    (tmp_path / "typo.json").write_text(json.dumps({"format": "tracecheck-thread/1", "elements": [
        {"id": "REQ-1", "kind": "requirement", "txt": "The arm shall stop."}], "links": []}))
    for args in (["good.json", "missing.json"], ["good.json", "typo.json"], ["-", "-"], ["a..", "good.json"]):
        result = CliRunner().invoke(cli, ["diff", *args], input="{}", catch_exceptions=False)
        assert result.exit_code == 2, args
        assert "Traceback" not in result.stderr and result.stderr.strip(), args
    climbing = CliRunner().invoke(cli, ["diff", "../missing.json", "good.json"], catch_exceptions=False)
    assert climbing.exit_code == 2 and "../missing.json" in climbing.stderr and "range" not in climbing.stderr
    assert (tmp_path / "good.json").read_text() == good.read_text()  # nothing the user owns touched


def test_html_is_self_contained_with_a_legend_and_distinct_markers(stages):
    html = run("diff", "--format", "html", "detailed-design.json", "qualification.json").stdout
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:|//)""", html)  # works offline
    assert "<script" not in html and "@media print" in html
    legend = html[html.index('aria-label="legend"'):]
    legend = legend[:legend.index("</svg>")]
    markers = re.findall(r'<(polygon|rect|circle) [^>]*?(?:fill|stroke)="(#[0-9a-f]{6})"', legend)
    # added, removed, modified, impacted: four different shapes' colours, all different
    labels = {"added": ">added<", "removed": ">removed<", "modified": ">modified", "impacted": ">needs re-review<"}
    assert all(label in legend for label in labels.values())
    looks = {}
    for status, label in labels.items():
        before = legend[:legend.index(label)]
        shape = re.findall(r"<(polygon points=\"[^\"]+\"|rect|circle)[^>]*?(#[0-9a-f]{6})", before)[-1]
        looks[status] = shape
    assert len({c for _, c in looks.values()}) == 4
    assert len(markers) >= 4


def test_picture_pages_beyond_the_page_size_and_draws_every_change_once():
    old = Model([Element("CMP-1", "component", "Power converter")], [])
    added = [Element(f"REQ-{n:03d}", "requirement", f"Requirement {n}", f"The charger shall handle case {n}.")
             for n in range(2 * PAGE_SIZE + 60)]
    new = Model([*old.elements, *added], [Link("CMP-1", e.id, "satisfies") for e in added])
    picture = diff_models(old, new).picture
    assert len(picture.pages) == 3
    drawn = [n[0] for page in picture.pages for n in page.nodes if n[1] != "context"]
    assert sorted(drawn) == sorted(e.id for e in added)
    for page in picture.pages:  # one row per element in each column: no two labels overlap
        places = [(n[3], n[4]) for n in page.nodes]
        assert len(places) == len(set(places))


def test_json_view_is_the_result_document(stages):
    # Oracle: Python's json module reads back exactly the document the result holds.
    from tracecheck.commands.common import load
    from tracecheck.report import RenderOptions, render

    old, new = load("detailed-design.json"), load("qualification.json")
    result = diff_models(old.model, new.model, new.config, with_picture=False)
    assert json.loads(render("diff", "json", result, RenderOptions())) == json.loads(json.dumps(result.to_json()))
