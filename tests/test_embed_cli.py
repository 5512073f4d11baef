"""``tracecheck embed fit / verify / suggest`` from the command line, and the ranking
metrics against outside references (scipy.stats.mannwhitneyu; the definition of
average precision)."""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
from click.testing import CliRunner
from scipy.stats import mannwhitneyu

from tracecheck.cli import cli
from tracecheck.config import default_metamodel
from tracecheck.embedding import verify_file
from tracecheck.embedding.metrics import average_precision, roc_auc
from tracecheck.errors import InputError
from tracecheck.formats import read_model

VERIFY_KEYS = {"exact", "dimension", "missing", "spurious", "unknown_elements"}  # DESIGN.md, embed verify


def run(*args, input=None, env=None):
    return CliRunner().invoke(cli, list(args), input=input, env=env, catch_exceptions=False)


def karate_thread(path: Path, drop: int | None = None, add: tuple[str, str] | None = None) -> Path:
    """Zachary's karate club (Zachary 1977, as networkx ships it) as a thread: one
    element per member, each friendship a link in both directions."""
    graph = nx.karate_club_graph()
    elements = [{"id": f"M{v:02d}", "kind": "component"} for v in graph.nodes]
    links = [{"source": f"M{u:02d}", "target": f"M{v:02d}", "relation": "traces_to"}
             for u, v in sorted(graph.to_directed().edges)]
    if drop is not None:
        del links[drop]
    if add is not None:
        links.append({"source": add[0], "target": add[1], "relation": "traces_to"})
    path.write_text(json.dumps({"format": "tracecheck-thread/1", "elements": elements, "links": links}))
    return path


@pytest.fixture
def fitted(tmp_path) -> tuple[Path, Path]:
    model = karate_thread(tmp_path / "karate.json")
    emb = tmp_path / "karate.npz"
    result = run("embed", "fit", str(model), "-o", str(emb), "--format", "json")
    assert result.exit_code == 0, result.output
    return model, emb


def test_fit_then_verify_is_exact_and_json_is_the_contract(fitted):
    model, emb = fitted
    result = run("embed", "verify", str(model), "--embedding", str(emb), "--format", "json")
    assert result.exit_code == 0
    document = json.loads(result.stdout)
    assert set(document) == VERIFY_KEYS
    assert document["exact"] is True and document["missing"] == document["spurious"] == []
    assert document["dimension"] == 4  # the karate record of tests/test_embedding.py
    with np.load(emb, allow_pickle=False) as archive:  # what the file promises to hold
        assert {"x", "y", "ids", "dimension", "threshold", "settings", "fingerprint"} <= set(archive.files)
        assert [str(i) for i in archive["ids"][:2]] == ["M00", "M01"]


def test_changing_one_link_names_exactly_the_removed_and_the_added_link(fitted, tmp_path):
    model, emb = fitted
    graph = nx.karate_club_graph()
    assert not graph.has_edge(0, 33)  # Zachary 1977: the instructor (0) and the administrator (33) are not friends
    changed = karate_thread(tmp_path / "changed.json", drop=0, add=("M00", "M33"))
    removed = sorted(graph.to_directed().edges)[0]
    result = run("embed", "verify", str(changed), "--embedding", str(emb), "--format", "json")
    assert result.exit_code == 1
    document = json.loads(result.stdout)
    assert document["missing"] == [{"source": "M00", "target": "M33", "relation": "traces_to"}]
    assert document["spurious"] == [{"source": f"M{removed[0]:02d}", "target": f"M{removed[1]:02d}", "relation": None}]
    assert document["unknown_elements"] == []
    text = run("embed", "verify", str(changed), "--embedding", str(emb))
    assert text.exit_code == 1 and "NOT EXACT: 1 missing, 1 spurious" in text.stdout
    markdown = run("embed", "verify", str(changed), "--embedding", str(emb), "--format", "markdown")
    assert markdown.exit_code == 1 and "| `M00` | traces_to | `M33` |" in markdown.stdout


def test_verify_file_is_the_entry_point_for_gate(fitted):
    model, emb = fitted
    result = verify_file(read_model(model.read_bytes(), str(model)), emb)
    assert result.exact and result.exit_code == 0
    with pytest.raises(InputError):
        verify_file(read_model(model.read_bytes(), str(model)), emb.with_name("absent.npz"))


def test_fit_writes_byte_identical_files(fitted, tmp_path):
    model, emb = fitted
    again = tmp_path / "again.npz"
    assert run("embed", "fit", str(model), "-o", str(again), "--quiet").exit_code == 0
    assert again.read_bytes() == emb.read_bytes()


def test_fixed_dimension_too_small_exits_1_and_still_writes(tmp_path):
    model = karate_thread(tmp_path / "karate.json")
    emb = tmp_path / "one.npz"
    result = run("embed", "fit", str(model), "-o", str(emb), "--dim", "1", "--format", "json")
    assert result.exit_code == 1
    document = json.loads(result.stdout)
    assert document["exact"] is False and document["dimension"] == 1 and document["missing"]
    assert emb.is_file()


def test_relation_option_fits_one_relation(tmp_path):
    path = tmp_path / "t.json"
    path.write_text(json.dumps({"format": "tracecheck-thread/1", "elements": [
        {"id": "TST-1", "kind": "test"}, {"id": "REQ-1", "kind": "requirement"}, {"id": "REQ-2", "kind": "requirement"}],
        "links": [{"source": "TST-1", "target": "REQ-1", "relation": "verifies"},
                  {"source": "REQ-2", "target": "REQ-1", "relation": "derives_from"}]}))
    emb = tmp_path / "v.npz"
    assert run("embed", "fit", str(path), "-o", str(emb), "--relation", "verifies").exit_code == 0
    document = json.loads(run("embed", "verify", str(path), "--embedding", str(emb), "--format", "json").stdout)
    assert document["exact"] is True  # derives_from is outside the embedding's scope


@pytest.mark.parametrize("make, words", [
    (lambda p: None, "no such embedding file"),
    (lambda p: p.write_bytes(b"not a zip archive"), "cannot be read as .npz"),
    (lambda p: np.savez(p, weights=np.zeros(3)), "missing"),  # someone else's .npz
    (lambda p: p.mkdir(), "is a directory"),
])
def test_bad_embedding_files_exit_2_with_one_message(fitted, tmp_path, make, words):
    model, _ = fitted
    bad = tmp_path / "bad.npz"
    make(bad)
    result = run("embed", "verify", str(model), "--embedding", str(bad))
    assert result.exit_code == 2
    assert words in result.stderr and str(bad) in result.stderr
    assert "Traceback" not in result.stderr


@pytest.mark.parametrize("args, words", [
    (["embed", "fit", "{model}", "-o", "{tmp}/e.npz", "--dim", "0"], "--dim"),
    (["embed", "fit", "{model}", "-o", "{tmp}/e.npz", "--max-seconds", "-1"], "--max-seconds"),
    (["embed", "fit", "{model}", "-o", "{tmp}/e.npz", "--relation", "nonsense"], "nonsense"),
    (["embed", "fit", "{tmp}/absent.json", "-o", "{tmp}/e.npz"], "absent.json"),
    (["embed", "fit", "{model}", "-o", "{tmp}/no/such/folder/e.npz"], "does not exist"),
    (["embed", "suggest", "{model}", "--holdout", "1.5"], "--holdout"),
    (["embed", "suggest", "{model}", "--top", "0"], "--top"),
])
def test_bad_options_and_inputs_exit_2(tmp_path, args, words):
    model = karate_thread(tmp_path / "karate.json")
    result = run(*[a.format(model=model, tmp=tmp_path) for a in args])
    assert result.exit_code == 2
    assert words in result.stderr and "Traceback" not in result.stderr
    assert not (tmp_path / "e.npz").exists()


def test_fit_keeps_an_existing_file_when_the_model_is_bad(tmp_path):
    emb = tmp_path / "keep.npz"
    emb.write_bytes(b"precious")
    bad = tmp_path / "bad.json"
    bad.write_text("{not json")
    assert run("embed", "fit", str(bad), "-o", str(emb)).exit_code == 2
    assert emb.read_bytes() == b"precious"


def demo_thread(tmp_path: Path) -> Path:
    from tracecheck.demo.stages import stage_bytes

    path = tmp_path / "preliminary.json"
    path.write_bytes(stage_bytes("preliminary-design"))
    return path


def test_suggest_ranks_only_links_the_metamodel_allows(tmp_path):
    path = demo_thread(tmp_path)
    result = run("embed", "suggest", str(path), "--format", "json", "--top", "10")
    assert result.exit_code == 0
    document = json.loads(result.stdout)
    evaluation = document["evaluation"]
    assert 0.0 <= evaluation["roc_auc"] <= 1.0 and 0.0 < evaluation["average_precision"] <= 1.0
    assert evaluation["held_out_links"] > 0
    metamodel = default_metamodel()  # DESIGN.md's default metamodel table
    existing = {(link.source, link.target) for link in read_model(path.read_bytes(), str(path)).links}
    assert len(document["likely_missing"]) == 10
    for item in document["likely_missing"]:
        assert (item["source"], item["target"]) not in existing
        assert item["relations"]
        for relation in item["relations"]:
            rule = metamodel.relations[relation]
            assert rule.sources is None or item["source_kind"] in rule.sources
            assert rule.targets is None or item["target_kind"] in rule.targets
    scores = [item["score"] for item in document["least_plausible"]]
    assert scores == sorted(scores) and len(scores) == 10
    assert "human reviewer" in document["note"]
    text = run("embed", "suggest", str(path), "--top", "3")
    assert "for review" in text.stdout and "ROC-AUC" in text.stdout
    again = run("embed", "suggest", str(path), "--format", "json", "--top", "10")
    assert again.stdout == result.stdout  # seeded: byte-identical reruns


# --- metrics against outside references ------------------------------------------------

@pytest.mark.parametrize("seed", [0, 1, 2])
def test_roc_auc_is_the_mann_whitney_statistic(seed):
    # Reference: scipy.stats.mannwhitneyu; AUC = U / (n1 n2) (Hanley & McNeil 1982).
    rng = np.random.default_rng(seed)
    positive = np.round(rng.normal(0.6, 0.3, 40), 1)  # rounded: ties on purpose
    negative = np.round(rng.normal(0.4, 0.3, 70), 1)
    u = mannwhitneyu(positive, negative, alternative="two-sided").statistic
    assert roc_auc(positive, negative) == pytest.approx(u / (40 * 70), abs=1e-12)


def test_average_precision_by_its_definition():
    # Definition (Manning, Raghavan, Schuetze 2008, sec. 8.4): with distinct scores, the
    # mean over the positives of the precision of the ranking cut at each positive.
    rng = np.random.default_rng(7)
    scores = rng.permutation(200) / 200.0
    labels = rng.random(200) < 0.2
    order = np.argsort(-scores)
    hits = np.cumsum(labels[order])
    brute = np.mean([hits[r] / (r + 1) for r in range(200) if labels[order][r]])
    assert average_precision(scores[labels], scores[~labels]) == pytest.approx(brute, abs=1e-12)


def test_demo_step_shows_exactly_the_drift_between_two_stages(tmp_path):
    # Oracle: plain set differences of the two stages' (source, target) pairs. The fit at
    # detailed-design is exact, so verify at qualification must name exactly the pairs
    # that appeared (missing) and those that went away (spurious).
    import io

    from tracecheck.demo import build_repository
    from tracecheck.demo.stages import stage_bytes
    from tracecheck.embedding.demo_step import embed_demo_step

    demo = build_repository(tmp_path / "repo")
    demo.reports.mkdir()
    out = io.StringIO()
    written = embed_demo_step(demo, out, None)
    assert written == ["embedding-detailed-design.npz", "embed-verify.json", "embed-verify.md", "embed-suggest.md"]
    document = json.loads((demo.reports / "embed-verify.json").read_text())

    def pairs(stage):
        model = read_model(stage_bytes(stage), stage)
        ids = set(model.by_id)
        return {(link.source, link.target) for link in model.links
                if link.source != link.target and {link.source, link.target} <= ids}

    before, after = pairs("detailed-design"), pairs("qualification")
    assert document["exact"] is False
    assert {(m["source"], m["target"]) for m in document["missing"]} == after - before
    assert {(s["source"], s["target"]) for s in document["spurious"]} == before - after
    assert "NOT EXACT" in out.getvalue() and "for a human reviewer" in out.getvalue()


def test_suggest_without_metamodel_restrictions_considers_every_pair(tmp_path):
    # The karate thread has only traces_to links, which the default metamodel allows
    # between any kinds: the evaluation must still run over all ordered pairs.
    model = karate_thread(tmp_path / "karate.json")
    document = json.loads(run("embed", "suggest", str(model), "--format", "json", "--top", "5").stdout)
    assert document["evaluation"]["roc_auc"] is not None
    assert len(document["likely_missing"]) == 5
    friends = {(f"M{u:02d}", f"M{v:02d}") for u, v in nx.karate_club_graph().to_directed().edges}
    assert not friends & {(s["source"], s["target"]) for s in document["likely_missing"]}
