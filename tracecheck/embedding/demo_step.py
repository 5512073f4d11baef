"""The embedding step of ``tracecheck demo``: fit at detailed-design, verify at qualification.

Shows what the check is for: an embedding fitted to the thread at one stage is checked
against a later stage, and the drift is named link by link; then the suggestions a
reviewer would look at. Heavy imports wait until the step runs, so importing the demo
stays light.
"""

from __future__ import annotations

from typing import TextIO

__all__ = ["embed_demo_step"]

FITTED_AT = "detailed-design"
CHECKED_AT = "qualification"
_SHOWN = 5


def _model_at(demo, rev: str):
    from tracecheck.demo import MODEL_PATH
    from tracecheck.formats import read_model
    from tracecheck.sources import read_source

    source = read_source(f"{rev}:{MODEL_PATH}", cwd=demo.root)
    return read_model(source.data, source.origin)


def _write(demo, name: str, data: str | bytes) -> str:
    from tracecheck.commands.common import atomic_write

    atomic_write(demo.reports / name, data)
    return name


def embed_demo_step(demo, out: TextIO, options) -> list[str]:
    """Fit, verify and suggest on the demo repository; return the report files written."""
    from tracecheck.commands.embed import allowed_pairs
    from tracecheck.config import Config
    from tracecheck.demo import MODEL_PATH
    from tracecheck.embedding.factors import dumps
    from tracecheck.embedding.fit import fit_model
    from tracecheck.embedding.suggest import SuggestSettings, suggest
    from tracecheck.embedding.verify import verify
    from tracecheck.report import RenderOptions, render
    from tracecheck.report.embed import fit_verdict, verify_verdict

    npz = f"embedding-{FITTED_AT}.npz"
    fitted = fit_model(_model_at(demo, FITTED_AT), output=f"reports/{npz}")
    written = [_write(demo, npz, dumps(fitted.outcome.embedding))]
    out.write(f"\n$ tracecheck embed fit {FITTED_AT}:{MODEL_PATH} -o reports/{npz}\n")
    out.write(f"  {fit_verdict(fitted)}\n")

    later = _model_at(demo, CHECKED_AT)
    check = verify(later, fitted.outcome.embedding, origin=f"reports/{npz}")
    out.write(f"\n$ tracecheck embed verify {CHECKED_AT}:{MODEL_PATH} --embedding reports/{npz}\n")
    out.write(f"  {verify_verdict(check)}\n")
    for title, links in (("missing", check.missing), ("spurious", check.spurious)):
        for link in links[:_SHOWN]:
            out.write(f"    {title}: {link.source} {link.relation or '(any relation)'} {link.target}\n")
    for fmt, name in (("json", "embed-verify.json"), ("markdown", "embed-verify.md")):
        written.append(_write(demo, name, render("embed verify", fmt, check, RenderOptions())))

    allowed = list(allowed_pairs(Config().metamodel))
    ideas = suggest(later, allowed=allowed, settings=SuggestSettings(top=10))
    out.write(f"\n$ tracecheck embed suggest {CHECKED_AT}:{MODEL_PATH}   (suggestions for a human reviewer)\n")
    if ideas.roc_auc is not None:
        out.write(f"  held-out ROC-AUC {ideas.roc_auc:.3f}, average precision {ideas.average_precision:.3f}\n")
    for item in ideas.likely_missing[:_SHOWN]:
        out.write(f"    likely missing? {item.source} {'/'.join(item.relations)} {item.target}  ({item.score:.2f})\n")
    written.append(_write(demo, "embed-suggest.md", render("embed suggest", "markdown", ideas, RenderOptions())))
    return written
