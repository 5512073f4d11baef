"""The structural diff of two matched models: element fields, moves and links."""

from __future__ import annotations

import difflib
import re
from collections import defaultdict
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import numpy as np

from tracecheck.model import Element, Model
from tracecheck.sides import Side, Triple, side_of

if TYPE_CHECKING:
    from tracecheck.diff.matching import Matching

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


def moves(old: Model, new: Model, matching: Matching) -> list[dict[str, str | None]]:
    """Matched elements whose parent, seen through the matching, is a different element."""
    # On the integer codes: parent codes of every matched pair in numpy passes; names
    # only for the pairs that moved and those whose old parent has no image (a
    # dangling parent, or an element that was not matched).
    oa, na = side_of(old).arrays, side_of(new).arrays
    codes = matching.codes
    matched, partners = matching.pairs()
    before, after = oa.parent[matched], na.parent[partners]
    element = (before >= 0) & (before < oa.n)
    image = np.where(element, codes[np.where(element, before, 0)], -1)  # -1: none, or no image
    known = (before == -1) | (image >= 0)
    moved = known & (image != after)  # a dangling parent's code never equals an element's

    def name(arrays, code: int) -> str | None:
        return None if code == -1 else arrays.names[code]

    for i in np.flatnonzero(~known).tolist():
        # The old parent keeps its own id (mapping.get(p, p)): compare the names.
        moved[i] = name(oa, int(before[i])) != name(na, int(after[i]))
    found = [{"id": na.names[int(partners[i])], "old_parent": name(oa, int(before[i])),
              "new_parent": name(na, int(after[i]))} for i in np.flatnonzero(moved).tolist()]
    return sorted(found, key=lambda m: m["id"])


def link_json(triple: tuple[str, str, str]) -> dict[str, str]:
    return {"source": triple[0], "target": triple[1], "relation": triple[2]}


def link_changes(old: Model, new: Model, matching: Matching) -> dict[str, list]:
    """Links added and removed after mapping old ids to new ones, and relation changes.

    An old link is carried into the new id space end by end (an end that was never
    matched keeps its id). ``removed`` lists links in their *old* ids, ``added`` in
    the new ones. ``relation_changed`` pairs a removed and an added link between the
    same two ends when each is the only one there; both stay in ``added``/``removed``
    so those two lists remain the plain set difference of triples.
    """
    renamed = {o: n for o, n, _ in matching.reidentified if o != n}
    lost, origin, added = _compare_links(side_of(old), side_of(new), matching.codes, renamed)
    removed = sorted(origin[k] for k in lost)
    gone: dict[tuple[str, str], list[tuple[str, str, str]]] = defaultdict(list)
    for key in lost:
        gone[key[:2]].append(origin[key])
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


def _absent(keys: np.ndarray, others: np.ndarray) -> np.ndarray:
    """Mask of ``keys`` not in ``others`` (two sorts and a binary search: ``np.isin``
    sorts both sides with their inverse, several times slower here). The keys are
    searched in sorted order, so each search starts where the last one ended and
    stays in cache: at 3M links 0.8-1.5 s instead of 3-6 s for keys in file order."""
    return _absent_sorted(_sorted(keys), np.sort(others))


def _absent_both(a: np.ndarray, b: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`_absent` both ways, each side sorted once (two sorts, not four)."""
    sorted_a, sorted_b = _sorted(a), _sorted(b)
    return _absent_sorted(sorted_a, sorted_b[1]), _absent_sorted(sorted_b, sorted_a[1])


def _sorted(keys: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The order that sorts ``keys``, and the keys in that order."""
    order = np.argsort(keys)
    return order, keys[order]


def _absent_sorted(keys: tuple[np.ndarray, np.ndarray], ordered: np.ndarray) -> np.ndarray:
    """Mask, in the original order of ``keys`` (as :func:`_sorted` gives them), of the
    keys not in the sorted array ``ordered``."""
    order, wanted = keys
    if len(ordered) == 0:
        return np.ones(len(wanted), dtype=bool)
    found = np.minimum(np.searchsorted(ordered, wanted), len(ordered) - 1)
    absent = np.empty(len(wanted), dtype=bool)
    absent[order] = ordered[found] != wanted
    return absent


def _compare_links(old: Side, new: Side, matched: np.ndarray, renamed: Mapping[str, str]):
    """The set algebra of :func:`link_changes` on integer keys.

    Both models' names (element ids and dangling ends) and relations get codes in one
    space, the old names after mapping (an end never matched keeps its id); each link
    becomes one integer, and two sorted look-ups find the links whose triple the
    other side lacks. Strings are touched only for those.

    ``matched`` is the matching on codes (:attr:`Matching.codes`): a matched old
    element takes its partner's code; only the unmatched ones and the dangling ends
    are looked up by name (a removed element's id may be a dangling end in the new
    model, and an old dangling end an element there).

    Returns the lost triples in the new id space, the old triple each stands for (a
    link touching a renamed element where several collapse into one, else the first
    in file order), and the added triples, sorted.
    """
    oa, na = old.arrays, new.arrays
    codes = np.full(len(oa.names), -1, dtype=np.int64)
    codes[: oa.n] = matched
    extra: dict[str, int] = {}  # names only the old side has
    for index in np.flatnonzero(codes < 0).tolist():
        name = oa.names[index]
        code = na.code_of(name)
        codes[index] = extra.setdefault(name, len(na.names) + len(extra)) if code is None else code
    relations = dict(zip(na.rel_names, range(len(na.rel_names)), strict=True))
    for name in oa.rel_names:
        relations.setdefault(name, len(relations))
    old_rel = np.array([relations[r] for r in oa.rel_names], dtype=np.int64)
    size, kinds = len(na.names) + len(extra), max(len(relations), 1)  # sizes of the common spaces
    old_keys = (codes[oa.src] * size + codes[oa.tgt]) * kinds + old_rel[oa.rel] if len(oa.src) else oa.src
    new_keys = (na.src * size + na.tgt) * kinds + na.rel
    oc, nc = old.columns, new.columns
    origin: dict[Triple, Triple] = {}
    lost, gained = _absent_both(old_keys, new_keys)
    for index in np.flatnonzero(lost).tolist():
        s, t, r = oc.link_sources[index], oc.link_targets[index], oc.link_relations[index]
        key = (renamed.get(s, s), renamed.get(t, t), r)
        if key not in origin or ((s in renamed or t in renamed) and origin[key] == key):
            origin[key] = (s, t, r)
    added = sorted({(nc.link_sources[i], nc.link_targets[i], nc.link_relations[i])
                    for i in np.flatnonzero(gained).tolist()})
    return origin.keys(), origin, added
