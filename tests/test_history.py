"""``tracecheck history`` on real temporary git repositories with known histories.

Every row is held to what ``check``, ``diff`` and the coverage evaluation report for
that revision alone, and the plain counts to the standard library's ``json`` reading of
the committed file and to set arithmetic over its ids.
"""

from __future__ import annotations

import csv
import io
import json
import random
from collections import Counter
from pathlib import Path

import jsonschema
import pytest
from click.testing import CliRunner
from lxml import html as lxml_html

from tests.conftest import git, thread
from tracecheck.cli import cli
from tracecheck.commands.history import history
from tracecheck.config import load_config
from tracecheck.coverage import evaluate_all
from tracecheck.formats import read_model
from tracecheck.history_cache import cache_folder
from tracecheck.report import RenderOptions, render

MODEL = "model/thread.json"
CONFIG = '[required_attributes]\nrequirement = ["integrity"]\n'
KINDS = ["requirement", "requirement", "function", "component", "test", "hazard"]
RELATIONS = [("test", "verifies", "requirement"), ("function", "satisfies", "requirement"),
             ("function", "allocated_to", "component"), ("requirement", "mitigates", "hazard"),
             ("requirement", "derives_from", "requirement")]

# The history JSON contract of DESIGN.md ("JSON output", history), written out as a
# JSON Schema and checked with the jsonschema reference validator.
CONTRACT = {
    "type": "object",
    "required": ["path", "revisions"],
    "additionalProperties": False,
    "properties": {
        "path": {"type": "string"},
        "revisions": {"type": "array", "items": {
            "type": "object",
            "additionalProperties": False,
            "required": ["rev", "tags", "status", "elements", "links", "by_kind", "findings", "severities",
                         "coverage", "churn"],
            "properties": {
                "rev": {"type": "string", "pattern": "^[0-9a-f]{40}$"},
                "tags": {"type": "array", "items": {"type": "string"}},
                "status": {"enum": ["ok", "missing", "malformed"]},
                "elements": {"type": ["integer", "null"]},
                "links": {"type": ["integer", "null"]},
                "by_kind": {"type": ["object", "null"], "additionalProperties": {"type": "integer"}},
                "findings": {"type": ["object", "null"], "additionalProperties": {"type": "integer"}},
                "severities": {"type": ["object", "null"], "additionalProperties": {"type": "integer"}},
                "coverage": {"type": ["object", "null"], "additionalProperties": {"type": ["number", "null"]}},
                "churn": {"oneOf": [{"type": "null"}, {
                    "type": "object", "additionalProperties": False,
                    "required": ["added", "removed", "modified", "moved", "reidentified"],
                    "properties": {k: {"type": "integer"} for k in
                                   ["added", "removed", "modified", "moved", "reidentified"]}}]},
            },
        }},
    },
}


def run(*args):
    return CliRunner().invoke(cli, list(args), catch_exceptions=False)


class Repo:
    """A repository built commit by commit, every commit at the pinned date."""

    def __init__(self, root: Path) -> None:
        self.root = root
        root.mkdir()
        git(root, "init", "-q", "-b", "main")
        (root / "tracecheck.toml").write_text(CONFIG)

    def commit(self, content: bytes | None, *, tag: str | None = None, path: str = MODEL, message: str = "export") -> str:
        file = self.root / path
        if content is None:
            git(self.root, "rm", "-q", "--cached", "--ignore-unmatch", path)
            file.unlink(missing_ok=True)
        else:
            file.parent.mkdir(parents=True, exist_ok=True)
            file.write_bytes(content)
        git(self.root, "add", "-A")
        git(self.root, "commit", "-q", "--allow-empty", "-m", message)
        if tag:
            git(self.root, "tag", tag)
        return git(self.root, "rev-parse", "HEAD").strip()


def _document(elements: dict, links: set) -> bytes:
    return json.dumps(thread(sorted(elements.values(), key=lambda e: e["id"]),
                             [{"source": s, "relation": r, "target": t} for s, r, t in sorted(links)]),
                      indent=1).encode()


def random_exports(seed: int, count: int) -> list[bytes]:
    """A history nobody wrote by hand: elements added, removed, edited, moved and
    renamed, links added and dropped (some left dangling), at random."""
    rng = random.Random(seed)
    elements: dict[str, dict] = {}
    links: set[tuple[str, str, str]] = set()
    exports, serial = [], 0
    for _ in range(count):
        for _ in range(rng.randint(3, 8)):
            serial += 1
            kind = rng.choice(KINDS)
            element = {"id": f"{kind[:3].upper()}-{serial:03d}", "kind": kind, "name": f"{kind} {serial}",
                       "text": f"The shore charger {kind} number {serial} limits the charging current."}
            if kind == "requirement" and rng.random() < 0.7:
                element["attributes"] = {"integrity": rng.choice("ABCD")}
            elements[element["id"]] = element
        ids = sorted(elements)
        for victim in rng.sample(ids, k=min(2, len(ids) // 6)):
            del elements[victim]
        for edited in rng.sample(sorted(elements), k=min(2, len(elements))):
            elements[edited] = dict(elements[edited], text=elements[edited]["text"] + " It is reviewed.")
        if len(elements) > 4:
            child, parent = rng.sample(sorted(elements), 2)
            elements[child] = dict(elements[child], parent=parent)
        by_kind: dict[str, list[str]] = {}
        for element_id, element in sorted(elements.items()):
            by_kind.setdefault(element["kind"], []).append(element_id)
        for source_kind, relation, target_kind in RELATIONS:
            for _ in range(rng.randint(0, 3)):
                if by_kind.get(source_kind) and by_kind.get(target_kind):
                    links.add((rng.choice(by_kind[source_kind]), relation, rng.choice(by_kind[target_kind])))
        links = {link for link in links if rng.random() < 0.9}  # some dropped, some now dangling
        exports.append(_document(elements, links))
    return exports


def _direct(repo: Repo, rev: str, path: str = MODEL) -> dict:
    """What check and coverage report for one revision alone."""
    report = json.loads(run("check", "--format", "json", f"{rev}:{path}").stdout)
    data = git(repo.root, "show", f"{rev}:{path}").encode()
    model = read_model(data, path)
    declarations = load_config(repo.root / "tracecheck.toml").declarations
    document = json.loads(data)  # the standard library's reading, independent of ours
    return {
        "elements": len(document["elements"]),
        "links": len(document["links"]),
        "by_kind": dict(Counter(e["kind"] for e in document["elements"])),
        "findings": report["summary"]["by_rule"],
        "severities": report["summary"]["by_severity"],
        "coverage": {r.declaration.name: r.percent for r in evaluate_all(model, declarations)},
        "ids": {e["id"] for e in document["elements"]},
    }


def _direct_churn(old: str, new: str, path: str = MODEL, new_path: str | None = None) -> dict:
    report = json.loads(run("diff", "--format", "json", f"{old}:{path}", f"{new}:{new_path or path}").stdout)
    return report["summary"]["elements"]


def _history_json(*args) -> dict:
    result = run("history", "--format", "json", *args)
    assert result.exit_code == 0, result.output
    document = json.loads(result.stdout)
    jsonschema.validate(document, CONTRACT)
    return document


@pytest.mark.parametrize("seed", [3, 11])
def test_every_row_equals_direct_check_coverage_and_diff(tmp_path, monkeypatch, seed):
    exports = random_exports(seed, 7)
    repo = Repo(tmp_path / "repo")
    plan = [exports[0], exports[1], b'{"format": "tracecheck-thread/1", "elements": [', exports[2], None,
            exports[3], exports[4], exports[5], exports[6]]
    revs = [repo.commit(content, tag=f"stage-{9 - n}") for n, content in enumerate(plan)]
    monkeypatch.chdir(repo.root)

    rows = _history_json(MODEL)["revisions"]

    # Tags are named against commit order, so only a commit-ordered walk passes.
    assert [r["rev"] for r in rows] == revs
    assert [r["tags"] for r in rows] == [[f"stage-{9 - n}"] for n in range(len(plan))]
    expected_status = ["ok", "ok", "malformed", "ok", "missing", "ok", "ok", "ok", "ok"]
    assert [r["status"] for r in rows] == expected_status
    before = None
    for row, rev in zip(rows, revs, strict=True):
        if row["status"] != "ok":
            assert row["elements"] is None and row["churn"] is None
            before = None
            continue
        direct = _direct(repo, rev)
        for key in ("elements", "links", "by_kind", "findings", "severities", "coverage"):
            assert row[key] == direct[key], (rev, key)
        if before is None:
            assert row["churn"] is None
        else:
            churn = _direct_churn(before[0], rev)
            assert row["churn"] == {k: churn[k] for k in row["churn"]}
            # Set arithmetic over the ids as a floor: what is new by id is added or re-identified.
            new_ids = direct["ids"] - before[1]["ids"]
            assert row["churn"]["added"] + row["churn"]["reidentified"] == len(new_ids)
        before = (rev, direct)


def test_missing_and_malformed_rows_are_reported_and_named(tmp_path, monkeypatch):
    exports = random_exports(5, 3)
    repo = Repo(tmp_path / "repo")
    repo.commit(exports[0], tag="concept")
    repo.commit(b'{"format": "tracecheck-thread/1",\n "elements": [{"id": 7}],\n "links": []}\n', tag="preliminary-design")
    repo.commit(None, tag="detailed-design")
    repo.commit(exports[1], tag="qualification")
    monkeypatch.chdir(repo.root)
    result = history(MODEL)
    assert [r.status for r in result.rows] == ["ok", "malformed", "missing", "ok"]
    assert "thread.json" in result.rows[1].message and ":2" in result.rows[1].message  # file and line
    text = run("history", MODEL).stdout
    assert "malformed" in text and "does not exist at this revision" in text
    assert "1 missing, 1 malformed" in text


def test_follow_takes_the_file_across_a_rename(tmp_path, monkeypatch):
    exports = random_exports(8, 3)
    repo = Repo(tmp_path / "repo")
    first = repo.commit(exports[0], tag="concept", path="model/old.json")
    git(repo.root, "mv", "model/old.json", MODEL)
    renamed = repo.commit((repo.root / MODEL).read_bytes(), tag="preliminary-design", message="rename")
    last = repo.commit(exports[1], tag="qualification")
    monkeypatch.chdir(repo.root)

    plain = _history_json(MODEL)["revisions"]
    assert [r["status"] for r in plain] == ["ok", "ok"]  # the first tag lies before the name existed
    assert [r["rev"] for r in plain] == [renamed, last]

    followed = _history_json("--follow", MODEL)["revisions"]
    assert [r["rev"] for r in followed] == [first, renamed, last]
    assert [r["status"] for r in followed] == ["ok", "ok", "ok"]
    direct = _direct(repo, first, "model/old.json")
    assert followed[0]["elements"] == direct["elements"] and followed[0]["findings"] == direct["findings"]
    assert followed[1]["churn"] == dict.fromkeys(["added", "removed", "modified", "moved", "reidentified"], 0)
    churn = _direct_churn(renamed, last)
    assert followed[2]["churn"] == {k: churn[k] for k in followed[2]["churn"]}


def test_revs_range_takes_both_ends_and_the_commits_that_change_the_file(tmp_path, monkeypatch):
    exports = random_exports(2, 3)
    repo = Repo(tmp_path / "repo")
    a = repo.commit(exports[0])
    (repo.root / "notes.txt").write_text("unrelated")
    repo.commit(exports[0], message="unrelated change")  # does not touch the model
    b = repo.commit(exports[1])
    c = repo.commit(exports[2])
    monkeypatch.chdir(repo.root)
    rows = _history_json("--revs", f"{a}..{c}", MODEL)["revisions"]
    assert [r["rev"] for r in rows] == [a, b, c]
    rows = _history_json("--revs", f"{a}..{b}", MODEL)["revisions"]
    assert [r["rev"] for r in rows] == [a, b]


def test_stages_are_walked_in_commit_order(tmp_path, monkeypatch):
    exports = random_exports(4, 3)
    repo = Repo(tmp_path / "repo")
    revs = [repo.commit(e, tag=t) for e, t in zip(exports, ["concept", "preliminary-design", "qualification"],
                                                   strict=True)]
    monkeypatch.chdir(repo.root)
    rows = _history_json("--stages", "qualification,concept", MODEL)["revisions"]
    assert [r["rev"] for r in rows] == [revs[0], revs[2]]
    churn = _direct_churn(revs[0], revs[2])
    assert rows[1]["churn"] == {k: churn[k] for k in rows[1]["churn"]}


@pytest.mark.parametrize("args, says", [
    (["--stages", "concept,no-such-stage", MODEL], "unknown git revision 'no-such-stage'"),
    (["--revs", "concept..nope", MODEL], "unknown git revision 'nope'"),
    (["--revs", "concept..", MODEL], "A..B"),
    (["--revs", "concept..qualification", "--stages", "concept", MODEL], "not both"),
    (["model/other.json"], "no tag of the repository has this file"),
    (["--stages", "concept", "model/other.json"], "does not exist at any of the 1 revisions"),
    (["--input-format", "nonsense", MODEL], "unknown format 'nonsense'"),
    (["concept:" + MODEL], "not a model spec"),
    (["-"], "not a model spec"),
])
def test_bad_requests_exit_2_with_one_clear_message(tmp_path, monkeypatch, args, says):
    repo = Repo(tmp_path / "repo")
    repo.commit(random_exports(1, 1)[0], tag="concept")
    repo.commit(random_exports(1, 2)[1], tag="qualification")
    monkeypatch.chdir(repo.root)
    result = run("history", *args)
    assert result.exit_code == 2
    assert says in result.stderr and "Traceback" not in result.stderr
    assert result.stderr.count("\n") == 1


def test_no_tags_and_no_repository_exit_2(tmp_path, monkeypatch):
    repo = Repo(tmp_path / "repo")
    repo.commit(random_exports(1, 1)[0])
    monkeypatch.chdir(repo.root)
    result = run("history", MODEL)
    assert result.exit_code == 2 and "no tags" in result.stderr
    outside = tmp_path / "outside"
    outside.mkdir()
    monkeypatch.chdir(outside)
    result = run("history", "thread.json")
    assert result.exit_code == 2 and "not inside a git repository" in result.stderr


def _stage_repo(tmp_path) -> Repo:
    exports = random_exports(9, 4)
    repo = Repo(tmp_path / "repo")
    for export, stage in zip(exports, ["concept", "preliminary-design", "detailed-design", "qualification"],
                             strict=True):
        repo.commit(export, tag=stage)
    return repo


def test_a_second_run_is_served_from_the_cache_and_is_byte_identical(tmp_path, monkeypatch):
    repo = _stage_repo(tmp_path)
    monkeypatch.chdir(repo.root)
    first = run("history", "--format", "json", MODEL).stdout
    entries = sorted(cache_folder().rglob("*.json"))
    assert len(entries) == 4 + 3  # metrics per blob, churn per consecutive pair
    calls = []
    monkeypatch.setattr("tracecheck.history.read_model", lambda *a, **k: calls.append(a) or read_model(*a, **k))
    from tracecheck.commands import history as command

    second = history(MODEL)
    assert calls == []  # nothing parsed
    assert render("history", "json", second, RenderOptions()) == first
    assert command.run(MODEL, fmt="json", output=str(tmp_path / "again.json")) == 0
    assert (tmp_path / "again.json").read_text() == first


def test_the_cache_follows_the_blob_when_a_tag_moves(tmp_path, monkeypatch):
    repo = _stage_repo(tmp_path)
    monkeypatch.chdir(repo.root)
    before = _history_json(MODEL)["revisions"]
    changed = random_exports(21, 1)[0]
    rev = repo.commit(changed)
    git(repo.root, "tag", "-f", "qualification", rev)
    after = _history_json(MODEL)["revisions"]
    assert after[:3] == before[:3]
    direct = _direct(repo, rev)
    assert after[3]["rev"] == rev and after[3]["elements"] == direct["elements"] != before[3]["elements"]
    assert after[3]["findings"] == direct["findings"]


def test_a_corrupt_or_foreign_cache_entry_is_ignored(tmp_path, monkeypatch):
    repo = _stage_repo(tmp_path)
    monkeypatch.chdir(repo.root)
    clean = run("history", "--format", "json", MODEL).stdout
    entries = sorted(cache_folder().rglob("*.json"))
    entries[0].write_bytes(b"\x00not json")
    entries[1].write_text('{"format": "history-cache/1", "value": {"status": "ok", "metrics": {"elements": "many"}}}')
    entries[2].write_text('{"format": "history-cache/1", "value": {"added": -1.5}}')
    entries[3].write_text("[]")
    entries[4].write_text('{"format": "history-cache/1", "value": [1, 2]}')
    entries[5].write_text('{"format": "history-cache/1", "value": {"status": "ok", "metrics": {"elements": 1, '
                          '"links": 1, "by_kind": {}, "findings": {}, "severities": {}, "coverage": {"x": "50"}}}}')
    result = run("history", "--format", "json", MODEL)
    assert result.exit_code == 0 and result.stdout == clean
    for entry in entries[:6]:  # rewritten with good content
        assert json.loads(entry.read_text())["format"] == "history-cache/1"
    for entry in entries:  # every entry of the right format but a foreign shape
        entry.write_text('{"format": "history-cache/1", "value": [1, 2]}')
    assert run("history", "--format", "json", MODEL).stdout == clean


def test_an_unwritable_cache_folder_is_not_fatal(tmp_path, monkeypatch):
    repo = _stage_repo(tmp_path)
    blocker = tmp_path / "not-a-folder"
    blocker.write_text("a file where the cache folder would go")
    monkeypatch.setenv("XDG_CACHE_HOME", str(blocker))
    monkeypatch.chdir(repo.root)
    assert run("history", "--format", "json", MODEL).exit_code == 0
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "fresh"))
    assert run("history", "--no-cache", "--format", "json", MODEL).exit_code == 0
    assert not (tmp_path / "fresh").exists()


def test_csv_markdown_and_text_carry_the_same_rows(tmp_path, monkeypatch):
    repo = _stage_repo(tmp_path)
    monkeypatch.chdir(repo.root)
    document = _history_json(MODEL)
    rows = list(csv.DictReader(io.StringIO(run("history", "--format", "csv", MODEL).stdout)))
    assert [r["rev"] for r in rows] == [r["rev"] for r in document["revisions"]]
    for line, row in zip(rows, document["revisions"], strict=True):
        assert int(line["elements"]) == row["elements"]
        assert {k.split(":", 1)[1]: int(v) for k, v in line.items() if k.startswith("rule:") and v != "0"} == row["findings"]
        assert all(float(line[f"coverage:{d}"]) == p for d, p in row["coverage"].items() if p is not None)
    markdown = run("history", "--format", "markdown", MODEL).stdout
    assert sum(1 for line in markdown.splitlines() if line.startswith("| `")) == 4
    quiet = run("history", "--quiet", MODEL).stdout
    assert quiet == "4 revisions of model/thread.json: 4 ok, 0 missing, 0 malformed.\n"
    text = run("history", MODEL)
    assert text.exit_code == 0 and text.stderr == ""  # no progress bar when not interactive
    assert "4 revisions of model/thread.json: 4 ok" in text.stdout
    assert "qualified people" in text.stdout


def test_html_is_self_contained_with_three_charts_and_legends(tmp_path, monkeypatch):
    repo = _stage_repo(tmp_path)
    repo.commit(b"{ not json", tag="withdrawn")
    monkeypatch.chdir(repo.root)
    page = run("history", "--format", "html", MODEL).stdout
    tree = lxml_html.fromstring(page.encode())
    svgs = tree.xpath("//svg")
    assert len(svgs) == 3
    assert not tree.xpath("//script") and "src=" not in page and "<link" not in page
    coverage = svgs[0]
    names = {d.name for d in load_config(repo.root / "tracecheck.toml").declarations}
    legend = {t.text_content() for t in coverage.xpath(".//g/text")}
    assert names <= legend
    # Series differ by dash pattern, not only colour, so print in greyscale keeps them apart.
    dashes = {p.get("stroke-dasharray") for p in coverage.xpath(".//g/line")}
    assert len(dashes) == len(names)
    assert "malformed" in {t.text_content() for t in coverage.xpath(".//text")}


def test_line_chart_leaves_a_gap_for_missing_values():
    from tracecheck.report.svgchart import Series, line_chart, nice_ticks

    svg = line_chart("t", ["a", "b", "c", "d", "e"], [Series("s", (1.0, 2.0, None, 3.0, 4.0))], y_label="n")
    tree = lxml_html.fromstring(svg)
    assert len(tree.xpath("//g/path")) == 2  # two runs either side of the gap
    # Ticks at 1, 2 or 5 times a power of ten (common practice, no source).
    assert nice_ticks(37) == [0, 10, 20, 30, 40]
    assert nice_ticks(100) == [0, 20, 40, 60, 80, 100]
    assert nice_ticks(3) == [0, 1, 2, 3]


def test_demo_writes_the_history_page(tmp_path):
    target = tmp_path / "demo"
    result = CliRunner().invoke(cli, ["demo", str(target)], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    assert "tracecheck history --stages concept,preliminary-design,detailed-design,qualification" in result.output
    page = (target / "reports" / "history.html").read_text()
    order = [page.index(f'<td class="t">{stage}</td>') for stage in ["concept", "preliminary-design", "detailed-design", "qualification"]]
    assert order == sorted(order)
    assert not cache_folder().exists()  # the demo leaves the user's cache alone


def test_the_readme_history_commands_run(tmp_path, monkeypatch):
    import re
    import shlex

    readme = (Path(__file__).resolve().parents[1] / "README.md").read_text("utf-8")
    commands = [line for block in re.findall(r"```sh\n(.*?)```", readme, flags=re.S)
                for line in block.splitlines() if line.startswith("tracecheck history")]
    assert len(commands) == 2
    repo = _stage_repo(tmp_path)
    monkeypatch.chdir(repo.root)
    for command in commands:
        result = run(*shlex.split(command)[1:])
        assert result.exit_code == 0, (command, result.output)
    assert (repo.root / "history.html").read_text().startswith("<!DOCTYPE html>")


def test_the_progress_bar_opens_only_on_walks_that_take_a_while(monkeypatch):
    from contextlib import ExitStack, contextmanager

    from tracecheck.commands import history as command

    opened, updates, clock = [], [], [100.0]

    @contextmanager
    def fake_progress(description, *, enabled):
        opened.append(description)
        yield lambda fraction, label: updates.append((fraction, label))

    monkeypatch.setattr(command, "progress", fake_progress)
    monkeypatch.setattr(command.time, "monotonic", lambda: clock[0])
    with ExitStack() as stack:
        quick = command._LateProgress(True, stack)
        quick(0.0, "concept")
        quick(1.0, "done")  # finished within the second: never shown
        assert opened == []
        slow = command._LateProgress(True, stack)
        clock[0] += 2.5
        slow(0.5, "detailed-design")
        assert opened == ["history"] and updates == [(0.5, "detailed-design")]
        off = command._LateProgress(False, stack)
        off(0.5, "x")
        assert len(opened) == 1
