"""``tracecheck coverage``: counts against an independent brute-force loop, a worked
example computed by hand, the JSON contract, CSV read back, evidence hashes, profiles,
determinism and bad input."""

from __future__ import annotations

import csv
import hashlib
import io
import json
from fractions import Fraction
from pathlib import Path

from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.conftest import git, write_thread
from tracecheck.audit import RESULTS, UNSET, Settings, build_report
from tracecheck.cli import cli
from tracecheck.config import Config, config_from_mapping
from tracecheck.model import Element, Link, Model
from tracecheck.profiles import PROFILE_NOTE, PROFILES
from tracecheck.sources import Source


def run(*args, input=None):
    return CliRunner().invoke(cli, list(args), input=input, catch_exceptions=False)


# --- an independent count -------------------------------------------------------------
# The oracle re-states the five default declarations of DESIGN.md as plain loops over
# the link list, sharing no code with tracecheck.coverage.

ORACLE = {
    # name: (element kind, direction, relation, other kinds, except (relation, kinds) or None)
    "requirement-verified": ("requirement", "in", "verifies", {"test"}, None),
    "requirement-satisfied": ("requirement", "in", "satisfies", {"function", "component", "interface"},
                              ("derives_from", {"requirement"})),
    "function-allocated": ("function", "out", "allocated_to", {"component"}, None),
    "test-verifies": ("test", "out", "verifies", {"requirement", "function", "component", "interface"}, None),
    "hazard-mitigated": ("hazard", "in", "mitigates", {"requirement", "function", "component"}, None),
}


def oracle_ends(elements, links, element_id, direction, relation, kinds):
    kind_of = {}
    for e in elements:
        kind_of.setdefault(e.id, e.kind)
    ends = set()
    for link in links:
        if link.relation != relation:
            continue
        mine, other = (link.target, link.source) if direction == "in" else (link.source, link.target)
        if mine == element_id and other != element_id and kind_of.get(other) in kinds:
            ends.add(other)
    return ends


def oracle_percent(covered, total):
    # Round half up to one decimal with exact fractions (DESIGN.md: one decimal).
    if total == 0:
        return None
    return float(int(Fraction(100 * covered, total) * 10 + Fraction(1, 2))) / 10


def oracle(elements, links, name, result_attribute="result"):
    kind, direction, relation, kinds, exception = ORACLE[name]
    first = {}
    for e in elements:
        first.setdefault(e.id, e)
    covered, uncovered, passing, failing_only = [], [], [], []
    for element_id, element in first.items():
        if element.kind != kind:
            continue
        if exception and oracle_ends(elements, links, element_id, "in", exception[0], exception[1]):
            continue
        ends = oracle_ends(elements, links, element_id, direction, relation, kinds)
        (covered if ends else uncovered).append(element_id)
        results = [first[t].attributes.get(result_attribute) for t in ends if first[t].kind == "test"]
        if any(first[t].kind != "test" or first[t].attributes.get(result_attribute) == "pass" for t in ends):
            passing.append(element_id)
        if results and all(r == "fail" for r in results):
            failing_only.append(element_id)
    return sorted(covered), sorted(uncovered), sorted(passing), sorted(failing_only)


KINDS = ["requirement", "function", "component", "interface", "test", "hazard"]
RELATIONS = ["verifies", "satisfies", "allocated_to", "mitigates", "derives_from", "traces_to"]
FITS = {
    "verifies": ({"test"}, {"requirement", "function", "component", "interface"}),
    "satisfies": ({"function", "component", "interface"}, {"requirement"}),
    "allocated_to": ({"function"}, {"component"}),
    "mitigates": ({"requirement", "function", "component"}, {"hazard"}),
    "derives_from": ({"requirement"}, {"requirement"}),
    "traces_to": (set(KINDS), set(KINDS)),
}


@st.composite
def graphs(draw):
    n = draw(st.integers(1, 14))
    ids = [f"E{i}" for i in range(n)]
    elements = []
    for element_id in ids + draw(st.lists(st.sampled_from(ids), max_size=2)):  # some duplicate ids
        attributes = {}
        integrity = draw(st.sampled_from(["A", "B", None, ["A", "B"]]))
        if integrity is not None:
            attributes["integrity"] = integrity
        result = draw(st.sampled_from([*RESULTS, "passed", None]))
        if result is not None:
            attributes["result"] = result
        elements.append(Element(element_id, draw(st.sampled_from(KINDS)), attributes=attributes))
    # Most links join the kinds their relation expects, so every declaration meets
    # covered, uncovered and excluded elements; the rest are arbitrary or dangling.
    kind_of = {}
    for e in elements:
        kind_of.setdefault(e.id, e.kind)
    links = []
    for _ in range(draw(st.integers(0, 30))):
        relation = draw(st.sampled_from(RELATIONS))
        source_kinds, target_kinds = FITS[relation]
        ends = []
        for kinds in (source_kinds, target_kinds):
            fitting = [i for i in ids if kind_of[i] in kinds]
            if fitting and draw(st.integers(0, 9)) < 8:
                ends.append(draw(st.sampled_from(fitting)))
            else:
                ends.append(draw(st.sampled_from(ids + ["MISSING"])))
        links.append(Link(ends[0], ends[1], relation))
    return elements, links


def report_for(elements, links, config=None, group_by=(), result_attribute="result"):
    model = Model(elements, links, origin="m.json")
    source = Source(b"{}", "<test>")
    return build_report(source, model, config or Config(), Settings(group_by, result_attribute))


@settings(max_examples=80, deadline=None)
@given(graphs())
def test_counts_match_a_brute_force_loop(graph):
    elements, links = graph
    report = report_for(elements, links, group_by=("integrity",))
    assert sorted(d.name for d in report.declarations) == sorted(ORACLE)
    for d in report.declarations:
        covered, uncovered, passing, failing_only = oracle(elements, links, d.name)
        data = d.to_json()
        assert data["covered"] == len(covered) and data["total"] == len(covered) + len(uncovered)
        assert data["uncovered"] == uncovered
        assert data["percent"] == oracle_percent(len(covered), len(covered) + len(uncovered))
        if d.name == "requirement-verified":
            assert data["passing"]["covered"] == len(passing)
            assert data["passing"]["uncovered"] == sorted(set(covered + uncovered) - set(passing))
            assert data["failing_only"] == failing_only
        # Groups: each element counted once per value it carries (UNSET when absent).
        first = {}
        for e in elements:
            first.setdefault(e.id, e)
        expected: dict[str, list[int]] = {}
        for element_id in covered + uncovered:
            value = first[element_id].attributes.get("integrity")
            keys = [UNSET] if value is None else sorted(set(value)) if isinstance(value, list) else [value]
            for key in keys:
                counts = expected.setdefault(key, [0, 0])
                counts[0] += element_id in covered
                counts[1] += 1
        assert {k: [v["covered"], v["total"]] for k, v in data["groups"]["integrity"].items()} == expected


@settings(max_examples=60, deadline=None)
@given(graphs(), st.integers(1, 3))
def test_declared_threshold_and_filter_match_the_loop(graph, at_least):
    elements, links = graph
    config = config_from_mapping({"rules": {"default_coverage": False}, "coverage": {"twice": {
        "elements": "requirement", "where": {"integrity": "A"}, "incoming": "verifies",
        "from": ["test"], "at_least": at_least}}})
    (d,) = report_for(elements, links, config).declarations
    first = {}
    for e in elements:
        first.setdefault(e.id, e)
    in_scope = [i for i, e in first.items() if e.kind == "requirement"
                and (e.attributes.get("integrity") == "A" or "A" in (e.attributes.get("integrity") or []))]
    covered = [i for i in in_scope if len(oracle_ends(elements, links, i, "in", "verifies", {"test"})) >= at_least]
    assert (d.counts.covered, d.counts.total) == (len(covered), len(in_scope))


# --- a worked example -----------------------------------------------------------------


def worked_example(tmp_path: Path) -> Path:
    # By hand (DESIGN.md semantics):
    #   requirement-verified: REQ-1..4 in scope; TST-1, TST-2, TST-3 verify REQ-1, 2, 3;
    #     covered 3/4 = 75.0 %. Passing tests: only TST-1 (pass) -> 1/4 = 25.0 %.
    #     Only failing tests: REQ-2 (its one test fails; REQ-3 has a failing TST-5 and a
    #     blocked TST-3, so not every test fails). By integrity: C = REQ-1, REQ-2
    #     -> 2/2 = 100.0 %; D = REQ-3 -> 1/1 = 100.0 %; unset = REQ-4 -> 0/1 = 0.0 %.
    #   requirement-satisfied: REQ-4 derives_from REQ-1, so REQ-1 is not a leaf and out
    #     of scope; REQ-2 (FN-1) and REQ-3 (CMP-1) satisfied, REQ-4 not: 2/3 = 66.7 %.
    #   function-allocated: FN-1 yes, FN-2 no: 1/2 = 50.0 %.
    #   test-verifies: TST-4 verifies the missing REQ-99: 4/5 = 80.0 %.
    #   hazard-mitigated: HAZ-1 by REQ-3, HAZ-2 by nothing: 1/2 = 50.0 %.
    elements = [
        {"id": "REQ-1", "kind": "requirement", "name": "Charging power", "attributes": {"integrity": "C"}},
        {"id": "REQ-2", "kind": "requirement", "name": "Current limit, \"hard\"", "attributes": {"integrity": "C"}},
        {"id": "REQ-3", "kind": "requirement", "name": "Stop within 500 ms; −25 °C", "attributes": {"integrity": "D"}},
        {"id": "REQ-4", "kind": "requirement", "name": "=1+1 ramp\nrate"},
        {"id": "TST-1", "kind": "test", "attributes": {"result": "pass"}},
        {"id": "TST-2", "kind": "test", "attributes": {"result": "fail"}},
        {"id": "TST-3", "kind": "test", "attributes": {"result": "blocked"}},
        {"id": "TST-4", "kind": "test"},
        {"id": "TST-5", "kind": "test", "attributes": {"result": "fail"}},
        {"id": "FN-1", "kind": "function"}, {"id": "FN-2", "kind": "function"},
        {"id": "CMP-1", "kind": "component"},
        {"id": "HAZ-1", "kind": "hazard"}, {"id": "HAZ-2", "kind": "hazard"},
    ]
    links = [
        {"source": "TST-1", "target": "REQ-1", "relation": "verifies"},
        {"source": "TST-2", "target": "REQ-2", "relation": "verifies"},
        {"source": "TST-3", "target": "REQ-3", "relation": "verifies"},
        {"source": "TST-4", "target": "REQ-99", "relation": "verifies"},
        {"source": "TST-5", "target": "REQ-3", "relation": "verifies"},
        {"source": "REQ-4", "target": "REQ-1", "relation": "derives_from"},
        {"source": "FN-1", "target": "REQ-2", "relation": "satisfies"},
        {"source": "FN-1", "target": "CMP-1", "relation": "allocated_to"},
        {"source": "CMP-1", "target": "REQ-3", "relation": "satisfies"},
        {"source": "REQ-3", "target": "HAZ-1", "relation": "mitigates"},
    ]
    return write_thread(tmp_path / "thread.json", elements, links)


def test_worked_example_percentages(tmp_path):
    path = worked_example(tmp_path)
    result = run("coverage", "--format", "json", "--by", "integrity", str(path))
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert set(doc) == {"declarations", "evidence"}  # DESIGN.md coverage JSON
    got = {d["name"]: d for d in doc["declarations"]}
    expected = {
        "requirement-verified": (3, 4, 75.0, ["REQ-4"]),
        "requirement-satisfied": (2, 3, 66.7, ["REQ-4"]),
        "function-allocated": (1, 2, 50.0, ["FN-2"]),
        "test-verifies": (4, 5, 80.0, ["TST-4"]),
        "hazard-mitigated": (1, 2, 50.0, ["HAZ-2"]),
    }
    for name, (covered, total, percent, uncovered) in expected.items():
        d = got[name]
        assert (d["covered"], d["total"], d["percent"], d["uncovered"]) == (covered, total, percent, uncovered), name
    verified = got["requirement-verified"]
    assert verified["passing"] == {"covered": 1, "total": 4, "percent": 25.0, "uncovered": ["REQ-2", "REQ-3", "REQ-4"]}
    assert verified["failing_only"] == ["REQ-2"]
    assert {k: (v["covered"], v["total"], v["percent"]) for k, v in verified["groups"]["integrity"].items()} == {
        "C": (2, 2, 100.0), "D": (1, 1, 100.0), UNSET: (0, 1, 0.0)}
    assert got["requirement-satisfied"]["excluded"] == ["REQ-1"]
    assert got["test-verifies"]["direction"] == "backward" and verified["direction"] == "forward"
    assert got["requirement-satisfied"]["passing"] is None


def test_fail_under_decides_the_exit_code(tmp_path):
    path = str(worked_example(tmp_path))
    # The lowest declarations are at 50.0 %: not below 50, below 50.1.
    assert run("coverage", "--fail-under", "50", path).exit_code == 0
    result = run("coverage", "--fail-under", "50.1", path)
    assert result.exit_code == 1
    assert "FAIL: below 50.1%" in result.stdout and "function-allocated (50.0%)" in result.stdout
    assert run("coverage", path).exit_code == 0  # DESIGN.md: exit 0 unless asked to fail


def test_matrix_csv_reads_back_with_the_csv_module(tmp_path):
    path = worked_example(tmp_path)
    matrix = tmp_path / "matrix.csv"
    assert run("coverage", "--by", "integrity", "--matrix", str(matrix), "-o", str(tmp_path / "r.txt"), str(path)).exit_code == 0
    raw = matrix.read_bytes()
    # RFC 4180: CRLF row ends; our choice: a UTF-8 byte order mark for spreadsheet programs.
    assert raw.startswith(b"\xef\xbb\xbf") and b"\r\n" in raw
    with matrix.open(encoding="utf-8-sig", newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert list(rows[0]) == ["requirement", "name", "integrity", "satisfied_by", "allocated_to",
                             "verified_by", "tests", "passing", "failing"]
    assert [r["requirement"] for r in rows] == ["REQ-1", "REQ-2", "REQ-3", "REQ-4"]  # one row each
    by_id = {r["requirement"]: r for r in rows}
    assert by_id["REQ-2"]["name"] == 'Current limit, "hard"'
    assert by_id["REQ-3"]["name"] == "Stop within 500 ms; −25 °C"
    assert by_id["REQ-4"]["name"] == "'=1+1 ramp\nrate"  # formula guard keeps the text, inert
    assert (by_id["REQ-2"]["satisfied_by"], by_id["REQ-2"]["allocated_to"]) == ("FN-1", "CMP-1")
    assert by_id["REQ-2"]["verified_by"] == "TST-2 [fail]"
    assert (by_id["REQ-2"]["tests"], by_id["REQ-2"]["passing"], by_id["REQ-2"]["failing"]) == ("1", "0", "1")
    assert by_id["REQ-3"]["satisfied_by"] == "CMP-1" and by_id["REQ-3"]["integrity"] == "D"
    assert by_id["REQ-3"]["verified_by"] == "TST-3 [blocked]; TST-5 [fail]"


def test_summary_csv_reads_back(tmp_path):
    out = run("coverage", "--format", "csv", "--by", "integrity", str(worked_example(tmp_path))).stdout
    rows = list(csv.DictReader(io.StringIO(out.removeprefix("\ufeff"), newline="")))
    top = {r["declaration"]: r for r in rows if not r["group_attribute"]}
    assert top["requirement-satisfied"]["percent"] == "66.7"
    assert top["requirement-verified"]["passing_percent"] == "25.0"
    groups = {(r["declaration"], r["group_value"]): r["percent"] for r in rows if r["group_attribute"]}
    assert groups[("requirement-verified", "C")] == "100.0"


def test_evidence_hashes_equal_sha256_of_the_files(tmp_path):
    path = worked_example(tmp_path)
    config = tmp_path / "tracecheck.toml"
    config.write_text('[report.coverage]\nby = ["integrity"]\n', encoding="utf-8")
    matrix = tmp_path / "m.csv"
    git(tmp_path, "init", "-q")
    git(tmp_path, "add", "thread.json", "tracecheck.toml")
    git(tmp_path, "commit", "-qm", "stage")
    doc = json.loads(run("coverage", "--format", "json", "--matrix", str(matrix), str(path)).stdout)
    evidence = doc["evidence"]
    assert evidence["model"]["sha256"] == hashlib.sha256(path.read_bytes()).hexdigest()
    assert evidence["config"]["sha256"] == hashlib.sha256(config.read_bytes()).hexdigest()
    assert evidence["matrix"]["sha256"] == hashlib.sha256(matrix.read_bytes()).hexdigest()
    head = git(tmp_path, "rev-parse", "HEAD").strip()
    # The state when the model was read: committed, nothing else in the work tree yet.
    assert evidence["model"]["git"] == {"commit": head, "path": "thread.json", "dirty": False, "modified": False}
    assert evidence["group_by"] == ["integrity"]  # taken from [report.coverage]
    assert evidence["counts"]["elements"] == 14 and evidence["counts"]["links"] == 10
    assert "generated" not in evidence
    # By hand: TST-1 pass, TST-2 fail, TST-3 blocked, TST-4 no result, TST-5 fail.
    assert evidence["counts"]["test_results"] == {UNSET: 1, "blocked": 1, "fail": 2, "pass": 1}
    # Now m.csv is an untracked file: the tree is dirty, the model itself unchanged ...
    again = json.loads(run("coverage", "--format", "json", str(path)).stdout)["evidence"]["model"]["git"]
    assert (again["dirty"], again["modified"]) == (True, False)
    # ... and once the model changes, that shows too.
    path.write_text(path.read_text().replace("Charging power", "Charging power (rated)"), encoding="utf-8")
    git_state = json.loads(run("coverage", "--format", "json", str(path)).stdout)["evidence"]["model"]["git"]
    assert git_state["modified"] is True
    # REV:PATH reads the committed blob: its hash is the committed file's hash.
    committed = git(tmp_path, "show", "HEAD:thread.json").encode("utf-8")
    rev = json.loads(run("coverage", "--format", "json", "HEAD:thread.json").stdout)["evidence"]["model"]
    assert rev["sha256"] == hashlib.sha256(committed).hexdigest() and rev["git"]["commit"] == head


def test_every_output_format_is_byte_identical_on_rerun_and_carries_the_caution(tmp_path):
    path = str(worked_example(tmp_path))
    for fmt in ("text", "json", "markdown", "csv", "html"):
        first = run("coverage", "--format", fmt, "--by", "integrity", path).stdout
        assert first == run("coverage", "--format", fmt, "--by", "integrity", path).stdout, fmt
        if fmt != "csv":  # the CSV is a plain table; its hash is in the other outputs
            flat = " ".join(first.split())
            quiet = " ".join(run("coverage", "--quiet", "--format", fmt, path).stdout.split())
            assert "does not replace, review by qualified people" in quiet, fmt
            assert "does not replace, review by qualified people" in flat, fmt
            assert "not verification adequacy" in flat and "licensed practice prevail" in flat, fmt


def test_timestamp_only_when_asked(tmp_path):
    path = str(worked_example(tmp_path))
    doc = json.loads(run("coverage", "--format", "json", "--timestamp", path).stdout)
    assert doc["evidence"]["generated"].endswith("+00:00")


def test_result_attribute_is_configurable(tmp_path):
    path = write_thread(tmp_path / "t.json", [
        {"id": "REQ-1", "kind": "requirement"},
        {"id": "TST-1", "kind": "test", "attributes": {"verdict": "pass", "result": "fail"}},
    ], [{"source": "TST-1", "target": "REQ-1", "relation": "verifies"}])
    by_default = json.loads(run("coverage", "--format", "json", str(path)).stdout)
    chosen = json.loads(run("coverage", "--format", "json", "--result-attribute", "verdict", str(path)).stdout)
    pick = lambda doc: next(d for d in doc["declarations"] if d["name"] == "requirement-verified")  # noqa: E731
    assert pick(by_default)["passing"]["covered"] == 0 and pick(by_default)["failing_only"] == ["REQ-1"]
    assert pick(chosen)["passing"]["covered"] == 1 and pick(chosen)["failing_only"] == []


def test_profiles_are_valid_configuration_and_name_their_clauses(tmp_path):
    path = write_thread(tmp_path / "t.json", [
        {"id": "REQ-S1", "kind": "requirement", "attributes": {"level": "system"}},
        {"id": "REQ-H1", "kind": "requirement", "attributes": {"level": "high"}},
        {"id": "REQ-L1", "kind": "requirement", "attributes": {"level": "low"}},
        {"id": "TST-1", "kind": "test"},
    ], [{"source": "REQ-H1", "target": "REQ-S1", "relation": "derives_from"},
        {"source": "TST-1", "target": "REQ-H1", "relation": "verifies"}])
    for name, profile in PROFILES.items():
        result = run("coverage", "--format", "json", "--profile", name, str(path))
        assert result.exit_code == 0, result.output
        doc = json.loads(result.stdout)
        assert [d["name"] for d in doc["declarations"]] == sorted(profile.settings["coverage"])
        assert all(d["clause"] and "from memory" in d["clause"] for d in doc["declarations"])
        assert doc["evidence"]["profile"]["note"] == PROFILE_NOTE
        assert "not a compliance claim" in PROFILE_NOTE
    doc = json.loads(run("coverage", "--format", "json", "--profile", "airborne-software", str(path)).stdout)
    got = {d["name"]: (d["covered"], d["total"]) for d in doc["declarations"]}
    # By hand: REQ-S1 is developed by REQ-H1; REQ-H1 traces up and is tested but has no
    # low-level requirement; REQ-L1 traces nowhere and has no test; TST-1 verifies REQ-H1.
    assert got == {"system-to-high-level": (1, 1), "high-level-to-system": (1, 1),
                   "high-level-to-low-level": (0, 1), "low-level-to-high-level": (0, 1),
                   "high-level-tested": (1, 1), "low-level-tested": (0, 1), "test-to-requirement": (1, 1)}
    for fmt in ("html", "markdown", "text"):
        out = " ".join(run("coverage", "--format", fmt, "--profile", "road-vehicles", str(path)).stdout.split())
        assert "not a compliance claim" in out, fmt
        assert "ISO 26262-8" in out, fmt


def test_a_user_declaration_overrides_the_profile_of_the_same_name(tmp_path):
    path = write_thread(tmp_path / "t.json", [{"id": "HAZ-1", "kind": "hazard"}], [])
    (tmp_path / "tracecheck.toml").write_text(
        '[report.coverage]\nprofile = "medical-software"\n'
        '[coverage.risk-control-traced]\nenabled = false\n', encoding="utf-8")
    doc = json.loads(run("coverage", "--format", "json", str(path)).stdout)
    names = [d["name"] for d in doc["declarations"]]
    assert "risk-control-traced" not in names and "system-test-traced" in names
    assert doc["evidence"]["profile"]["name"] == "medical-software"


def test_bad_input_is_one_message_and_exit_2(tmp_path):
    path = str(worked_example(tmp_path))
    cases = [
        (["--fail-under", "150", path], "--fail-under"),
        (["--profile", "shipbuilding", path], "unknown profile"),
        (["--matrix", "-", path], "--matrix needs a file name"),
        (["--matrix", "same.csv", "-o", "./same.csv", path], "name the same file"),
        ([str(tmp_path / "missing.json")], "no such file"),
        (["--by", "integrty", path], "no element carries the attribute 'integrty'"),
    ]
    for args, words in cases:
        result = CliRunner().invoke(cli, ["coverage", *args])
        assert result.exit_code == 2, (args, result.output)
        assert words in result.stderr and "Traceback" not in result.stderr
    (tmp_path / "tracecheck.toml").write_text('[report.coverage]\nby = 3\n', encoding="utf-8")
    result = CliRunner().invoke(cli, ["coverage", path])
    assert result.exit_code == 2 and "report.coverage.by" in result.stderr and "tracecheck.toml" in result.stderr
    # From configuration, an attribute the model lacks is accepted (an early stage may
    # not carry it yet): everything falls under "(unset)".
    (tmp_path / "tracecheck.toml").write_text('[report.coverage]\nby = ["owner"]\n', encoding="utf-8")
    doc = json.loads(run("coverage", "--format", "json", path).stdout)
    assert set(doc["declarations"][0]["groups"]["owner"]) == {UNSET}


def test_html_is_self_contained(tmp_path):
    from lxml import html as lxml_html

    page = run("coverage", "--format", "html", "--by", "integrity", str(worked_example(tmp_path))).stdout
    tree = lxml_html.fromstring(page)
    assert tree.xpath("//link") == [] and tree.xpath("//script[@src]") == [] and tree.xpath("//img") == []
    for attribute in tree.xpath("//@href | //@src"):
        assert "://" not in attribute
    assert "@media print" in page
    assert tree.xpath("//*[@id='summary']") and tree.xpath("//table[@id='matrix']//tbody/tr")
    assert len(tree.xpath("//table[@id='matrix']//tbody/tr")) == 4


def test_json_output_validates_against_the_published_schema(tmp_path):
    import jsonschema

    from tests.conftest import ROOT

    # jsonschema as the reference validator of JSON Schema draft 2020-12.
    schema = json.loads((ROOT / "schemas" / "coverage.schema.json").read_text())
    jsonschema.Draft202012Validator.check_schema(schema)
    path = str(worked_example(tmp_path))
    for args in ([], ["--profile", "road-vehicles"], ["--matrix", str(tmp_path / "m.csv"), "--timestamp"]):
        doc = json.loads(run("coverage", "--format", "json", "--by", "integrity", *args, path).stdout)
        jsonschema.Draft202012Validator(schema).validate(doc)
    broken = {**doc, "declarations": [{**doc["declarations"][0], "percent": "75.0"}]}
    assert list(jsonschema.Draft202012Validator(schema).iter_errors(broken))


def test_demo_writes_the_qualification_audit(tmp_path):
    target = tmp_path / "demo"
    result = run("demo", str(target))
    assert result.exit_code == 0, result.output
    reports = target / "reports"
    doc = json.loads((reports / "coverage.json").read_text())
    evidence = doc["evidence"]
    assert evidence["model"]["stage"] == "qualification"
    assert evidence["model"]["git"]["commit"] == git(target, "rev-parse", "qualification^{commit}").strip()
    assert evidence["model"]["git"]["dirty"] is False  # reports/ is ignored by the demo repository
    assert evidence["matrix"]["sha256"] == hashlib.sha256((reports / "matrix.csv").read_bytes()).hexdigest()
    got = {d["name"]: d for d in doc["declarations"]}
    # The planted defects of tracecheck/demo/stages.py at qualification: HAZ-006
    # unmitigated, REQ-SW-040's verifying link removed (its second test verifies nothing).
    assert got["hazard-mitigated"]["uncovered"] == ["HAZ-006"]
    assert got["test-verifies"]["uncovered"] == ["TST-SW-040-2"]
    assert "REQ-SW-040" in got["high-integrity-verified-twice"]["uncovered"]
    assert (reports / "coverage.html").read_text().startswith("<!DOCTYPE html>")
    assert "hazard-mitigated: 5/6 83.3%" in result.stdout


def test_coverage_and_check_agree_on_the_gaps(tmp_path):
    # The coverage rule of `check` and the report share one evaluation; hold them to it.
    path = tmp_path / "thread.json"
    from tracecheck.demo.stages import stage_bytes

    path.write_bytes(stage_bytes("detailed-design"))
    report = json.loads(run("coverage", "--format", "json", str(path)).stdout)
    found = json.loads(run("check", "--format", "json", str(path)).stdout)["findings"]
    from_check: dict[str, list[str]] = {}
    for finding in found:
        if finding["rule"] == "coverage":
            from_check.setdefault(finding["declaration"], []).extend(finding["elements"])
    from_report = {d["name"]: d["uncovered"] for d in report["declarations"] if d["uncovered"]}
    assert {k: sorted(v) for k, v in from_check.items()} == from_report
    text = run("coverage", str(path)).stdout
    assert "\x1b[" not in text  # piped: plain text


def test_html_escapes_model_text(tmp_path):
    from lxml import html as lxml_html

    hostile = '<img src=x onerror="alert(1)"></script>'
    path = write_thread(tmp_path / "t.json", [
        {"id": "REQ-<b>1</b>", "kind": "requirement", "name": hostile, "attributes": {"integrity": hostile}},
        {"id": "TST-1", "kind": "test", "attributes": {"result": '" onmouseover="x'}},
    ], [{"source": "TST-1", "target": "REQ-<b>1</b>", "relation": "verifies"}])
    page = run("coverage", "--format", "html", "--by", "integrity", str(path)).stdout
    tree = lxml_html.fromstring(page)
    assert tree.xpath("//img") == [] and tree.xpath("//b") == [] and len(tree.xpath("//script")) == 1
    assert not tree.xpath("//@onmouseover") and not tree.xpath("//@onerror")
    assert hostile in tree.text_content()
