"""The rule catalogue, checked case by case and against independent oracles."""

from __future__ import annotations

import networkx as nx
from hypothesis import given, settings
from hypothesis import strategies as st

from tracecheck.config import Config, config_from_mapping, default_metamodel
from tracecheck.model import Element, Link, Model
from tracecheck.rules import RULE_IDS, rules
from tracecheck.rules.engine import run_rules


def findings(elements, links, config=None):
    return run_rules(Model(elements, links, origin="m.json"), config or Config())


def by_rule(found, rule):
    return [f for f in found if f.rule == rule]


def R(i, **kw):
    return Element(i, "requirement", **kw)


def T(i, **kw):
    return Element(i, "test", **kw)


def test_every_registered_rule_has_complete_metadata():
    registered = rules()
    assert set(registered) <= set(RULE_IDS)
    for info in registered.values():
        assert info.short and info.full and info.help and info.template
        assert info.severity in ("error", "warning", "note")


def test_a_clean_thread_has_no_findings():
    elements = [R("REQ-1"), T("TST-1"), Element("FN-1", "function"), Element("CMP-1", "component"),
                Element("HAZ-1", "hazard")]
    links = [Link("TST-1", "REQ-1", "verifies"), Link("FN-1", "REQ-1", "satisfies"),
             Link("FN-1", "CMP-1", "allocated_to"), Link("REQ-1", "HAZ-1", "mitigates")]
    assert findings(elements, links) == []


def test_dangling_link_with_unknown_relation_gives_both_findings():
    # DESIGN.md: a link is reported under every rule it breaks.
    found = findings([R("REQ-1")], [Link("REQ-1", "REQ-404", "derives_frm")])
    rules_hit = {f.rule for f in found if f.link}
    assert rules_hit == {"dangling-link", "unknown-relation"}
    dangling = by_rule(found, "dangling-link")[0]
    assert dangling.elements == ("REQ-1", "REQ-404")
    assert dangling.link == ("REQ-1", "REQ-404", "derives_frm")


def test_self_loop_is_a_self_link_not_a_cycle():
    found = findings([R("REQ-1")], [Link("REQ-1", "REQ-1", "derives_from")])
    assert [f.rule for f in found if f.rule in ("self-link", "cycle")] == ["self-link"]


def test_duplicates_unknown_kind_endpoints_and_parent():
    elements = [R("REQ-1", parent="SEC-9"), R("REQ-1"), T("TST-1"), Element("HAZ-1", "hazard"),
                Element("X-1", "requirment")]
    links = [Link("TST-1", "REQ-1", "verifies"), Link("TST-1", "REQ-1", "verifies"),
             Link("TST-1", "HAZ-1", "verifies")]
    found = findings(elements, links)
    assert [f.elements for f in by_rule(found, "duplicate-id")] == [("REQ-1",)]
    assert [f.elements for f in by_rule(found, "dangling-parent")] == [("REQ-1",)]
    assert [f.link for f in by_rule(found, "duplicate-link")] == [("TST-1", "REQ-1", "verifies")]
    assert [f.link for f in by_rule(found, "relation-endpoints")] == [("TST-1", "HAZ-1", "verifies")]
    assert [f.elements for f in by_rule(found, "unknown-kind")] == [("X-1",)]


def test_part_of_joins_only_the_same_kind():
    elements = [Element("FN-1", "function"), Element("CMP-1", "component")]
    found = findings(elements, [Link("FN-1", "CMP-1", "part_of")])
    assert [f.link for f in by_rule(found, "relation-endpoints")] == [("FN-1", "CMP-1", "part_of")]


def test_parent_cycle_is_reported_once_with_all_members():
    elements = [R("A", parent="B"), R("B", parent="C"), R("C", parent="A"), R("D", parent="A")]
    cycles = by_rule(findings(elements, []), "cycle")
    assert [f.elements for f in cycles] == [("A", "B", "C")]
    assert "parent" in cycles[0].message


def test_missing_attribute_and_severity_and_disable_from_configuration():
    config = config_from_mapping({
        "required_attributes": {"requirement": ["integrity", "status"]},
        "rules": {"severity": {"coverage": "note"}, "disable": ["dangling-link"]},
    })
    found = findings([R("REQ-1", attributes={"integrity": "C", "status": ""})],
                     [Link("REQ-1", "NOPE", "traces_to")], config)
    missing = by_rule(found, "missing-attribute")
    assert [(f.elements, "status" in f.message) for f in missing] == [(("REQ-1",), True)]
    assert not by_rule(found, "dangling-link")
    assert {f.severity for f in by_rule(found, "coverage")} == {"note"}


def test_declared_coverage_with_filter_and_count():
    config = config_from_mapping({"coverage": {"high-integrity-verified-twice": {
        "elements": "requirement", "where": {"integrity": ["C", "D"]},
        "incoming": "verifies", "from": ["test"], "at_least": 2}}})
    elements = [R("REQ-1", attributes={"integrity": "C"}), R("REQ-2", attributes={"integrity": "A"}),
                T("TST-1"), T("TST-2")]
    links = [Link("TST-1", "REQ-1", "verifies"), Link("TST-1", "REQ-2", "verifies")]
    gaps = [f for f in findings(elements, links, config) if f.declaration == "high-integrity-verified-twice"]
    assert [f.elements for f in gaps] == [("REQ-1",)]
    assert gaps[0].fingerprint != findings(elements, links)[0].fingerprint


def test_fingerprints_ignore_lines_and_order():
    a = findings([R("REQ-1")], [Link("REQ-1", "GONE", "derives_from")])
    b = findings([T("TST-9"), R("REQ-1")], [Link("TST-9", "REQ-1", "verifies"),
                                             Link("REQ-1", "GONE", "derives_from")])
    fa = {f.fingerprint for f in a if f.rule == "dangling-link"}
    fb = {f.fingerprint for f in b if f.rule == "dangling-link"}
    assert fa == fb and len(fa) == 1


# --- property tests against independent oracles ----------------------------------------

NAMES = [f"N{i}" for i in range(8)]
KINDS = ["requirement", "test", "function", "component", "hazard"]
RELATIONS = ["derives_from", "verifies", "satisfies", "part_of", "mitigates"]

models = st.builds(
    lambda kinds, edges, extra: Model(
        [Element(n, k) for n, k in kinds.items()],
        [Link(s, t, r) for s, t, r in edges + extra],
    ),
    st.dictionaries(st.sampled_from(NAMES), st.sampled_from(KINDS), min_size=1),
    st.lists(st.tuples(st.sampled_from(NAMES), st.sampled_from(NAMES), st.sampled_from(RELATIONS)), max_size=25),
    st.lists(st.tuples(st.sampled_from(NAMES + ["GHOST"]), st.sampled_from(NAMES + ["GHOST"]),
                       st.sampled_from(RELATIONS)), max_size=3),
)


@settings(max_examples=300, deadline=None)
@given(models)
def test_cycles_equal_networkx_strongly_connected_components(model):
    # Oracle: networkx.strongly_connected_components (Tarjan), per acyclic relation,
    # over links whose ends exist, self-loops excluded (they are self-links).
    expected = set()
    ids = set(model.by_id)
    for relation in default_metamodel().acyclic_relations:
        graph = nx.DiGraph()
        graph.add_edges_from((x.source, x.target) for x in model.links
                             if x.relation == relation and x.source != x.target
                             and x.source in ids and x.target in ids)
        expected |= {(relation, tuple(sorted(c))) for c in nx.strongly_connected_components(graph) if len(c) > 1}
    found = {(f.message.split(" ")[0], f.elements) for f in run_rules(model, Config()) if f.rule == "cycle"}
    assert found == expected


@settings(max_examples=300, deadline=None)
@given(models)
def test_dangling_links_equal_a_set_difference(model):
    # Oracle: plain set difference of link ends against element ids.
    ids = {e.id for e in model.elements}
    expected = {x.triple for x in model.links if x.source not in ids or x.target not in ids}
    found = {f.link for f in run_rules(model, Config()) if f.rule == "dangling-link"}
    assert found == expected


@settings(max_examples=300, deadline=None)
@given(models)
def test_coverage_gaps_equal_a_brute_force_count(model):
    # Oracle: a direct loop over all element pairs, written from DESIGN.md's wording of
    # the five default declarations, independent of tracecheck.coverage.
    kinds = {e.id: e.kind for e in model.elements}
    triples = {x.triple for x in model.links}

    def has(src_kinds, rel, dst, incoming=True):
        for a in kinds:
            if a == dst or kinds[a] not in src_kinds:
                continue
            if ((a, dst, rel) if incoming else (dst, a, rel)) in triples:
                return True
        return False

    expected = set()
    for n, k in kinds.items():
        if k == "requirement":
            if not has({"test"}, "verifies", n):
                expected.add(("requirement-verified", n))
            leaf = not has({"requirement"}, "derives_from", n)
            if leaf and not has({"function", "component", "interface"}, "satisfies", n):
                expected.add(("requirement-satisfied", n))
        if k == "function" and not has({"component"}, "allocated_to", n, incoming=False):
            expected.add(("function-allocated", n))
        if k == "test" and not has({"requirement", "function", "component", "interface"}, "verifies", n, incoming=False):
            expected.add(("test-verifies", n))
        if k == "hazard" and not has({"requirement", "function", "component"}, "mitigates", n):
            expected.add(("hazard-mitigated", n))
    found = {(f.declaration, f.elements[0]) for f in run_rules(model, Config()) if f.rule == "coverage"}
    assert found == expected
