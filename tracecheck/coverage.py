"""Coverage declarations evaluated over a model.

A declaration (see :class:`tracecheck.config.Declaration`) names the elements that
need coverage — a kind plus attribute filters — and the links they need. This module
only counts; the ``coverage`` rule turns gaps into findings and ``report/`` renders.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from decimal import ROUND_HALF_UP, Decimal

from tracecheck.config import Condition, Declaration
from tracecheck.model import Element, Model

__all__ = ["DeclarationResult", "evaluate", "evaluate_all", "percent", "matches_where", "counterparts"]


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
    for key, allowed in where:
        if key not in element.attributes or not _value_matches(element.attributes[key], allowed):
            return False
    return True


def counterparts(model: Model, element_id: str, condition: Condition) -> set[str]:
    """Distinct existing elements joined to ``element_id`` as ``condition`` says.

    Links whose other end is missing, has a kind outside ``condition.kinds``, or is the
    element itself do not count.
    """
    by_id = model.by_id
    if condition.direction == "incoming":
        links = model.incoming.get(element_id, ())
        ends = (link.source for link in links if link.relation in condition.relations)
    else:
        links = model.outgoing.get(element_id, ())
        ends = (link.target for link in links if link.relation in condition.relations)
    found = set()
    for end in ends:
        other = by_id.get(end)
        if other is None or end == element_id:
            continue
        if condition.kinds is None or other.kind in condition.kinds:
            found.add(end)
    return found


def evaluate(model: Model, declaration: Declaration) -> DeclarationResult:
    """Evaluate one declaration over ``model`` (each distinct id once, sorted)."""
    covered, uncovered, excluded = [], [], []
    for element in model.by_id.values():
        if element.kind != declaration.kind or not matches_where(element, declaration.where):
            continue
        if declaration.except_when is not None and counterparts(
            model, element.id, declaration.except_when
        ):
            excluded.append(element.id)
        elif len(counterparts(model, element.id, declaration.need)) >= declaration.at_least:
            covered.append(element.id)
        else:
            uncovered.append(element.id)
    return DeclarationResult(declaration, tuple(sorted(covered)), tuple(sorted(uncovered)), tuple(sorted(excluded)))


def evaluate_all(model: Model, declarations: Iterable[Declaration]) -> list[DeclarationResult]:
    return [evaluate(model, d) for d in declarations]
