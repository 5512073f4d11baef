"""Property: any valid thread model survives every writable format unchanged.

Generated models include what exports get wrong: ids that are not XML names, repeated
ids, dangling and cyclic parents, dangling links, multi-line texts, typed and list
attributes, characters XML escapes. Thread JSON's own parser is the judge of validity.
"""

from __future__ import annotations

import json

from hypothesis import given, settings
from hypothesis import strategies as st

from tests.test_reqif import assert_valid
from tracecheck.formats import csvpair, graphml, reqif, thread_json

# XML 1.0 cannot carry most control characters (the writers refuse them with exit 2).
_TEXT = st.text(
    st.characters(blacklist_categories=("Cs", "Cc"), blacklist_characters="\ufffe\uffff")
    | st.sampled_from("\n\r\t<>&\"' ,"),
    max_size=12,
)
_ID = st.one_of(st.sampled_from(["REQ-1", "REQ-2", "FN-1", "CMP-1", "TST-1", "1st", "a b", "x:y"]),
                _TEXT.filter(lambda s: s != ""))
_SCALAR = st.one_of(_TEXT, st.integers(-10**12, 10**12), st.booleans(),
                    st.floats(allow_nan=False, allow_infinity=False))
_VALUE = st.one_of(_SCALAR, st.lists(_SCALAR, max_size=3))
_ATTRIBUTES = st.dictionaries(st.sampled_from(["level", "integrity", "weight", "tags", "note:int", "id"]),
                              _VALUE, max_size=3)


@st.composite
def documents(draw):
    elements = []
    for _ in range(draw(st.integers(0, 6))):
        element = {"id": draw(_ID), "kind": draw(st.sampled_from(["requirement", "test", "hazard", "a kind"]))}
        for key in ("name", "text", "parent"):
            if draw(st.booleans()):
                element[key] = draw(_ID if key == "parent" else _TEXT)
        if draw(st.booleans()):
            element["attributes"] = draw(_ATTRIBUTES)
        elements.append(element)
    links = []
    for _ in range(draw(st.integers(0, 6))):
        link = {"source": draw(_ID), "target": draw(_ID),
                "relation": draw(st.sampled_from(["verifies", "derives_from", "traces to"]))}
        if draw(st.booleans()):
            link["id"] = draw(_ID)
        if draw(st.booleans()):
            link["attributes"] = draw(_ATTRIBUTES)
        links.append(link)
    document = {"format": "tracecheck-thread/1", "elements": elements, "links": links}
    if draw(st.booleans()):
        document["model"] = {"name": draw(_TEXT), "revision": draw(st.integers(0, 9))}
    return json.loads(json.dumps(document))


def _canonical(document: dict) -> dict:
    # What thread JSON itself would write back: empty attribute tables are dropped.
    return thread_json.to_document(thread_json.parse(json.dumps(document).encode(), "t.json"))


@settings(max_examples=40, deadline=None)
@given(documents())
def test_reqif_round_trip(document):
    model = thread_json.parse(json.dumps(document).encode(), "t.json")
    data = reqif.write(model)
    assert_valid(data)  # OMG ReqIF schema, ../shared/data/reqif.xsd (XHTML content not checked)
    back = reqif.parse(data, "t.reqif")
    assert thread_json.to_document(back) == _canonical(document)


@settings(max_examples=40, deadline=None)
@given(documents())
def test_graphml_round_trip(document):
    model = thread_json.parse(json.dumps(document).encode(), "t.json")
    back = graphml.parse(graphml.write(model), "t.graphml")
    assert thread_json.to_document(back) == _canonical(document)


def _drop_empty_fields(document: dict) -> dict:
    # CSV limits: no model block; an empty name or text cannot be told from "not set".
    document.pop("model", None)
    for element in document["elements"]:
        for key in ("name", "text"):
            if element.get(key) == "":
                del element[key]
    return document


@settings(max_examples=40, deadline=None)
@given(documents())
def test_csv_round_trip(document):
    model = thread_json.parse(json.dumps(document).encode(), "t.json")
    files = csvpair.write_pair(model)
    back = csvpair.read_pair((files["elements.csv"], "e.csv"), (files["links.csv"], "l.csv"))
    assert thread_json.to_document(back) == _drop_empty_fields(_canonical(document))
