"""Candidate pools of the content matching: rarest keys first, bounded, order-free.

The pool bound is what keeps the diff's matching linear in the model size; these
tests pin what it may and may not drop. The reference is brute force: every same-kind
pair scored and assigned by networkx's maximum-weight matching (networkx as an
independent oracle for the assignment, as elsewhere in the suite).
"""

from __future__ import annotations

import random

from hypothesis import given, settings
from hypothesis import strategies as st

from tracecheck.diff import matching
from tracecheck.diff.matching import (
    MatchOptions,
    _assign,
    _candidates,
    _Profile,
    match_elements,
    similarity,
)
from tracecheck.model import Element, Link, Model
from tracecheck.sides import side_of

VOCABULARY = [f"w{i}" for i in range(60)]


def _profile(element_id: str, words: frozenset[str], kind: str = "requirement") -> _Profile:
    return _Profile(Element(element_id, kind, None, " ".join(sorted(words))), words, frozenset(), frozenset())


@st.composite
def profile_sets(draw):
    """Old and new profiles over a vocabulary drawn with skewed frequencies, so some
    keys are shared by one new element and others by dozens."""
    def words():
        # Low indices are drawn far more often: common words next to rare ones.
        return frozenset(VOCABULARY[min(int(draw(st.floats(0, 1)) ** 3 * 60), 59)]
                         for _ in range(draw(st.integers(1, 6))))
    new = {f"N{i}": _profile(f"N{i}", words()) for i in range(draw(st.integers(1, 120)))}
    old = {f"O{i}": _profile(f"O{i}", words()) for i in range(draw(st.integers(1, 10)))}
    return old, new


@settings(max_examples=60, deadline=None)
@given(profile_sets(), st.randoms(use_true_random=False))
def test_pool_takes_the_rarest_keys_whole_and_stays_bounded(sets, rng):
    old, new = sets
    pools = _candidates(old, new)
    for old_id, profile in old.items():
        buckets = sorted(({n for n, p in new.items() if key in p.content} for key in profile.content), key=len)
        buckets = [b for b in buckets if 0 < len(b) <= matching._BLOCK_LIMIT]
        pool = pools[old_id]
        if not buckets:
            assert pool == set()
            continue
        # Rarest keys first, a size class whole or not at all: the pool is every bucket
        # up to the largest size whose buckets together stay within the bound, and at
        # least the rarest size class.
        sizes = sorted({len(b) for b in buckets})
        within = [s for s in sizes if sum(len(b) for b in buckets if len(b) <= s) <= matching._POOL_SIZE]
        cut = within[-1] if within else sizes[0]
        assert pool == set().union(*(b for b in buckets if len(b) <= cut))
    # The order in which elements and keys arrive does not change any pool.
    shuffled_new = dict(rng.sample(sorted(new.items()), len(new)))
    shuffled_old = dict(rng.sample(sorted(old.items()), len(old)))
    assert _candidates(shuffled_old, shuffled_new) == pools


def _templated(renumbered: int, replaced: int, seed: int) -> tuple[Model, Model, dict[str, str]]:
    """Channel requirements written from one template (ferry shore-charging scenario):
    ``renumbered`` get new ids with unchanged content and links, ``replaced`` are
    removed and as many new channels added. Returns the true renumbering."""
    rng = random.Random(seed)
    total = renumbered + replaced
    text = "The charge controller shall supervise the heartbeat of channel {} within {} ms."
    periods = [rng.choice([50, 100, 200]) for _ in range(total + replaced)]
    old_elements = [Element("SYS-1", "requirement", "Charging supervision", "The system shall supervise charging.")]
    new_elements = list(old_elements)
    truth = {}
    for i in range(total):
        element = Element(f"REQ-{i:04d}", "requirement", f"Channel {i} heartbeat", text.format(i, periods[i]), "SYS-1")
        old_elements.append(element)
        if i < renumbered:
            truth[element.id] = f"REQ-{i + 5000:04d}"
            new_elements.append(Element(truth[element.id], "requirement", element.name, element.text, "SYS-1"))
    for i in range(total, total + replaced):
        new_elements.append(Element(f"REQ-{i + 5000:04d}", "requirement", f"Channel {i} heartbeat",
                                    text.format(i, periods[i]), "SYS-1"))
    links_old = [Link(e.id, "SYS-1", "derives_from") for e in old_elements[1:]]
    links_new = [Link(e.id, "SYS-1", "derives_from") for e in new_elements[1:]]
    return Model(old_elements, links_old), Model(new_elements, links_new), truth


def test_templated_siblings_match_as_brute_force_does():
    # 200 siblings share every template word, so each common key's bucket is far above
    # the pool bound; only the channel number (and a shared period) tell them apart.
    old, new, truth = _templated(renumbered=160, replaced=40, seed=3)
    options = MatchOptions()
    result = match_elements(old, new, options)
    assert {o: n for o, n, _ in result.reidentified} == truth
    # Brute force: every old element left over scored against every new one.
    old_left = [e for e in old.elements if e.id not in {x.id for x in new.elements}]
    new_left = [e for e in new.elements if e.id not in {x.id for x in old.elements}]
    identity = {"SYS-1": "SYS-1"}
    old_profiles = matching._profiles(side_of(old), [e.id for e in old_left], identity)
    new_profiles = matching._profiles(side_of(new), [e.id for e in new_left], identity)
    rarity = matching.rarity_weights([*old_profiles.values(), *new_profiles.values()])
    scored = []
    for o, a in sorted(old_profiles.items()):
        ranked = sorted(((similarity(a, b, options, rarity), n) for n, b in new_profiles.items()),
                        key=lambda pair: (-pair[0], pair[1]))
        scored += [(o, n, s) for s, n in ranked[: matching._TOP_CANDIDATES] if s >= options.threshold]
    assert _assign(scored, options.threshold) == result.reidentified


def test_mapping_view_answers_as_the_plain_dict():
    # Reference: the dict built the plain way (shared ids map to themselves, content
    # pairs as reported), compared entry by entry with the view over the codes.
    old, new, truth = _templated(renumbered=12, replaced=5, seed=5)
    result = match_elements(old, new)
    new_ids = {e.id for e in new.elements}
    plain = {e.id: e.id for e in old.elements if e.id in new_ids} | {o: n for o, n, _ in result.reidentified}
    view = result.mapping
    assert dict(view) == plain and len(view) == len(plain)
    assert {o: n for o, n, _ in result.reidentified} == truth
    for element in old.elements:
        assert (element.id in view) == (element.id in plain)
        assert view.get(element.id) == plain.get(element.id)
    assert "REQ-9999" not in view and view.get("REQ-9999", "none") == "none"
    assert None not in view
