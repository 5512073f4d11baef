"""The review ledger and the ``stale-link`` rule, in real temporary git repositories."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

from click.testing import CliRunner

from tests.conftest import git, thread
from tracecheck.cli import cli
from tracecheck.model import Element
from tracecheck.review import content_hash


def run(*args):
    return CliRunner().invoke(cli, list(args))


ELEMENTS = [
    {"id": "REQ-1", "kind": "requirement", "name": "Emergency stop", "text": "Open within 500 ms.",
     "attributes": {"integrity": "D", "status": "approved"}},
    {"id": "REQ-2", "kind": "requirement", "name": "Mooring", "text": "Confirm the berth position."},
    {"id": "TST-1", "kind": "test", "attributes": {"result": "pass"}},
    {"id": "TST-2", "kind": "test"},
    {"id": "FN-1", "kind": "function"},
]
LINKS = [
    {"source": "TST-1", "target": "REQ-1", "relation": "verifies"},
    {"source": "TST-2", "target": "REQ-2", "relation": "verifies"},
    {"source": "FN-1", "target": "REQ-1", "relation": "satisfies"},
    {"source": "REQ-2", "target": "REQ-1", "relation": "derives_from"},
    {"source": "TST-2", "target": "REQ-404", "relation": "verifies"},  # dangling: never accepted
]


def repository(tmp_path: Path, elements=ELEMENTS) -> Path:
    root = tmp_path / "repo"
    (root / "model").mkdir(parents=True)
    model = root / "model" / "thread.json"
    model.write_text(json.dumps(thread(elements, LINKS), indent=2), encoding="utf-8")
    git(root, "init", "-q")
    git(root, "add", ".")
    git(root, "commit", "-qm", "stage")
    return model


def stale_findings(model: Path) -> list[dict]:
    result = run("check", "--format", "json", str(model))
    assert result.exit_code in (0, 1), result.output
    return [f for f in json.loads(result.stdout)["findings"] if f["rule"] == "stale-link"]


def test_content_hash_is_sha256_of_the_canonical_fields():
    element = Element("REQ-1", "requirement", "Stop", "Open.", "REQ-0", {"b": 1, "a": "x"})
    # hashlib as the reference; the parent is not something a link reviewer reads.
    canonical = '{"attributes":{"a":"x","b":1},"kind":"requirement","name":"Stop","text":"Open."}'
    assert content_hash(element) == hashlib.sha256(canonical.encode()).hexdigest()


def test_accept_all_writes_a_sorted_ledger_at_the_repository_root(tmp_path):
    model = repository(tmp_path)
    before = model.read_bytes()
    result = run("review", "accept", str(model), "--all", "--by", "A. Assessor", "--on", "2026-11-30")
    assert result.exit_code == 0, result.output
    ledger = tmp_path / "repo" / ".tracecheck" / "reviews.json"
    document = json.loads(ledger.read_text())
    links = [(r["source"], r["relation"], r["target"]) for r in document["reviews"]]
    assert links == sorted(links) and len(links) == 4  # the dangling link is not accepted
    assert {r["accepted_by"] for r in document["reviews"]} == {"A. Assessor"}
    assert {r["accepted_on"] for r in document["reviews"]} == {"2026-11-30"}
    assert model.read_bytes() == before  # the model export is never modified
    # jsonschema as the reference validator, with the ledger's published schema.
    import jsonschema

    from tests.conftest import ROOT

    schema = json.loads((ROOT / "schemas" / "reviews.schema.json").read_text())
    jsonschema.Draft202012Validator(schema).validate(document)
    assert stale_findings(model) == []
    # Accepting again records nothing and leaves the file byte for byte.
    saved = ledger.read_bytes()
    again = run("review", "accept", str(model), "--all", "--by", "B. Other", "--on", "2026-12-01")
    assert again.exit_code == 0 and "Nothing to record" in again.stdout
    assert ledger.read_bytes() == saved


def test_an_edit_makes_exactly_the_links_of_the_changed_element_stale(tmp_path):
    model = repository(tmp_path)
    assert run("review", "accept", str(model), "--all", "--by", "A", "--on", "2026-11-30").exit_code == 0
    document = json.loads(model.read_text())
    document["elements"][0]["text"] = "Open within 300 ms."
    model.write_text(json.dumps(document, indent=2), encoding="utf-8")
    found = stale_findings(model)
    # Oracle: every accepted link with REQ-1 at one end, by a plain loop over the links.
    expected = {(link["source"], link["target"], link["relation"]) for link in LINKS
                if "REQ-1" in (link["source"], link["target"]) and link["target"] != "REQ-404"}
    assert {(f["link"]["source"], f["link"]["target"], f["link"]["relation"]) for f in found} == expected
    assert all(f["severity"] == "warning" and f["location"]["line"] for f in found)
    status = run("review", "status", "--format", "json", str(model))
    assert status.exit_code == 0
    data = json.loads(status.stdout)
    changed = {(s["source"], s["target"]): s["changed"] for s in data["stale"]}
    assert changed == {("TST-1", "REQ-1"): ["target"], ("FN-1", "REQ-1"): ["target"],
                       ("REQ-2", "REQ-1"): ["target"]}
    assert data["current"] == 1 and data["unreviewed"] == []
    assert run("review", "status", "--fail-on-stale", str(model)).exit_code == 1
    # Review one again: it is current; the others stay stale.
    assert run("review", "accept", str(model), "TST-1 verifies REQ-1", "--by", "B", "--on", "2026-12-01").exit_code == 0
    assert len(stale_findings(model)) == 2


def test_layout_and_attribute_order_do_not_make_a_link_stale(tmp_path):
    model = repository(tmp_path)
    assert run("review", "accept", str(model), "--all", "--by", "A", "--on", "2026-11-30").exit_code == 0
    document = json.loads(model.read_text())
    document["elements"][0]["attributes"] = {"status": "approved", "integrity": "D"}
    document["elements"].reverse()
    model.write_text(json.dumps(document), encoding="utf-8")  # no indentation: every line moved
    assert stale_findings(model) == []


def test_bad_ledger_and_bad_links_are_exit_2_without_writing(tmp_path):
    model = repository(tmp_path)
    ledger = tmp_path / "repo" / ".tracecheck" / "reviews.json"
    unknown = run("review", "accept", str(model), "TST-1 verifies REQ-2", "--by", "A", "--on", "2026-11-30")
    assert unknown.exit_code == 2 and "no such link" in unknown.stderr and not ledger.exists()
    for args, words in ((["--all", "TST-1 verifies REQ-1"], "not both"), (["--all", "--by", "A", "--on", "30.11.2026"], "YYYY-MM-DD"),
                        (["TST-1 verifies"], "SOURCE RELATION TARGET"), (["--all"], "--by")):
        result = run("review", "accept", str(model), *args)
        assert result.exit_code == 2 and words in result.stderr, (args, result.stderr)
        assert "Traceback" not in result.stderr
    assert not ledger.exists()
    ledger.parent.mkdir()
    ledger.write_text('{"format": "tracecheck-reviews/1", "reviews": [{"source": 1}]}', encoding="utf-8")
    result = run("check", str(model))
    assert result.exit_code == 2 and str(ledger) in result.stderr and "$.reviews[0]" in result.stderr


def test_outside_a_repository_the_ledger_sits_beside_the_model(tmp_path):
    model = tmp_path / "thread.json"
    model.write_text(json.dumps(thread(ELEMENTS, LINKS)), encoding="utf-8")
    assert run("review", "accept", str(model), "--all", "--by", "A", "--on", "2026-11-30").exit_code == 0
    assert (tmp_path / ".tracecheck" / "reviews.json").is_file()


def test_a_ledger_above_the_repository_is_not_used(tmp_path):
    model = repository(tmp_path)
    outside = tmp_path / ".tracecheck"
    outside.mkdir()
    (outside / "reviews.json").write_text("not json", encoding="utf-8")
    assert stale_findings(model) == []  # tmp_path/.tracecheck lies above repo/.git
