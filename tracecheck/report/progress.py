"""Progress on stderr for long work: shown only when interactive, not quiet and not in CI."""

from __future__ import annotations

import os
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager

__all__ = ["progress_enabled", "progress"]

Callback = Callable[[float, str], None]


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
