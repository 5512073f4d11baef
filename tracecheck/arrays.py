"""Integer-coded columns of a model, for rules and coverage that run on numpy arrays.

Every distinct element id gets a code ``0 .. n-1`` in first-seen order (the same
numbering as ``Model.position``). Link ends and parents that name no element get
*ghost* codes ``n, n+1, ...`` so that equal strings always get equal codes: a link is
dangling exactly when one of its codes is ``>= n``, and a self-link exactly when its
two codes are equal. Kinds and relations are coded in first-seen order too.

The per-item Python work is a handful of C-level ``map`` calls over the columns; all
later work (distinct links, masks, strongly connected components, coverage counts) is
vectorised.
"""

from __future__ import annotations

from collections.abc import Sequence
from functools import cached_property
from itertools import repeat
from typing import TYPE_CHECKING

import numpy as np

if TYPE_CHECKING:
    from tracecheck.model import Columns

__all__ = ["ModelArrays"]


def _compact(strings: Sequence[str]) -> Sequence[str]:
    """Copies of ``strings`` laid out next to each other in memory.

    Decoded ids sit scattered among every other object of the document, so each dict
    probe that compares a link end with an id misses the processor caches; the
    position dict keyed by fresh, adjacent copies answers the link-end lookups about a
    third faster at 100k elements. Returns ``strings`` itself when it holds anything
    but strings, or a NUL (the separator).
    """
    try:
        copies = "\x00".join(strings).split("\x00")
    except TypeError:
        return strings
    return copies if len(copies) == len(strings) and strings else strings


class ModelArrays:
    """Integer columns of one model.

    Attributes
    ----------
    n : int
        Number of distinct element ids.
    names : list of str
        Code -> id: the ``n`` element ids, then the ghost names.
    position : dict
        Element id -> code (elements only, no ghosts).
    first : ndarray
        Per element code, the file index of the first element with that id.
    kind : ndarray
        Per element code, the code of its kind (from its first element) in ``kind_names``.
    parent : ndarray
        Per element code, the code of its parent, ``-1`` when it has none.
    src, tgt, rel : ndarray
        Per link in file order: source code, target code, relation code (``rel_names``).
    """

    def __init__(self, columns: Columns) -> None:
        # Raises TypeError if a column holds an unhashable value (a reader's validation
        # relies on that).
        self.columns = columns
        ids = _compact(columns.element_ids)
        position = dict(zip(ids, range(len(ids)), strict=True))
        if len(position) == len(ids):  # the usual case: ids are unique, one dict suffices
            self.names: list[str] = list(ids)
        else:
            self.names = list(dict.fromkeys(ids))
            position = dict(zip(self.names, range(len(self.names)), strict=True))
        self.position: dict[str, int] = position
        self.n = n = len(position)
        self._ghosts: dict[str, int] = {}
        if n == len(ids):
            self.first = np.arange(n, dtype=np.int64)
            kinds, parents = columns.element_kinds, columns.element_parents
        else:
            firsts: dict[str, int] = {}
            for index, element_id in enumerate(ids):
                firsts.setdefault(element_id, index)
            self.first = np.fromiter(firsts.values(), dtype=np.int64, count=n)
            order = self.first.tolist()
            kinds = [columns.element_kinds[i] for i in order]
            parents = [columns.element_parents[i] for i in order]
        self.kind_names: list[str] = list(dict.fromkeys(kinds))
        self.kind_code = {name: code for code, name in enumerate(self.kind_names)}
        self.kind = np.fromiter(map(self.kind_code.__getitem__, kinds), dtype=np.int32, count=n)
        self.parent = self._codes(parents)
        self.src = self._codes(columns.link_sources)
        self.tgt = self._codes(columns.link_targets)
        relations = columns.link_relations
        self.rel_names: list[str] = list(dict.fromkeys(relations))
        self.rel_code = {name: code for code, name in enumerate(self.rel_names)}
        self.rel = np.fromiter(map(self.rel_code.__getitem__, relations), dtype=np.int32, count=len(relations))
        # coverage.evaluate_codes' results per declaration object (computed once per model).
        self.coverage_cache: dict[int, tuple[object, tuple[np.ndarray, ...]]] = {}

    def _codes(self, strings: Sequence[str | None]) -> np.ndarray:
        """Codes of ``strings``: element codes, ghost codes for unknown names, -1 for None."""
        codes = np.fromiter(map(self.position.get, strings, repeat(-1)), dtype=np.int64, count=len(strings))
        for index in np.flatnonzero(codes < 0).tolist():
            name = strings[index]
            if name is not None:
                codes[index] = self._ghost(name)
        return codes

    def code_of(self, name: str) -> int | None:
        """The code of ``name``: an element id's, a dangling end's, or ``None``."""
        code = self.position.get(name)
        return self._ghosts.get(name) if code is None else code

    def _ghost(self, name: str) -> int:
        code = self._ghosts.get(name)
        if code is None:
            code = self._ghosts[name] = len(self.names)
            self.names.append(name)
        return code

    # --- distinct links -----------------------------------------------------------

    @cached_property
    def _triples(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Distinct (source, target, relation) in first-seen order.

        Returns the file index of each distinct triple's first link, its count, and
        (order, start) so that ``order[start : start + count]`` lists its links in file
        order.
        """
        m = len(self.src)
        if m == 0:
            empty = np.zeros(0, dtype=np.int64)
            return empty, empty, empty, empty
        key = (self.src * len(self.names) + self.tgt) * max(len(self.rel_names), 1) + self.rel
        order = np.argsort(key, kind="stable")
        ordered = key[order]
        starts = np.concatenate(([0], np.flatnonzero(ordered[1:] != ordered[:-1]) + 1))
        counts = np.diff(np.append(starts, m))
        firsts = order[starts]
        # First-seen order of the distinct triples: their first file indexes are
        # distinct, so marking them in a file-length array and reading it in file order
        # sorts them in one linear pass (an argsort of 3M costs about 0.2 s).
        rank = np.full(m, -1, dtype=np.int64)
        rank[firsts] = np.arange(len(firsts))
        seen = rank[rank >= 0]
        return firsts[seen], counts[seen], order, starts[seen]

    @property
    def triple_first(self) -> np.ndarray:
        """File index of the first link of each distinct triple, in first-seen order."""
        return self._triples[0]

    @property
    def triple_count(self) -> np.ndarray:
        return self._triples[1]

    def distinct_links(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Source, target and relation codes of each distinct triple (first-seen order)."""
        firsts = self.triple_first
        return self.src[firsts], self.tgt[firsts], self.rel[firsts]

    def triple_links(self, triple: int) -> list[int]:
        """File indexes of every link of distinct triple number ``triple``."""
        _, counts, order, starts = self._triples
        start = int(starts[triple])
        return order[start : start + int(counts[triple])].tolist()

    # --- small helpers --------------------------------------------------------------

    def exists(self, codes: np.ndarray) -> np.ndarray:
        return codes < self.n

    def kind_counts(self) -> dict[str, int]:
        counts = np.bincount(self.kind, minlength=len(self.kind_names)).tolist()
        return dict(zip(self.kind_names, counts, strict=True))

    def kind_codes(self, kinds) -> list[int]:
        """Codes of those of ``kinds`` that occur in the model."""
        return [self.kind_code[k] for k in kinds if k in self.kind_code]

    def rel_codes(self, relations) -> list[int]:
        return [self.rel_code[r] for r in relations if r in self.rel_code]

    def element_attributes(self, code: int):
        return self.columns.element_attributes(int(self.first[code]))

    def element_location(self, code: int):
        return self.columns.element_location(int(self.first[code]))
