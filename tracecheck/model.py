"""The one in-memory model every adapter builds and every analysis reads.

Elements and links are frozen dataclasses in file order (duplicates kept, so the
rules can report them). Indexes are computed once, on first use, and map ids to
integer positions so analyses can work on plain integer arrays.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any, NamedTuple

__all__ = ["Location", "Element", "Link", "Model", "AttributeValue"]

AttributeValue = str | int | float | bool | list


class Location(NamedTuple):
    """Where something starts in its source: a display name and a 1-based line.

    A named tuple rather than a dataclass: a model holds one per element and link, and
    tuples are built several times faster.
    """

    file: str
    line: int | None = None

    def __str__(self) -> str:
        return self.file if self.line is None else f"{self.file}:{self.line}"


@dataclass(frozen=True, slots=True)
class Element:
    """A requirement, function, component, interface, test, hazard (or a declared kind)."""

    id: str
    kind: str
    name: str | None = None
    text: str | None = None
    parent: str | None = None
    attributes: Mapping[str, Any] = field(default_factory=dict, hash=False)
    location: Location | None = field(default=None, compare=False)


@dataclass(frozen=True, slots=True)
class Link:
    """A typed trace link, read as a sentence: *source relation target*."""

    source: str
    target: str
    relation: str
    id: str | None = None
    attributes: Mapping[str, Any] = field(default_factory=dict, hash=False)
    location: Location | None = field(default=None, compare=False)

    @property
    def triple(self) -> tuple[str, str, str]:
        return (self.source, self.target, self.relation)


class Model:
    """A digital thread: elements and links in source order, plus lazy indexes.

    Parameters
    ----------
    elements, links
        In the order the source gave them; duplicates are kept.
    meta
        The optional ``model`` block of the source (name, stage, ...).
    origin
        Display name of the source (a path, ``<stdin>`` or ``REV:PATH``).
    """

    def __init__(
        self,
        elements: Iterable[Element],
        links: Iterable[Link],
        *,
        meta: Mapping[str, Any] | None = None,
        origin: str = "<model>",
        format: str = "thread-json",
    ) -> None:
        self.elements: tuple[Element, ...] = tuple(elements)
        self.links: tuple[Link, ...] = tuple(links)
        self.meta: Mapping[str, Any] = dict(meta or {})
        self.origin = origin
        self.format = format

    def __repr__(self) -> str:
        return f"Model({self.origin!r}, {len(self.elements)} elements, {len(self.links)} links)"

    @cached_property
    def by_id(self) -> dict[str, Element]:
        """First element of each id (later duplicates are reported, not indexed)."""
        index: dict[str, Element] = {}
        for element in self.elements:
            index.setdefault(element.id, element)
        return index

    @cached_property
    def position(self) -> dict[str, int]:
        """Integer index of each distinct element id, in first-seen order."""
        return {element_id: n for n, element_id in enumerate(self.by_id)}

    @cached_property
    def outgoing(self) -> dict[str, list[Link]]:
        """Links by source id, in source order (ends need not exist)."""
        index: dict[str, list[Link]] = {}
        for link in self.links:
            index.setdefault(link.source, []).append(link)
        return index

    @cached_property
    def incoming(self) -> dict[str, list[Link]]:
        """Links by target id, in source order (ends need not exist)."""
        index: dict[str, list[Link]] = {}
        for link in self.links:
            index.setdefault(link.target, []).append(link)
        return index

    @cached_property
    def kinds(self) -> dict[str, int]:
        """Number of distinct elements per kind."""
        counts: dict[str, int] = {}
        for element in self.by_id.values():
            counts[element.kind] = counts.get(element.kind, 0) + 1
        return counts

    def kind_of(self, element_id: str) -> str | None:
        element = self.by_id.get(element_id)
        return None if element is None else element.kind
