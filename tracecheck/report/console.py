"""Rich consoles that render to a string, so text output is a value like any other."""

from __future__ import annotations

import io

from rich.console import Console, RenderableType

from tracecheck.report import RenderOptions

__all__ = ["to_text", "stderr_console"]


def to_text(renderables: list[RenderableType], options: RenderOptions) -> str:
    buffer = io.StringIO()
    console = Console(
        file=buffer,
        width=options.width,
        color_system="standard" if options.color else None,
        force_terminal=options.color,
        no_color=not options.color,
        highlight=False,
        emoji=False,
        soft_wrap=False,
    )
    for item in renderables:
        console.print(item)
    # Table cells are padded to the console width; trailing blanks only bloat files.
    return "\n".join(line.rstrip(" ") for line in buffer.getvalue().split("\n"))


def stderr_console(color: bool) -> Console:
    return Console(stderr=True, color_system="standard" if color else None, no_color=not color, highlight=False)
