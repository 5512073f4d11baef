"""``gate --embedding EMB``: the optional embedding check, in real temporary git repositories.

The model is Zachary's karate club as networkx ships it (Zachary 1977, J. Anthropol.
Res. 33(4)), one element per member and each friendship a link both ways. The embedding
is fitted to the base; the feature branch drops one friendship and adds one between the
instructor (0) and the administrator (33), who are not friends in Zachary's data. The
expected missing and spurious links are that construction, written out by hand.
"""

from __future__ import annotations

import json
from pathlib import Path

import networkx as nx
import pytest
from click.testing import CliRunner

from tests.conftest import git
from tests.test_embed_cli import karate_thread
from tracecheck.cli import cli

REMOVED = sorted(nx.karate_club_graph().to_directed().edges)[0]  # what drop=0 removes


def run(*args: str):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


@pytest.fixture
def repo(tmp_path: Path, monkeypatch) -> tuple[Path, Path]:
    """main: the karate thread, with an embedding fitted to it (outside the repository);
    feature: one friendship removed and M00 -> M33 added."""
    root = tmp_path / "repo"
    root.mkdir()
    git(root, "init", "-q", "-b", "main")
    model = karate_thread(root / "thread.json")
    git(root, "add", "-A")
    git(root, "commit", "-qm", "karate thread")
    emb = tmp_path / "karate.npz"
    assert run("embed", "fit", str(model), "-o", str(emb), "--quiet").exit_code == 0
    git(root, "checkout", "-qb", "feature")
    karate_thread(model, drop=0, add=("M00", "M33"))
    git(root, "commit", "-qam", "change one friendship")
    monkeypatch.chdir(root)
    return root, emb


def gate(*args: str):
    return run("gate", "--base", "main", "thread.json", *args)


def test_unchanged_model_passes_and_json_reports_the_exact_embedding(repo):
    root, emb = repo
    git(root, "checkout", "-q", "main")
    result = gate("--embedding", str(emb), "--format", "json")
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    check = document["gate"]["embedding"]
    assert check["file"] == str(emb) and check["exact"] is True
    assert [m["path"] for m in check["models"]] == ["thread.json"]
    assert check["models"][0]["missing"] == check["models"][0]["spurious"] == []
    assert document["summary"]["embedding_exact"] is True and document["summary"]["failed"] is False


def test_without_the_option_the_gate_document_is_unchanged(repo):
    result = gate("--format", "json")
    document = json.loads(result.stdout)
    assert "embedding" not in document["gate"] and "embedding_exact" not in document["summary"]
    assert result.exit_code == 0  # the changed friendship is no finding of the rules


def test_a_changed_link_fails_the_gate_and_names_exactly_the_two_links(repo):
    root, emb = repo
    result = gate("--embedding", str(emb), "--format", "json")
    assert result.exit_code == 1
    document = json.loads(result.stdout)
    assert document["findings"] == []  # the failure is the embedding's alone
    model = document["gate"]["embedding"]["models"][0]
    assert document["gate"]["embedding"]["exact"] is False and model["exact"] is False
    assert model["missing"] == [{"source": "M00", "target": "M33", "relation": "traces_to"}]
    assert model["spurious"] == [{"source": f"M{REMOVED[0]:02d}", "target": f"M{REMOVED[1]:02d}", "relation": None}]
    assert model["unknown_elements"] == []
    assert document["summary"]["failed"] is True

    text = gate("--embedding", str(emb))
    assert text.exit_code == 1
    assert "NOT EXACT: 1 missing, 1 spurious" in text.stdout and "M00 traces_to M33" in text.stdout
    assert "FAIL: 0 new findings" in text.stdout  # the verdict, last
    markdown = gate("--embedding", str(emb), "--format", "markdown")
    assert markdown.exit_code == 1
    assert "| M00 | traces_to | M33 | missing |" in markdown.stdout
    assert f"| M{REMOVED[0]:02d} | (any) | M{REMOVED[1]:02d} | spurious |" in markdown.stdout


def test_output_is_byte_identical_on_rerun(repo):
    _, emb = repo
    first = gate("--embedding", str(emb), "--format", "json").stdout
    assert gate("--embedding", str(emb), "--format", "json").stdout == first


def test_an_unreadable_embedding_exits_2_naming_the_file(repo):
    root, _ = repo
    (root / "not-an-embedding.npz").write_text("plain text", encoding="utf-8")
    for path in ("absent.npz", "not-an-embedding.npz"):
        result = gate("--embedding", path)
        assert result.exit_code == 2
        assert path in result.stderr and "Traceback" not in result.stderr
