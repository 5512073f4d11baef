"""GraphML adapter: mapping, locations, and interoperability with networkx both ways."""

from __future__ import annotations

import io
import json

import networkx as nx
import pytest
from click.testing import CliRunner

from tracecheck.cli import cli
from tracecheck.demo.stages import stage_bytes
from tracecheck.errors import ConfigError, InputError
from tracecheck.formats import detect, graphml, read_model, thread_json
from tracecheck.model import Model

NS = "http://graphml.graphdrawing.org/xmlns"


def _nx_bytes(graph) -> bytes:
    buffer = io.BytesIO()
    nx.write_graphml(graph, buffer)
    return buffer.getvalue()


def _as_nx(model) -> nx.MultiDiGraph:
    """The graph a model stands for, built directly (the expected side of the oracle)."""
    graph = nx.MultiDiGraph(**model.meta)
    for e in model.elements:
        fields = {k: getattr(e, k) for k in ("kind", "name", "text", "parent") if getattr(e, k) is not None}
        graph.add_node(e.id, **fields, **e.attributes)
    for x in model.links:
        graph.add_edge(x.source, x.target, relation=x.relation, **x.attributes)
    return graph


def test_reads_what_networkx_writes():
    # Oracle: networkx.write_graphml (networkx's own GraphML writer) produces the file;
    # every node, edge and datum networkx put there must come back.
    graph = nx.MultiDiGraph(name="ferry shore charging", stage="concept")
    graph.add_node("REQ-SYS-001", kind="requirement", name="Charging power", integrity="C", level=2)
    graph.add_node("CMP-CHG", kind="component", name="Shore charger", rated_mw=1.2, redundant=True)
    graph.add_node("FN-CHG", kind="function")
    graph.add_edge("FN-CHG", "CMP-CHG", relation="allocated_to")
    graph.add_edge("CMP-CHG", "REQ-SYS-001", relation="satisfies", confidence=0.9)
    graph.add_edge("CMP-CHG", "REQ-SYS-001", relation="traces_to")  # parallel edge
    model = read_model(_nx_bytes(graph), "export.graphml")
    assert model.meta == {"name": "ferry shore charging", "stage": "concept"}
    charger = model.by_id["CMP-CHG"]
    assert (charger.kind, charger.name) == ("component", "Shore charger")
    assert charger.attributes == {"rated_mw": 1.2, "redundant": True}
    assert model.by_id["REQ-SYS-001"].attributes == {"integrity": "C", "level": 2}
    triples = sorted((x.source, x.target, x.relation) for x in model.links)
    assert triples == sorted((u, v, d["relation"]) for u, v, d in graph.edges(data=True))
    assert [x.attributes for x in model.links if x.relation == "satisfies"] == [{"confidence": 0.9}]


def test_networkx_reads_back_the_same_graph():
    # Oracle: networkx.read_graphml of what we write equals the graph the model stands
    # for (same nodes with the same data, same edges with the same data).
    model = read_model(stage_bytes("qualification"), "thread.json")
    back = nx.read_graphml(io.BytesIO(graphml.write(model)), force_multigraph=True)
    expected = _as_nx(model)
    assert back.graph == {**expected.graph, "node_default": {}, "edge_default": {}}
    assert dict(back.nodes(data=True)) == dict(expected.nodes(data=True))
    edges = sorted(sorted(d.items()) + [("", (u, v))] for u, v, d in back.edges(data=True))
    want = sorted(sorted(d.items()) + [("", (u, v))] for u, v, d in expected.edges(data=True))
    assert edges == want


def test_round_trip_through_networkx_and_back():
    # networkx merges nodes of the same id: compare a model without duplicate ids.
    staged = read_model(stage_bytes("detailed-design"), "thread.json")
    model = Model(staged.by_id.values(), staged.links, meta=staged.meta)
    graph = nx.read_graphml(io.BytesIO(graphml.write(model)), force_multigraph=True)
    again = read_model(_nx_bytes(graph), "again.graphml")
    assert sorted(e.id for e in again.elements) == sorted(e.id for e in model.elements)
    assert {e.id: e for e in again.elements} == {e.id: e for e in model.elements}
    assert sorted(x.triple for x in again.links) == sorted(x.triple for x in model.links)


def test_every_element_and_link_keeps_its_line():
    model = read_model(stage_bytes("concept"), "thread.json")
    data = graphml.write(model)
    back = graphml.parse(data, "t.graphml")
    lines = data.decode().splitlines()
    for item in (*back.elements, *back.links):
        assert item.location.file == "t.graphml"
        start = lines[item.location.line - 1]
        assert start.startswith("<node" if hasattr(item, "kind") else "<edge")


def test_nested_subgraph_gives_parent_and_defaults_apply():
    # GraphML primer, sections 2.4 (key defaults) and 3.2 (nested graphs).
    data = f"""<?xml version="1.0"?>
<graphml xmlns="{NS}">
  <key id="k" for="node" attr.name="kind" attr.type="string"><default>component</default></key>
  <key id="r" for="edge" attr.name="relation" attr.type="string"/>
  <key id="x" for="node" yfiles.type="nodegraphics"/>
  <graph edgedefault="directed">
    <node id="CMP-ARM"><data key="x">drawing</data>
      <graph id="CMP-ARM:">
        <node id="CMP-ARM-DRIVE"/>
        <node id="FN-LOWER"><data key="k">function</data></node>
      </graph>
    </node>
    <edge source="FN-LOWER" target="CMP-ARM-DRIVE"><data key="r">allocated_to</data></edge>
  </graph>
</graphml>""".encode()
    model = graphml.parse(data, "arm.graphml")
    by_id = model.by_id
    assert by_id["CMP-ARM-DRIVE"].parent == "CMP-ARM"
    assert by_id["CMP-ARM-DRIVE"].kind == "component"
    assert by_id["FN-LOWER"].kind == "function"
    assert by_id["CMP-ARM"].parent is None
    assert by_id["CMP-ARM"].attributes == {}
    assert [x.location.line for x in model.links] == [13]


def test_configurable_key_names():
    data = f"""<graphml xmlns="{NS}">
  <key id="t" for="node" attr.name="type" attr.type="string"/>
  <key id="l" for="edge" attr.name="label" attr.type="string"/>
  <graph edgedefault="directed">
    <node id="TST-1"><data key="t">test</data></node>
    <node id="REQ-1"/>
    <edge source="TST-1" target="REQ-1"><data key="l">verifies</data></edge>
  </graph>
</graphml>""".encode()
    options = {"graphml": {"kind": "type", "relation": "label", "default_kind": "requirement"}}
    model = graphml.parse(data, "g.graphml", options)
    assert [(e.id, e.kind) for e in model.elements] == [("TST-1", "test"), ("REQ-1", "requirement")]
    assert model.links[0].triple == ("TST-1", "REQ-1", "verifies")
    with pytest.raises(InputError, match=r"g.graphml:6: node 'REQ-1' has no 'type' data"):
        graphml.parse(data, "g.graphml", {"graphml": {"kind": "type", "relation": "label"}})
    with pytest.raises(ConfigError, match="formats.graphml.knd"):
        graphml.parse(data, "g.graphml", {"graphml": {"knd": "type"}})


@pytest.mark.parametrize(
    "body, message",
    [
        ('<node id="A"><data key="n">x</data></node>', r"g.graphml:4: data of node 'A' refers to undeclared key 'n'"),
        ('<node id="A"><data key="k">requirement</data><data key="i">two</data></node>',
         r"g.graphml:4: data for 'level' of node 'A': invalid literal"),
        ('<node><data key="k">requirement</data></node>', r"g.graphml:4: a <node> has no 'id'"),
        ('<node id="A"><data key="k"></data></node>', r"g.graphml:4: node 'A' has no 'kind' data"),
        ('<edge source="A"/>', r"g.graphml:4: an <edge> needs both"),
        ('<hyperedge/>', r"g.graphml:4: hyperedges are not supported"),
    ],
)
def test_bad_content_is_located(body, message):
    data = f"""<graphml xmlns="{NS}"><key id="k" for="node" attr.name="kind"/>
<key id="i" for="node" attr.name="level" attr.type="int"/>
<graph>
{body}
</graph></graphml>""".encode()
    with pytest.raises(InputError, match=message):
        graphml.parse(data, "g.graphml")


def test_detected_by_content_whatever_the_name():
    data = graphml.write(read_model(stage_bytes("concept"), "thread.json"))
    assert detect(data, "export.txt").name == "graphml"
    assert detect(data, "-").name == "graphml"


def test_lists_survive_as_json_strings_and_output_is_deterministic():
    model = thread_json.parse(
        b'{"format": "tracecheck-thread/1", "elements": [{"id": "REQ-1", "kind": "requirement",'
        b' "attributes": {"stages": ["concept", 2, true]}}], "links": []}',
        "t.json",
    )
    first = graphml.write(model)
    assert first == graphml.write(model)
    assert graphml.parse(first, "t.graphml").elements[0].attributes == {"stages": ["concept", 2, True]}


def test_configuration_file_section_reaches_the_reader(tmp_path):
    # The README's example: [formats.graphml] kind = "type", default_relation = "traces_to".
    (tmp_path / "tracecheck.toml").write_text('[formats.graphml]\nkind = "type"\ndefault_relation = "traces_to"\n')
    (tmp_path / "arm.graphml").write_text(f"""<graphml xmlns="{NS}">
  <key id="t" for="node" attr.name="type" attr.type="string"/>
  <graph edgedefault="directed">
    <node id="REQ-1"><data key="t">requirement</data></node>
    <node id="REQ-2"><data key="t">requirement</data></node>
    <edge source="REQ-2" target="REQ-1"/>
  </graph>
</graphml>""")
    result = CliRunner().invoke(cli, ["convert", "arm.graphml", "-o", "arm.json"], catch_exceptions=False)
    assert result.exit_code == 0, result.output
    document = json.loads((tmp_path / "arm.json").read_text())
    assert [e["kind"] for e in document["elements"]] == ["requirement", "requirement"]
    assert [x["relation"] for x in document["links"]] == ["traces_to"]
    (tmp_path / "tracecheck.toml").write_text('[formats.graphml]\nknd = "type"\n')
    result = CliRunner().invoke(cli, ["check", "arm.graphml"], catch_exceptions=False)
    assert result.exit_code == 2 and "formats.graphml.knd: unknown option" in result.stderr


def test_streaming_keeps_every_record_its_line_and_nesting():
    # Records are freed as they are read; the nesting and lines must survive that.
    inner = "".join(f'<node id="CMP-{n}"><data key="k">component</data></node>\n' for n in range(700))
    outer = "".join(f'<node id="FN-{n}"><data key="k">function</data></node>\n' for n in range(700))
    edges = "".join(f'<edge source="FN-{n}" target="CMP-{n}"><data key="r">allocated_to</data></edge>\n'
                    for n in range(700))
    data = f"""<graphml xmlns="{NS}">
<key id="k" for="node" attr.name="kind"/><key id="r" for="edge" attr.name="relation"/>
<graph edgedefault="directed">
{outer}<node id="CMP-ROOT"><data key="k">component</data><graph>
{inner}</graph></node>
{edges}</graph></graphml>""".encode()
    model = graphml.parse(data, "big.graphml")
    assert len(model.elements) == 1401 and len(model.links) == 700
    assert {e.parent for e in model.elements if e.id.startswith("CMP-") and e.id != "CMP-ROOT"} == {"CMP-ROOT"}
    assert {e.parent for e in model.elements if e.id.startswith("FN-")} == {None}
    assert model.by_id["CMP-699"].location.line == 1404  # FN-* on lines 4-703, CMP-ROOT on 704
    assert [x.location.line for x in model.links][-1] == 2105


def test_key_defaults_written_by_networkx_apply_as_networkx_reads_them():
    # Oracle: networkx's own reader of the file networkx's pure-Python writer made
    # (write_graphml_xml), with node and edge defaults declared on the keys. networkx
    # keeps the defaults apart (graph["node_default"]); the GraphML primer (section
    # 2.4) says a default holds for every node without data for the key, so they merge.
    graph = nx.DiGraph(node_default={"kind": "requirement", "integrity": "B"},
                       edge_default={"relation": "derives_from"})
    graph.add_node("REQ-SYS-001", integrity="C")
    graph.add_node("REQ-SYS-002")
    graph.add_node("TST-001", kind="test")
    graph.add_edge("REQ-SYS-002", "REQ-SYS-001")
    graph.add_edge("TST-001", "REQ-SYS-001", relation="verifies")
    buffer = io.BytesIO()
    nx.write_graphml_xml(graph, buffer)
    model = graphml.parse(buffer.getvalue(), "defaults.graphml")
    oracle = nx.read_graphml(io.BytesIO(buffer.getvalue()))
    node_default, edge_default = oracle.graph["node_default"], oracle.graph["edge_default"]
    assert {e.id: {"kind": e.kind, **e.attributes} for e in model.elements} == {
        node: {**node_default, **data} for node, data in oracle.nodes(data=True)}
    assert sorted((x.source, x.target, x.relation) for x in model.links) == sorted(
        (u, v, {**edge_default, **d}["relation"]) for u, v, d in oracle.edges(data=True))
