"""The one in-memory model every adapter builds and every analysis reads.

Elements and links are frozen dataclasses in file order (duplicates kept, so the
rules can report them). A model is built either from those objects or, by a reader
that wants to be fast, from *columns* (:class:`Columns`): the ids, kinds, parents and
link ends as plain lists, with the objects materialised only when someone asks for
``model.elements`` / ``model.links`` / ``model.by_id``. The rules and coverage read
``model.arrays`` (:class:`tracecheck.arrays.ModelArrays`), integer-coded numpy columns
built once from either kind of model.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any, NamedTuple, Protocol

if TYPE_CHECKING:
    from tracecheck.arrays import ModelArrays

__all__ = ["Location", "Element", "Link", "Model", "AttributeValue", "Columns", "ObjectColumns"]

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


class Columns(Protocol):
    """A model as columns, in file order (duplicates kept): what the fast path reads.

    ``element_parents`` holds ``None`` where an element has no parent. The methods give
    one item's attributes or location, or materialise the objects, on demand.
    """

    element_ids: Sequence[str]
    element_kinds: Sequence[str]
    element_parents: Sequence[str | None]
    link_sources: Sequence[str]
    link_targets: Sequence[str]
    link_relations: Sequence[str]

    def element_attributes(self, index: int) -> Mapping[str, Any]: ...

    def element_location(self, index: int) -> Location | None: ...

    def link_location(self, index: int) -> Location | None: ...

    def link(self, index: int) -> Link: ...

    def materialise(self) -> tuple[tuple[Element, ...], tuple[Link, ...]]: ...


class ObjectColumns:
    """The columns of a model given as Element and Link objects."""

    def __init__(self, elements: tuple[Element, ...], links: tuple[Link, ...]) -> None:
        self._elements, self._links = elements, links
        self.element_ids = [e.id for e in elements]
        self.element_kinds = [e.kind for e in elements]
        self.element_parents = [e.parent for e in elements]
        self.link_sources = [x.source for x in links]
        self.link_targets = [x.target for x in links]
        self.link_relations = [x.relation for x in links]

    def element_attributes(self, index: int) -> Mapping[str, Any]:
        return self._elements[index].attributes

    def element_location(self, index: int) -> Location | None:
        return self._elements[index].location

    def link_location(self, index: int) -> Location | None:
        return self._links[index].location

    def link(self, index: int) -> Link:
        return self._links[index]

    def materialise(self) -> tuple[tuple[Element, ...], tuple[Link, ...]]:
        return self._elements, self._links


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
        self._elements: tuple[Element, ...] | None = tuple(elements)
        self._links: tuple[Link, ...] | None = tuple(links)
        self._columns: Columns | None = None
        self.meta: Mapping[str, Any] = dict(meta or {})
        self.origin = origin
        self.format = format

    @classmethod
    def from_columns(
        cls,
        columns: Columns,
        *,
        meta: Mapping[str, Any] | None = None,
        origin: str = "<model>",
        format: str = "thread-json",
        arrays: ModelArrays | None = None,
    ) -> Model:
        """A model whose Element and Link objects are built only when first asked for.

        ``arrays`` may pass the integer columns when the reader built them already.
        """
        model = cls((), (), meta=meta, origin=origin, format=format)
        model._elements = model._links = None
        model._columns = columns
        if arrays is not None:
            model.__dict__["arrays"] = arrays  # seeds the cached property
        return model

    def __repr__(self) -> str:
        return f"Model({self.origin!r}, {self.element_count} elements, {self.link_count} links)"

    @property
    def columns(self) -> Columns:
        """The model as columns (built from the objects on first use)."""
        if self._columns is None:
            self._columns = ObjectColumns(self.elements, self.links)
        return self._columns

    def _materialise(self) -> None:
        assert self._columns is not None
        self._elements, self._links = self._columns.materialise()

    @property
    def elements(self) -> tuple[Element, ...]:
        if self._elements is None:
            # Columns that can build one side alone spare the links (most of the objects)
            # for readers of elements only, such as the coverage report.
            build = getattr(self._columns, "materialise_elements", None)
            if build is None:
                self._materialise()
            else:
                self._elements = build()
        return self._elements  # type: ignore[return-value]

    @property
    def links(self) -> tuple[Link, ...]:
        if self._links is None:
            build = getattr(self._columns, "materialise_links", None)
            if build is None:
                self._materialise()
            else:
                self._links = build()
        return self._links  # type: ignore[return-value]

    @elements.setter
    def elements(self, elements: Iterable[Element]) -> None:
        # Kept assignable as when these were plain attributes; the columns and integer
        # arrays then follow the new objects (other cached indexes, as before, do not).
        links = self.links
        self._elements, self._links = tuple(elements), links
        self._forget_columns()

    @links.setter
    def links(self, links: Iterable[Link]) -> None:
        elements = self.elements
        self._elements, self._links = elements, tuple(links)
        self._forget_columns()

    def _forget_columns(self) -> None:
        self._columns = None
        self.__dict__.pop("arrays", None)

    @property
    def element_count(self) -> int:
        """Number of elements, duplicates included (without materialising them)."""
        if self._elements is not None:
            return len(self._elements)
        return len(self.columns.element_ids)

    @property
    def link_count(self) -> int:
        if self._links is not None:
            return len(self._links)
        return len(self.columns.link_sources)

    @cached_property
    def arrays(self) -> ModelArrays:
        """Integer-coded columns for the rules and coverage (built once)."""
        from tracecheck.arrays import ModelArrays

        return ModelArrays(self.columns)

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
        return dict(self.arrays.position)

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
        """Number of distinct elements per kind, kinds in first-seen order."""
        return self.arrays.kind_counts()

    def kind_of(self, element_id: str) -> str | None:
        arrays = self.arrays
        index = arrays.position.get(element_id)
        return None if index is None else arrays.kind_names[arrays.kind[index]]

    def element_content(self, element_id: str) -> Element | None:
        """The first element with ``element_id``, for reading its fields (``None`` if none).

        Builds this one object when the model has not materialised its elements (the
        column source may then leave its ``location`` unset: a location costs a scan of
        the whole file), so comparing a few elements of a large model stays cheap.
        """
        if self._elements is None:
            getter = getattr(self._columns, "element_content", None)
            if getter is not None:
                index = self.arrays.position.get(element_id)
                return None if index is None else getter(int(self.arrays.first[index]))
        return self.by_id.get(element_id)

    def location_of(self, element_id: str) -> Location | None:
        """Location of the first element with ``element_id`` (``None`` if there is none)."""
        arrays = self.arrays
        index = arrays.position.get(element_id)
        return None if index is None else self.columns.element_location(int(arrays.first[index]))
