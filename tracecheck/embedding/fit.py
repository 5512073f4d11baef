"""Fit a directed low-rank logistic factorisation that reproduces a graph exactly.

Each element ``i`` gets a source vector ``x_i`` and a target vector ``y_i`` in
``R^k``; the decoder predicts ``i -> j`` when ``x_i . y_j > 0``. Training minimises
the class-weighted squared hinge of :mod:`tracecheck.embedding.objective` with
scipy's L-BFGS-B from a seeded start, and stops at the first iterate whose every
ordered pair is on the right side of the threshold by the float64 certification
margin. Small graphs (``n <= dense_limit``) are trained full-batch on all ``n^2``
pairs; larger ones on an *active set* -- every link, a seeded sample of non-links,
and the non-links that each full blockwise pass finds too close to the threshold --
until a full pass certifies every pair.

Without a requested dimension the smallest exact one is searched: doubling from 1
until a fit is exact, then bisection, each bisection step starting from the best
rank-``k`` truncation of the smallest exact fit so far and then from fixed seeds.
Failed attempts are bounded (iterations, a stall patience, a total count). The
dimension found is an upper bound on the smallest exact dimension, not a proof of
minimality: a lower one may exist that the optimiser did not find.

References
----------
S. Chanpuriya, C. Musco, K. Sotiropoulos, C. E. Tsourakakis, "Node Embeddings and Exact
Low-Rank Representations of Complex Networks", NeurIPS 2020.
R. H. Byrd, P. Lu, J. Nocedal, C. Zhu, "A Limited Memory Algorithm for Bound Constrained
Optimization", SIAM J. Sci. Comput. 16(5), 1995 (L-BFGS-B, scipy's).
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable
from dataclasses import asdict, dataclass, field

import numpy as np

from tracecheck.embedding.factors import Embedding, certification_margin, truncate
from tracecheck.embedding.graph import PairGraph, pair_graph
from tracecheck.embedding.objective import dense_objective, minimise, pair_objective, split
from tracecheck.embedding.scan import BLOCK_BYTES, scan
from tracecheck.embedding.threads import one_blas_thread
from tracecheck.embedding.verify import VerifyResult, verify
from tracecheck.model import Model

__all__ = ["FitSettings", "Attempt", "FitOutcome", "FitResult", "fit_graph", "fit_model"]

Progress = Callable[[float, str], None]
HINGE_MARGIN = 1.0


@dataclass(frozen=True)
class FitSettings:
    """How a fit is trained; recorded in the embedding file.

    Attributes
    ----------
    seed
        Base seed; attempt ``r`` at dimension ``k`` starts from ``default_rng([seed, k, r])``.
    max_iter
        Iteration cap of one attempt (of one active-set round).
    patience
        An attempt is abandoned after this many iterations without 1 % fewer wrong pairs.
    restarts
        Random starts per dimension in bisection (and with ``--dim``).
    active_start
        First dimension of the doubling above ``dense_limit``.
    active_restarts
        The same above ``dense_limit``, where an attempt costs minutes: bisection then
        starts only from the truncated larger exact fit (on the synthetic 5k thread it
        came closer to exact than the random starts did in the same number of rounds).
    max_failed
        Cap on failed attempts over a whole dimension search.
    max_dimension
        Largest dimension the doubling tries.
    dense_limit
        Above this many elements, train on an active set instead of all pairs.
    negatives_per_link
        Initial non-link sample of the active set, per link.
    rounds, round_iter
        Cap on active-set rounds (full passes) per attempt, and on the iterations of
        one round.
    doubling_rounds
        Cap on active-set rounds of an attempt in the doubling phase: failed low
        dimensions dominated the search time, and a dimension that is only exact after
        long training is found again by bisection, which has the full budget.
    max_seconds
        Wall-clock bound on the whole fit (``None``: none). The best fit so far is kept.
    """

    seed: int = 0
    loss: str = "squared-hinge"
    max_iter: int = 3000
    patience: int = 150
    restarts: int = 2
    active_restarts: int = 0
    active_start: int = 8
    max_failed: int = 10
    max_dimension: int = 256
    dense_limit: int = 400
    negatives_per_link: int = 5
    rounds: int = 40
    doubling_rounds: int = 12
    round_iter: int = 60
    implicit: float = 1.0
    init_scale: float = 0.1
    max_seconds: float | None = None

    def to_json(self) -> dict:
        return asdict(self)


@dataclass(frozen=True)
class Attempt:
    """One training run: its dimension, where it started, and how it ended."""

    dimension: int
    start: str
    exact: bool
    errors: int
    iterations: int
    stopped: str

    def to_json(self) -> dict:
        return asdict(self)


@dataclass
class FitOutcome:
    """The best embedding found and the attempts that led to it."""

    embedding: Embedding
    exact: bool
    errors: int
    attempts: list[Attempt] = field(default_factory=list)
    searched: bool = True
    timed_out: bool = False


@dataclass
class _Monitor:
    """Counts errors at each iterate; decides when an attempt stops."""

    errors_at: Callable[[np.ndarray], int]
    patience: int
    deadline: float | None
    report: Callable[[int, int], None]
    iterations: int = 0
    best: int = -1
    best_theta: np.ndarray | None = None
    since: int = 0
    stopped: str = "converged"

    def __call__(self, theta: np.ndarray) -> bool:
        self.iterations += 1
        errors = self.errors_at(theta)
        if self.best < 0 or errors < self.best:
            # Progress means 1 % fewer wrong pairs (at least one) within the patience.
            if self.best < 0 or errors <= self.best - max(1, self.best // 100):
                self.since = self.iterations
            self.best, self.best_theta = errors, theta.copy()
        if self.iterations % 25 == 0:
            self.report(self.iterations, self.best)
        if errors == 0:
            self.stopped = "exact"
        elif self.iterations - self.since > self.patience:
            self.stopped = "stalled"
        elif self.deadline is not None and time.monotonic() > self.deadline:
            self.stopped = "time"
        else:
            return False
        return True


def _optimise(objective, theta: np.ndarray, monitor: _Monitor, settings: FitSettings,
              max_iter: int | None = None) -> None:
    minimise(objective, theta, max_iter=max_iter or settings.max_iter, callback=monitor)
    if monitor.best_theta is None:  # not one iteration: judge the start
        monitor(theta)


def _logits_for(state, objective, theta: np.ndarray) -> np.ndarray:
    if state.theta is None or not np.array_equal(state.theta, theta):
        objective(theta)
    return state.z


class _Problem:
    """One graph to fit, with what every attempt on it shares."""

    def __init__(self, graph: PairGraph, settings: FitSettings, progress: Progress | None,
                 deadline: float | None) -> None:
        self.graph, self.settings, self.deadline = graph, settings, deadline
        self.progress = progress or (lambda fraction, label: None)
        self.fraction = 0.0
        self.dense = graph.n <= settings.dense_limit
        if self.dense:
            n = graph.n
            self.link = np.zeros((n, n), dtype=bool)
            self.link[graph.src, graph.dst] = True
            self.non_link = ~self.link
            np.fill_diagonal(self.non_link, False)
            non_links = n * (n - 1) - graph.m
            self.positive_weight = max(1.0, non_links / graph.m)

    def monitor(self, errors_at, label: str) -> _Monitor:
        def report(iterations: int, best: int) -> None:
            self.progress(self.fraction, f"{label}: iteration {iterations}, {best} pairs wrong")

        return _Monitor(errors_at, self.settings.patience, self.deadline, report)

    def attempt(self, k: int, theta: np.ndarray, label: str,
                rounds: int | None = None) -> tuple[np.ndarray, int, int, str]:
        """Train from ``theta``; return (best theta, errors, iterations, why it stopped).

        ``rounds`` caps the active-set rounds (the doubling phase only needs to know
        whether a dimension is easily exact; bisection gives the full budget).
        """
        if self.dense:
            return self._dense(k, theta, label)
        return self._active(k, theta, label, rounds or self.settings.rounds)

    def _dense(self, k, theta, label):
        n = self.graph.n
        objective, state = dense_objective(
            self.link, k, loss=self.settings.loss, positive_weight=self.positive_weight
        )

        def errors_at(t: np.ndarray) -> int:
            # A pair is right when s * z > margin (s = +1 link, -1 non-link); self-pairs
            # are never asked, so their count is taken off.
            _logits_for(state, objective, t)
            margin = certification_margin(*split(t, n, k))
            wrong = np.count_nonzero(state.sz <= margin)
            return int(wrong - np.count_nonzero(np.diagonal(state.sz) <= margin))

        monitor = self.monitor(errors_at, label)
        _optimise(objective, theta, monitor, self.settings)
        return monitor.best_theta, monitor.best, monitor.iterations, monitor.stopped

    def _active(self, k, theta, label, rounds):
        """Short L-BFGS runs on a growing active set, each followed by a full blockwise pass.

        Stops when a pass certifies every pair, or fails when the wrong-pair count of the
        passes has not fallen 10 % below the best for two passes, or at the iteration cap.
        """
        graph, n, settings = self.graph, self.graph.n, self.settings
        rng = np.random.default_rng([settings.seed, k, 7])
        negatives = _sample_non_links(graph, settings.negatives_per_link * graph.m, rng)
        rows = max(1, min(n, BLOCK_BYTES // max(1, 8 * n)))
        blocks = -(-n // rows)
        iterations, best, since = 0, (-1, theta), 0  # best: (errors of a full pass, factors)
        for round_number in range(1, rounds + 1):
            src, dst, sign, weight = _active_pairs(graph, negatives)
            implicit = settings.implicit * negatives.size / (n * n) if round_number == 1 else 0.0
            objective, state = pair_objective(n, k, src, dst, sign, weight, loss=settings.loss,
                                              implicit=implicit)

            def errors_at(t: np.ndarray, state=state, objective=objective, sign=sign) -> int:
                z = _logits_for(state, objective, t)
                return int(np.count_nonzero(sign * z <= certification_margin(*split(t, n, k))))

            monitor = self.monitor(errors_at, f"{label} round {round_number}")
            _optimise(objective, theta, monitor, settings, settings.round_iter)
            theta, iterations = monitor.best_theta, iterations + monitor.iterations
            x, y = split(theta, n, k)
            # Let the active set at most double per round: fewer rounds, bounded memory.
            per_block = max(64, max(4 * graph.m, negatives.size) // blocks + 1)
            full = scan(x, y, graph.src, graph.dst, threshold=0.0, margin=certification_margin(x, y),
                        bound=HINGE_MARGIN, limit=per_block, rng=rng)
            errors = int(full.missing_src.size + full.spurious_count)
            since = 0 if best[0] < 0 or errors < 0.9 * best[0] else since + 1
            if best[0] < 0 or errors < best[0]:
                best = (errors, theta)
            if full.exact:
                return theta, 0, iterations, "exact"
            if self.deadline is not None and time.monotonic() > self.deadline:
                return best[1], best[0], iterations, "time"
            if since >= 2:  # two full passes without 10 % fewer wrong pairs than the best
                return best[1], best[0], iterations, "stalled"
            if iterations >= settings.max_iter:
                return best[1], best[0], iterations, "iterations"
            negatives = np.union1d(negatives, full.spurious_src * n + full.spurious_dst)
        return best[1], best[0], iterations, "rounds"


def _sample_non_links(graph: PairGraph, count: int, rng: np.random.Generator) -> np.ndarray:
    """Up to ``count`` distinct non-link pairs (as ``src * n + dst`` keys), uniformly."""
    n = graph.n
    total = n * (n - 1) - graph.m
    count = min(count, total)
    keys = np.zeros(0, dtype=np.int64)
    while keys.size < count:
        draw = int(1.2 * (count - keys.size)) + 16
        s, t = rng.integers(0, n, draw), rng.integers(0, n, draw)
        fresh = (s != t) & ~graph.has(s, t)
        keys = np.union1d(keys, s[fresh] * n + t[fresh])
    return np.sort(rng.permutation(keys)[:count])


def _active_pairs(graph: PairGraph, negatives: np.ndarray):
    """Links and chosen non-links, sorted by (src, dst), with signs and class weights."""
    n = graph.n
    keys = np.concatenate([graph.keys, negatives])
    sign = np.concatenate([np.ones(graph.m), -np.ones(negatives.size)])
    order = np.argsort(keys, kind="stable")
    keys, sign = keys[order], sign[order]
    weight = np.where(sign > 0, max(1.0, negatives.size / max(1, graph.m)), 1.0)
    return keys // n, keys % n, sign, weight


def _random_start(n: int, k: int, seed: int, restart: int, scale: float) -> np.ndarray:
    return np.random.default_rng([seed, k, restart]).standard_normal(2 * n * k) * scale


def _trivial(graph: PairGraph, settings: FitSettings, searched: bool) -> FitOutcome:
    """No links: one dimension, every logit -1."""
    ones = np.ones((graph.n, 1))
    embedding = _embedding(graph, ones, -ones, settings)
    return FitOutcome(embedding, True, 0, [Attempt(1, "constant", True, 0, 0, "exact")], searched)


def _embedding(graph: PairGraph, x: np.ndarray, y: np.ndarray, settings: FitSettings) -> Embedding:
    return Embedding(
        x=np.array(x, dtype=np.float64), y=np.array(y, dtype=np.float64), ids=graph.ids,
        threshold=0.0, relations=graph.relations, settings=settings.to_json(),
        fingerprint=graph.fingerprint,
    )


class _Search:
    """Attempts at one dimension after another, keeping the smallest exact fit."""

    def __init__(self, problem: _Problem) -> None:
        self.problem = problem
        self.attempts: list[Attempt] = []
        self.best: tuple[int, int, np.ndarray] | None = None  # (errors, k, theta)
        self.smallest_exact: tuple[int, np.ndarray] | None = None
        self.failed = 0
        self.tried: set[tuple[int, str]] = set()

    @property
    def out_of_time(self) -> bool:
        deadline = self.problem.deadline
        return deadline is not None and time.monotonic() > deadline

    def at(self, k: int, starts: list[tuple[str, np.ndarray]], rounds: int | None = None) -> bool:
        """Try ``starts`` at dimension ``k`` until one is exact."""
        for label, theta in starts:
            if (k, label) in self.tried:
                continue
            self.tried.add((k, label))
            if self.out_of_time:
                return False
            theta, errors, iterations, stopped = self.problem.attempt(k, theta, f"k={k} {label}", rounds)
            self.attempts.append(Attempt(k, label, errors == 0, errors, iterations, stopped))
            if self.best is None or (errors, k) < self.best[:2]:
                self.best = (errors, k, theta)
            if errors == 0:
                if self.smallest_exact is None or k < self.smallest_exact[0]:
                    self.smallest_exact = (k, theta)
                return True
            self.failed += 1
            if self.failed >= self.problem.settings.max_failed:
                return False
        return False

    def random_starts(self, k: int, count: int) -> list[tuple[str, np.ndarray]]:
        s = self.problem.settings
        return [(f"seed {r}", _random_start(self.problem.graph.n, k, s.seed, r, s.init_scale))
                for r in range(count)]

    def warm_start(self, k: int) -> list[tuple[str, np.ndarray]]:
        if self.smallest_exact is None:
            return []
        big, theta = self.smallest_exact
        x, y = truncate(*split(theta, self.problem.graph.n, big), k)
        return [(f"from k={big}", np.concatenate([x.ravel(), y.ravel()]))]


@one_blas_thread
def fit_graph(
    graph: PairGraph,
    *,
    dimension: int | None = None,
    settings: FitSettings | None = None,
    progress: Progress | None = None,
) -> FitOutcome:
    """Fit an embedding of ``graph``; search the smallest exact dimension unless given.

    Parameters
    ----------
    graph
        The directed pairs to reproduce (:func:`~tracecheck.embedding.graph.pair_graph`).
    dimension
        Fit exactly this dimension (``settings.restarts + 1`` seeded starts, the one
        with fewest wrong pairs kept); ``None`` searches.
    settings
        Training settings; the defaults suit threads up to tens of thousands of elements.
    progress
        Optional ``callback(fraction, label)``; called from inside training.

    Returns
    -------
    FitOutcome
        ``exact`` says whether every ordered pair is certified; the dimension of an
        exact search result is an upper bound on the smallest exact dimension.

    Examples
    --------
    >>> from tracecheck.model import Element, Link, Model
    >>> from tracecheck.embedding.graph import pair_graph
    >>> star = Model([Element(str(i), "node") for i in range(5)],
    ...              [Link("0", str(i), "traces_to") for i in range(1, 5)])
    >>> outcome = fit_graph(pair_graph(star))
    >>> outcome.exact, outcome.embedding.dimension
    (True, 1)

    References
    ----------
    S. Chanpuriya, C. Musco, K. Sotiropoulos, C. E. Tsourakakis, "Node Embeddings and
    Exact Low-Rank Representations of Complex Networks", NeurIPS 2020.
    """
    settings = settings or FitSettings()
    if graph.m == 0:
        return _trivial(graph, settings, dimension is None)
    deadline = None if settings.max_seconds is None else time.monotonic() + settings.max_seconds
    problem = _Problem(graph, settings, progress, deadline)
    search = _Search(problem)
    if dimension is not None:
        search.at(dimension, search.random_starts(dimension, settings.restarts + 1))
    else:
        _search_dimension(search, settings)
    errors, k, theta = search.best
    if search.smallest_exact is not None:
        errors, (k, theta) = 0, search.smallest_exact
    x, y = split(theta, graph.n, k)
    if problem.progress:
        problem.progress(1.0, f"k={k}: {'exact' if errors == 0 else f'{errors} pairs wrong'}")
    return FitOutcome(_embedding(graph, x, y, settings), errors == 0, errors, search.attempts,
                      dimension is None, search.out_of_time)


def _search_dimension(search: _Search, settings: FitSettings) -> None:
    """Doubling, then bisection between the last failure and the first success.

    Doubling starts at 1 for dense problems and at ``active_start`` above the dense
    limit, where dimensions 1, 2 and 4 never fitted a synthetic thread and each
    failure cost minutes; bisection still explores below the start (from 0).
    """
    limit = min(settings.max_dimension, max(1, search.problem.graph.n))
    low, k = 0, 1 if search.problem.dense else min(limit, settings.active_start)
    while True:
        if search.at(k, search.random_starts(k, 1), settings.doubling_rounds):
            break
        if search.failed >= settings.max_failed or search.out_of_time or k >= limit:
            return
        low, k = k, min(2 * k, limit)
        search.problem.fraction = min(0.5, 0.1 * len(search.attempts))
    high, thorough = k, {k}
    while not search.out_of_time and search.failed < settings.max_failed:
        if high - low > 1:
            mid = (low + high) // 2
        elif low >= 1 and low not in thorough:
            mid = low  # the doubling tried it from one seed only
            low = low // 2
        else:
            return
        thorough.add(mid)
        steps = max(1, int(np.ceil(np.log2(max(2, high - low)))))
        search.problem.fraction = 1.0 - 0.5 / steps
        restarts = settings.restarts if search.problem.dense else settings.active_restarts
        if search.at(mid, search.warm_start(mid) + search.random_starts(mid, restarts)):
            high = mid
        else:
            low = mid


@dataclass
class FitResult:
    """The outcome of ``embed fit``, certified by an independent :func:`verify` pass."""

    outcome: FitOutcome
    check: VerifyResult
    graph_elements: int
    graph_links: int
    skipped_self: int
    skipped_dangling: int
    output: str = ""

    @property
    def exact(self) -> bool:
        return self.check.exact

    @property
    def exit_code(self) -> int:
        return 0 if self.exact else 1

    def to_json(self) -> dict:
        embedding = self.outcome.embedding
        attempts = self.outcome.attempts
        return {
            "exact": self.exact,
            "dimension": embedding.dimension,
            "searched": self.outcome.searched,
            "upper_bound": self.outcome.searched and self.exact,
            "attempts": [a.to_json() for a in attempts],
            "failed_attempts": sum(1 for a in attempts if not a.exact),
            "random_starts": sum(1 for a in attempts if a.start.startswith("seed")),
            "timed_out": self.outcome.timed_out,
            "elements": self.graph_elements,
            "links": self.graph_links,
            "skipped": {"self_links": self.skipped_self, "dangling_links": self.skipped_dangling},
            "relations": None if embedding.relations is None else list(embedding.relations),
            "fingerprint": embedding.fingerprint,
            "margin": self.check.margin,
            "missing": [link.to_json() for link in self.check.missing],
            "spurious": [link.to_json() for link in self.check.spurious],
            "embedding": self.output,
            "model": self.check.model,
            "settings": dict(embedding.settings),
        }


def fit_model(
    model: Model,
    *,
    relations: Iterable[str] | None = None,
    dimension: int | None = None,
    settings: FitSettings | None = None,
    progress: Progress | None = None,
    output: str = "",
) -> FitResult:
    """Fit ``model`` (see :func:`fit_graph`) and certify the result with :func:`verify`.

    Parameters
    ----------
    model
        The thread to reproduce.
    relations
        Fit only these relations (default: the union of all links).
    dimension, settings, progress
        As for :func:`fit_graph`.
    output
        Where the embedding will be written, for the report.

    Returns
    -------
    FitResult
    """
    graph = pair_graph(model, relations)
    outcome = fit_graph(graph, dimension=dimension, settings=settings, progress=progress)
    check = verify(model, outcome.embedding, origin=output)
    return FitResult(outcome, check, graph.n, graph.m, graph.skipped_self, graph.skipped_dangling, output)
