"""Demo step: the pre-merge gate on the ``proposed-change`` branch against ``qualification``.

The branch adds REQ-SYS-040 without a test (new findings under two coverage
declarations) and mitigates HAZ-006 (one resolved finding). A reviewer accepts the
second-test gap of the high-integrity declaration in a waiver until the sea trials, so
the gate shows exactly one new finding, one resolved and one waived. Expiry is judged
as of the branch's commit date, so the demo prints the same whatever day it runs.
"""

from __future__ import annotations

import io
import os
from contextlib import contextmanager
from pathlib import Path

__all__ = ["gate_step", "DEMO_WAIVERS"]

DEMO_WAIVERS = """\
# Findings the ferry shore-charging team accepted for a while (tracecheck demo).
[[waiver]]
rule = "coverage"
element = "REQ-SYS-040"
declaration = "high-integrity-verified-twice"
reason = "The second independent test of the reduced charge rate runs at the sea trials."
approved_by = "Charging system safety engineer"
expires = 2027-03-31
"""
AS_OF = "2026-11-09"  # the proposed change's commit date (tracecheck.demo._DATES)


@contextmanager
def _inside(folder: Path):
    before = Path.cwd()
    os.chdir(folder)
    try:
        yield
    finally:
        os.chdir(before)


def gate_step(demo, out, options) -> list[str]:
    """Run the gate, print its text view, write reports/gate.sarif and gate.junit.xml."""
    from tracecheck.commands import gate
    from tracecheck.commands.common import Streams
    from tracecheck.demo import BRANCH, MODEL_PATH

    waivers = demo.root / "waivers.toml"
    waivers.write_text(DEMO_WAIVERS, encoding="utf-8")
    out.write(f"\n$ tracecheck gate --base qualification --head {BRANCH} --waivers waivers.toml {MODEL_PATH}\n")
    written = []
    with _inside(demo.root):
        common = dict(base="qualification", head=BRANCH, waivers_option="waivers.toml", today_option=AS_OF)
        quiet = Streams(io.StringIO(), io.StringIO())
        gate.run([MODEL_PATH], fmt="text", options=options, streams=Streams(out, quiet.stderr), **common)
        for fmt, name in (("sarif", "gate.sarif"), ("junit", "gate.junit.xml"), ("markdown", "gate.md")):
            gate.run([MODEL_PATH], fmt=fmt, output=str(Path("reports") / name), streams=quiet, **common)
            written.append(name)
    return written
