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

__all__ = ["GateResult", "FileSides", "FileOutcome", "compare_file", "start_compare", "Comparison", "start_side", "forks", "FILE_STATUSES"]

FILE_STATUSES = ("added", "deleted", "modified", "unchanged")
# Models at least this large (elements + links) check both sides in a forked child while
# the parent diffs; below it the fork costs more than it saves.
FORK_MIN = 20_000


@dataclass(frozen=True)
class FileSides:
    """One model file at base and on head (``None`` where it does not exist).

    ``head_work``, when given, is head's rules and input record already started
    (:func:`start_side`), e.g. in a forked child as soon as head was parsed.
    ``reread``, when given, parses a side again from its bytes (``"head"`` or
    ``"base"``): work forked to a child then falls back on it, so this process need
    not keep the models alive while the child works (:func:`start_compare`).
    """

    path: str  # from the repository root
    base: Model | None
    head: Model | None
    base_data: bytes | None = None
    head_data: bytes | None = None
    head_work: background.Pending | None = None
    reread: Callable[[str], Model | None] | None = None


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


def forks(model: Model | None, other_data: bytes | None, data: bytes | None) -> bool:
    """Whether a side's work is worth a forked child: the model is large and the other
    side exists with different bytes (so this process has other work meanwhile)."""
    return model is not None and other_data is not None and other_data != data and _big(model)


def _side_work(model: Model, data: bytes | None, config: Config, role: str) -> tuple[list[Finding], list]:
    return run_rules(model, config), _inputs(model, data, config, role)


def start_side(model: Model, data: bytes | None, config: Config, role: str, *, fork: bool,
               reread: Callable[[], Model | None] | None = None) -> background.Pending:
    """Start one side's rules and its input record (file hash and counts): in a forked
    child with ``fork`` (only the findings and the record come back; should the child
    fail, they are computed here, on ``reread()`` when given), else in this process
    when the result is asked for."""
    fallback = None if reread is None else (lambda: _side_work(reread(), data, config, role))
    return background.start(lambda: _side_work(model, data, config, role), fork=fork, fallback=fallback)


class Comparison:
    """A file comparison under way (:func:`start_compare`). It holds the results and the
    work still running in children, not the models, so the caller can free those
    meanwhile; :meth:`result` waits for the rest."""

    def __init__(self, path: str, status: str, head: background.Pending | None, base: tuple[list, list],
                 diff: background.Pending | None) -> None:
        self._path, self._status = path, status
        self._head, self._base, self._diff = head, base, diff

    def result(self) -> FileOutcome:
        path, status = self._path, self._status
        diff = None if self._diff is None else self._diff.result()
        head, inputs = ([], []) if self._head is None else self._head.result()
        base, base_inputs = self._base
        inputs = inputs + base_inputs
        if status == "unchanged":
            return FileOutcome(path, status, head, [], [], None, inputs)
        if status == "deleted":
            note = (f"{path}: deleted on head; its {len(base)} finding(s) at base are not "
                    "counted as resolved (removing a model export fixes nothing).")
            return FileOutcome(path, status, [], [], [], None, inputs, note)
        return _outcome(path, status, head, base, diff, inputs)


def start_compare(sides: FileSides, config: Config) -> Comparison:
    """Start comparing both sides of one model file; see :func:`compare_file`.

    For a large modified model, head's rules (unless already started) and the diff run
    in forked children while this process checks base; the returned
    :class:`Comparison` then needs the models no more when ``sides.reread`` is given.
    Otherwise the work runs here when the result is asked for.
    """
    status = _status(sides)
    fork = status == "modified" and _big(sides.base)
    reread = sides.reread if fork else None
    head_work = sides.head_work
    if head_work is None and sides.head is not None:
        head_work = start_side(sides.head, sides.head_data, config, "model", fork=fork,
                               reread=None if reread is None else (lambda: reread("head")))
    diff_work = None
    if status not in ("unchanged", "deleted"):
        path, base_data, head_data = sides.path, sides.base_data, sides.head_data  # not the models
        fallback = None if reread is None else (lambda: _diff(
            FileSides(path, reread("base"), reread("head"), base_data, head_data), config))
        diff_work = background.start(lambda: _diff(sides, config), fork=fork, fallback=fallback)
    base = ([], []) if sides.base is None or status == "unchanged" else _side_work(
        sides.base, sides.base_data, config, "base")  # here, while the children work
    return Comparison(sides.path, status, head_work, base, diff_work)


def compare_file(sides: FileSides, config: Config) -> FileOutcome:
    """Check both sides of one model file and compare their findings by fingerprint.

    For a large modified model, head's rules and the diff run in forked children while
    this process checks base (:mod:`tracecheck.background`); the result is the same.
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
