"""Rank likely-missing and least-plausible links for a human reviewer.

A small logistic factorisation (``P(i -> j) = sigma(x_i . y_j)``, L2-regularised,
few iterations: exact fits memorise the graph and rank held-out links poorly) is
first trained with a seeded fraction of the links held out, and scored on them
against sampled non-links of the same candidate kinds (ROC-AUC, average precision).
It is then trained on every link; the non-links it scores highest, among the kind
pairs the metamodel allows, are the likely-missing links, and the existing links it
scores lowest are the least plausible. Nothing is ever applied to the model.

References
----------
S. Chanpuriya, C. Musco, K. Sotiropoulos, C. E. Tsourakakis, "Node Embeddings and Exact
Low-Rank Representations of Complex Networks", NeurIPS 2020.
D. Liben-Nowell, J. Kleinberg, "The Link-Prediction Problem for Social Networks",
J. Am. Soc. Inf. Sci. Technol. 58(7), 2007 (held-out evaluation of link prediction).
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import asdict, dataclass, field

import numpy as np

from tracecheck.embedding.graph import PairGraph, pair_graph
from tracecheck.embedding.metrics import average_precision, roc_auc
from tracecheck.embedding.objective import dense_objective, minimise, pair_objective, split
from tracecheck.embedding.threads import one_blas_thread
from tracecheck.model import Model

__all__ = ["AllowedPair", "SuggestSettings", "Suggestion", "SuggestResult", "suggest"]

Progress = Callable[[float, str], None]
# (relation, source kinds, target kinds); None means any kind.
AllowedPair = tuple[str, "frozenset[str] | None", "frozenset[str] | None"]


@dataclass(frozen=True)
class SuggestSettings:
    """Training and evaluation settings of ``embed suggest``."""

    dimension: int = 8
    holdout: float = 0.1
    seed: int = 0
    l2: float = 0.1
    max_iter: int = 200
    negatives_per_link: int = 10
    dense_limit: int = 400
    top: int = 20

    def to_json(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class Suggestion:
    """A scored pair; ``relations`` are the relations the metamodel allows for it
    (likely-missing) or the relations it has (least plausible)."""

    source: str
    target: str
    relations: tuple[str, ...]
    score: float
    source_kind: str
    target_kind: str

    def to_json(self) -> dict:
        return {"source": self.source, "target": self.target, "relations": list(self.relations),
                "score": round(self.score, 6), "source_kind": self.source_kind,
                "target_kind": self.target_kind}


@dataclass
class SuggestResult:
    """The outcome of ``embed suggest``: held-out quality, then the two ranked lists."""

    roc_auc: float | None
    average_precision: float | None
    held_out: int
    negatives: int
    likely_missing: list[Suggestion]
    least_plausible: list[Suggestion]
    settings: SuggestSettings
    elements: int = 0
    links: int = 0
    candidates: int = 0
    allowed: list[tuple[str, list[str] | None, list[str] | None]] = field(default_factory=list)
    relations: tuple[str, ...] | None = None
    model: str = ""

    @property
    def exit_code(self) -> int:
        return 0

    def to_json(self) -> dict:
        return {
            "model": self.model,
            "evaluation": {"roc_auc": _round(self.roc_auc), "average_precision": _round(self.average_precision),
                           "held_out_links": self.held_out, "negatives": self.negatives},
            "likely_missing": [s.to_json() for s in self.likely_missing],
            "least_plausible": [s.to_json() for s in self.least_plausible],
            "elements": self.elements,
            "links": self.links,
            "candidates": self.candidates,
            "allowed": [{"relation": r, "source_kinds": s, "target_kinds": t} for r, s, t in self.allowed],
            "relations": None if self.relations is None else list(self.relations),
            "settings": self.settings.to_json(),
        }


def _round(value: float | None) -> float | None:
    return None if value is None else round(value, 6)


def _train(graph: PairGraph, src: np.ndarray, dst: np.ndarray, settings: SuggestSettings,
           rng: np.random.Generator) -> tuple[np.ndarray, np.ndarray]:
    """Logistic factors for the links ``src -> dst`` over ``graph.n`` elements."""
    n, k = graph.n, settings.dimension
    theta = rng.standard_normal(2 * n * k) * 0.1
    m = max(1, src.size)
    if n <= settings.dense_limit:
        link = np.zeros((n, n), dtype=bool)
        link[src, dst] = True
        weight = max(1.0, (n * (n - 1) - src.size) / m)
        objective, _ = dense_objective(link, k, loss="logistic", positive_weight=weight, l2=settings.l2)
    else:
        keys = np.unique(src * n + dst)
        negatives = _sample_pairs(n, settings.negatives_per_link * src.size, keys, rng)
        all_keys = np.concatenate([keys, negatives])
        sign = np.concatenate([np.ones(keys.size), -np.ones(negatives.size)])
        order = np.argsort(all_keys)
        all_keys, sign = all_keys[order], sign[order]
        weight = np.where(sign > 0, settings.negatives_per_link, 1.0)
        objective, _ = pair_objective(n, k, all_keys // n, all_keys % n, sign, weight,
                                      loss="logistic", l2=settings.l2 * negatives.size / m)
    # A fixed small iteration count is the early stopping: long runs memorise the graph.
    found = minimise(objective, theta, max_iter=settings.max_iter)
    return split(found, n, k)


def _sample_pairs(n: int, count: int, exclude: np.ndarray, rng: np.random.Generator) -> np.ndarray:
    """Up to ``count`` distinct non-self pair keys not in the sorted ``exclude``."""
    count = min(count, n * (n - 1) - exclude.size)
    keys = np.zeros(0, dtype=np.int64)
    while keys.size < count:
        draw = int(1.2 * (count - keys.size)) + 16
        s, t = rng.integers(0, n, draw), rng.integers(0, n, draw)
        k = s * n + t
        keep = (s != t) & ~np.isin(k, exclude)
        keys = np.union1d(keys, k[keep])
    return np.sort(rng.permutation(keys)[:count])


class _Candidates:
    """The kind pairs the metamodel allows, as boolean masks over source and target rows."""

    def __init__(self, graph: PairGraph, allowed: Iterable[AllowedPair] | None) -> None:
        kinds = np.array(graph.kinds, dtype=object)
        self.rules: list[tuple[str, np.ndarray, np.ndarray]] = []
        for relation, sources, targets in allowed if allowed is not None else [("*", None, None)]:
            s = np.ones(graph.n, bool) if sources is None else np.isin(kinds, sorted(sources))
            t = np.ones(graph.n, bool) if targets is None else np.isin(kinds, sorted(targets))
            self.rules.append((relation, s, t))

    def relations_for(self, s: int, t: int) -> tuple[str, ...]:
        return tuple(sorted({r for r, sm, tm in self.rules if sm[s] and tm[t]}))

    def mask(self, rows: np.ndarray) -> np.ndarray:
        """``len(rows) x n``: which (row, target) pairs some rule allows."""
        out = np.zeros((rows.size, self.rules[0][2].size), dtype=bool) if self.rules else np.zeros((rows.size, 0), bool)
        for _, sm, tm in self.rules:
            out |= np.outer(sm[rows], tm)
        return out


def _negatives(graph: PairGraph, candidates: _Candidates, count: int, rng) -> np.ndarray:
    """Sampled non-link pairs (keys) among the allowed kind pairs, for the evaluation."""
    n = graph.n
    drawn = np.zeros(0, dtype=np.int64)
    for _ in range(50):
        if drawn.size >= count:
            break
        s, t = rng.integers(0, n, 4 * count + 64), rng.integers(0, n, 4 * count + 64)
        ok = np.zeros(s.size, dtype=bool)
        for _, sm, tm in candidates.rules:
            ok |= sm[s] & tm[t]
        ok &= (s != t) & ~graph.has(s, t)
        drawn = np.union1d(drawn, s[ok] * n + t[ok])
    return np.sort(rng.permutation(drawn)[:count])


def _top_missing(graph, x, y, candidates: _Candidates, top: int) -> tuple[list[tuple[float, int, int]], int]:
    """The ``top`` highest-scoring allowed non-links, blockwise; and the candidate count."""
    n = graph.n
    rows_per_block = max(1, 2_000_000 // max(1, n))
    best: list[tuple[float, int, int]] = []
    total = 0
    indptr = graph.row_slices()
    for start in range(0, n, rows_per_block):
        rows = np.arange(start, min(n, start + rows_per_block))
        z = x[rows] @ y.T
        allowed = candidates.mask(rows)
        allowed[rows - start, rows] = False
        links = graph.dst[indptr[start] : indptr[rows[-1] + 1]]
        allowed[graph.src[indptr[start] : indptr[rows[-1] + 1]] - start, links] = False
        total += int(allowed.sum())
        z = np.where(allowed, z, -np.inf)
        flat = z.ravel()
        take = min(top, int(allowed.sum()))
        if take:
            idx = np.argpartition(-flat, take - 1)[:take]
            best += [(float(flat[i]), int(rows[i // n]), int(i % n)) for i in idx]
        best = sorted(best, key=lambda b: (-b[0], b[1], b[2]))[:top]
    return best, total


def _sigmoid(z: float) -> float:
    return float(0.5 * (1.0 + np.tanh(0.5 * z)))


@one_blas_thread
def suggest(
    model: Model,
    *,
    allowed: Iterable[AllowedPair] | None = None,
    relations: Iterable[str] | None = None,
    settings: SuggestSettings | None = None,
    progress: Progress | None = None,
) -> SuggestResult:
    """Held-out evaluation, then ranked likely-missing and least-plausible links.

    Parameters
    ----------
    model
        The thread.
    allowed
        ``(relation, source kinds, target kinds)`` triples (``None``: any kind) that
        restrict likely-missing links and the evaluation's negatives; ``None`` allows
        every ordered pair.
    relations
        Fit only links of these relations (default: their union).
    settings
        Dimension, held-out fraction, seed, regularisation, list length.
    progress
        Optional ``callback(fraction, label)``.

    Returns
    -------
    SuggestResult
        Scores are ``sigma(x_i . y_j)`` of a class-weighted fit (links weigh as much as
        all non-links together), so they rank pairs but are not calibrated
        probabilities; evaluation is ``None`` when the model has too few links to hold
        any out.

    Examples
    --------
    >>> from tracecheck.model import Element, Link, Model
    >>> m = Model([Element(f"E{i}", "node") for i in range(6)],
    ...           [Link(f"E{i}", f"E{(i + 1) % 6}", "traces_to") for i in range(6)])
    >>> len(suggest(m, settings=SuggestSettings(top=3)).likely_missing)
    3
    """
    settings = settings or SuggestSettings()
    report = progress or (lambda fraction, label: None)
    allowed = None if allowed is None else [(r, s, t) for r, s, t in allowed]
    graph = pair_graph(model, relations)
    candidates = _Candidates(graph, allowed)
    rng = np.random.default_rng([settings.seed, 1])
    held = int(round(settings.holdout * graph.m))
    auc = ap = None
    negatives = 0
    if held >= 1 and graph.m - held >= 1:
        report(0.1, "held-out evaluation")
        order = rng.permutation(graph.m)
        test, train = order[:held], np.sort(order[held:])
        x, y = _train(graph, graph.src[train], graph.dst[train], settings, rng)
        negative_keys = _negatives(graph, candidates, 10 * held, rng)
        if negative_keys.size:
            pos = np.einsum("ij,ij->i", x[graph.src[test]], y[graph.dst[test]])
            neg = np.einsum("ij,ij->i", x[negative_keys // graph.n], y[negative_keys % graph.n])
            auc, ap, negatives = roc_auc(pos, neg), average_precision(pos, neg), int(negative_keys.size)
    report(0.5, "ranking")
    x, y = _train(graph, graph.src, graph.dst, settings, np.random.default_rng([settings.seed, 2]))
    best, total = _top_missing(graph, x, y, candidates, settings.top)
    kinds, ids = graph.kinds, graph.ids
    missing = [Suggestion(ids[s], ids[t], candidates.relations_for(s, t), _sigmoid(z), kinds[s], kinds[t])
               for z, s, t in best]
    existing = np.einsum("ij,ij->i", x[graph.src], y[graph.dst]) if graph.m else np.zeros(0)
    low = np.lexsort((graph.dst, graph.src, existing))[: settings.top]
    implausible = [Suggestion(ids[s], ids[t], graph.link_relations[(s, t)], _sigmoid(existing[i]), kinds[s], kinds[t])
                   for i, s, t in zip(low, graph.src[low], graph.dst[low], strict=True)]
    report(1.0, "done")
    return SuggestResult(
        roc_auc=auc, average_precision=ap, held_out=held if auc is not None else 0, negatives=negatives,
        likely_missing=missing, least_plausible=implausible, settings=settings,
        elements=graph.n, links=graph.m, candidates=total,
        allowed=[(r, None if s is None else sorted(s), None if t is None else sorted(t)) for r, s, t in allowed]
        if allowed is not None else [],
        relations=graph.relations, model=model.origin,
    )
