"""The pre-merge gate: findings new on head and resolved since base, per model file.

Both sides of each model file are checked under one configuration (head's: the rules
a change will be judged by from now on). A finding is *new* when its fingerprint is
absent from the same file at base, *resolved* when a base fingerprint is gone on head.

File cases, decided here and documented in the README:

- ``added`` (absent at base): every finding on head is new; the diff is against an
  empty model.
- ``deleted`` (absent on head): nothing is new; the base findings are **not** counted as
  resolved, because removing a model export fixes nothing. A note says so.
- ``unchanged`` (identical bytes): checked once; nothing new, nothing resolved, no diff.
- ``modified``: both sides checked and diffed.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

from tracecheck import background
from tracecheck.check import CheckResult, input_info
from tracecheck.config import Config
from tracecheck.diff import diff_models
from tracecheck.model import Model
from tracecheck.rules.engine import Finding, run_rules, sort_key

__all__ = [
    "GateResult", "FileSides", "FileOutcome", "FILE_STATUSES",
    "compare_file", "start_compare", "start_forked", "start_side", "forks", "Comparison",
]

FILE_STATUSES = ("added", "deleted", "modified", "unchanged")
# Models at least this large (elements + links) are compared with forked children
# (start_forked: base read, checked and diffed beside head's check); below it a fork
# costs more than it saves.
FORK_MIN = 20_000


@dataclass(frozen=True)
class FileSides:
    """One model file at base and on head (``None`` where it does not exist)."""

    path: str  # from the repository root
    base: Model | None
    head: Model | None
    base_data: bytes | None = None
    head_data: bytes | None = None


@dataclass(frozen=True)
class FileOutcome:
    path: str
    status: str
    head_findings: list[Finding]  # every finding on head (waivers are applied later)
    new: list[Finding]
    resolved: list[Finding]
    diff: dict[str, Any] | None
    inputs: list[dict[str, Any]]
    note: str | None = None

    def to_json(self) -> dict[str, Any]:
        return {"path": self.path, "status": self.status, "new": len(self.new),
                "resolved": len(self.resolved), "diff": self.diff}


def _status(sides: FileSides) -> str:
    if sides.base is None:
        return "added"
    if sides.head is None:
        return "deleted"
    if sides.base_data is not None and sides.base_data == sides.head_data:
        return "unchanged"
    return "modified"


def _inputs(model: Model, data: bytes | None, config: Config, role: str) -> list[dict[str, Any]]:
    entries = input_info(model, data or b"", config)
    entries[0]["role"] = role
    return [e for e in entries if e["role"] != "config"]


# Models read inside a forked child: held there until it exits (background.start leaves
# with os._exit), so the child never spends time freeing them.
_HELD: list[Model] = []


def forks(head: Model | None, base_data: bytes | None, head_data: bytes | None) -> bool:
    """Whether a file is compared with forked children (:func:`start_forked`): head is
    large and base exists with different bytes."""
    return head is not None and base_data is not None and base_data != head_data and _big(head)


def _side_work(model: Model, data: bytes | None, config: Config, role: str) -> tuple[list[Finding], list]:
    return run_rules(model, config), _inputs(model, data, config, role)


def start_side(model: Model, data: bytes | None, config: Config, role: str, *, fork: bool) -> background.Pending:
    """One side's rules and its input record (file hash and counts): in a forked child
    with ``fork`` (only the findings and the record come back), else in this process
    when the result is asked for."""
    return background.start(lambda: _side_work(model, data, config, role), fork=fork)


def _base_and_diff(sides: FileSides, status: str, config: Config, *, fork: bool) -> tuple[Any, tuple[list, list]]:
    """The diff and base's rules and input record; base's rules in a forked child with
    ``fork`` while this process diffs."""
    base = None if sides.base is None or status == "unchanged" else start_side(
        sides.base, sides.base_data, config, "base", fork=fork)
    diff = None if status in ("unchanged", "deleted") else _diff(sides, config)
    return diff, ([], []) if base is None else base.result()


class Comparison:
    """A file comparison under way (:func:`start_compare`, :func:`start_forked`);
    :meth:`result` waits for the parts still running."""

    def __init__(self, path: str, status: str, head: background.Pending | None, rest: background.Pending) -> None:
        self._path, self._status, self._head, self._rest = path, status, head, rest

    def result(self) -> FileOutcome:
        path, status = self._path, self._status
        diff, (base, base_inputs) = self._rest.result()
        head, inputs = ([], []) if self._head is None else self._head.result()
        inputs = inputs + base_inputs
        if status == "unchanged":
            return FileOutcome(path, status, head, [], [], None, inputs)
        if status == "deleted":
            note = (f"{path}: deleted on head; its {len(base)} finding(s) at base are not "
                    "counted as resolved (removing a model export fixes nothing).")
            return FileOutcome(path, status, [], [], [], None, inputs, note)
        return _outcome(path, status, head, base, diff, inputs)


def start_forked(path: str, head: Model, head_data: bytes, base_data: bytes,
                 read: Callable[[str], Model], config: Config) -> Comparison:
    """Compare a large modified file where base is read only in forked children.

    A child reads base (``read("base")``), forks a grandchild for base's rules and
    diffs; this process checks head meanwhile. Only the diff summary and base's
    findings come back, so base is never built here and head can be freed as soon as
    the returned :class:`Comparison` exists (it holds no model). Should the child
    fail, the same is computed here from ``read("head")`` and ``read("base")``.
    """
    def rest() -> tuple[Any, tuple[list, list]]:  # in the child
        base = read("base")
        _HELD.append(base)  # the child leaves without freeing it (tearing it down costs 0.3 s at 100k)
        return _base_and_diff(FileSides(path, base, head, base_data, head_data), "modified", config, fork=True)

    def fallback() -> tuple[Any, tuple[list, list]]:
        sides = FileSides(path, read("base"), read("head"), base_data, head_data)
        return _base_and_diff(sides, "modified", config, fork=False)

    pending = background.start(rest, fork=True, fallback=fallback)
    done = _side_work(head, head_data, config, "model")  # here, while the child works
    return Comparison(path, "modified", background.Pending(lambda: done, None, None), pending)


def start_compare(sides: FileSides, config: Config) -> Comparison:
    """Start comparing both sides of one model file; see :func:`compare_file`."""
    status = _status(sides)
    if forks(sides.head, sides.base_data, sides.head_data) and background.forkable():
        return start_forked(sides.path, sides.head, sides.head_data, sides.base_data,
                            lambda side: sides.head if side == "head" else sides.base, config)
    head = None if sides.head is None else start_side(sides.head, sides.head_data, config, "model", fork=False)
    rest = background.start(lambda: _base_and_diff(sides, status, config, fork=False), fork=False)
    return Comparison(sides.path, status, head, rest)


def compare_file(sides: FileSides, config: Config) -> FileOutcome:
    """Check both sides of one model file and compare their findings by fingerprint.

    For a large modified model, base's rules and the diff run in forked children while
    this process checks head (:mod:`tracecheck.background`); the result is the same.
    """
    return start_compare(sides, config).result()


def _big(model: Model) -> bool:
    return model.element_count + model.link_count >= FORK_MIN  # counts without building objects


def _diff(sides: FileSides, config: Config) -> dict[str, Any]:
    old = sides.base if sides.base is not None else Model([], [], origin=f"(absent):{sides.path}")
    summary = diff_models(old, sides.head, config, with_checks=False, with_picture=False).summary()
    # The gate compares findings itself; the diff's own (uncomputed here) would only mislead.
    return {k: v for k, v in summary.items() if k not in ("findings", "coverage")}


def _outcome(path: str, status: str, head: list[Finding], base: list[Finding],
             diff: dict[str, Any] | None, inputs: list[dict[str, Any]]) -> FileOutcome:
    before = {f.fingerprint for f in base}
    after = {f.fingerprint for f in head}
    return FileOutcome(
        path,
        status,
        head,
        [f for f in head if f.fingerprint not in before],
        [f for f in base if f.fingerprint not in after],
        diff,
        inputs,
    )


@dataclass(frozen=True)
class GateResult(CheckResult):
    """A check result whose ``findings`` are those new since base, plus what was resolved."""

    resolved: tuple[Finding, ...] = ()
    base: dict[str, Any] = field(default_factory=dict)  # rev, commit, how it was chosen
    head: dict[str, Any] = field(default_factory=dict)  # rev (None: working tree), commit
    files: tuple[FileOutcome, ...] = ()
    # The optional embedding check (gate --embedding): the file, and per head model its
    # path and embedding VerifyResult. A non-exact embedding fails the gate.
    embedding_file: str | None = None
    embedding: tuple[tuple[str, Any], ...] = ()

    @property
    def embedding_exact(self) -> bool | None:
        """``None`` when no embedding was given, else whether it reproduces every head model."""
        if self.embedding_file is None:
            return None
        return all(check.exact for _, check in self.embedding)

    @property
    def exit_code(self) -> int:
        return 1 if self.failing or self.embedding_exact is False else 0

    def summary(self) -> dict[str, Any]:
        statuses = Counter(f.status for f in self.files)
        extra = {} if self.embedding_file is None else {"embedding_exact": self.embedding_exact}
        return super().summary() | {
            "new": len(self.findings),
            "resolved": len(self.resolved),
            "files": {s: statuses.get(s, 0) for s in FILE_STATUSES},
            "failed": self.exit_code == 1,
        } | extra

    def to_json(self) -> dict[str, Any]:
        gate = {"base": self.base, "head": self.head, "files": [f.to_json() for f in self.files]}
        if self.embedding_file is not None:
            gate["embedding"] = {
                "file": self.embedding_file,
                "exact": self.embedding_exact,
                "models": [{"path": path} | check.to_json() for path, check in self.embedding],
            }
        return super().to_json() | {"resolved": [f.to_json() for f in self.resolved], "gate": gate}


def sorted_findings(findings) -> list[Finding]:
    return sorted(findings, key=sort_key)
