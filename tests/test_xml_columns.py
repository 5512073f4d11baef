"""The XML readers' column form equals the objects it stands for.

GraphML and ReqIF are read into per-field lists (``xmlsafe.RecordColumns``) and handed
to ``Model.from_columns``; Element and Link objects are built only when asked for.
These tests hold the column-built model against the object-built one, on every demo
stage written as GraphML and ReqIF, and against outside oracles: networkx's own GraphML
reader for the graph, lxml's full-tree parse for the source lines, the OMG ReqIF schema
for the file read.
"""

from __future__ import annotations

import io

import networkx as nx
import pytest
from lxml import etree

from tests.test_reqif import assert_valid
from tracecheck.arrays import ModelArrays
from tracecheck.check import check_model
from tracecheck.config import Config
from tracecheck.demo import STAGES
from tracecheck.demo.stages import stage_bytes
from tracecheck.formats import graphml, read_model, reqif, xmlsafe
from tracecheck.model import Model, ObjectColumns

_WRITERS = {"graphml": graphml.write, "reqif": reqif.write}
_ORIGIN = {"graphml": "thread.graphml", "reqif": "thread.reqif"}
_RECORDS = {  # the tags whose start lines are the elements' and links' locations
    "graphml": (graphml._NODE, graphml._EDGE),
    "reqif": (reqif._SPEC_OBJECT, reqif._SPEC_RELATION),
}


def _written(stage: str, fmt: str) -> tuple[Model, bytes]:
    source = read_model(stage_bytes(stage), "thread.json")
    return source, _WRITERS[fmt](source)


def _column_model(fmt: str, data: bytes) -> Model:
    model = read_model(data, _ORIGIN[fmt])
    assert isinstance(model.columns, xmlsafe.RecordColumns)
    return model


@pytest.mark.parametrize("fmt", sorted(_WRITERS))
@pytest.mark.parametrize("stage", STAGES)
def test_column_model_equals_object_model(stage, fmt):
    source, data = _written(stage, fmt)
    model = _column_model(fmt, data)
    columns = model.columns
    # Nothing built yet: counts, kinds and locations come from the lists.
    assert model._elements is None and model._links is None
    assert model.element_count == len(source.elements) and model.link_count == len(source.links)
    by_columns_elements = [(columns.element_ids[i], columns.element_kinds[i], columns.element_parents[i],
                            dict(columns.element_attributes(i)), columns.element_location(i))
                           for i in range(model.element_count)]
    by_columns_links = [columns.link(i) for i in range(model.link_count)]
    link_locations = [columns.link_location(i) for i in range(model.link_count)]
    # The objects, once asked for, say the same (Element/Link equality leaves out the
    # location, so it is compared on its own).
    assert model.elements == source.elements and model.links == source.links
    assert by_columns_elements == [(e.id, e.kind, e.parent, dict(e.attributes), e.location) for e in model.elements]
    assert by_columns_links == list(model.links)
    assert link_locations == [x.location for x in model.links] == [x.location for x in by_columns_links]
    # The integer columns the rules and coverage use match those of the objects.
    from_objects = ModelArrays(ObjectColumns(model.elements, model.links))
    for name in ("names", "kind_names", "rel_names"):
        assert getattr(model.arrays, name) == getattr(from_objects, name), name
    for name in ("kind", "parent", "src", "tgt", "rel", "first"):
        assert list(getattr(model.arrays, name)) == list(getattr(from_objects, name)), name
    # And so do the findings, with their lines, of a model read as columns and one
    # given as objects.
    objects = Model(model.elements, model.links, meta=model.meta, origin=model.origin, format=fmt)
    fresh = _column_model(fmt, data)
    assert (check_model(fresh, data, Config()).findings == check_model(objects, data, Config()).findings)


@pytest.mark.parametrize("fmt", sorted(_WRITERS))
@pytest.mark.parametrize("stage", STAGES)
def test_column_locations_are_the_lines_lxml_reports(stage, fmt):
    # Oracle: lxml's full-tree parse (etree.fromstring), whose sourceline is libxml2's
    # line of each start tag, in document order.
    _source, data = _written(stage, fmt)
    model = _column_model(fmt, data)
    tree = etree.fromstring(data)
    element_tag, link_tag = _RECORDS[fmt]
    assert model.columns.element_lines == [e.sourceline for e in tree.iter(element_tag)]
    assert model.columns.link_lines == [e.sourceline for e in tree.iter(link_tag)]
    assert {x.location.file for x in (*model.elements, *model.links)} == {_ORIGIN[fmt]}


@pytest.mark.parametrize("stage", STAGES)
def test_graphml_columns_match_networkx(stage):
    # Oracle: networkx.read_graphml (networkx's own GraphML reader) on the same bytes.
    _source, data = _written(stage, "graphml")
    model = _column_model("graphml", data)
    graph = nx.read_graphml(io.BytesIO(data), force_multigraph=True)
    columns = model.columns
    # networkx keeps one node per id and adds a bare node for a dangling link end; the
    # demo has both, so compare distinct ids, and fields of ids that occur once.
    ids = columns.element_ids
    assert [n for n, d in graph.nodes(data=True) if "kind" in d] == list(dict.fromkeys(ids))
    once = {i for i in ids if ids.count(i) == 1}
    assert once
    for i, node in enumerate(ids):
        if node in once:
            assert graph.nodes[node]["kind"] == columns.element_kinds[i]
            assert graph.nodes[node].get("parent") == columns.element_parents[i]
    assert sorted((s, t, d["relation"]) for s, t, d in graph.edges(data=True)) == sorted(
        zip(columns.link_sources, columns.link_targets, columns.link_relations, strict=True))


@pytest.mark.parametrize("stage", STAGES)
def test_reqif_columns_come_from_a_schema_valid_file(stage):
    # Source: OMG ReqIF 1.2 schema (../shared/data/reqif.xsd) validates the file read;
    # its SPEC-OBJECT and SPEC-RELATION counts are the column lengths.
    _source, data = _written(stage, "reqif")
    assert_valid(data)
    tree = etree.fromstring(data)
    model = _column_model("reqif", data)
    assert len(model.columns.element_ids) == sum(1 for _ in tree.iter(reqif._SPEC_OBJECT))
    assert len(model.columns.link_sources) == sum(1 for _ in tree.iter(reqif._SPEC_RELATION))
