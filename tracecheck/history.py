"""Metrics of one model file across git revisions: the analysis behind ``history``.

Which revisions (:func:`plan`): by default every tag at which the file has a history
(it exists there or was deleted on the way), in commit order; ``--stages`` names the
revisions; ``--revs A..B`` takes A, every commit after A up to B that changes the file,
and B. ``--follow`` follows the file across renames.

What each revision gives (:func:`walk`): element and link counts (as exported,
duplicates included, as ``check`` counts its input), findings by rule and severity from
the rule engine, coverage per declaration, and churn against the previous row from the
diff engine. A revision without the file is a ``missing`` row, one whose file cannot be
read as a model a ``malformed`` row; neither stops the walk. Churn is ``None`` on the
first row and whenever this row or the one before it is not ``ok``.

Each distinct blob is parsed at most once per run; metrics and churn are cached on disk
by blob id (:mod:`tracecheck.history_cache`), so a rerun over the same history parses
nothing.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

from tracecheck import gitsource
from tracecheck.caution import caution
from tracecheck.config import Config
from tracecheck.coverage import percents
from tracecheck.diff import diff_models
from tracecheck.errors import GitError, InputError, UsageError
from tracecheck.formats import read_model
from tracecheck.history_cache import Cache
from tracecheck.model import Model
from tracecheck.rules.engine import run_rules

__all__ = [
    "CAUTION",
    "CHURN",
    "SEVERITIES",
    "Metrics",
    "HistoryRow",
    "HistoryResult",
    "Planned",
    "plan",
    "walk",
    "measure",
    "churn_between",
]

CHURN = ("added", "removed", "modified", "moved", "reidentified")
SEVERITIES = ("error", "warning", "note")
CAUTION = caution("This history supports")

Progress = Callable[[float, str], None]


@dataclass(frozen=True)
class Metrics:
    """What ``check`` and coverage say about one model file."""

    elements: int
    links: int
    by_kind: dict[str, int]
    findings: dict[str, int]
    severities: dict[str, int]
    coverage: dict[str, float | None]

    def to_json(self) -> dict[str, Any]:
        return {
            "elements": self.elements,
            "links": self.links,
            "by_kind": dict(sorted(self.by_kind.items())),
            "findings": dict(sorted(self.findings.items())),
            "severities": {s: self.severities.get(s, 0) for s in SEVERITIES},
            "coverage": dict(sorted(self.coverage.items())),
        }

    @classmethod
    def from_json(cls, data: dict[str, Any]) -> Metrics:
        return cls(**{k: data[k] for k in ("elements", "links", "by_kind", "findings", "severities", "coverage")})

    @staticmethod
    def valid(data: Any) -> bool:
        """Whether a cached value has the shape :meth:`to_json` writes."""
        try:
            counts = [data["by_kind"], data["findings"], data["severities"]]
            ints = [data["elements"], data["links"]] + [v for c in counts for v in c.values()]
            percents = list(data["coverage"].values())
        except (TypeError, KeyError, AttributeError):
            return False
        return all(type(v) is int for v in ints) and all(
            p is None or isinstance(p, int | float) and not isinstance(p, bool) for p in percents
        )


@dataclass(frozen=True)
class HistoryRow:
    """One revision: where it is, what state the file is in, and its metrics.

    ``path`` is the file's name at this revision (it differs across a followed rename),
    ``blob`` its object id, ``message`` why a ``malformed`` file could not be read.
    """

    rev: str
    tags: tuple[str, ...]
    path: str
    status: str
    blob: str | None = None
    metrics: Metrics | None = None
    churn: dict[str, int] | None = None
    message: str | None = None

    def to_json(self) -> dict[str, Any]:
        m = self.metrics.to_json() if self.metrics is not None else None
        return {
            "rev": self.rev,
            "tags": list(self.tags),
            "status": self.status,
            **{k: (m[k] if m else None) for k in ("elements", "links", "by_kind", "findings", "severities", "coverage")},
            "churn": None if self.churn is None else {c: self.churn[c] for c in CHURN},
        }


@dataclass(frozen=True)
class HistoryResult:
    """The rows of one history, oldest first, and the declarations they were measured by."""

    path: str
    rows: tuple[HistoryRow, ...]
    declarations: tuple[str, ...]

    def to_json(self) -> dict[str, Any]:
        return {"path": self.path, "revisions": [row.to_json() for row in self.rows]}

    @property
    def rules(self) -> list[str]:
        """Every rule id with a finding in some row, sorted."""
        return sorted({r for row in self.rows if row.metrics for r in row.metrics.findings})

    @property
    def kinds(self) -> list[str]:
        return sorted({k for row in self.rows if row.metrics for k in row.metrics.by_kind})


@dataclass(frozen=True)
class Planned:
    rev: str
    tags: tuple[str, ...]
    path: str


# --- which revisions ------------------------------------------------------------------


def _split_range(revs: str) -> tuple[str, str]:
    first, sep, second = revs.partition("..")
    if not sep or not first or not second or second.startswith("."):
        raise UsageError(f"--revs {revs}: a revision range is written A..B, both revisions given.")
    return first, second


def _ancestors(start: str, parents: dict[str, tuple[str, ...]]) -> set[str]:
    seen, todo = set(), [start]
    while todo:
        sha = todo.pop()
        if sha not in seen:
            seen.add(sha)
            todo.extend(parents.get(sha, ()))
    return seen


def _heads(graph, tips: set[str]) -> list[str]:
    """The tips that are no other tip's ancestor (newest first pass over the graph)."""
    below: set[str] = set()
    for sha, parents in reversed(graph):
        if sha in tips or sha in below:
            below.update(parents)
    return sorted(tips - below)


def _touched(repo, graph, tips: set[str], path: str, follow: bool) -> dict[str, str]:
    if not follow:
        return gitsource.path_commits(repo, sorted(tips), path)
    # git follows renames along one line of history only, so it gets one walk per head.
    touched: dict[str, str] = {}
    for head in _heads(graph, tips):
        for sha, name in gitsource.path_commits(repo, [head], path, follow=True).items():
            touched.setdefault(sha, name)
    return touched


def _names(graph, touched: dict[str, str], path: str, follow: bool) -> tuple[dict[str, str], set[str]]:
    """The file's name at each commit (along first parents) and the commits at or after
    a change of it."""
    names: dict[str, str] = {}
    reached: set[str] = set()
    for sha, parents in graph:
        if sha in touched:
            names[sha] = touched[sha] if follow else path
            reached.add(sha)
            continue
        if parents and parents[0] in names:
            names[sha] = names[parents[0]]
        if any(p in reached for p in parents):
            reached.add(sha)
    return names, reached


def plan(repo, path: str, *, revs: str | None = None, stages: list[str] | None = None,
         follow: bool = False) -> list[Planned]:
    """The revisions to measure, oldest first (topological commit order).

    Raises
    ------
    GitError
        An unknown revision, or no revision to show.
    UsageError
        ``--revs`` and ``--stages`` together, or a malformed range.
    """
    if revs and stages:
        raise UsageError("give either --revs A..B or --stages, not both.")
    tags = gitsource.tags_by_commit(repo)
    if revs:
        ends = [gitsource.commit_id(repo, r) for r in _split_range(revs)]
        tips = ends
    elif stages:
        tips = [gitsource.commit_id(repo, s) for s in stages]
    else:
        tips = sorted(tags)
        if not tips:
            raise GitError(f"{path}: the repository has no tags; name the revisions with --revs A..B or --stages.")
    graph = gitsource.commit_graph(repo, sorted(set(tips)))
    touched = _touched(repo, graph, set(tips), path, follow)
    names, reached = _names(graph, touched, path, follow)
    if revs:
        parents = dict(graph)
        inside = _ancestors(ends[1], parents) - _ancestors(ends[0], parents)
        chosen = set(ends) | {sha for sha in touched if sha in inside}
    elif stages:
        chosen = set(tips)
    else:
        chosen = {sha for sha in tips if sha in reached}
        if not chosen:
            raise GitError(f"{path}: no tag of the repository has this file in its history; "
                           "check the path, or name the revisions with --revs A..B or --stages.")
    return [Planned(sha, tuple(tags.get(sha, ())), names.get(sha, path)) for sha, _ in graph if sha in chosen]


# --- what each revision gives ---------------------------------------------------------


def measure(model: Model, config: Config) -> Metrics:
    """Counts, findings and coverage of one model, from the rule engine and coverage."""
    findings = run_rules(model, config)
    severities = Counter(f.severity for f in findings)
    return Metrics(
        elements=len(model.elements),
        links=len(model.links),
        by_kind=dict(sorted(Counter(e.kind for e in model.elements).items())),
        findings=dict(sorted(Counter(f.rule for f in findings).items())),
        severities={s: severities.get(s, 0) for s in SEVERITIES},
        coverage=percents(model, config.declarations),
    )


def churn_between(old: Model, new: Model, config: Config) -> dict[str, int]:
    """Elements added, removed, modified, moved and re-identified, from the diff engine."""
    counts = diff_models(old, new, config, with_checks=False, with_picture=False).summary()["elements"]
    return {c: int(counts[c]) for c in CHURN}


def _valid_churn(data: Any) -> bool:
    return isinstance(data, dict) and set(data) == set(CHURN) and all(type(v) is int for v in data.values())


class _Models:
    """Parse each blob at most once; keep the two most recent models (this row and the
    one before, which is all churn needs)."""

    def __init__(self, repo, config: Config, input_format: str | None) -> None:
        self.repo = repo
        self.config = config
        self.input_format = input_format
        self.kept: dict[str, Model] = {}
        self.parsed = 0

    def get(self, blob: str, name: str) -> Model:
        model = self.kept.get(blob)
        if model is None:
            data = gitsource.read_object(self.repo, blob)
            model = read_model(data, name, input_format=self.input_format, options=self.config.section("formats"))
            self.parsed += 1
            self.kept = {k: v for k, v in list(self.kept.items())[-1:]}
            self.kept[blob] = model
        return model


def _metrics(planned: Planned, blob: str, models: _Models, cache: Cache, config: Config) -> HistoryRow:
    key = ("metrics", blob, planned.path)
    cached = cache.get(key, lambda v: v.get("status") == "malformed" and isinstance(v.get("message"), str)
                       or v.get("status") == "ok" and Metrics.valid(v.get("metrics")))
    if cached is not None:
        if cached["status"] == "malformed":
            return HistoryRow(planned.rev, planned.tags, planned.path, "malformed", blob, message=cached["message"])
        return HistoryRow(planned.rev, planned.tags, planned.path, "ok", blob, Metrics.from_json(cached["metrics"]))
    try:
        model = models.get(blob, planned.path)
    except InputError as error:
        cache.put(key, {"status": "malformed", "message": str(error)})
        return HistoryRow(planned.rev, planned.tags, planned.path, "malformed", blob, message=str(error))
    metrics = measure(model, config)
    cache.put(key, {"status": "ok", "metrics": metrics.to_json()})
    return HistoryRow(planned.rev, planned.tags, planned.path, "ok", blob, metrics)


def _churn(before: HistoryRow, row: HistoryRow, models: _Models, cache: Cache, config: Config) -> dict[str, int]:
    assert before.blob is not None and row.blob is not None
    if before.blob == row.blob:  # the same content: nothing changed by definition
        return dict.fromkeys(CHURN, 0)
    key = ("churn", before.blob, before.path, row.blob, row.path)
    cached = cache.get(key, _valid_churn)
    if cached is not None:
        return cached
    counts = churn_between(models.get(before.blob, before.path), models.get(row.blob, row.path), config)
    cache.put(key, counts)
    return counts


def walk(repo, planned: list[Planned], config: Config, cache: Cache, *, input_format: str | None = None,
         progress: Progress | None = None) -> list[HistoryRow]:
    """Measure every planned revision, oldest first; see the module docstring."""
    models = _Models(repo, config, input_format)
    rows: list[HistoryRow] = []
    for n, item in enumerate(planned):
        if progress is not None:
            progress(n / len(planned), item.tags[0] if item.tags else item.rev[:12])
        blob = gitsource.blob_at(repo, item.rev, item.path)
        if blob is None:
            row = HistoryRow(item.rev, item.tags, item.path, "missing")
        else:
            row = _metrics(item, blob, models, cache, config)
        before = rows[-1] if rows else None
        if row.status == "ok" and before is not None and before.status == "ok":
            row = HistoryRow(row.rev, row.tags, row.path, row.status, row.blob, row.metrics,
                             _churn(before, row, models, cache, config))
        rows.append(row)
    if progress is not None:
        progress(1.0, "done")
    return rows
