"""The coverage audit on integer codes against the audit as it was written before.

The reference below is the object-based audit: every Element through ``by_id``, the
counterparts of each element asked of a networkx ``MultiDiGraph`` of the links
(reference library: networkx, ``in_edges`` / ``out_edges`` with keys), groups,
passing tests, the matrix, names and test results computed one element at a time.
The report built from the arrays must give exactly the same answer on random models,
read through the fast column path and from Element and Link objects.
"""

from __future__ import annotations

import gc
import json
import weakref

import networkx as nx
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tracecheck.audit import UNSET, MatrixRow, Settings, build_report, group_key
from tracecheck.commands.common import load
from tracecheck.config import Condition, Config, config_from_mapping
from tracecheck.coverage import joined_pairs
from tracecheck.demo import DEMO_CONFIG
from tracecheck.demo.stages import STAGE_NAMES, stage_bytes
from tracecheck.errors import UsageError
from tracecheck.formats.thread_json import parse
from tracecheck.model import Model
from tracecheck.report import RenderOptions, render
from tracecheck.sources import Source

# --- the reference: the audit from objects, one element at a time -------------------------


def _graph(model: Model) -> nx.MultiDiGraph:
    graph = nx.MultiDiGraph()
    for link in model.links:
        graph.add_edge(link.source, link.target, key=link.relation)
    return graph


def _ends(model: Model, graph, element_id: str, direction: str, relations, kinds) -> set[str]:
    if element_id not in graph:
        return set()
    if direction == "incoming":
        edges = ((u, r) for u, _, r in graph.in_edges(element_id, keys=True))
    else:
        edges = ((v, r) for _, v, r in graph.out_edges(element_id, keys=True))
    found = set()
    for end, relation in edges:
        other = model.by_id.get(end)
        if relation in relations and other is not None and end != element_id and (kinds is None or other.kind in kinds):
            found.add(end)
    return found


def _result_of(element, attribute: str) -> str:
    value = element.attributes.get(attribute)
    return value if isinstance(value, str) else UNSET


def _reference_groups(model, result, group_by):
    covered = set(result.covered)
    groups = {}
    for attribute in group_by:
        members: dict[str, list[str]] = {}
        for element_id in (*result.covered, *result.uncovered):
            attrs = model.by_id[element_id].attributes
            for key in group_key(attrs[attribute]) if attribute in attrs else [UNSET]:
                members.setdefault(key, []).append(element_id)
        groups[attribute] = {
            key: (sum(1 for m in ids if m in covered), len(ids), tuple(sorted(m for m in ids if m not in covered)))
            for key, ids in sorted(members.items())
        }
    return groups


def _reference_passing(model, graph, result, attribute):
    need = result.declaration.need
    if need.kinds is None or "test" not in need.kinds:
        return None, ()
    covered, uncovered, failing_only = [], [], []
    for element_id in (*result.covered, *result.uncovered):
        ends = [model.by_id[e] for e in _ends(model, graph, element_id, need.direction, need.relations, need.kinds)]
        tests = [_result_of(e, attribute) for e in ends if e.kind == "test"]
        good = sum(1 for e in ends if e.kind != "test" or _result_of(e, attribute) == "pass")
        (covered if good >= result.declaration.at_least else uncovered).append(element_id)
        if tests and all(r == "fail" for r in tests):
            failing_only.append(element_id)
    return (len(covered), len(covered) + len(uncovered), tuple(sorted(uncovered))), tuple(sorted(failing_only))


def _reference_matrix(model, graph, group_by, attribute):
    rows = []
    for element in sorted(model.by_id.values(), key=lambda e: e.id):
        if element.kind != "requirement":
            continue
        satisfied = sorted(_ends(model, graph, element.id, "incoming", ("satisfies",),
                                 {"function", "component", "interface"}))
        allocated = sorted({c for fn in satisfied if model.by_id[fn].kind == "function"
                            for c in _ends(model, graph, fn, "outgoing", ("allocated_to",), {"component"})})
        tests = sorted(_ends(model, graph, element.id, "incoming", ("verifies",), {"test"}))
        attrs = tuple("; ".join(group_key(element.attributes[a])) if a in element.attributes else "" for a in group_by)
        rows.append(MatrixRow(element.id, element.name or "", attrs, tuple(satisfied), tuple(allocated),
                              tuple((t, _result_of(model.by_id[t], attribute)) for t in tests)))
    return rows


def _reference_test_results(model, attribute):
    counts: dict[str, int] = {}
    for element in model.by_id.values():
        if element.kind == "test":
            key = _result_of(element, attribute)
            counts[key] = counts.get(key, 0) + 1
    return dict(sorted(counts.items()))


def _check_against_reference(report, objects: Model, group_by, attribute) -> None:
    graph = _graph(objects)
    for d in report.declarations:
        groups = {a: {k: (c.covered, c.total, c.uncovered) for k, c in values.items()} for a, values in d.groups.items()}
        assert groups == _reference_groups(objects, d.result, group_by), d.name
        passing, failing_only = _reference_passing(objects, graph, d.result, attribute)
        assert (None if d.passing is None else (d.passing.covered, d.passing.total, d.passing.uncovered)) == passing
        assert d.failing_only == failing_only, d.name
    assert len(report.matrix) == sum(1 for e in objects.by_id.values() if e.kind == "requirement")
    assert list(report.matrix) == _reference_matrix(objects, graph, group_by, attribute)
    assert dict(report.names) == {e.id: e.name for e in objects.by_id.values() if e.name}
    for element_id in [*objects.by_id, "NOT-AN-ELEMENT"]:
        element = objects.by_id.get(element_id)
        assert report.names.get(element_id) == (element.name or None if element else None)
    assert report.evidence["counts"]["test_results"] == _reference_test_results(objects, attribute)


# --- random models -----------------------------------------------------------------------

_IDS = [f"E{i}" for i in range(9)]
_KINDS = ["requirement", "function", "component", "interface", "test", "hazard"]
_RELATIONS = ["verifies", "satisfies", "allocated_to", "mitigates", "derives_from"]
_FITS = {
    "verifies": (["test"], ["requirement", "function"]),
    "satisfies": (["function", "component", "interface"], ["requirement"]),
    "allocated_to": (["function"], ["component"]),
    "mitigates": (["requirement", "function"], ["hazard"]),
    "derives_from": (["requirement"], ["requirement"]),
}
_RESULTS = st.sampled_from(["pass", "pass", "fail", "fail", "not-run", "(unset)", 1, True, ["pass"]])
_VALUES = st.one_of(st.sampled_from(["A", "B", "(unset)", "pass", "fail", "not-run"]), st.integers(0, 2),
                    st.sampled_from([1.0, 2.5, True, False]),
                    st.lists(st.sampled_from(["A", "B", 1, True]), max_size=3))


@st.composite
def _documents(draw) -> bytes:
    elements = []
    for element_id in draw(st.lists(st.sampled_from(_IDS), min_size=1, max_size=12)):  # duplicates kept
        item = {"id": element_id, "kind": draw(st.sampled_from(_KINDS))}
        name = draw(st.sampled_from([None, "", "Arm stop", "=cmd"]))
        if name is not None:
            item["name"] = name
        attributes = {key: draw(_VALUES) for key in ("integrity", "level") if draw(st.booleans())}
        if draw(st.integers(0, 3)):
            attributes["result"] = draw(_RESULTS)
        if attributes or draw(st.booleans()):
            item["attributes"] = attributes
        elements.append(item)
    # Most links join the kinds their relation expects, so that every declaration and
    # group meets covered and uncovered elements; the rest are arbitrary or dangling.
    of_kind = {kind: [e["id"] for e in elements if e["kind"] == kind] for kind in _KINDS}
    links = []
    for _ in range(draw(st.integers(0, 25))):
        relation = draw(st.sampled_from(_RELATIONS))
        ends = []
        for kinds in _FITS[relation]:
            fitting = [i for k in kinds for i in of_kind[k]]
            pool = fitting if fitting and draw(st.integers(0, 3)) else _IDS + ["GHOST"]
            ends.append(draw(st.sampled_from(pool)))
        links.append({"source": ends[0], "target": ends[1], "relation": relation})
    return json.dumps({"format": "tracecheck-thread/1", "elements": elements, "links": links}).encode()


_CONFIGS = [
    Config(),
    config_from_mapping({"coverage": {
        "twice": {"elements": "requirement", "incoming": ["verifies", "satisfies"],
                  "from": ["test", "component"], "at_least": 2},
        "filtered": {"elements": "requirement", "where": {"integrity": ["A", 1]}, "incoming": "verifies",
                     "from": ["test"]},
        "any-kind": {"elements": "test", "outgoing": "verifies"},
    }}),
]


def _report(model: Model, config: Config, group_by, attribute):
    return build_report(Source(b"{}", "<test>"), model, config, Settings(group_by, attribute))


@settings(max_examples=60, deadline=None)
@given(_documents(), st.sampled_from(_CONFIGS),
       st.sampled_from([(), ("integrity",), ("level", "integrity"), ("result",), ("missing",)]),
       st.sampled_from(["result", "integrity"]))
def test_random_reports_equal_the_object_audit(document, config, group_by, attribute):
    columns = parse(document, "m.json")
    objects = parse(document, "m.json")
    objects = Model(objects.elements, objects.links, origin="m.json")
    for model in (columns, objects):
        _check_against_reference(_report(model, config, group_by, attribute), objects, group_by, attribute)


@settings(max_examples=60, deadline=None)
@given(_documents(), st.sampled_from(["incoming", "outgoing"]),
       st.sampled_from([("verifies",), ("verifies", "satisfies")]),
       st.sampled_from([None, frozenset({"test"}), frozenset({"requirement", "component"})]))
def test_joined_pairs_are_the_counterparts(document, direction, relations, kinds):
    model = parse(document, "m.json")
    graph = _graph(model)
    mine, other = joined_pairs(model.arrays, Condition(direction, relations, kinds))
    names = model.arrays.names
    pairs = sorted(zip((names[c] for c in mine.tolist()), (names[c] for c in other.tolist()), strict=True))
    assert len(pairs) == len(set(pairs))  # each pair once
    expected = sorted((e, end) for e in model.by_id for end in _ends(model, graph, e, direction, relations, kinds))
    assert pairs == expected


@pytest.mark.parametrize("stage", STAGE_NAMES)
def test_demo_stages_report_what_the_object_audit_reports(stage, tmp_path):
    (tmp_path / "tracecheck.toml").write_text(DEMO_CONFIG, encoding="utf-8")
    (tmp_path / "m.json").write_bytes(stage_bytes(stage))
    loaded = load(str(tmp_path / "m.json"))
    objects = Model(loaded.model.elements, loaded.model.links, origin="m.json")
    group_by = ("integrity", "level")
    fresh = parse(stage_bytes(stage), "m.json")
    _check_against_reference(_report(fresh, loaded.config, group_by, "result"), objects, group_by, "result")


def test_an_element_in_several_groups_counts_in_each():
    # Worked by hand: R1 (integrity C and D) is verified, R2 (C) is not, R3 has no
    # integrity; so C is 1 of 2 covered, D 1 of 1, and (unset) 0 of 1.
    document = {"format": "tracecheck-thread/1", "elements": [
        {"id": "R1", "kind": "requirement", "attributes": {"integrity": ["D", "C", "D"]}},
        {"id": "R2", "kind": "requirement", "attributes": {"integrity": "C"}},
        {"id": "R3", "kind": "requirement"},
        {"id": "T1", "kind": "test", "attributes": {"result": "fail"}}],
        "links": [{"source": "T1", "target": "R1", "relation": "verifies"}]}
    model = parse(json.dumps(document).encode(), "m.json")
    report = _report(model, Config(), ("integrity",), "result")
    verified = next(d for d in report.declarations if d.name == "requirement-verified")
    groups = {k: (c.covered, c.total, c.uncovered) for k, c in verified.groups["integrity"].items()}
    assert groups == {"(unset)": (0, 1, ("R3",)), "C": (1, 2, ("R2",)), "D": (1, 1, ())}
    assert verified.failing_only == ("R1",) and verified.passing.covered == 0
    assert list(report.matrix)[0].attributes == ("C; D",)


def test_a_json_report_builds_no_element_or_link_objects():
    model = parse(stage_bytes("qualification"), "q.json")
    report = _report(model, Config(), ("integrity",), "result")
    render("coverage", "json", report, RenderOptions())
    render("coverage", "text", report, RenderOptions())
    assert model._elements is None and model._links is None
    render("coverage", "html", report, RenderOptions())  # reads the matrix and names
    assert model._elements is None and model._links is None
    assert len(report.matrix) == model.kinds["requirement"]


def test_an_unknown_group_attribute_is_refused_naming_the_known_ones():
    model = parse(stage_bytes("qualification"), "q.json")
    with pytest.raises(UsageError, match="'integrty'.*attributes in the model: integrity, level"):
        build_report(Source(b"{}", "<test>"), model, Config(), Settings(("integrty",), strict_groups=True))
    # An attribute that some element carries passes, however late in the file it is.
    last = max(model.by_id.values(), key=lambda e: model.position[e.id])
    carried = next(iter(last.attributes), None)
    if carried is not None:
        build_report(Source(b"{}", "<test>"), model, Config(), Settings((carried,), strict_groups=True))


def test_a_report_frees_its_model_without_the_cyclic_collector():
    # The command pauses the collector: the report, its lazy matrix and names must not
    # keep the model alive through a reference cycle.
    enabled = gc.isenabled()
    gc.disable()
    try:
        model = parse(stage_bytes("qualification"), "q.json")
        report = _report(model, Config(), ("integrity",), "result")
        list(report.matrix), report.names.get("REQ-SYS-001")
        arrays = weakref.ref(model.arrays)
        del model, report
        assert arrays() is None
    finally:
        if enabled:
            gc.enable()
