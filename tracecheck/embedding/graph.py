"""The directed pair graph an embedding reproduces, built from a model.

An embedding sees a thread as a set of ordered pairs of element positions: one pair
per distinct (source, target) of the selected relations. Self-links are left out (the
decoder is never asked about self-pairs) and so are links whose ends are not elements
(they have no row to embed); both are counted so the report can say so.
"""

from __future__ import annotations

import hashlib
from collections.abc import Iterable
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np

from tracecheck.model import Model

__all__ = ["PairGraph", "pair_graph", "fingerprint"]


@dataclass(frozen=True)
class PairGraph:
    """Distinct directed pairs over ``ids``, as sorted integer arrays.

    Attributes
    ----------
    ids
        Element ids in model order; row ``i`` of a factor belongs to ``ids[i]``.
    src, dst
        Positions of each pair, sorted by ``(src, dst)``, no duplicates, no self-pairs.
    relations
        The relations selected (``None``: the union of all relations).
    kinds
        The kind of each element, aligned with ``ids``.
    skipped_self, skipped_dangling
        Links left out because they join an element to itself or name a missing end.
    """

    ids: tuple[str, ...]
    src: np.ndarray
    dst: np.ndarray
    relations: tuple[str, ...] | None = None
    kinds: tuple[str, ...] = ()
    skipped_self: int = 0
    skipped_dangling: int = 0
    link_relations: dict[tuple[int, int], tuple[str, ...]] = field(default_factory=dict, repr=False)

    @property
    def n(self) -> int:
        return len(self.ids)

    @property
    def m(self) -> int:
        return int(self.src.size)

    @cached_property
    def index(self) -> dict[str, int]:
        return {element_id: n for n, element_id in enumerate(self.ids)}

    @cached_property
    def keys(self) -> np.ndarray:
        """``src * n + dst`` per pair (sorted): a membership test by ``searchsorted``."""
        return self.src.astype(np.int64) * self.n + self.dst

    def has(self, src: np.ndarray, dst: np.ndarray) -> np.ndarray:
        """Whether each ``(src[k], dst[k])`` is a pair of the graph."""
        query = np.asarray(src, dtype=np.int64) * self.n + np.asarray(dst, dtype=np.int64)
        if self.m == 0:
            return np.zeros(query.shape, dtype=bool)
        where = np.searchsorted(self.keys, query)
        where = np.minimum(where, self.m - 1)
        return self.keys[where] == query

    def row_slices(self) -> np.ndarray:
        """``indptr`` of the pairs by source row (CSR layout)."""
        return np.searchsorted(self.src, np.arange(self.n + 1))

    @cached_property
    def fingerprint(self) -> str:
        return fingerprint((self.ids[s], self.ids[t]) for s, t in zip(self.src, self.dst, strict=True))


def fingerprint(pairs: Iterable[tuple[str, str]]) -> str:
    """sha256 of the sorted directed id pairs, one ``source<TAB>target`` line each.

    Independent of element order and of relation names, so a re-exported model with
    the same links has the same fingerprint.
    """
    digest = hashlib.sha256()
    for source, target in sorted(set(pairs)):
        digest.update(f"{source}\t{target}\n".encode())
    return digest.hexdigest()


def pair_graph(model: Model, relations: Iterable[str] | None = None) -> PairGraph:
    """The distinct directed pairs of ``model`` (of ``relations`` when given).

    Parameters
    ----------
    model
        Any model; duplicate element ids keep their first occurrence.
    relations
        Relation names to keep; ``None`` keeps every relation (their union).

    Returns
    -------
    PairGraph
    """
    wanted = None if relations is None else tuple(sorted(set(relations)))
    ids = tuple(model.by_id)
    index = model.position
    found: dict[tuple[int, int], set[str]] = {}
    skipped_self = skipped_dangling = 0
    for link in model.links:
        if wanted is not None and link.relation not in wanted:
            continue
        s, t = index.get(link.source), index.get(link.target)
        if s is None or t is None:
            skipped_dangling += 1
        elif s == t:
            skipped_self += 1
        else:
            found.setdefault((s, t), set()).add(link.relation)
    pairs = np.array(sorted(found), dtype=np.int64).reshape(-1, 2)
    return PairGraph(
        ids=ids,
        src=pairs[:, 0].copy(),
        dst=pairs[:, 1].copy(),
        relations=wanted,
        kinds=tuple(element.kind for element in model.by_id.values()),
        skipped_self=skipped_self,
        skipped_dangling=skipped_dangling,
        link_relations={pair: tuple(sorted(rels)) for pair, rels in found.items()},
    )
