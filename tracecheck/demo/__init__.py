"""``tracecheck demo``: build the ferry shore-charging model repository and run the job.

The stage exports are built by :mod:`tracecheck.demo.stages` inside the package, so the demo
works after a plain ``pip install .`` from any folder. It writes only into the folder
it is given (which must be new or empty) and prints what it did and where.
"""

from __future__ import annotations

import sys
import tempfile
from dataclasses import dataclass, field
from pathlib import Path
from typing import TextIO

from tracecheck.demo.stages import stage_bytes
from tracecheck.errors import UsageError

__all__ = ["STAGES", "run", "build_repository", "stage_bytes"]

STAGES = ("concept", "preliminary-design", "detailed-design", "qualification")
BRANCH = "proposed-change"
MODEL_PATH = "model/thread.json"
# Commit dates are pinned so two demo repositories have the same commit ids.
_DATES = {
    "concept": "2026-02-02T09:00:00+00:00",
    "preliminary-design": "2026-04-13T09:00:00+00:00",
    "detailed-design": "2026-07-06T09:00:00+00:00",
    "qualification": "2026-10-19T09:00:00+00:00",
    BRANCH: "2026-11-09T09:00:00+00:00",
}

DEMO_CONFIG = """\
# Configuration of the ferry shore-charging model repository (tracecheck demo).
# Every requirement carries an integrity level and a review status.
[required_attributes]
requirement = ["integrity", "status"]

# Requirements of the two highest integrity levels need two independent tests.
[coverage.high-integrity-verified-twice]
description = "Integrity C and D requirements are verified by at least two tests."
elements = "requirement"
where = { integrity = ["C", "D"] }
incoming = "verifies"
from = ["test"]
at_least = 2

# A review status or a test result changing does not reopen the review of what traces
# to the element; a change of its text or other attributes does.
[impact]
ignore_fields = ["attributes.status", "attributes.result"]
"""




@dataclass
class DemoRepository:
    root: Path
    commits: dict[str, str] = field(default_factory=dict)

    @property
    def model(self) -> Path:
        return self.root / MODEL_PATH

    @property
    def reports(self) -> Path:
        return self.root / "reports"


def _target(directory: str | None) -> Path:
    if directory is None:
        return Path(tempfile.mkdtemp(prefix="tracecheck-demo-"))
    path = Path(directory)
    if path.exists() and (not path.is_dir() or any(path.iterdir())):
        raise UsageError(f"{path}: exists and is not an empty folder; the demo needs a new or empty one.")
    path.mkdir(parents=True, exist_ok=True)
    return path


def build_repository(root: Path) -> DemoRepository:
    """One commit per stage, tagged, and a branch with a proposed change."""
    from tracecheck import gitsource

    repo = gitsource.init_repo(root)
    demo = DemoRepository(root)
    demo.model.parent.mkdir(parents=True, exist_ok=True)
    (root / "tracecheck.toml").write_text(DEMO_CONFIG, encoding="utf-8")
    (root / ".gitignore").write_text("reports/\n", encoding="utf-8")
    for stage in STAGES:
        demo.model.write_bytes(stage_bytes(stage))
        demo.commits[stage] = gitsource.commit_all(repo, f"Export of the {stage} stage", _DATES[stage])
        gitsource.tag(repo, stage)
    gitsource.create_branch(repo, BRANCH, "qualification")
    gitsource.checkout(repo, BRANCH)
    demo.model.write_bytes(stage_bytes(BRANCH))
    demo.commits[BRANCH] = gitsource.commit_all(
        repo, "Proposed change: new charge-rate requirement, hazard mitigation", _DATES[BRANCH]
    )
    gitsource.checkout(repo, "main")
    return demo


def _say(out: TextIO, text: str = "") -> None:
    out.write(text + "\n")
    out.flush()


def run(directory: str | None, *, options=None, stdout: TextIO | None = None) -> int:
    """Build the demo repository, run the checks and write the reports; exit 0."""
    from tracecheck.check import check_model
    from tracecheck.commands.common import atomic_write, load
    from tracecheck.report import RenderOptions, render

    out = stdout or sys.stdout
    options = options or RenderOptions()
    root = _target(directory)
    demo = build_repository(root)
    demo.reports.mkdir(exist_ok=True)
    _say(out, f"tracecheck demo: ferry shore-charging model repository in {root}")
    _say(out, f"  stages tagged: {', '.join(STAGES)}; branch {BRANCH!r} holds a proposed change")
    _say(out)

    loaded = load(str(demo.model))
    result = check_model(loaded.model, loaded.source.data, loaded.config)
    _say(out, f"$ tracecheck check {MODEL_PATH}   (stage: qualification)")
    out.write(render("check", "text", result, options))
    written = []
    for fmt, name in (("json", "check.json"), ("markdown", "check.md")):
        data = render("check", fmt, result, RenderOptions())
        atomic_write(demo.reports / name, data)
        written.append(name)
    for step in _EXTRA_STEPS:
        written += step(demo, out, options)
    _say(out)
    _say(out, f"Reports written to {demo.reports}: {', '.join(written)}")
    _say(out, "These reports support, and do not replace, review by qualified people.")
    return 0


# Later capabilities (diff, gate, coverage, history, formats, embedding) add a step here:
# a function (demo, out, options) -> list of report file names it wrote.
_EXTRA_STEPS: list = []

# The order is the story a reviewer follows: what changed since the last stage, how well
# the latest stage is covered, whether the proposed change may merge, how the thread
# evolved, the same stage in the open interchange formats, and the embedding check.
from tracecheck.commands.coverage import demo_step as _coverage_step  # noqa: E402
from tracecheck.demo.formats_step import formats_step  # noqa: E402
from tracecheck.demo.history import history_step  # noqa: E402
from tracecheck.diff.demo_step import diff_step  # noqa: E402
from tracecheck.embedding.demo_step import embed_demo_step  # noqa: E402  (light: imports on call)


def _gate_step(demo, out, options) -> list[str]:
    from tracecheck.demo.gate_step import gate_step

    return gate_step(demo, out, options)


_EXTRA_STEPS += [diff_step, _coverage_step, _gate_step, history_step, formats_step,
                 embed_demo_step]
