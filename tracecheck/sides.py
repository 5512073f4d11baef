"""What the diff and coverage read of one model, served from its columns and integer arrays.

A model read from thread JSON keeps its elements and links as columns until someone
asks for the objects (:mod:`tracecheck.model`); building all of them cost more than
half of a 100k-element diff. The diff only needs the distinct ids, the parent of each
matched element, the fields of the few elements whose content differs, and the links
of the few elements near a change. :class:`Side` gives exactly
those: triples come straight from the columns, a link index per end is a counting
sort of the integer codes, and an element object is built only when
its fields are compared. Coverage asks the same link-by-end questions for every
element in scope, so the view lives beside the model rather than inside diff/.
"""

from __future__ import annotations

import weakref
from collections.abc import Mapping
from functools import cached_property
from typing import Any

import numpy as np

from tracecheck.model import Element, Model

__all__ = ["Side", "Triple", "side_of"]

Triple = tuple[str, str, str]


class _EndIndex:
    """Link file indexes grouped by one end's code, each group in file order."""

    def __init__(self, codes: np.ndarray, n: int) -> None:
        from scipy.sparse import csr_matrix  # the rules import it too

        # A counting sort in C, linear where a stable argsort is not (3M links: 0.17-0.26
        # s instead of 0.45-0.6 s): row = the end's code (ends that name no element go
        # to row n), column = the link's file index, so each row's column indices list
        # its links in file order whether or not scipy sorts them.
        m = len(codes)
        rows = np.where((codes >= 0) & (codes < n), codes, n)
        grouped = csr_matrix((np.ones(m, dtype=np.int8), (rows, np.arange(m))), shape=(n + 1, max(m, 1)))
        # The bounds as a Python list (a slice per question); the order stays an array
        # and only the asked slice becomes a list: the diff asks about the elements
        # near a change, and turning 3M indexes into Python ints cost 0.15-0.3 s per
        # index at 1M elements. (Coverage asks about every element at once, on arrays:
        # coverage.joined_pairs.)
        self.bounds: list[int] = grouped.indptr[: n + 1].tolist()
        self.order: np.ndarray = grouped.indices

    def links(self, code: int) -> list[int]:
        return self.order[self.bounds[code] : self.bounds[code + 1]].tolist()


class Side:
    """Read-only views of one model for the diff (see the module docstring)."""

    def __init__(self, model: Model) -> None:
        # A weak reference: the cache in side_of must not keep the model alive, and a
        # strong one would make a cycle that only the cyclic collector could free.
        self._model = weakref.ref(model)
        self.arrays = model.arrays
        self.columns = model.columns
        self.position: Mapping[str, int] = self.arrays.position

    @property
    def ids(self) -> list[str]:
        """Distinct element ids in first-seen order (the order of ``model.by_id``)."""
        return self.arrays.names[: self.arrays.n]

    def __contains__(self, element_id: object) -> bool:
        return element_id in self.position

    def __len__(self) -> int:
        return self.arrays.n

    def element(self, element_id: str) -> Element:
        """The first element with ``element_id`` (it must exist)."""
        model = self._model()
        assert model is not None
        element = model.element_content(element_id)
        assert element is not None, element_id
        return element

    def kind(self, element_id: str) -> str:
        arrays = self.arrays
        return arrays.kind_names[arrays.kind[self.position[element_id]]]

    def parent(self, element_id: str) -> str | None:
        """The parent named by the element's first occurrence (an id, a dangling name,
        or ``None``), read from the parent codes."""
        code = int(self.arrays.parent[self.position[element_id]])
        return None if code == -1 else self.arrays.names[code]

    def _triple(self, index: int) -> Triple:
        columns = self.columns
        return (columns.link_sources[index], columns.link_targets[index], columns.link_relations[index])

    @cached_property
    def _by_source(self) -> _EndIndex:
        return _EndIndex(self.arrays.src, self.arrays.n)

    @cached_property
    def _by_target(self) -> _EndIndex:
        return _EndIndex(self.arrays.tgt, self.arrays.n)

    def outgoing(self, element_id: str) -> list[Triple]:
        """Links whose source is the element ``element_id``, in file order."""
        code = self.position.get(element_id)
        return [] if code is None else [self._triple(i) for i in self._by_source.links(code)]

    def incoming(self, element_id: str) -> list[Triple]:
        code = self.position.get(element_id)
        return [] if code is None else [self._triple(i) for i in self._by_target.links(code)]

    def items(self, codes: list[int]) -> list[Mapping[str, Any]] | None:
        """The decoded source items of the elements with ``codes`` (first of each id),
        when the reader kept them (``None`` otherwise); equal items mean equal fields
        up to the types of attribute values. C-level ``map`` passes, no per-id Python
        call."""
        items = getattr(self.columns, "element_items", None)
        if items is None:
            return None
        if self.arrays.n != len(items):
            codes = self.arrays.first[codes].tolist() if len(codes) else []
        return list(map(items.__getitem__, codes))

    def attributes(self, codes: list[int]) -> list[Mapping[str, Any]]:
        """The attributes of the elements with ``codes`` (first of each id), read from
        the columns one item each, without building an element."""
        first = self.arrays.first
        return list(map(self.columns.element_attributes, first[codes].tolist() if len(codes) else []))

    def names(self, codes: list[int]) -> list[str | None]:
        """The names of the elements with ``codes`` (first of each id): from the
        columns' names or decoded items when the reader keeps them, else one element
        object each."""
        index = self.arrays.first[codes].tolist() if len(codes) else []
        names = getattr(self.columns, "element_names", None)
        if names is not None:
            return list(map(names.__getitem__, index))
        items = getattr(self.columns, "element_items", None)
        if items is not None:
            return [item.get("name") for item in map(items.__getitem__, index)]
        ids = self.arrays.names
        return [self.element(ids[code]).name for code in codes]


_SIDES: weakref.WeakKeyDictionary[Model, Side] = weakref.WeakKeyDictionary()


def side_of(model: Model) -> Side:
    """The :class:`Side` of ``model``, shared by the steps of one diff (built once,
    rebuilt if the model's elements or links were reassigned since)."""
    side = _SIDES.get(model)
    if side is None or side.arrays is not model.arrays:
        side = _SIDES[model] = Side(model)
    return side
