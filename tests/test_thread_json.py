"""Thread JSON reader: locations, located errors, and agreement with the published schema."""

from __future__ import annotations

import json

import jsonschema
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tracecheck.errors import InputError
from tracecheck.formats import read_model
from tracecheck.formats.thread_json import fast_valid, parse, schema, write

GOOD = b"""{
  "format": "tracecheck-thread/1",
  "model": {"name": "ferry shore charging", "stage": "concept"},
  "elements": [
    {"id": "REQ-SYS-001", "kind": "requirement", "name": "Charge current limit",
     "text": "The shore charger shall limit the charging current.",
     "attributes": {"integrity": "C", "tags": ["power", 2, true]}},
    {
      "id": "TST-001",
      "kind": "test"
    }
  ],
  "links": [
    {"source": "TST-001", "target": "REQ-SYS-001", "relation": "verifies"}
  ]
}
"""


def test_every_element_and_link_keeps_its_start_line():
    model = parse(GOOD, "m.json")
    assert [e.location.line for e in model.elements] == [5, 8]
    assert [x.location.line for x in model.links] == [14]
    assert model.meta["stage"] == "concept"
    assert model.elements[0].attributes["tags"] == ["power", 2, True]


def test_round_trip_through_the_writer_is_equal():
    model = parse(GOOD, "m.json")
    again = parse(write(model), "again.json")
    assert again.elements == model.elements and again.links == model.links
    assert again.meta == model.meta


def test_all_schema_violations_are_reported_with_line_and_json_path():
    data = b"""{"format": "tracecheck-thread/1",
 "elements": [
  {"id": "A", "kind": "requirement"},
  {"id": "", "kind": "requirement", "txt": "x"},
  {"id": "C", "kind": 3}
 ],
 "links": [{"source": "A", "relation": "verifies"}]}"""
    with pytest.raises(InputError) as caught:
        parse(data, "bad.json")
    text = str(caught.value)
    assert "4 schema violations" in text
    assert "bad.json:4: $.elements[1].id" in text
    assert "bad.json:4: $.elements[1]: unknown key(s) 'txt'" in text
    assert "bad.json:5: $.elements[2].kind" in text
    assert "bad.json:7: $.links[0]: 'target' is a required property" in text


def test_malformed_json_names_line_and_column():
    with pytest.raises(InputError, match=r"x.json:3:5: malformed JSON"):
        parse(b'{"format": "tracecheck-thread/1",\n"elements": [\n    ,]}', "x.json")


def test_content_detection_does_not_need_the_extension():
    assert read_model(GOOD, "<stdin>").format == "thread-json"


# --- the fast checks accept exactly what the published schema accepts ------------------
# Oracle: the JSON Schema 2020-12 validator of the jsonschema package over
# schemas/thread.schema.json (the published contract).

scalars = st.one_of(
    st.text(max_size=5), st.integers(), st.floats(allow_nan=False), st.booleans(), st.none()
)
ids = st.one_of(st.sampled_from(["", "REQ-1", "TST-1"]), st.integers(), st.none())
attr_values = st.one_of(scalars, st.lists(scalars, max_size=3), st.dictionaries(st.text(max_size=2), scalars, max_size=1))
maybe_attrs = st.one_of(st.dictionaries(st.text(max_size=3), attr_values, max_size=3), st.lists(scalars, max_size=1))


def _item(keys):
    return st.fixed_dictionaries(
        {},
        optional={
            **{k: ids for k in keys},
            "name": st.one_of(st.text(max_size=4), st.integers()),
            "text": st.one_of(st.text(max_size=4), st.none()),
            "attributes": maybe_attrs,
            "txt": st.just("typo"),
        },
    )


documents = st.fixed_dictionaries(
    {},
    optional={
        "format": st.sampled_from(["tracecheck-thread/1", "tracecheck-thread/2", 1]),
        "elements": st.one_of(st.lists(_item(["id", "kind", "parent"]), max_size=3), st.just({})),
        "links": st.lists(_item(["source", "target", "relation", "id"]), max_size=3),
        "model": st.one_of(st.dictionaries(st.text(max_size=3), attr_values, max_size=2), st.text(max_size=2)),
        "extra": st.just(1),
    },
)


@settings(max_examples=400, deadline=None)
@given(documents)
def test_fast_checks_agree_with_the_published_schema(document):
    # Python's json treats 1.0 and 1 alike only through the schema's "number"; keep the
    # document as the parser would produce it from text.
    document = json.loads(json.dumps(document))
    expected = jsonschema.Draft202012Validator(schema()).is_valid(document)
    assert fast_valid(document) == expected


def test_the_schema_is_a_valid_2020_12_schema():
    # Source: JSON Schema 2020-12 meta-schema, as shipped with the jsonschema package.
    jsonschema.Draft202012Validator.check_schema(schema())
