"""``tracecheck gate [--base REV] [--head REV] [--exact-base] PATH...``.

Reads each model file at base and on head (a revision, or the working tree), compares
their findings (:mod:`tracecheck.gate`), applies the waivers, and renders the result.
The base is the merge-base of ``--base`` (default: the repository's default branch)
and head, as a pull request shows the change; ``--exact-base`` takes REV itself.
With ``--embedding EMB`` the stored embedding is also verified against each head model;
a non-exact one fails the gate (exit 1).
"""

from __future__ import annotations

import dataclasses
import os
from pathlib import Path

from tracecheck import background, gitsource
from tracecheck.collection import collection_paused
from tracecheck.commands.common import Streams, emit, resolve_config
from tracecheck.commands.outcome import apply_review, step_summary
from tracecheck.config import Config
from tracecheck.errors import GitError, InputError, UsageError
from tracecheck.formats import read_model
from tracecheck.gate import (
    Comparison,
    FileSides,
    GateResult,
    forks,
    sorted_findings,
    start_compare,
    start_forked,
)
from tracecheck.model import Model
from tracecheck.report import RenderOptions, render
from tracecheck.report.progress import late_progress, progress_enabled
from tracecheck.rules import rules

__all__ = ["run", "choose_base"]


def choose_base(base: str | None, head: str | None, exact: bool, cwd: Path) -> tuple[str, dict]:
    """The base commit and a record of how it was chosen."""
    target = base or gitsource.default_branch(cwd)
    if target is None:
        raise UsageError(
            "gate: no --base given and no default branch found (tried origin/HEAD, main, "
            "master); name what the change goes into with --base REV."
        )
    chosen = "--base" if base else "default branch"
    target_commit = gitsource.resolve(target, cwd)
    if exact:
        how = f"{target} ({chosen}) itself, --exact-base"
        return target_commit, {"rev": target, "commit": target_commit, "how": how}
    head_ref = head or "HEAD"
    commit = gitsource.merge_base(target, head_ref, cwd)
    how = f"merge-base of {target} ({chosen}) and {head_ref}"
    return commit, {"rev": target, "commit": commit, "how": how}


def _worktree_bytes(root: Path, path: str) -> bytes | None:
    file = root / path
    if not file.exists():
        return None
    if file.is_dir():
        raise InputError(f"{path}: is a folder; give the model export file.")
    try:
        return file.read_bytes()
    except OSError as error:
        raise InputError(f"{path}: cannot be read ({error.strerror or error}).") from None


def _blob(rev: str, root: Path, path: str) -> bytes | None:
    if gitsource.blob_id(rev, str(root / path), root) is None:
        return None
    return gitsource.read_blob(rev, str(root / path), root)


def _read(data: bytes | None, origin: str, config: Config, input_format: str | None):
    if data is None:
        return None
    return read_model(data, origin, input_format=input_format, options=config.section("formats"))


def _start(path: str, root: Path, base: str, head: str | None, config: Config,
           input_format: str | None) -> tuple[Comparison, Model | None]:
    """Read both sides of ``path`` and start comparing them; also head's model.

    A large modified file goes to :func:`gate.start_forked`: base is read, checked
    and diffed in forked children while this process checks head, so base is never
    built here. Otherwise both sides are read here (:func:`gate.start_compare`).
    """
    head_data = _worktree_bytes(root, path) if head is None else _blob(head, root, path)
    base_bytes = gitsource.start_blob(base, str(root / path), root)  # inflated while head is parsed
    if head_data is None and base_bytes is None:
        where = "in the working tree" if head is None else f"at {head}"
        raise InputError(f"{path}: exists neither {where} nor at the base {base[:12]}.")
    origins = {"head": path if head is None else f"{head}:{path}", "base": f"{base[:12]}:{path}"}

    def read(side: str):  # a side from its bytes (again, should a forked child fail)
        return _read(head_data if side == "head" else base_data, origins[side], config, input_format)

    try:
        head_model = read("head")
    except BaseException:  # a bad head: let git finish, then report head's error
        try:
            base_bytes() if base_bytes is not None else None
        except GitError:
            pass
        raise
    base_data = None if base_bytes is None else base_bytes()
    if forks(head_model, base_data, head_data) and background.forkable():
        return start_forked(path, head_model, head_data, base_data, read, config), head_model
    base_model = head_model if base_data == head_data else read("base")
    return start_compare(FileSides(path, base_model, head_model, base_data, head_data), config), head_model


def _paths(paths: list[str], cwd: Path) -> list[str]:
    if not paths:
        raise UsageError("gate: name at least one model file (PATH...).")
    seen: dict[str, None] = {}
    for path in paths:
        seen.setdefault(gitsource.repo_relative(path, cwd), None)
    return list(seen)


def _embedding_checks(path: str | None, file: str, head: Model | None) -> tuple[tuple, tuple[str, ...]]:
    """Verify the embedding at ``path`` against head's model of ``file``, or a note
    when ``file`` is absent on head."""
    if path is None:
        return (), ()
    if head is None:
        return (), (f"{file}: absent on head, so the embedding was not verified against it.",)
    from tracecheck.embedding import verify_file  # numpy work only when asked for

    return ((file, verify_file(head, path)),), ()


def run(
    paths: list[str],
    *,
    base: str | None = None,
    head: str | None = None,
    exact_base: bool = False,
    fmt: str = "text",
    output: str | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    fail_on: str = "error",
    waivers_option: str | None = None,
    today_option: str | None = None,
    options: RenderOptions | None = None,
    streams: Streams | None = None,
    embedding: str | None = None,
) -> int:
    streams = streams or Streams.default()
    options = options or RenderOptions()
    # Each file's two models are freed by reference counting once compared; the cyclic
    # collector stays paused until then, so it never walks them (tracecheck.collection).
    with collection_paused():
        return _run(paths, base, head, exact_base, fmt, output, config_option, input_format, fail_on,
                    waivers_option, today_option, options, streams, embedding)


def _run(paths, base, head, exact_base, fmt, output, config_option, input_format, fail_on,
         waivers_option, today_option, options, streams, embedding) -> int:
    cwd = Path.cwd()
    root = gitsource.repo_root(cwd)
    relative = _paths(paths, cwd)
    head_commit = gitsource.resolve(head, cwd) if head else gitsource.head_commit(cwd)
    base_commit, base_info = choose_base(base, head, exact_base, cwd)
    streams.stderr.write(f"tracecheck gate: base is the {base_info['how']}: {base_commit[:12]}\n")
    config = resolve_config(config_option, (root / relative[0]).parent)
    outcomes = []
    checks: tuple = ()
    absent: tuple[str, ...] = ()
    with late_progress("gate", enabled=progress_enabled(options.quiet)) as step:
        for n, path in enumerate(relative):
            step(n / len(relative), f"reading {path}")
            comparison, head_model = _start(path, root, base_commit, head, config, input_format)
            step((n + 0.5) / len(relative), f"comparing {path}")
            more_checks, more_absent = _embedding_checks(embedding, path, head_model)
            checks, absent = checks + more_checks, absent + more_absent
            # Each file's models are freed before the next is read; on a large file,
            # while forked children still diff and check (they hold their own copies).
            del head_model
            outcomes.append(comparison.result())
    old = {id(f) for o in outcomes for f in o.head_findings} - {id(f) for o in outcomes for f in o.new}
    review = apply_review(
        [f for o in outcomes for f in o.head_findings], config, cwd,
        waivers_option=waivers_option, today_option=today_option, old=old,
    )
    standing = {id(f) for f in review.findings}
    outcomes = [dataclasses.replace(o, new=[f for f in o.new if id(f) in standing]) for o in outcomes]
    uris = {i["path"]: o.path for o in outcomes for i in o.inputs}
    result = GateResult(
        findings=review.findings,
        inputs=[i for o in outcomes for i in o.inputs] + review.config_inputs(config),
        fail_on=fail_on,
        waivers=review.waivers,
        rule_ids=tuple(r for r in rules() if r not in config.disabled),
        uris=uris | review.uris(root),
        notes=tuple(o.note for o in outcomes if o.note) + absent,
        resolved=tuple(sorted_findings(f for o in outcomes for f in o.resolved)),
        base=base_info,
        head={"rev": head, "commit": head_commit, "worktree": head is None},
        files=tuple(outcomes),
        embedding_file=embedding,
        embedding=checks,
    )
    emit(render("gate", fmt, result, options), output, streams)
    if fmt == "github" and os.environ.get("GITHUB_STEP_SUMMARY"):
        step_summary(render("gate", "markdown", result, options), Path(os.environ["GITHUB_STEP_SUMMARY"]))
    return result.exit_code
