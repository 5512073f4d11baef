"""Demo step of the open formats: the qualification stage also as ReqIF and GraphML.

Writes ``reports/thread.reqif`` and ``reports/thread.graphml`` from the model the demo
just checked, reads each back with ``check`` and shows that the findings are the same
(by fingerprint), with their lines now pointing into the converted file.
"""

from __future__ import annotations

from typing import Any, TextIO

__all__ = ["formats_step"]

_FILES = (("reqif", "thread.reqif"), ("graphml", "thread.graphml"))


def formats_step(demo: Any, out: TextIO, options: Any) -> list[str]:
    """Convert the demo model, check the copies, print one line each; returns file names."""
    from tracecheck.check import check_model
    from tracecheck.commands.common import atomic_write, load
    from tracecheck.formats import get_format

    loaded = load(str(demo.model))
    formats = loaded.config.section("formats")
    baseline = {f.fingerprint for f in check_model(loaded.model, loaded.source.data, loaded.config).findings}
    out.write("\n$ tracecheck convert model/thread.json -o reports/thread.reqif   (and reports/thread.graphml)\n")
    written = []
    for fmt, name in _FILES:
        path = demo.reports / name
        atomic_write(path, get_format(fmt).write(loaded.model, formats))  # type: ignore[attr-defined]
        copy = load(str(path), config=loaded.config)
        findings = check_model(copy.model, copy.source.data, copy.config).findings
        same = "the same" if {f.fingerprint for f in findings} == baseline else "NOT the same"
        first = next((f for f in findings if f.location is not None), None)
        where = f"; first at {name}:{first.location.line}" if first else ""
        out.write(
            f"$ tracecheck check reports/{name}   -> {len(copy.model.elements)} elements, "
            f"{len(copy.model.links)} links, {len(findings)} findings, {same} as model/thread.json{where}\n"
        )
        written.append(name)
    return written
