"""``tracecheck history PATH``: metrics of one model file across git revisions."""

from __future__ import annotations

import hashlib
import time
from contextlib import ExitStack
from pathlib import Path

from tracecheck import gitsource
from tracecheck.commands.common import Streams, emit, resolve_config
from tracecheck.config import Config
from tracecheck.errors import GitError, UsageError
from tracecheck.formats import get_format
from tracecheck.history import HistoryResult, plan, walk
from tracecheck.history_cache import Cache, cache_folder
from tracecheck.report import RenderOptions, render
from tracecheck.report.progress import progress, progress_enabled
from tracecheck.sources import split_rev_spec

__all__ = ["run", "history"]

# The bar is worth showing only on walks that take a while.
_PROGRESS_AFTER_SECONDS = 1.0


def _anchor(cwd: Path, path: str) -> Path:
    # The repository and configuration are found from the file's folder (which may be
    # gone from the work tree): its nearest existing ancestor.
    folder = (cwd / path).parent
    while not folder.is_dir() and folder != folder.parent:
        folder = folder.parent
    return folder


def _salt(config: Config, input_format: str | None) -> str:
    config_hash = config.sha256 or "default-configuration"
    return hashlib.sha256(f"{config_hash}\x1f{input_format or ''}".encode()).hexdigest()


class _LateProgress:
    """A progress callback that opens the bar only once the walk has run a second."""

    def __init__(self, enabled: bool, stack: ExitStack) -> None:
        self.enabled = enabled
        self.stack = stack
        self.started = time.monotonic()
        self.bar = None

    def __call__(self, fraction: float, label: str) -> None:
        if not self.enabled:
            return
        if self.bar is None:
            if time.monotonic() - self.started < _PROGRESS_AFTER_SECONDS or fraction >= 1.0:
                return
            self.bar = self.stack.enter_context(progress("history", enabled=True))
        self.bar(fraction, label)


def history(
    path: str,
    *,
    cwd: Path | None = None,
    revs: str | None = None,
    stages: list[str] | None = None,
    follow: bool = False,
    config: Config | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    cache: Cache | None = None,
    show_progress: bool = False,
) -> HistoryResult:
    """The history of ``path`` (relative to ``cwd``) in the repository around it."""
    cwd = cwd or Path.cwd()
    if path == "-" or split_rev_spec(path) is not None:
        raise UsageError(f"{path}: history takes the path of a model file in a git repository, not a model "
                         "spec; choose the revisions with --revs A..B or --stages.")
    if input_format:
        get_format(input_format)  # an unknown format is a usage error, not a malformed row
    anchor = _anchor(cwd, path)
    repo = gitsource.open_repo(anchor)
    tree_path = gitsource.repo_path(repo, path, cwd)
    if config is None:
        config = resolve_config(config_option, anchor)
    if cache is None:
        cache = Cache(cache_folder(), _salt(config, input_format))
    planned = plan(repo, tree_path, revs=revs, stages=stages, follow=follow)
    with ExitStack() as stack:
        rows = walk(repo, planned, config, cache, input_format=input_format,
                    progress=_LateProgress(show_progress, stack))
    if all(row.status == "missing" for row in rows):
        raise GitError(f"{tree_path}: does not exist at any of the {len(rows)} revisions chosen; check the path.")
    return HistoryResult(tree_path, tuple(rows), tuple(d.name for d in config.declarations))


def run(
    path: str,
    *,
    revs: str | None = None,
    stages: str | None = None,
    follow: bool = False,
    fmt: str = "text",
    output: str | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    use_cache: bool = True,
    options: RenderOptions | None = None,
    streams: Streams | None = None,
) -> int:
    streams = streams or Streams.default()
    options = options or RenderOptions()
    names = [s.strip() for s in stages.split(",") if s.strip()] if stages else None
    result = history(
        path,
        revs=revs,
        stages=names,
        follow=follow,
        config_option=config_option,
        input_format=input_format,
        cache=None if use_cache else Cache(None, ""),
        show_progress=progress_enabled(options.quiet),
    )
    emit(render("history", fmt, result, options), output, streams)
    return 0
