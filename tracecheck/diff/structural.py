"""The structural diff of two matched models: element fields, moves and links."""

from __future__ import annotations

import difflib
import re
from collections import defaultdict
from collections.abc import Mapping
from typing import Any

from tracecheck.diff.sides import side_of
from tracecheck.model import Element, Model

__all__ = ["field_changes", "word_diff", "moves", "link_changes", "link_json", "MISSING"]

MISSING = None  # an absent field or attribute is reported as null
# A word (with inner dots, commas, hyphens, apostrophes, slashes: "0.5", "set-point",
# "A/s"), or one mark of punctuation, so "cycle." against "cycle and" changes one word.
_TOKEN = re.compile(r"\w+(?:[.,'/-]\w+)*|[^\w\s]")


def _tokens(text: str | None) -> list[tuple[str, str]]:
    """(gap, token): gap is " " where whitespace preceded the token, else ""."""
    found, end = [], 0
    for match in _TOKEN.finditer(text or ""):
        found.append((" " if match.start() > end and found else "", match.group()))
        end = match.end()
    return found


def _run(op: str, tokens: list[tuple[str, str]]) -> dict[str, str]:
    return {"op": op, "text": "".join(gap + token for gap, token in tokens)}


def word_diff(old: str | None, new: str | None) -> list[dict[str, str]]:
    """Word-level diff of two texts as runs ``{"op": equal|delete|insert, "text"}``.

    Texts are split into words and punctuation marks; whitespace only separates (a
    reflowed paragraph is unchanged word by word). The runs come from
    :class:`difflib.SequenceMatcher` over the token lists, with autojunk off so
    frequent words ("the", "shall") are still aligned. A run's text starts with one
    space when whitespace separated it from what precedes it, so concatenating the
    ``equal`` and ``insert`` runs gives the new text with its whitespace normalised
    (``equal`` and ``delete`` runs: the old one, up to spacing around punctuation).

    Examples
    --------
    >>> word_diff("stop within 1 s.", "stop within 0.5 s.")
    [{'op': 'equal', 'text': 'stop within'}, {'op': 'delete', 'text': ' 1'}, {'op': 'insert', 'text': ' 0.5'}, {'op': 'equal', 'text': ' s.'}]
    """
    a, b = _tokens(old), _tokens(new)
    runs: list[dict[str, str]] = []
    matcher = difflib.SequenceMatcher(None, [t for _, t in a], [t for _, t in b], autojunk=False)
    for op, i1, i2, j1, j2 in matcher.get_opcodes():
        if op == "equal":
            runs.append(_run("equal", b[j1:j2]))
            continue
        if i2 > i1:
            runs.append(_run("delete", a[i1:i2]))
        if j2 > j1:
            runs.append(_run("insert", b[j1:j2]))
    return runs


def _jsonable(value: Any) -> Any:
    return list(value) if isinstance(value, tuple) else value


def field_changes(old: Element, new: Element) -> dict[str, dict[str, Any]]:
    """Changed fields of a matched pair: ``name``, ``text``, ``kind``, ``attributes.KEY``.

    The id and the parent are not fields here (re-identification and moves have their
    own lists). A ``text`` change also carries its word-level ``words`` runs.
    """
    changes: dict[str, dict[str, Any]] = {}
    for name in ("kind", "name", "text"):
        before, after = getattr(old, name), getattr(new, name)
        if before != after:
            changes[name] = {"old": before, "new": after}
    if "text" in changes and old.text is not None and new.text is not None:
        if old.text.split() == new.text.split():
            del changes["text"]  # only reflowed: no word changed
        else:
            changes["text"]["words"] = word_diff(old.text, new.text)
    for key in sorted(set(old.attributes) | set(new.attributes)):
        before, after = old.attributes.get(key, MISSING), new.attributes.get(key, MISSING)
        if before != after or type(before) is not type(after):
            changes[f"attributes.{key}"] = {"old": _jsonable(before), "new": _jsonable(after)}
    return dict(sorted(changes.items()))


def moves(old: Model, new: Model, mapping: Mapping[str, str]) -> list[dict[str, str | None]]:
    """Matched elements whose parent, seen through the mapping, is a different element."""
    found = []
    old_parent, new_parent = side_of(old).parent, side_of(new).parent
    for old_id, new_id in mapping.items():
        before = old_parent(old_id)
        after = new_parent(new_id)
        translated = None if before is None else mapping.get(before, before)
        if translated != after:
            found.append({"id": new_id, "old_parent": before, "new_parent": after})
    return sorted(found, key=lambda m: m["id"])


def link_json(triple: tuple[str, str, str]) -> dict[str, str]:
    return {"source": triple[0], "target": triple[1], "relation": triple[2]}


def link_changes(old: Model, new: Model, mapping: Mapping[str, str]) -> dict[str, list]:
    """Links added and removed after mapping old ids to new ones, and relation changes.

    An old link is carried into the new id space end by end (an end that was never
    matched keeps its id). ``removed`` lists links in their *old* ids, ``added`` in
    the new ones. ``relation_changed`` pairs a removed and an added link between the
    same two ends when each is the only one there; both stay in ``added``/``removed``
    so those two lists remain the plain set difference of triples.
    """
    # Plain set algebra on triples; only links touching a re-identified element need
    # carrying into the new ids (matched ids are mostly unchanged).
    # Triples come straight from the columns (no Link objects); the links touching a
    # renamed element are found through the link index of each renamed end.
    renamed = {o: n for o, n in mapping.items() if o != n}
    old_side = side_of(old)
    before = old_side.triples
    origin: dict[tuple[str, str, str], tuple[str, str, str]] = {}
    if renamed:
        touched = set()
        for old_id in renamed:
            touched.update(old_side.outgoing(old_id), old_side.incoming(old_id))
        origin = {(renamed.get(s, s), renamed.get(t, t), r): (s, t, r) for s, t, r in touched}
        before = (before - touched) | origin.keys()
    now = side_of(new).triples
    lost = before - now
    removed = sorted(origin.get(k, k) for k in lost)
    added = sorted(now - before)
    gone: dict[tuple[str, str], list[tuple[str, str, str]]] = defaultdict(list)
    for key in lost:
        gone[key[:2]].append(origin.get(key, key))
    came: dict[tuple[str, str], list[str]] = defaultdict(list)
    for s, t, r in added:
        came[(s, t)].append(r)
    changed = []
    for ends in sorted(gone.keys() & came.keys()):
        if len(gone[ends]) == 1 and len(came[ends]) == 1:
            changed.append({"source": ends[0], "target": ends[1],
                            "old_relation": gone[ends][0][2], "new_relation": came[ends][0]})
    return {
        "added": [link_json(t) for t in added],
        "removed": [link_json(t) for t in removed],
        "relation_changed": changed,
    }
