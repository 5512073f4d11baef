"""The demo's diff step: detailed-design against qualification, as a design review sees it."""

from __future__ import annotations

from typing import TextIO

from tracecheck.report import RenderOptions

__all__ = ["diff_step"]

OLD, NEW = "detailed-design", "qualification"


def diff_step(demo, out: TextIO, options: RenderOptions) -> list[str]:
    """Print the stage summary of the diff and write reports/diff.html and diff.json.

    The terminal gets the counts, coverage before and after, findings new and resolved,
    the re-identifications and text edits, and the headline; the full change lists are
    in the two reports.
    """
    from tracecheck.commands.common import atomic_write, resolve_config
    from tracecheck.demo import MODEL_PATH
    from tracecheck.diff import diff_models
    from tracecheck.formats import read_model
    from tracecheck.report import render
    from tracecheck.report.diff import summary_text
    from tracecheck.sources import read_source

    config = resolve_config(None, demo.model)  # the demo repository's tracecheck.toml
    models = []
    for stage in (OLD, NEW):
        # Revisions resolve in the demo repository, whatever the working directory.
        source = read_source(f"{stage}:{MODEL_PATH}", cwd=demo.root)
        models.append(read_model(source.data, source.origin, options=config.section("formats")))
    result = diff_models(models[0], models[1], config)
    out.write(f"\n$ tracecheck diff {OLD}..{NEW} {MODEL_PATH}   (summary; every change in reports/diff.html)\n")
    out.write(summary_text(result, options))
    written = []
    for fmt, name in (("html", "diff.html"), ("json", "diff.json")):
        data = render("diff", fmt, result, RenderOptions())
        atomic_write(demo.reports / name, data)
        written.append(name)
    return written
