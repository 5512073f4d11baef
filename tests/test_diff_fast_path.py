"""The diff's fast path (columns, integer codes, decoded items) against the plain path.

The plain path is the diff as it was written before the fast path: every Element and
Link object, ``by_id`` lookups, set algebra on Link triples. It is kept here, as the
reference, and run on the same models.
"""

from __future__ import annotations

import gc
import json
import weakref
from collections import defaultdict

from hypothesis import given, settings
from hypothesis import strategies as st

from tracecheck.config import Condition, Config
from tracecheck.coverage import counterparts, evaluate_codes
from tracecheck.demo.stages import STAGE_NAMES, stage_bytes
from tracecheck.diff import diff_models
from tracecheck.diff.matching import match_elements
from tracecheck.diff.structural import field_changes
from tracecheck.formats.thread_json import parse
from tracecheck.model import Model


def _objects(model: Model) -> Model:
    """The same model built from Element and Link objects (no decoded items, no columns)."""
    return Model(model.elements, model.links, meta=model.meta, origin=model.origin)


def _plain(old: Model, new: Model, mapping: dict[str, str]) -> dict:
    """The element and link lists computed the plain way, from objects."""
    modified = []
    for o, n in sorted(mapping.items(), key=lambda p: p[1]):
        changes = field_changes(old.by_id[o], new.by_id[n])
        if changes:
            modified.append({"id": n, "changes": changes} | ({"old_id": o} if o != n else {}))
    moved = []
    for o, n in mapping.items():
        before, after = old.by_id[o].parent, new.by_id[n].parent
        if (None if before is None else mapping.get(before, before)) != after:
            moved.append({"id": n, "old_parent": before, "new_parent": after})
    image = set(mapping.values())
    renamed = {o: n for o, n in mapping.items() if o != n}
    origin = defaultdict(list)
    for lk in old.links:
        origin[(renamed.get(lk.source, lk.source), renamed.get(lk.target, lk.target), lk.relation)].append(lk.triple)
    now = {lk.triple for lk in new.links}
    # Where several old links collapse into one triple after renaming (a dangling end
    # that names a renamed element's new id), the one touching a renamed element
    # stands for them, the first in file order.
    removed = sorted(next((t for t in origin[k] if t[0] in renamed or t[1] in renamed), origin[k][0])
                     for k in origin.keys() - now)
    added = sorted(now - origin.keys())
    return {
        "added": sorted(i for i in new.by_id if i not in image),
        "removed": sorted(i for i in old.by_id if i not in mapping),
        "modified": modified,
        "moved": sorted(moved, key=lambda m: m["id"]),
        "links_added": [list(t) for t in added],
        "links_removed": [list(t) for t in removed],
    }


def _fast(result) -> dict:
    lists = {k: result.elements[k] for k in ("added", "removed", "modified", "moved")}
    return lists | {
        "links_added": [[x["source"], x["target"], x["relation"]] for x in result.links["added"]],
        "links_removed": [[x["source"], x["target"], x["relation"]] for x in result.links["removed"]],
    }


def _both_ways(old_bytes: bytes, new_bytes: bytes) -> None:
    old, new = parse(old_bytes, "old.json"), parse(new_bytes, "new.json")
    fast = diff_models(old, new, Config(), with_picture=False)
    assert old._elements is None and new._elements is None  # the fast path built no objects
    objects = diff_models(_objects(parse(old_bytes, "old.json")), _objects(parse(new_bytes, "new.json")),
                          Config(), with_picture=False)
    assert fast.to_json() == objects.to_json()
    mapping = match_elements(_objects(old), _objects(new)).mapping
    assert _fast(fast) == _plain(_objects(old), _objects(new), mapping)


def test_demo_stage_diffs_equal_the_plain_path():
    # Invented demo data (the ferry stages), each stage against the next.
    for before, after in zip(STAGE_NAMES, STAGE_NAMES[1:], strict=False):
        _both_ways(stage_bytes(before), stage_bytes(after))


# Attribute values that compare equal in Python but not in the export (1, 1.0, true),
# so a comparison of decoded items must not hide a type change.
_VALUES = st.sampled_from([1, 1.0, True, "1", "approved", [1], [1.0], None])
_IDS = [f"REQ-{i}" for i in range(8)] + [f"TST-{i}" for i in range(4)]


def _twins(value) -> list:
    """Values Python finds equal to ``value`` but of another JSON type."""
    if isinstance(value, list):
        return [[1.0]] if value == [1] else []
    if isinstance(value, str) or value != 1:
        return []
    return [v for v in (1, 1.0, True) if type(v) is not type(value)]


@st.composite
def _changed(draw, document: bytes) -> bytes:
    """A second version: per element, maybe an attribute value of another type that
    Python finds equal (1 -> 1.0 -> true), keys reordered, or a new text."""
    doc = json.loads(document)
    for item in doc["elements"]:
        change = draw(st.sampled_from(["none", "type", "order", "text", "parent"]))
        attributes = item.get("attributes") or {}
        if change == "type" and attributes:
            key = draw(st.sampled_from(sorted(attributes)))
            value = attributes[key]
            twins = _twins(value)
            if twins:
                attributes[key] = draw(st.sampled_from(twins))
        elif change == "order" and attributes:
            item["attributes"] = dict(reversed(attributes.items()))
        elif change == "text":
            item["text"] = "The arm shall stop within 1 s."
        elif change == "parent":
            item["parent"] = _IDS[3]
    return json.dumps(doc).encode()


@st.composite
def _documents(draw) -> bytes:
    elements = []
    for element_id in draw(st.lists(st.sampled_from(_IDS), max_size=10)):  # duplicates kept
        item = {"id": element_id, "kind": draw(st.sampled_from(["requirement", "test"]))}
        for key, pool in (("name", ["Stop", "Stop arm"]), ("text", ["The arm shall stop.", "The arm  shall stop."]),
                          ("parent", _IDS[:3])):
            if draw(st.booleans()):
                item[key] = draw(st.sampled_from(pool))
        if draw(st.booleans()):
            keys = draw(st.permutations(["integrity", "status"]))
            item["attributes"] = {k: v for k in keys if (v := draw(_VALUES)) is not None}
        elements.append(item)
    links = [{"source": draw(st.sampled_from(_IDS + ["GHOST"])), "target": draw(st.sampled_from(_IDS)),
              "relation": draw(st.sampled_from(["verifies", "derives_from"]))}
             for _ in range(draw(st.integers(0, 12)))]
    return json.dumps({"format": "tracecheck-thread/1", "elements": elements, "links": links}).encode()


@settings(max_examples=150, deadline=None)
@given(_documents(), _documents())
def test_random_diffs_equal_the_plain_path(old, new):
    _both_ways(old, new)


@settings(max_examples=150, deadline=None)
@given(st.data())
def test_small_changes_of_one_model_equal_the_plain_path(data):
    old = data.draw(_documents())
    _both_ways(old, data.draw(_changed(old)))


def test_a_parsed_model_is_freed_without_the_cyclic_collector():
    # The columns and their integer arrays must not refer to each other: a cycle would
    # keep the whole decoded document alive until the collector walks it.
    enabled = gc.isenabled()
    gc.disable()
    try:
        model = parse(stage_bytes("qualification"), "q.json")
        evaluate_codes(model, Config().declarations[0])
        arrays, columns = weakref.ref(model.arrays), weakref.ref(model.columns)
        del model
        assert arrays() is None and columns() is None
    finally:
        if enabled:
            gc.enable()


def test_coverage_is_computed_once_per_model_and_declaration():
    model = parse(stage_bytes("qualification"), "q.json")
    declaration = Config().declarations[0]
    first = evaluate_codes(model, declaration)
    assert evaluate_codes(model, declaration) is first
    assert all(not codes.flags.writeable for codes in first)
    # A fresh model of the same bytes computes the same answer itself.
    again = evaluate_codes(parse(stage_bytes("qualification"), "q.json"), declaration)
    assert [c.tolist() for c in again] == [c.tolist() for c in first]


def _plain_counterparts(model: Model, element_id: str, condition: Condition) -> set[str]:
    """counterparts() as written before, from Link objects and by_id."""
    links = model.incoming.get(element_id, ()) if condition.direction == "incoming" else model.outgoing.get(
        element_id, ())
    found = set()
    for link in links:
        if link.relation not in condition.relations:
            continue
        end = link.source if condition.direction == "incoming" else link.target
        other = model.by_id.get(end)
        if other is not None and end != element_id and (condition.kinds is None or other.kind in condition.kinds):
            found.add(end)
    return found


@settings(max_examples=100, deadline=None)
@given(_documents(), st.sampled_from(["incoming", "outgoing"]),
       st.sampled_from([("verifies",), ("verifies", "derives_from")]),
       st.sampled_from([None, frozenset({"test"}), frozenset({"requirement", "test"})]))
def test_counterparts_from_codes_equal_the_plain_ones(document, direction, relations, kinds):
    model = parse(document, "m.json")
    objects = _objects(parse(document, "m.json"))
    condition = Condition(direction, relations, kinds)
    for element_id in objects.by_id:
        assert counterparts(model, element_id, condition) == _plain_counterparts(objects, element_id, condition)
    assert model.elements == objects.elements and model.links == objects.links  # built one side at a time


@settings(max_examples=150, deadline=None)
@given(st.lists(st.integers(0, 40), max_size=60), st.lists(st.integers(0, 40), max_size=60))
def test_absent_mask_equals_python_set_membership(keys, others):
    # Oracle: Python's own set membership (the plain definition of "not in").
    import numpy as np

    from tracecheck.diff.structural import _absent

    mask = _absent(np.array(keys, dtype=np.int64), np.array(others, dtype=np.int64))
    assert mask.tolist() == [k not in set(others) for k in keys]


def test_attributes_json_cannot_encode_take_the_key_and_type_comparison():
    # A lone surrogate escape is valid JSON text (RFC 8259 section 8.2 allows it) and
    # the schema accepts it, but it cannot be encoded as UTF-8: the all-at-once check
    # of attribute types falls back to comparing keys and value types. One element is
    # unchanged, the other's value changes type (1 -> 1.0, an export-visible change).
    def document(value: str) -> bytes:
        return ('{"format": "tracecheck-thread/1", "elements": ['
                '{"id": "REQ-1", "kind": "requirement", "attributes": {"note": "\\udc80", "level": 1}},'
                '{"id": "REQ-2", "kind": "requirement", "attributes": {"note": "\\udc80", "level": ' + value + '}}'
                '], "links": []}').encode()

    old, new = parse(document("1"), "old.json"), parse(document("1.0"), "new.json")
    assert [entry["id"] for entry in diff_models(old, new).elements["modified"]] == ["REQ-2"]
    _both_ways(document("1"), document("1.0"))


def test_percents_from_counts_equal_those_of_the_full_evaluation():
    # Reference: evaluate_all (the sorted id lists, themselves checked against the
    # networkx reference in test_differential.py) and its percent property; on every
    # demo stage (invented ferry data) and the random documents below.
    from tracecheck.coverage import evaluate_all, percents

    config = Config()
    for name in STAGE_NAMES:
        model = parse(stage_bytes(name), f"{name}.json")
        assert percents(model, config.declarations) == {
            r.declaration.name: r.percent for r in evaluate_all(model, config.declarations)}


@settings(max_examples=60, deadline=None)
@given(_documents())
def test_percents_equal_the_full_evaluation_on_random_documents(document):
    from tracecheck.coverage import evaluate_all, percents

    config = Config()
    model = parse(document, "m.json")
    assert percents(model, config.declarations) == {
        r.declaration.name: r.percent for r in evaluate_all(_objects(parse(document, "m.json")), config.declarations)}
