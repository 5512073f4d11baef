"""Demo step: the history of the four stage tags, printed and drawn as an HTML page."""

from __future__ import annotations

from typing import TextIO

__all__ = ["history_step"]


def history_step(demo, out: TextIO, options) -> list[str]:
    """Print the stage history of the demo model and write ``reports/history.html``."""
    from tracecheck.commands.common import atomic_write
    from tracecheck.commands.history import history
    from tracecheck.demo import MODEL_PATH, STAGES
    from tracecheck.history_cache import Cache
    from tracecheck.report import RenderOptions, render

    # The demo writes only into its own folder, so it neither reads nor fills the
    # user's cache.
    result = history(MODEL_PATH, cwd=demo.root, stages=list(STAGES), cache=Cache(None, ""))
    out.write(f"\n$ tracecheck history --stages {','.join(STAGES)} {MODEL_PATH}\n")
    out.write(render("history", "text", result, options))
    atomic_write(demo.reports / "history.html", render("history", "html", result, RenderOptions()))
    return ["history.html"]
