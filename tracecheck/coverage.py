"""Coverage declarations evaluated over a model.

A declaration (see :class:`tracecheck.config.Declaration`) names the elements that
need coverage — a kind plus attribute filters — and the links they need. This module
only counts; the ``coverage`` rule turns gaps into findings and ``report/`` renders.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from decimal import ROUND_HALF_UP, Decimal
from typing import TYPE_CHECKING

import numpy as np

from tracecheck.config import Condition, Declaration
from tracecheck.model import Element, Model
from tracecheck.sides import side_of

if TYPE_CHECKING:
    from tracecheck.arrays import ModelArrays

__all__ = ["DeclarationResult", "evaluate", "evaluate_codes", "evaluate_all", "joined_pairs", "percent", "percents",
           "matches_where", "counterparts"]


@dataclass(frozen=True)
class DeclarationResult:
    """Outcome of one declaration: the ids in scope, split into covered and uncovered.

    ``excluded`` holds elements of the right kind and attributes that ``except_when``
    takes out of scope (for example non-leaf requirements for ``requirement-satisfied``).
    """

    declaration: Declaration
    covered: tuple[str, ...]
    uncovered: tuple[str, ...]
    excluded: tuple[str, ...]

    @property
    def total(self) -> int:
        return len(self.covered) + len(self.uncovered)

    @property
    def percent(self) -> float | None:
        return percent(len(self.covered), self.total)


def percent(covered: int, total: int) -> float | None:
    """``covered / total`` in percent, rounded half up to one decimal; ``None`` if ``total`` is 0.

    Exact decimal arithmetic, so 1/16 gives 6.3 rather than the 6.2 that binary
    floating point and round-half-even would give.
    """
    if total == 0:
        return None
    value = (Decimal(100 * covered) / Decimal(total)).quantize(Decimal("0.1"), ROUND_HALF_UP)
    return float(value)


def _value_matches(value, allowed: tuple) -> bool:
    if isinstance(value, list):
        return any(_value_matches(v, allowed) for v in value)
    return any(type(value) is type(a) and value == a for a in allowed) or (
        isinstance(value, int | float)
        and not isinstance(value, bool)
        and any(isinstance(a, int | float) and not isinstance(a, bool) and value == a for a in allowed)
    )


def matches_where(element: Element, where: Iterable[tuple[str, tuple]]) -> bool:
    """True when every filtered attribute of ``element`` has one of the allowed values."""
    return _attributes_match(element.attributes, where)


def counterparts(model: Model, element_id: str, condition: Condition) -> set[str]:
    """Distinct existing elements joined to ``element_id`` as ``condition`` says.

    Links whose other end is missing, has a kind outside ``condition.kinds``, or is the
    element itself do not count.
    """
    # Links by end from the integer codes, no Link objects. joined_pairs answers the
    # same question for every element at once, as arrays.
    side = side_of(model)
    if condition.direction == "incoming":
        ends = (s for s, _, r in side.incoming(element_id) if r in condition.relations)
    else:
        ends = (t for _, t, r in side.outgoing(element_id) if r in condition.relations)
    found = set()
    for end in ends:
        if end not in side or end == element_id:
            continue
        if condition.kinds is None or side.kind(end) in condition.kinds:
            found.add(end)
    return found


def evaluate(model: Model, declaration: Declaration) -> DeclarationResult:
    """Evaluate one declaration over ``model`` (each distinct id once, sorted).

    Runs on the model's integer arrays: the same answer as calling
    :func:`counterparts` for every element in scope, in time linear in the links.
    """
    covered, uncovered, excluded = evaluate_codes(model, declaration)
    names = model.arrays.names

    def ids(codes: np.ndarray) -> tuple[str, ...]:
        return tuple(sorted(map(names.__getitem__, codes.tolist())))

    return DeclarationResult(declaration, ids(covered), ids(uncovered), ids(excluded))


def percents(model: Model, declarations: Iterable[Declaration]) -> dict[str, float | None]:
    """Declaration name -> covered percent (:func:`percent`), as ``evaluate_all`` would
    give it, from the counts alone: no id is named or sorted (at 1M elements, sorting
    the ids of ten declarations cost about 1.5 s for the diff's before/after table)."""
    found: dict[str, float | None] = {}
    for declaration in declarations:
        covered, uncovered, _ = evaluate_codes(model, declaration)
        found[declaration.name] = percent(len(covered), len(covered) + len(uncovered))
    return found


def evaluate_codes(model: Model, declaration: Declaration) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Covered, uncovered and excluded element codes (``model.arrays``), unsorted.

    For callers that need only part of the answer (the ``coverage`` rule reports the
    uncovered): turning every covered code into a sorted id costs more than the count.

    Computed once per model and declaration object: the ``coverage`` rule and the
    diff's before/after table ask for the same declarations of the same model. The
    arrays returned are read-only.
    """
    arrays = model.arrays
    cache = arrays.coverage_cache
    hit = cache.get(id(declaration))
    if hit is not None and hit[0] is declaration:
        return hit[1]
    result = _evaluate_codes(arrays, declaration)
    for codes in result:
        codes.flags.writeable = False
    cache[id(declaration)] = (declaration, result)  # keeps the key's object alive
    return result


def _evaluate_codes(arrays: ModelArrays, declaration: Declaration) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    code = arrays.kind_code.get(declaration.kind)
    if code is None:
        empty = np.zeros(0, dtype=np.int64)
        return empty, empty, empty
    scope = np.flatnonzero(arrays.kind == code)
    if declaration.where:
        scope = np.array(
            [c for c in scope.tolist() if _attributes_match(arrays.element_attributes(c), declaration.where)],
            dtype=np.int64,
        )
    if declaration.except_when is not None:
        out = _joined_counts(arrays, declaration.except_when)[scope] > 0
        excluded, scope = scope[out], scope[~out]
    else:
        excluded = scope[:0]
    enough = _joined_counts(arrays, declaration.need)[scope] >= declaration.at_least
    return scope[enough], scope[~enough], excluded


def _attributes_match(attributes, where) -> bool:
    for key, allowed in where:
        if key not in attributes or not _value_matches(attributes[key], allowed):
            return False
    return True


def _joined_counts(arrays: ModelArrays, condition: Condition) -> np.ndarray:
    """Per element code: distinct existing elements of ``condition.kinds`` joined to it."""
    return np.bincount(joined_pairs(arrays, condition)[0], minlength=arrays.n)


def joined_pairs(arrays: ModelArrays, condition: Condition) -> tuple[np.ndarray, np.ndarray]:
    """Distinct pairs of element codes joined as ``condition`` says.

    Parameters
    ----------
    arrays : ModelArrays
        The model's integer columns.
    condition : Condition
        Relations, direction and the kinds the other end may have.

    Returns
    -------
    mine, other : ndarray
        Equal-length code arrays: ``other[i]`` is one of :func:`counterparts` of the
        element ``mine[i]``; each pair appears once, in no particular order. Links with
        a missing end, and self-links, join nothing.
    """
    n = arrays.n
    # Filter the links first and make the few that remain distinct: cheaper than
    # sorting every link into distinct triples (a 3M-link model spends most of a
    # second on that sort).
    codes = arrays.rel_codes(condition.relations)
    if len(codes) == 1:
        mask = arrays.rel == codes[0]
    else:
        mask = np.isin(arrays.rel, codes)
    mine, other = (arrays.tgt, arrays.src) if condition.direction == "incoming" else (arrays.src, arrays.tgt)
    mine, other = mine[mask], other[mask]
    keep = (mine < n) & (other < n) & (mine != other)
    mine, other = mine[keep], other[keep]
    if condition.kinds is not None:
        keep = np.isin(arrays.kind[other], arrays.kind_codes(condition.kinds))
        mine, other = mine[keep], other[keep]
    # The same pair may be joined by copies of one link or by several relations.
    # (A sort, not np.unique: recent numpy hashes there, several times slower at 1M.)
    pairs = np.sort(mine * n + other)
    if len(pairs):
        pairs = pairs[np.concatenate(([True], pairs[1:] != pairs[:-1]))]
    return pairs // n, pairs % n


def evaluate_all(model: Model, declarations: Iterable[Declaration]) -> list[DeclarationResult]:
    return [evaluate(model, d) for d in declarations]
