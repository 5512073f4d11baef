"""Stage diff: invariants checked against plain-set oracles (hypothesis), the CLI, and
REV1..REV2 in real temporary git repositories."""

from __future__ import annotations

import json
import os

from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.conftest import git, write_thread
from tracecheck.cli import cli
from tracecheck.diff import diff_models
from tracecheck.diff.structural import word_diff
from tracecheck.model import Element, Link, Model

KINDS = ["requirement", "function", "component", "test", "hazard"]
RELATIONS = ["derives_from", "satisfies", "verifies", "mitigates", "traces_to"]
WORDS = ["charger", "arm", "mooring", "battery", "stop", "shall", "insulation", "panel", "within", "current"]


@st.composite
def models(draw, ids=None):
    """Small models whose elements each carry a unique word (so content pins them)."""
    n = draw(st.integers(1, 8))
    pool = ids or [f"E{i}" for i in range(n)]
    chosen = draw(st.lists(st.sampled_from(pool), min_size=1, max_size=len(pool), unique=True)) if ids else pool
    elements = []
    for i, element_id in enumerate(chosen):
        words = draw(st.lists(st.sampled_from(WORDS), max_size=6))
        parent = draw(st.one_of(st.none(), st.sampled_from(chosen[:i]))) if i else None
        attrs = draw(st.dictionaries(st.sampled_from(["level", "integrity"]), st.sampled_from(["A", "B", "C"]), max_size=2))
        elements.append(Element(element_id, draw(st.sampled_from(KINDS)), f"unique{element_id}",
                                " ".join(words) or None, parent, attrs))
    triples = draw(st.lists(st.tuples(st.sampled_from(chosen), st.sampled_from(chosen), st.sampled_from(RELATIONS)),
                            max_size=12, unique=True))
    return Model(elements, [Link(s, t, r) for s, t, r in triples])


def renamed(model: Model, prefix: str = "NEW-") -> Model:
    """The same model with every id replaced (parents and link ends follow)."""
    new = {e.id: prefix + e.id for e in model.elements}
    elements = [Element(new[e.id], e.kind, e.name, e.text, e.parent and new[e.parent], e.attributes)
                for e in model.elements]
    return Model(elements, [Link(new[lk.source], new[lk.target], lk.relation) for lk in model.links])


def triples(links) -> set[tuple[str, str, str]]:
    return {(lk["source"], lk["target"], lk["relation"]) for lk in links}


@settings(max_examples=80, deadline=None)
@given(models())
def test_a_model_diffed_with_itself_is_empty(model):
    result = diff_models(model, model)
    assert not result.changed
    assert all(result.elements[c] == [] for c in result.elements)
    assert result.links == {"added": [], "removed": [], "relation_changed": []}
    assert result.impact == [] and result.findings == {"new": [], "resolved": []}


@settings(max_examples=80, deadline=None)
@given(models(ids=[f"E{i}" for i in range(10)]), models(ids=[f"E{i}" for i in range(10)]))
def test_added_one_way_is_removed_the_other_way(a, b):
    forward, backward = diff_models(a, b), diff_models(b, a)
    assert forward.elements["added"] == backward.elements["removed"]
    assert forward.elements["removed"] == backward.elements["added"]
    assert triples(forward.links["added"]) == triples(backward.links["removed"])
    pairs = {(r["old"], r["new"]) for r in forward.elements["reidentified"]}
    assert pairs == {(r["new"], r["old"]) for r in backward.elements["reidentified"]}


@settings(max_examples=80, deadline=None)
@given(models())
def test_renaming_every_id_gives_only_reidentifications(model):
    result = diff_models(model, renamed(model))
    assert {(r["old"], r["new"]) for r in result.elements["reidentified"]} == {
        (e.id, "NEW-" + e.id) for e in model.elements
    }
    assert all(r["score"] == 1.0 for r in result.elements["reidentified"])
    for category in ("added", "removed", "modified", "moved"):
        assert result.elements[category] == []
    assert result.links["added"] == [] and result.links["removed"] == []


@settings(max_examples=80, deadline=None)
@given(models(), st.data())
def test_link_changes_are_the_plain_set_difference_when_ids_stay(model, data):
    ids = [e.id for e in model.elements]
    new_links = data.draw(st.lists(st.tuples(st.sampled_from(ids), st.sampled_from(ids), st.sampled_from(RELATIONS)),
                                   max_size=12, unique=True))
    other = Model(model.elements, [Link(*t) for t in new_links])
    result = diff_models(model, other)
    before = {lk.triple for lk in model.links}
    after = set(new_links)
    # Oracle: Python's own set difference of (source, target, relation) triples.
    assert triples(result.links["added"]) == after - before
    assert triples(result.links["removed"]) == before - after
    assert result.elements["reidentified"] == []


def _element(id, kind="requirement", **extra):
    return {"id": id, "kind": kind, **extra}


OLD = [
    _element("REQ-1", name="Emergency stop", text="The shore charger shall stop charging within 1 s of an emergency stop.",
             attributes={"integrity": "C"}),
    _element("REQ-2", name="Arm retract", text="The charging arm shall retract when mooring is lost.", parent="REQ-1"),
    _element("REQ-3", name="Insulation", text="The charger shall monitor insulation resistance continuously."),
    _element("TST-1", "test", name="E-stop test"),
    _element("HAZ-1", "hazard", name="Arc flash at the connector"),
    _element("CMP-1", "component", name="Operator panel"),
]
OLD_LINKS = [
    {"source": "TST-1", "target": "REQ-1", "relation": "verifies"},
    {"source": "REQ-2", "target": "REQ-1", "relation": "derives_from"},
    {"source": "REQ-1", "target": "HAZ-1", "relation": "mitigates"},
    {"source": "CMP-1", "target": "REQ-3", "relation": "satisfies"},
]
NEW = [
    _element("REQ-1", name="Emergency stop", text="The shore charger shall stop charging within 0.5 s of an emergency stop.",
             attributes={"integrity": "D"}),
    _element("REQ-20", name="Arm retract", text="The charging arm shall retract when mooring is lost."),
    _element("TST-1", "test", name="E-stop test"),
    _element("HAZ-1", "hazard", name="Arc flash at the connector"),
    _element("CMP-1", "component", name="Operator panel"),
    _element("FN-1", "function", name="Detect mooring"),
]
NEW_LINKS = [
    {"source": "TST-1", "target": "REQ-1", "relation": "verifies"},
    {"source": "REQ-20", "target": "REQ-1", "relation": "derives_from"},
    {"source": "REQ-1", "target": "HAZ-1", "relation": "mitigates"},
    {"source": "TST-1", "target": "REQ-20", "relation": "verifies"},
]


def run(*args):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


def test_planted_changes_are_all_found_and_nothing_else(tmp_path):
    old = write_thread(tmp_path / "old.json", OLD, OLD_LINKS)
    new = write_thread(tmp_path / "new.json", NEW, NEW_LINKS)
    result = run("diff", "--format", "json", str(old), str(new))
    assert result.exit_code == 0
    doc = json.loads(result.stdout)
    elements = doc["elements"]
    assert elements["added"] == ["FN-1"]
    assert elements["removed"] == ["REQ-3"]
    assert [(r["old"], r["new"]) for r in elements["reidentified"]] == [("REQ-2", "REQ-20")]
    assert elements["moved"] == [{"id": "REQ-20", "old_parent": "REQ-1", "new_parent": None}]
    assert [m["id"] for m in elements["modified"]] == ["REQ-1"]
    changes = elements["modified"][0]["changes"]
    assert set(changes) == {"text", "attributes.integrity"}
    assert changes["attributes.integrity"] == {"old": "C", "new": "D"}
    assert {"op": "delete", "text": " 1"} in changes["text"]["words"]
    assert {"op": "insert", "text": " 0.5"} in changes["text"]["words"]
    assert doc["links"]["added"] == [{"source": "TST-1", "target": "REQ-20", "relation": "verifies"}]
    assert doc["links"]["removed"] == [{"source": "CMP-1", "target": "REQ-3", "relation": "satisfies"}]
    impacted = {(e["element"], e["because"]) for e in doc["impact"]}
    # REQ-1 changed: its test, its hazard and the requirement derived from it.
    assert {("TST-1", "REQ-1"), ("HAZ-1", "REQ-1"), ("REQ-20", "REQ-1")} <= impacted
    # Removed REQ-3 was satisfied by CMP-1, which is still there.
    assert ("CMP-1", "REQ-3") in impacted
    assert doc["summary"]["elements"] == {"added": 1, "removed": 1, "modified": 1, "moved": 1, "reidentified": 1}


def test_fail_on_change_and_unchanged_exit_codes(tmp_path):
    old = write_thread(tmp_path / "old.json", OLD, OLD_LINKS)
    new = write_thread(tmp_path / "new.json", NEW, NEW_LINKS)
    assert run("diff", str(old), str(new)).exit_code == 0
    assert run("diff", "--fail-on-change", str(old), str(new)).exit_code == 1
    assert run("diff", "--fail-on-change", str(old), str(old)).exit_code == 0


def test_every_format_renders_and_reruns_are_byte_identical(tmp_path):
    old = write_thread(tmp_path / "old.json", OLD, OLD_LINKS)
    new = write_thread(tmp_path / "new.json", NEW, NEW_LINKS)
    for fmt in ("text", "json", "markdown", "html"):
        first = run("diff", "--format", fmt, str(old), str(new)).stdout
        assert first == run("diff", "--format", fmt, str(old), str(new)).stdout
        assert "REQ-20" in first and "TST-1" in first


def test_bad_input_is_exit_2_naming_the_file(tmp_path):
    old = write_thread(tmp_path / "old.json", OLD, OLD_LINKS)
    broken = tmp_path / "broken.json"
    broken.write_text("{not json")
    result = run("diff", str(old), str(broken))
    assert result.exit_code == 2 and "broken.json" in result.stderr and "Traceback" not in result.stderr
    assert run("diff", str(old)).exit_code == 2


def test_revision_range_reads_both_sides_from_git(tmp_path):
    repo = tmp_path / "repo"
    repo.mkdir()
    git(repo, "init", "-q", "-b", "main")
    model = repo / "model" / "thread.json"
    model.parent.mkdir()
    write_thread(model, OLD, OLD_LINKS)
    git(repo, "add", "-A")
    git(repo, "commit", "-q", "-m", "preliminary design")
    git(repo, "tag", "preliminary-design")
    write_thread(model, NEW, NEW_LINKS)
    git(repo, "commit", "-qam", "detailed design")
    git(repo, "tag", "detailed-design")
    os.chdir(repo)
    ranged = run("diff", "--format", "json", "preliminary-design..detailed-design", "model/thread.json")
    assert ranged.exit_code == 0, ranged.stderr
    doc = json.loads(ranged.stdout)
    assert doc["summary"]["old"] == "preliminary-design:model/thread.json"
    assert doc["elements"]["added"] == ["FN-1"] and doc["elements"]["removed"] == ["REQ-3"]
    explicit = run("diff", "--format", "json", "preliminary-design:model/thread.json", "HEAD:model/thread.json")
    assert json.loads(explicit.stdout)["elements"] == doc["elements"]
    unknown = run("diff", "no-such-stage..detailed-design", "model/thread.json")
    assert unknown.exit_code == 2 and "no-such-stage" in unknown.stderr


@settings(max_examples=150, deadline=None)
@given(st.lists(st.sampled_from(WORDS + ["0.5", "s.", "(A/s)", ",", "degC;"]), max_size=12),
       st.lists(st.sampled_from(WORDS + ["0.5", "s.", "(A/s)", ",", "degC;"]), max_size=12))
def test_word_diff_runs_rebuild_both_texts(old_words, new_words):
    old, new = " ".join(old_words), "  ".join(new_words)  # the new side also reflowed
    runs = word_diff(old, new)
    # Oracle: the texts themselves. The new side comes back with whitespace normalised;
    # the old side up to the spacing around punctuation marks.
    assert "".join(r["text"] for r in runs if r["op"] != "delete") == " ".join(new.split())
    assert "".join("".join(r["text"] for r in runs if r["op"] != "insert").split()) == "".join(old.split())
    assert all(r["op"] in ("equal", "delete", "insert") and r["text"].strip() for r in runs)


def test_an_attribute_changing_type_only_is_a_modification():
    # 1, 1.0 and True are equal in Python but different values in the export (JSON).
    old = Model([Element("TST-1", "test", "Heave rig", attributes={"runs": 1, "rated": 1.0})], [])
    new = Model([Element("TST-1", "test", "Heave rig", attributes={"runs": True, "rated": 1.0})], [])
    (entry,) = diff_models(old, new).elements["modified"]
    assert entry["changes"] == {"attributes.runs": {"old": 1, "new": True}}


def test_the_documented_examples_hold():
    import doctest

    from tracecheck.diff import matching, structural

    for module in (matching, structural):
        outcome = doctest.testmod(module)
        assert outcome.attempted > 0 and outcome.failed == 0, module.__name__
