"""Progress on stderr for long work: shown only when interactive, not quiet and not in CI."""

from __future__ import annotations

import os
import sys
import time
from collections.abc import Callable, Iterator
from contextlib import ExitStack, contextmanager

__all__ = ["progress_enabled", "progress", "late_progress", "AFTER_SECONDS"]

Callback = Callable[[float, str], None]
AFTER_SECONDS = 1.0  # work shorter than this shows no bar


def progress_enabled(quiet: bool) -> bool:
    return not quiet and not os.environ.get("CI") and sys.stderr.isatty()


@contextmanager
def progress(description: str, *, enabled: bool) -> Iterator[Callback]:
    """Yield ``update(fraction, label)``; a no-op when disabled.

    The bar appears only after about a second (rich's transient live display), so
    short runs print nothing.
    """
    if not enabled:
        yield lambda fraction, label: None
        return
    from rich.console import Console
    from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(
        TextColumn("{task.description}"),
        BarColumn(),
        TextColumn("{task.percentage:>3.0f}%"),
        TimeElapsedColumn(),
        TextColumn("{task.fields[label]}"),
        console=Console(stderr=True),
        transient=True,
        redirect_stdout=False,
        redirect_stderr=False,
    ) as bar:
        task = bar.add_task(description, total=1.0, label="")

        def update(fraction: float, label: str) -> None:
            bar.update(task, completed=min(max(fraction, 0.0), 1.0), label=label)

        yield update


@contextmanager
def late_progress(description: str, *, enabled: bool) -> Iterator[Callback]:
    """Yield ``update(fraction, label)`` for work reported in coarse steps.

    The bar opens only at the first step that starts after about a second of work
    (:data:`AFTER_SECONDS`), so a run that finishes sooner prints nothing, and closes
    when the block ends (before the caller prints its report). A no-op when disabled.
    """
    if not enabled:
        yield lambda fraction, label: None
        return
    started = time.monotonic()
    with ExitStack() as stack:
        bar: Callback | None = None

        def update(fraction: float, label: str) -> None:
            nonlocal bar
            if bar is None:
                if time.monotonic() - started < AFTER_SECONDS or fraction >= 1.0:
                    return
                bar = stack.enter_context(progress(description, enabled=True))
            bar(fraction, label)

        yield update
