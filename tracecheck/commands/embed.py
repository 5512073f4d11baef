"""``tracecheck embed fit / verify / suggest``: plain functions that return an exit code.

Exit codes: 0 exact (suggest: done), 1 not exact, 2 bad input or options. Training and
verification show a progress bar on stderr only when it is a terminal, ``--quiet`` is
not given and ``CI`` is not set (:mod:`tracecheck.report.progress`).
"""

from __future__ import annotations

from collections.abc import Iterator, Sequence
from pathlib import Path

from tracecheck.commands.common import Streams, atomic_write, emit, load
from tracecheck.config import Metamodel
from tracecheck.embedding import factors
from tracecheck.embedding.fit import FitSettings, fit_model
from tracecheck.embedding.suggest import AllowedPair, SuggestSettings, suggest
from tracecheck.embedding.verify import verify
from tracecheck.errors import InputError, UsageError
from tracecheck.model import Model
from tracecheck.report import RenderOptions, render
from tracecheck.report.progress import progress, progress_enabled

__all__ = ["run_fit", "run_verify", "run_suggest", "allowed_pairs"]



def _relations(model: Model, relations: Sequence[str]) -> tuple[str, ...] | None:
    if not relations:
        return None
    present = {link.relation for link in model.links}
    absent = sorted(set(relations) - present)
    if absent:
        raise UsageError(
            f"{model.origin}: no link has relation {', '.join(repr(r) for r in absent)}; "
            f"relations present: {', '.join(sorted(present)) or 'none'}."
        )
    return tuple(sorted(set(relations)))


def allowed_pairs(metamodel: Metamodel, relations: Sequence[str] | None = None) -> Iterator[AllowedPair]:
    """The metamodel's relations as ``(relation, source kinds, target kinds)`` triples.

    A relation that allows any kind at both ends (``traces_to`` by default) is left
    out unless asked for, since it would make every pair a candidate; a same-kind
    relation becomes one triple per kind.
    """
    for name, rule in sorted(metamodel.relations.items()):
        if relations:
            if name not in relations:
                continue
        elif rule.sources is None and rule.targets is None:
            continue
        if rule.same_kind:
            kinds = (rule.sources or metamodel.kinds) & (rule.targets or metamodel.kinds)
            for kind in sorted(kinds):
                yield (name, frozenset([kind]), frozenset([kind]))
        else:
            yield (name, rule.sources, rule.targets)


def run_fit(
    spec: str,
    embedding_path: str,
    *,
    dimension: int | None = None,
    relations: Sequence[str] = (),
    seed: int = 0,
    max_seconds: float | None = None,
    fmt: str = "text",
    config_option: str | None = None,
    input_format: str | None = None,
    options: RenderOptions | None = None,
    streams: Streams | None = None,
) -> int:
    """``embed fit``: fit MODEL, write the ``.npz`` atomically, print the report.

    Returns 0 when the written embedding reproduces MODEL exactly, else 1.
    """
    streams = streams or Streams.default()
    options = options or RenderOptions()
    if dimension is not None and dimension < 1:
        raise UsageError(f"--dim must be at least 1, not {dimension}.")
    if max_seconds is not None and max_seconds <= 0:
        raise UsageError(f"--max-seconds must be positive, not {max_seconds:g}.")
    folder = Path(embedding_path).parent
    if not folder.is_dir():  # before training, not after minutes of it
        raise InputError(f"{embedding_path}: the output folder {folder} does not exist; nothing was written.")
    loaded = load(spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
    settings = FitSettings(seed=seed, max_seconds=max_seconds)
    chosen = _relations(loaded.model, relations)
    with progress("embed fit", enabled=progress_enabled(options.quiet)) as update:
        result = fit_model(loaded.model, relations=chosen, dimension=dimension,
                           settings=settings, progress=update, output=embedding_path)
    try:
        atomic_write(Path(embedding_path), factors.dumps(result.outcome.embedding))
    except (PermissionError, IsADirectoryError) as error:
        raise InputError(f"{embedding_path}: cannot be written ({error.strerror}); nothing was written.") from None
    emit(render("embed fit", fmt, result, options), None, streams)
    return result.exit_code


def run_verify(
    spec: str,
    embedding_path: str,
    *,
    fmt: str = "text",
    output: str | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    options: RenderOptions | None = None,
    streams: Streams | None = None,
) -> int:
    """``embed verify``: 0 when the stored embedding reproduces MODEL exactly, else 1."""
    streams = streams or Streams.default()
    options = options or RenderOptions()
    embedding = factors.load(embedding_path)
    loaded = load(spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
    with progress("embed verify", enabled=progress_enabled(options.quiet)) as update:
        result = verify(loaded.model, embedding, progress=update, origin=embedding_path)
    emit(render("embed verify", fmt, result, options), output, streams)
    return result.exit_code


def run_suggest(
    spec: str,
    *,
    relations: Sequence[str] = (),
    dimension: int = 8,
    holdout: float = 0.1,
    top: int = 20,
    seed: int = 0,
    fmt: str = "text",
    output: str | None = None,
    config_option: str | None = None,
    input_format: str | None = None,
    options: RenderOptions | None = None,
    streams: Streams | None = None,
) -> int:
    """``embed suggest``: held-out evaluation and ranked links for review; exit 0."""
    streams = streams or Streams.default()
    options = options or RenderOptions()
    if not 0.0 <= holdout < 1.0:
        raise UsageError(f"--holdout must be at least 0 and below 1, not {holdout:g}.")
    if dimension < 1 or top < 1:
        raise UsageError("--dim and --top must be at least 1.")
    loaded = load(spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
    chosen = _relations(loaded.model, relations)
    settings = SuggestSettings(dimension=dimension, holdout=holdout, seed=seed, top=top)
    # A metamodel whose relations allow any kinds (or a thread of traces_to links only)
    # restricts nothing: every ordered pair is then a candidate.
    allowed = list(allowed_pairs(loaded.config.metamodel, chosen)) or None
    with progress("embed suggest", enabled=progress_enabled(options.quiet)) as update:
        result = suggest(loaded.model, allowed=allowed, relations=chosen, settings=settings, progress=update)
    emit(render("embed suggest", fmt, result, options), output, streams)
    return result.exit_code
