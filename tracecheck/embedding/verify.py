"""Does a stored embedding still reproduce a model's links exactly?"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from tracecheck.embedding.factors import Embedding, load
from tracecheck.embedding.graph import pair_graph
from tracecheck.embedding.scan import scan
from tracecheck.embedding.threads import one_blas_thread
from tracecheck.model import Model

__all__ = ["LinkRef", "VerifyResult", "verify", "verify_file", "predicted_pairs"]

Progress = Callable[[float, str], None]


@dataclass(frozen=True, order=True)
class LinkRef:
    """A directed link named by ids; ``relation`` is ``None`` when the embedding covers
    the union of relations (it predicts that a link exists, not which relation)."""

    source: str
    target: str
    relation: str | None = None

    def to_json(self) -> dict:
        return {"source": self.source, "target": self.target, "relation": self.relation}


@dataclass
class VerifyResult:
    """The outcome of ``embed verify``; ``to_json`` is the DESIGN.md contract (plus
    informational keys)."""

    exact: bool
    dimension: int
    missing: list[LinkRef]
    spurious: list[LinkRef]
    unknown_elements: list[str]
    removed_elements: list[str] = field(default_factory=list)
    relations: tuple[str, ...] | None = None
    elements: int = 0
    links: int = 0
    margin: float = 0.0
    threshold: float = 0.0
    closest: float | None = None
    fingerprint_match: bool = False
    model: str = ""
    embedding: str = ""

    @property
    def exit_code(self) -> int:
        return 0 if self.exact else 1

    def to_json(self) -> dict:
        """The DESIGN.md document, exactly: ``exact``, ``dimension``, ``missing``,
        ``spurious``, ``unknown_elements`` (links as ``{source, target, relation}``)."""
        return {
            "exact": self.exact,
            "dimension": self.dimension,
            "missing": [link.to_json() for link in self.missing],
            "spurious": [link.to_json() for link in self.spurious],
            "unknown_elements": list(self.unknown_elements),
        }


@one_blas_thread
def verify(
    model: Model,
    embedding: Embedding,
    *,
    progress: Progress | None = None,
    origin: str = "",
) -> VerifyResult:
    """Reconstruct every ordered pair from ``embedding`` and compare with ``model``.

    A link of the model is reproduced if its logit exceeds the threshold by more than
    the certification margin (:func:`~tracecheck.embedding.factors.certification_margin`);
    a non-link if its logit is below the threshold by more than the margin. Pairs are
    compared blockwise, so memory stays bounded whatever the size.

    Parameters
    ----------
    model
        The model as it is now; only links of ``embedding.relations`` count (all
        relations when that is ``None``); self-links and dangling links are ignored.
    embedding
        The stored embedding.
    progress
        Optional ``callback(fraction, label)``.
    origin
        Display name of the embedding file, for the report.

    Returns
    -------
    VerifyResult
        ``missing``: links of the model that the embedding does not reproduce (every
        link touching an element the embedding does not know is missing);
        ``spurious``: links the embedding predicts that the model lacks (every
        predicted link touching an element no longer in the model is spurious).

    Examples
    --------
    >>> from tracecheck.model import Element, Link, Model
    >>> import numpy as np
    >>> m = Model([Element("A", "test"), Element("B", "requirement")], [Link("A", "B", "verifies")])
    >>> e = Embedding(np.array([[1.0], [-1.0]]), np.array([[1.0], [1.0]]), ("A", "B"))
    >>> verify(m, e).exact
    True
    """
    graph = pair_graph(model, embedding.relations)
    row = {element_id: n for n, element_id in enumerate(embedding.ids)}
    mapped = np.array([row.get(element_id, -1) for element_id in graph.ids], dtype=np.int64)
    known = (mapped[graph.src] >= 0) & (mapped[graph.dst] >= 0) if graph.m else np.zeros(0, bool)
    src, dst = mapped[graph.src[known]], mapped[graph.dst[known]]
    order = np.lexsort((dst, src))
    margin = embedding.margin
    found = scan(
        embedding.x, embedding.y, src[order], dst[order],
        threshold=embedding.threshold, margin=margin, progress=progress,
    )
    missing = _model_links(graph, graph.src[~known], graph.dst[~known])
    missing += _model_links_by_row(graph, row, embedding.ids, found.missing_src, found.missing_dst)
    single = embedding.relations[0] if embedding.relations and len(embedding.relations) == 1 else None
    spurious = sorted(
        LinkRef(embedding.ids[s], embedding.ids[t], single)
        for s, t in zip(found.spurious_src, found.spurious_dst, strict=True)
    )
    model_ids = set(graph.ids)
    unknown = sorted(set(graph.ids) - set(row))
    removed = sorted(set(embedding.ids) - model_ids)
    exact = not missing and not spurious and not unknown
    return VerifyResult(
        exact=exact,
        dimension=embedding.dimension,
        missing=sorted(missing),
        spurious=spurious,
        unknown_elements=unknown,
        removed_elements=removed,
        relations=embedding.relations,
        elements=graph.n,
        links=graph.m,
        margin=margin,
        threshold=embedding.threshold,
        closest=found.closest if exact and np.isfinite(found.closest) else None,
        fingerprint_match=graph.fingerprint == embedding.fingerprint,
        model=model.origin,
        embedding=origin,
    )


def verify_file(model: Model, path: str | Path, *, progress: Progress | None = None) -> VerifyResult:
    """Verify ``model`` against the embedding stored at ``path`` (for ``gate`` and scripts).

    Parameters
    ----------
    model
        The model as it is now.
    path
        A ``.npz`` written by ``tracecheck embed fit``.
    progress
        Optional ``callback(fraction, label)``.

    Returns
    -------
    VerifyResult
        ``exit_code`` is 0 when exact, 1 otherwise.

    Raises
    ------
    tracecheck.errors.InputError
        The file is missing, unreadable, not an ``.npz``, holds pickles, or is not a
        tracecheck embedding (exit code 2).
    """
    return verify(model, load(path), progress=progress, origin=str(path))


def _model_links(graph, src: np.ndarray, dst: np.ndarray) -> list[LinkRef]:
    """The model's links (one per relation) for pairs given as graph positions."""
    out: list[LinkRef] = []
    for s, t in zip(src.tolist(), dst.tolist(), strict=True):
        for relation in graph.link_relations[(s, t)]:
            out.append(LinkRef(graph.ids[s], graph.ids[t], relation))
    return out


def _model_links_by_row(graph, row, ids, src: np.ndarray, dst: np.ndarray) -> list[LinkRef]:
    index = graph.index
    s = np.array([index[ids[i]] for i in src.tolist()], dtype=np.int64)
    t = np.array([index[ids[j]] for j in dst.tolist()], dtype=np.int64)
    return _model_links(graph, s, t)


def predicted_pairs(embedding: Embedding) -> set[tuple[str, str]]:
    """Every ordered pair the embedding predicts as a link (certified), by id.

    For small graphs and tests: the result holds one entry per predicted link.
    """
    empty = np.zeros(0, dtype=np.int64)
    found = scan(
        embedding.x, embedding.y, empty, empty,
        threshold=embedding.threshold, margin=embedding.margin,
    )
    ids = embedding.ids
    return {(ids[s], ids[t]) for s, t in zip(found.spurious_src, found.spurious_dst, strict=True)}
