"""The XML readers' batch columns say exactly what their one-by-one path says.

GraphML and ReqIF read the finished records of each parsed chunk by compiled XPath
columns, and fall back to reading records one at a time whenever the columns cannot
vouch for a batch. Both paths must give the same model: the same elements and links
in the same order, attributes, source lines and meta. These tests read every demo
stage, the hand-written ReqIF fixture and small awkward documents both ways, at
several chunk sizes (a chunk can end anywhere, even inside a tag), and compare.
Oracle for the source lines: lxml's full-tree parse (``sourceline`` of each start tag).
"""

from __future__ import annotations

from pathlib import Path

import pytest
from lxml import etree

from tracecheck.demo import STAGES
from tracecheck.demo.stages import stage_bytes
from tracecheck.errors import InputError
from tracecheck.formats import graphml, read_model, reqif, xmlsafe

FIXTURE = Path(__file__).resolve().parents[1] / "fixtures" / "reqif" / "charging-arm.reqif"
_ORIGIN = {"graphml": "thread.graphml", "reqif": "thread.reqif"}
_RECORDS = {"graphml": (graphml._NODE, graphml._EDGE), "reqif": (reqif._SPEC_OBJECT, reqif._SPEC_RELATION)}


def _no_columns(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(graphml, "_node_columns", lambda *args: None)
    monkeypatch.setattr(graphml, "_edge_columns", lambda *args: None)
    for name in ("_object_columns", "_relation_columns", "_hierarchy_columns"):
        monkeypatch.setattr(reqif, name, lambda *args: False)


def _spy(monkeypatch: pytest.MonkeyPatch) -> list:
    """Record whether each batch reader took its batch (so a test knows the columns ran)."""
    taken: list = []
    for module, name in ((graphml, "_node_columns"), (graphml, "_edge_columns"), (reqif, "_object_columns"),
                         (reqif, "_relation_columns"), (reqif, "_hierarchy_columns")):
        real = getattr(module, name)

        def spy(*args, real=real, name=name):
            result = real(*args)
            taken.append((name, result is not None and result is not False))
            return result

        monkeypatch.setattr(module, name, spy)
    return taken


def _content(fmt: str, data: bytes) -> tuple:
    model = read_model(data, _ORIGIN[fmt])
    return (
        [(e, dict(e.attributes), e.location) for e in model.elements],
        [(x, dict(x.attributes), x.location) for x in model.links],
        model.meta,
    )


def _both_ways(fmt: str, data: bytes, monkeypatch: pytest.MonkeyPatch, chunk: int | None) -> tuple:
    """The content read with batch columns, read one by one, and whether columns were used."""
    if chunk is not None:
        monkeypatch.setattr(xmlsafe, "CHUNK", chunk)
    with monkeypatch.context() as patch:
        taken = _spy(patch)
        by_columns = _content(fmt, data)
    with monkeypatch.context() as patch:
        _no_columns(patch)
        one_by_one = _content(fmt, data)
    return by_columns, one_by_one, any(took for _name, took in taken)


def _written(stage: str, fmt: str) -> bytes:
    model = read_model(stage_bytes(stage), "thread.json")
    return graphml.write(model) if fmt == "graphml" else reqif.write(model)


@pytest.mark.parametrize("chunk", [None, 97, 4096])
@pytest.mark.parametrize("fmt", sorted(_ORIGIN))
@pytest.mark.parametrize("stage", STAGES)
def test_columns_and_one_by_one_agree_on_the_demo(stage, fmt, chunk, monkeypatch):
    data = _written(stage, fmt)
    by_columns, one_by_one, columns_ran = _both_ways(fmt, data, monkeypatch, chunk)
    assert by_columns == one_by_one
    assert columns_ran, "no batch was read by columns"
    # Oracle: lxml's full-tree parse gives each record's start line.
    tree = etree.fromstring(data)
    element_tag, link_tag = _RECORDS[fmt]
    assert [loc.line for _e, _a, loc in by_columns[0]] == [e.sourceline for e in tree.iter(element_tag)]
    assert [loc.line for _x, _a, loc in by_columns[1]] == [e.sourceline for e in tree.iter(link_tag)]


@pytest.mark.parametrize("chunk", [None, 13, 211])
def test_columns_and_one_by_one_agree_on_the_hand_written_reqif(chunk, monkeypatch):
    by_columns, one_by_one, _columns_ran = _both_ways("reqif", FIXTURE.read_bytes(), monkeypatch, chunk)
    assert by_columns == one_by_one and by_columns[0]


_G = 'xmlns="http://graphml.graphdrawing.org/xmlns"'
_KEYS = ('<key id="k" for="node" attr.name="kind" attr.type="string"/>'
         '<key id="n" for="node" attr.name="name" attr.type="string"/>'
         '<key id="p" for="node" attr.name="parent" attr.type="string"/>'
         '<key id="s" for="node" attr.name="status" attr.type="string"/>'
         '<key id="c" for="node" attr.name="cost" attr.type="int"/>'
         '<key id="r" for="edge" attr.name="relation" attr.type="string"/>'
         '<key id="m" for="graph" attr.name="name" attr.type="string"/>')

# Documents whose batches the columns must refuse or read exactly as one by one
# would: empty values, comments inside values, a field given twice, typed keys, a
# nested graph, edges with and without ids, graph data before and after records.
_GRAPHML = {
    "plain": '<node id="A"><data key="k">function</data><data key="n">Arm drive</data></node>'
             '<node id="B"><data key="k">requirement</data><data key="p">A</data><data key="s">draft</data></node>'
             '<edge source="B" target="A"><data key="r">satisfies</data></edge>',
    "empty value": '<node id="A"><data key="k">function</data><data key="n"></data></node>',
    "comment in a value": '<node id="A"><data key="k">function</data><data key="n">Arm<!-- x -->drive</data></node>'
                          '<node id="B"><data key="k">test</data><data key="n"><!-- x -->Stop</data></node>',
    "field twice": '<node id="A"><data key="k">function</data><data key="n">one</data><data key="n">two</data></node>',
    "typed key": '<node id="A"><data key="k">component</data><data key="c">12</data></node>',
    "nested graph": '<node id="P"><data key="k">component</data><graph edgedefault="directed">'
                    '<node id="Q"><data key="k">function</data></node></graph></node>',
    "edge ids": '<node id="A"><data key="k">hazard</data></node>'
                '<edge id="e1" source="A" target="A"><data key="r">mitigates</data></edge>'
                '<edge source="A" target="Z"><data key="r">traces</data></edge>',
    "graph data": '<data key="m">shore charger</data><node id="A"><data key="k">function</data></node>'
                  '<data key="m">ignored</data>',
}


@pytest.mark.parametrize("chunk", [None, 5, 64])
@pytest.mark.parametrize("case", sorted(_GRAPHML))
def test_graphml_batches_agree_on_awkward_records(case, chunk, monkeypatch):
    data = (f'<?xml version="1.0"?>\n<graphml {_G}>{_KEYS}\n<graph edgedefault="directed">\n'
            + _GRAPHML[case].replace("><", ">\n<") + "\n</graph></graphml>\n").encode()
    by_columns, one_by_one, columns_ran = _both_ways("graphml", data, monkeypatch, chunk)
    assert by_columns == one_by_one
    if case in ("plain", "edge ids", "graph data"):
        assert columns_ran, "no batch was read by columns"


def test_graphml_error_from_a_batch_names_the_line(monkeypatch):
    # A node without kind inside an otherwise plain batch: the columns decline, and the
    # one-by-one path reports the node's own line.
    monkeypatch.setattr(xmlsafe, "CHUNK", 1 << 20)
    nodes = "\n".join(f'<node id="N{i}"><data key="k">function</data></node>' for i in range(5))
    data = (f'<graphml {_G}>{_KEYS}\n<graph>\n{nodes}\n<node id="X"><data key="n">no kind</data></node>\n'
            "</graph></graphml>").encode()
    with pytest.raises(InputError, match=r"thread\.graphml:8: node 'X' has no 'kind' data"):
        read_model(data, "thread.graphml")
