"""The thread JSON reader's fast path: byte-scanned lines, column checks, lazy objects."""

from __future__ import annotations

import json

import jsonschema
from hypothesis import given, settings
from hypothesis import strategies as st

from tracecheck.formats import thread_json
from tracecheck.formats.json_lines import item_lines
from tracecheck.formats.thread_json import fast_valid, parse, schema
from tracecheck.model import Location

# Strings that trouble a byte scanner: quotes, runs of backslashes, brackets, braces,
# commas, escaped newlines, non-ASCII (multi-byte UTF-8) text.
tricky = st.text(alphabet=st.sampled_from(list('ab"\\[]{},:\n\t é漢😀')), max_size=8)
values = st.recursive(
    st.one_of(tricky, st.integers(), st.booleans(), st.none()),
    lambda inner: st.one_of(st.lists(inner, max_size=3), st.dictionaries(tricky, inner, max_size=3)),
    max_leaves=6,
)
items = st.lists(st.dictionaries(tricky, values, max_size=4), max_size=6)


def _exact_lines(text: str) -> dict[str, list[int]]:
    # Oracle: Python's own JSON scanner run item by item (the reader's slow path,
    # json.JSONDecoder.scan_once), counting newlines before each item's first character.
    positions = thread_json._Positions()
    thread_json._decode_document(text, positions)
    return {key: thread_json._lines(text, starts) for key, starts in positions.items.items()}


@settings(max_examples=120, deadline=None)
@given(
    items,
    items,
    st.dictionaries(tricky, tricky, max_size=2),
    st.sampled_from([None, 0, 1, 3]),
    st.booleans(),
    st.sampled_from([1, 2, 3, 7, 64, 1 << 20]),
)
def test_byte_scan_lines_equal_the_item_by_item_scanner(elements, links, model, indent, ascii_only, chunk):
    document = {"model": model, "elements": elements, "format": "x", "links": links}
    text = json.dumps(document, indent=indent, ensure_ascii=ascii_only)
    data = text.encode("utf-8")
    found = item_lines(data, {"elements": len(elements), "links": len(links)}, chunk=chunk)
    assert found == _exact_lines(text)


def test_byte_scan_declines_what_it_cannot_vouch_for():
    escaped_key = b'{"\\u0065lements": [{"a": 1}], "links": []}'
    assert item_lines(escaped_key, {"elements": 1, "links": 0}) is None
    twice = b'{"elements": [{"a": 1}], "elements": [{"a": 1}], "links": []}'
    assert item_lines(twice, {"elements": 1, "links": 0}) is None
    wrong_count = b'{"elements": [{"a": 1}], "links": []}'
    assert item_lines(wrong_count, {"elements": 2, "links": 0}) is None


def test_escaped_key_still_gets_exact_lines_through_the_fallback():
    data = b'{"format": "tracecheck-thread/1",\n"\\u0065lements": [\n\n{"id": "A", "kind": "test"}],\n"links": []}'
    model = parse(data, "m.json")
    assert model.location_of("A") == Location("m.json", 4)
    assert model.elements[0].location == Location("m.json", 4)


def test_objects_are_built_only_when_asked_for():
    data = json.dumps({"format": "tracecheck-thread/1",
                       "elements": [{"id": "A", "kind": "test", "attributes": {"status": "draft"}}],
                       "links": [{"source": "A", "target": "B", "relation": "verifies"}]}).encode()
    model = parse(data, "m.json")
    assert model._elements is None and model._links is None
    assert (model.element_count, model.link_count, model.kinds, model.kind_of("A")) == (1, 1, {"test": 1}, "test")
    assert model._elements is None  # counts, kinds and kind_of come from the columns
    assert model.elements[0].attributes == {"status": "draft"}
    assert model.links[0].triple == ("A", "B", "verifies")


# --- the column checks accept exactly what the published schema accepts ----------------
# Oracle: the JSON Schema 2020-12 validator of the jsonschema package over
# schemas/thread.schema.json. Values sit near every limit of the schema (empty strings,
# id length 1000/1001, scalar length 100000/100001) and every JSON type appears where a
# string is expected.

near_limits = st.sampled_from(["", "x", "x" * 1000, "x" * 1001, "y" * 10000, "y" * 10001])
odd_values = st.one_of(near_limits, st.integers(), st.floats(allow_nan=False, allow_infinity=False),
                       st.booleans(), st.none(), st.just([]), st.just({}))
attribute_values = st.one_of(odd_values, st.sampled_from(["z" * 100000, "z" * 100001]),
                             st.lists(st.one_of(odd_values, st.just(["nested"])), max_size=2))
attributes = st.one_of(st.dictionaries(near_limits, attribute_values, max_size=2), odd_values)


def _thing(required, optional):
    return st.fixed_dictionaries(
        {k: st.one_of(st.just("ID-1"), odd_values) for k in required},
        optional={**{k: odd_values for k in optional}, "attributes": attributes, "extra": st.just(1)},
    )


element_items = st.one_of(_thing(["id", "kind"], ["name", "text", "parent"]), _thing(["id"], []), odd_values)
link_items = st.one_of(_thing(["source", "target", "relation"], ["id"]), _thing(["source"], []), odd_values)


@settings(max_examples=200, deadline=None)
@given(st.lists(element_items, max_size=3), st.lists(link_items, max_size=3),
       st.one_of(st.none(), st.dictionaries(near_limits, attribute_values, max_size=2)))
def test_column_checks_agree_with_the_published_schema(elements, links, model):
    document = {"format": "tracecheck-thread/1", "elements": elements, "links": links}
    if model is not None:
        document["model"] = model
    document = json.loads(json.dumps(document))
    expected = jsonschema.Draft202012Validator(schema()).is_valid(document)
    assert fast_valid(document) == expected


def test_a_later_copy_of_an_id_is_checked_too():
    # Oracle: jsonschema over the published schema; the fast path codes only the first
    # element of each id, so the copies' kinds and parents need their own check.
    for bad in ({"kind": ""}, {"kind": 5}, {"kind": "test", "parent": ""}, {"kind": "test", "parent": 7}):
        document = {"format": "tracecheck-thread/1", "links": [],
                    "elements": [{"id": "A", "kind": "test"}, {"id": "A", **bad}]}
        assert not jsonschema.Draft202012Validator(schema()).is_valid(document)
        assert fast_valid(document) is False


def test_ids_holding_the_separator_of_the_compact_copies_still_match():
    # Oracle: plain set difference of link ends against element ids (as in test_rules).
    from tracecheck.config import Config
    from tracecheck.rules.engine import run_rules

    data = json.dumps({"format": "tracecheck-thread/1",
                       "elements": [{"id": "A\u0000B", "kind": "test"}, {"id": "A", "kind": "requirement"}],
                       "links": [{"source": "A\u0000B", "target": "A", "relation": "verifies"},
                                 {"source": "A\u0000B", "target": "B", "relation": "verifies"}]}).encode()
    model = parse(data, "m.json")
    dangling = {f.link for f in run_rules(model, Config()) if f.rule == "dangling-link"}
    assert dangling == {("A\u0000B", "B", "verifies")}
    assert model.position == {"A\u0000B": 0, "A": 1}


def test_elements_and_links_stay_assignable_and_the_arrays_follow():
    from tracecheck.model import Element, Link, Model

    model = Model([Element("A", "test")], [Link("A", "B", "verifies")])
    assert model.arrays.n == 1
    model.elements = [Element("A", "test"), Element("B", "requirement")]
    assert (model.arrays.n, model.kind_of("B"), model.element_count, model.link_count) == (2, "requirement", 2, 1)


def test_a_null_link_end_is_refused_as_the_schema_refuses_it():
    # Oracle: jsonschema over the published schema (a link's source, target and relation
    # are strings). A null end once passed the column checks: it was coded as "no
    # element", like a null parent.
    for end in ("source", "target", "relation"):
        link = {"source": "REQ-1", "target": "REQ-2", "relation": "derives_from", end: None}
        document = {"format": "tracecheck-thread/1", "elements": [], "links": [link]}
        assert not jsonschema.Draft202012Validator(schema()).is_valid(document)
        assert fast_valid(document) is False


# --- the typed decoder (msgspec structs) accepts exactly what the schema accepts ---------
# Oracle: jsonschema's Draft 2020-12 validator over the published schema, as above; and,
# for the values, the standard library's decoder through the reader's fallback path.

@settings(max_examples=200, deadline=None)
@given(st.lists(element_items, max_size=3), st.lists(link_items, max_size=3),
       st.one_of(st.none(), st.dictionaries(near_limits, attribute_values, max_size=2)))
def test_typed_decoder_agrees_with_the_published_schema(elements, links, model):
    document = {"format": "tracecheck-thread/1", "elements": elements, "links": links}
    if model is not None:
        document["model"] = model
    data = json.dumps(document).encode()
    expected = jsonschema.Draft202012Validator(schema()).is_valid(json.loads(data))
    assert (thread_json._decode_typed(data) is not None) == expected
    if expected:
        typed = thread_json.to_document(parse(data, "m.json"))
        standard = thread_json.to_document(thread_json._parse_slowly(data, "m.json"))
        assert typed == standard
        assert [type(v) for v in _leaves(typed)] == [type(v) for v in _leaves(standard)]


def _leaves(value):
    if isinstance(value, dict):
        for v in value.values():
            yield from _leaves(v)
    elif isinstance(value, list):
        for v in value:
            yield from _leaves(v)
    else:
        yield value


def test_inputs_the_typed_decoder_refuses_but_the_schema_allows_still_read():
    # Oracle: jsonschema over the published schema says these documents are valid; the
    # values must be what json.loads (the standard library) makes of them.
    cases = [
        '{"format": "tracecheck-thread/1", "elements": [{"id": "A", "kind": "test", "name": "\\ud800"}], "links": []}',
        '{"format": "tracecheck-thread/1", "elements": [{"id": "A", "kind": "test", "attributes": {"x": 1e400}}],'
        ' "links": []}',
    ]
    for text in cases:
        data = text.encode()
        assert jsonschema.Draft202012Validator(schema()).is_valid(json.loads(text))
        assert thread_json._decode_typed(data) is None
        element = parse(data, "m.json").elements[0]
        expected = json.loads(text)["elements"][0]
        assert (element.name, dict(element.attributes)) == (expected.get("name"), expected.get("attributes", {}))


def test_duplicate_keys_keep_the_last_value_on_both_paths():
    # RFC 8259 section 4 leaves duplicate names open; Python's json module keeps the last
    # value, and the typed decoder must agree with it (the fallback path is json).
    text = ('{"format": "tracecheck-thread/1", "elements": [{"id": "A", "kind": "test", "kind": "hazard",'
            ' "attributes": {"x": 1, "x": 2}}], "links": []}')
    data = text.encode()
    assert thread_json._decode_typed(data) is not None
    element = parse(data, "m.json").elements[0]
    assert (element.kind, dict(element.attributes)) == ("hazard", {"x": 2})
    assert thread_json.to_document(parse(data, "m.json")) == thread_json.to_document(
        thread_json._parse_slowly(data, "m.json"))


@settings(max_examples=120, deadline=None)
@given(items, items, st.sampled_from([None, 0, 1, 3]), st.booleans(), st.sampled_from([1, 2, 3, 7, 64, 1 << 20]),
       st.randoms(use_true_random=False), st.sampled_from([0, 2, 64]))
def test_lazy_lines_equal_the_item_by_item_scanner(elements, links, indent, ascii_only, chunk, rnd, eager_after):
    # Oracle: Python's own JSON scanner run item by item, as in the test above; lines
    # asked one at a time in random order, across the switch to computing all at once.
    from tracecheck.formats.json_lines import LazyLines

    text = json.dumps({"elements": elements, "format": "x", "links": links}, indent=indent, ensure_ascii=ascii_only)
    expected = _exact_lines(text)
    lazy = LazyLines.scan(text.encode("utf-8"), {"elements": len(elements), "links": len(links)}, chunk=chunk)
    assert lazy is not None
    lazy.EAGER_AFTER = eager_after
    asked = [(name, i) for name in ("elements", "links") for i in range(len(expected[name]))]
    rnd.shuffle(asked)
    assert [lazy.line(name, i) for name, i in asked] == [expected[name][i] for name, i in asked]
    assert {name: lazy.lines(name) for name in expected} == expected


@settings(max_examples=80, deadline=None)
@given(items, items, st.sampled_from([None, 0, 2]), st.sampled_from([1, 3, 64, 1 << 20]),
       st.sampled_from([1, 2, 5, 17, 1 << 16]), st.randoms(use_true_random=False))
def test_lazy_lines_with_any_checkpoint_spacing(elements, links, indent, chunk, step, rnd):
    # Oracle as above (Python's JSON scanner item by item). Newline checkpoints every
    # `step` bytes, chunk boundaries anywhere relative to them; every line asked one
    # at a time (the switch to all-at-once is set out of reach), then all at once.
    from tracecheck.formats.json_lines import LazyLines

    text = json.dumps({"elements": elements, "format": "x", "links": links}, indent=indent)
    expected = _exact_lines(text)
    lazy = LazyLines.scan(text.encode("utf-8"), {"elements": len(elements), "links": len(links)}, chunk=chunk,
                          step=step)
    assert lazy is not None
    lazy.EAGER_AFTER = 10**9
    asked = [(name, i) for name in ("elements", "links") for i in range(len(expected[name]))]
    rnd.shuffle(asked)
    assert [lazy.line(name, i) for name, i in asked] == [expected[name][i] for name, i in asked]
    assert lazy._all is None
    assert {name: lazy.lines(name) for name in expected} == expected
