"""The fast path (integer arrays, lazy model) against a straightforward reference.

Oracle: ``tests/reference_rules.py``, a plain-Python implementation of the rule
catalogue over Element/Link objects with networkx for strongly connected components
(networkx.strongly_connected_components, Tarjan 1972) and example cycles. Findings must
be equal field by field: rule, severity, message, subjects, link, location, fingerprint,
declaration. Models are random: duplicate ids and links, dangling ends, self-links,
parents, unknown kinds and relations, attributes for filters and required attributes.
"""

from __future__ import annotations

import json
from unittest import mock

import networkx as nx
import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from tests.reference_rules import reference_coverage, reference_findings
from tracecheck.config import Config, config_from_mapping
from tracecheck.coverage import evaluate
from tracecheck.formats import thread_json
from tracecheck.formats.thread_json import parse
from tracecheck.model import Element, Link, Location, Model
from tracecheck.rules import cycles
from tracecheck.rules.engine import run_rules

NAMES = [f"N{i}" for i in range(7)]
ENDS = NAMES + ["GHOST", "N9"]
KINDS = ["requirement", "test", "function", "component", "hazard", "interface", "requirment"]
RELATIONS = ["derives_from", "verifies", "satisfies", "part_of", "mitigates", "refines",
             "allocated_to", "traces_to", "derives_frm"]
VALUES = st.one_of(st.sampled_from(["A", "B", "C", "", "approved"]), st.integers(0, 2),
                   st.booleans(), st.lists(st.sampled_from(["A", "C", 1]), max_size=2))

elements = st.lists(
    st.builds(
        lambda i, kind, parent, attrs, line: Element(
            i, kind, None, None, parent, attrs, Location("m.json", line)
        ),
        st.sampled_from(NAMES),
        st.sampled_from(KINDS),
        st.one_of(st.none(), st.sampled_from(ENDS)),
        st.dictionaries(st.sampled_from(["integrity", "status", "level"]), VALUES, max_size=3),
        st.one_of(st.none(), st.integers(1, 9)),
    ),
    min_size=0,
    max_size=9,
)
links = st.lists(
    st.builds(
        lambda s, t, r, line: Link(s, t, r, None, {}, None if line is None else Location("m.json", line)),
        st.sampled_from(ENDS),
        st.sampled_from(ENDS),
        st.sampled_from(RELATIONS),
        st.one_of(st.none(), st.integers(1, 40)),
    ),
    max_size=30,
)

CONFIGS = [
    Config(),
    config_from_mapping({
        "required_attributes": {"requirement": ["integrity", "status"], "test": ["status"]},
        "rules": {"severity": {"coverage": "note", "cycle": "warning"}, "disable": ["self-link"]},
        "metamodel": {"relations": {"traces_to": {"acyclic": True}, "satisfies": {"acyclic": True}}},
        "coverage": {
            "high-integrity-verified-twice": {
                "elements": "requirement", "where": {"integrity": ["C", 1, True]},
                "incoming": ["verifies", "refines"], "from": ["test", "requirement"], "at_least": 2},
            "any-trace": {"elements": "component", "outgoing": "traces_to", "severity": "error",
                          "except_when": {"incoming": "part_of"}},
            "function-allocated": {"enabled": False},
        },
    }),
]


def _compare(model, config):
    fast = run_rules(model, config)
    expected = reference_findings(model, config)
    assert fast == expected


@settings(max_examples=250, deadline=None)
@given(elements, links, st.sampled_from(range(len(CONFIGS))))
def test_fast_rules_equal_the_reference_on_object_models(elements, links, which):
    _compare(Model(elements, links, origin="m.json"), CONFIGS[which])


@settings(max_examples=100, deadline=None)
@given(elements, links, st.sampled_from(range(len(CONFIGS))))
def test_cycle_labelling_by_scipy_and_without_peeling_equals_the_reference(elements, links, which):
    # The large-model branches: scipy's labelling, and peeling that gives up at once.
    with mock.patch.object(cycles, "SCIPY_FROM", 0), mock.patch.object(cycles, "MAX_ROUNDS", 0):
        _compare(Model(elements, links, origin="m.json"), CONFIGS[which])


edges = st.lists(st.tuples(st.integers(0, 7), st.integers(0, 7)).filter(lambda e: e[0] != e[1]), max_size=20)


@settings(max_examples=200, deadline=None)
@given(edges)
def test_peeling_keeps_exactly_what_can_lie_on_a_cycle(pairs):
    # Oracle: networkx.simple_cycles. Peeling must keep every edge of every cycle, and
    # leave nothing when networkx finds no cycle (networkx.is_directed_acyclic_graph).
    graph = nx.DiGraph(pairs)
    sources = np.array([u for u, _ in pairs], dtype=np.int64)
    targets = np.array([v for _, v in pairs], dtype=np.int64)
    rest = cycles.peel(8, sources, targets, 64)
    kept = {pairs[i] for i in rest.tolist()}
    on_cycles = {(c[i], c[(i + 1) % len(c)]) for c in nx.simple_cycles(graph) for i in range(len(c))}
    assert on_cycles <= kept
    assert (not kept) == nx.is_directed_acyclic_graph(graph)


@settings(max_examples=150, deadline=None)
@given(elements, links, st.sampled_from(range(len(CONFIGS))))
def test_fast_coverage_equals_the_reference(elements, links, which):
    model = Model(elements, links, origin="m.json")
    for declaration in CONFIGS[which].declarations:
        result = evaluate(model, declaration)
        assert (result.covered, result.uncovered, result.excluded) == reference_coverage(model, declaration)


def _document(elements, links):
    items = []
    for e in elements:
        item = {"id": e.id, "kind": e.kind}
        if e.parent is not None:
            item["parent"] = e.parent
        if e.attributes:
            item["attributes"] = e.attributes
        items.append(item)
    return {"format": "tracecheck-thread/1", "elements": items,
            "links": [{"source": x.source, "target": x.target, "relation": x.relation} for x in links]}


@settings(max_examples=150, deadline=None)
@given(elements, links, st.sampled_from(range(len(CONFIGS))), st.sampled_from([None, 0, 1, 2]))
def test_fast_rules_equal_the_reference_on_parsed_thread_json(elements, links, which, indent):
    # The reader's lazy model (columns, lines found by the byte scanner) against the
    # reference reading Element/Link objects whose lines come from the item-by-item
    # decode (the reader's slow path, json.JSONDecoder.scan_once per item).
    data = json.dumps(_document(elements, links), indent=indent).encode("utf-8")
    lazy = parse(data, "m.json")
    eager = thread_json._parse_slowly(data, "m.json")
    materialised = Model(eager.elements, eager.links, origin="m.json")
    assert run_rules(lazy, CONFIGS[which]) == reference_findings(materialised, CONFIGS[which])
