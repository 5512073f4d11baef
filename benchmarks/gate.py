"""Gate benchmark: ``tracecheck gate`` on a 100k-element model in a 20-commit repository.

Builds a git repository whose ``model/thread.json`` is the synthetic ferry
shore-charging thread of ``scale.py``; 19 commits on ``main`` each change a few
elements and links, then a ``feature`` branch commits a change that adds one dangling
link and fixes one coverage gap. Measured in fresh subprocesses (best of ``--repeat``):

- baseline: ``tracecheck check`` of the same model (one side, no git);
- gate: ``tracecheck gate --base main --format json model/thread.json`` from the
  feature branch (head = working tree), and with ``--format sarif``; these two are
  timed inside the process, imports not counted;
- gate CLI: ``python -m tracecheck gate ...`` as a user runs it, start-up and imports
  included (the target applies to this one).

Wall and CPU seconds are both shown; CPU includes every process the gate forks
(children and grandchildren: the measuring process makes itself their subreaper and
reaps them all). On a shared machine the wall time mostly measures the other load,
so the load average is printed with it. Then one in-process run split into phases
(reading the blobs, parsing, rules per side, diff, freeing the models, waivers and
rendering), each done in turn to show what it costs; in a real gate run parsing base,
its rules and the diff run in forked children beside head's rules (README/DEVELOPERS).
Target: gate under 3 s wall on 2 cores.

    python benchmarks/gate.py [--elements 100000] [--repeat 2]
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from scale import generate  # noqa: E402

ENV = {
    **os.environ,
    "GIT_AUTHOR_NAME": "bench", "GIT_AUTHOR_EMAIL": "bench@tracecheck.invalid",
    "GIT_COMMITTER_NAME": "bench", "GIT_COMMITTER_EMAIL": "bench@tracecheck.invalid",
    "GIT_AUTHOR_DATE": "2026-01-01T00:00:00+00:00", "GIT_COMMITTER_DATE": "2026-01-01T00:00:00+00:00",
}

TIMED = """
import io, resource, sys, time
sys.path.insert(0, {here!r})
from gate import adopt_descendants, reap_descendants
adopt_descendants()
from tracecheck.commands import {module}
from tracecheck.commands.common import Streams
t = time.perf_counter()
code = {module}.run({args}, fmt={fmt!r}, output=sys.argv[1], streams=Streams(io.StringIO(), io.StringIO()))
wall = time.perf_counter() - t
reap_descendants()
child = resource.getrusage(resource.RUSAGE_CHILDREN)  # every process the gate forked
print(wall, time.process_time() + child.ru_utime + child.ru_stime, code)
"""


def adopt_descendants() -> None:
    """Become the subreaper of this process's descendants (Linux), so a grandchild
    whose parent left first is reaped here and its CPU time counted."""
    try:
        import ctypes

        ctypes.CDLL(None, use_errno=True).prctl(36, 1, 0, 0, 0)  # PR_SET_CHILD_SUBREAPER
    except (OSError, AttributeError):
        pass  # elsewhere the CPU of an orphaned grandchild goes uncounted


def reap_descendants() -> None:
    while True:
        try:
            os.waitpid(-1, 0)
        except ChildProcessError:
            return


def git(root: Path, *args: str) -> None:
    subprocess.run(["git", *args], cwd=root, env=ENV, check=True, capture_output=True)


def build(root: Path, n: int) -> None:
    model = root / "model" / "thread.json"
    model.parent.mkdir(parents=True)
    generate(n, model)
    git(root, "init", "-q", "-b", "main")
    git(root, "add", "-A")
    git(root, "commit", "-qm", "commit 1")
    doc = json.loads(model.read_text("utf-8"))
    text = model.read_text("utf-8")
    for c in range(2, 20):  # small edits, as stage work between reviews looks
        for k in range(5):
            element = doc["elements"][(c * 97 + k * 13) % n]
            old = json.dumps(element["name"])
            element["name"] += f" (rev {c})"
            text = text.replace(f'"name": {old},', f'"name": {json.dumps(element["name"])},', 1)
        model.write_text(text, encoding="utf-8")
        git(root, "commit", "-qam", f"commit {c}")
    git(root, "checkout", "-q", "-b", "feature")
    requirement = next(e["id"] for e in doc["elements"] if e["kind"] == "requirement")
    doc["links"].append({"source": requirement, "target": "REQ-DELETED", "relation": "traces_to"})
    model.write_text(json.dumps(doc, indent=1), encoding="utf-8")
    git(root, "commit", "-qam", "commit 20: feature")


def timed(root: Path, module: str, args: str, fmt: str, out: Path) -> tuple[float, float]:
    """Wall and CPU seconds of one run in a fresh interpreter (imports not counted)."""
    script = TIMED.format(module=module, args=args, fmt=fmt, here=str(Path(__file__).resolve().parent))
    proc = subprocess.run([sys.executable, "-c", script, str(out)], cwd=root, check=True,
                          capture_output=True, text=True, env=ENV)
    wall, cpu, _ = proc.stdout.split()
    return float(wall), float(cpu)


def cli(root: Path, out: Path) -> tuple[float, float]:
    """Wall and CPU seconds of ``python -m tracecheck gate`` as a user runs it."""
    reap_descendants()
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    subprocess.run([sys.executable, "-m", "tracecheck", "gate", "--format", "json", "--base", "main",
                    "-o", str(out), "model/thread.json"], cwd=root, capture_output=True, env=ENV)
    wall = time.perf_counter() - t
    reap_descendants()
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return wall, after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime


def phases(root: Path) -> list[tuple[str, float]]:
    """One gate run, split by hand into the steps commands/gate.py takes."""
    os.chdir(root)
    rows = []
    t, cpu = time.perf_counter(), time.process_time()
    from tracecheck import gitsource
    from tracecheck.commands import gate  # noqa: F401  (what the CLI imports for the gate)
    from tracecheck.commands.common import resolve_config
    from tracecheck.diff import diff_models
    from tracecheck.formats import read_model
    from tracecheck.gate import GateResult
    from tracecheck.report import RenderOptions
    from tracecheck.report.ci import sarif  # the gate imports only its own renderers
    from tracecheck.rules.engine import run_rules

    def lap(name: str) -> None:
        nonlocal t, cpu
        now, now_cpu = time.perf_counter(), time.process_time()
        rows.append((name, now - t, now_cpu - cpu))
        t, cpu = now, now_cpu

    rows.append(("imports (the gate's modules)", time.perf_counter() - t, time.process_time() - cpu))
    t, cpu = time.perf_counter(), time.process_time()
    base = gitsource.merge_base("main", "HEAD", root)
    config = resolve_config(None, root / "model")
    lap("git: merge-base, config")
    head_data = (root / "model" / "thread.json").read_bytes()
    base_data = gitsource.start_blob(base, str(root / "model" / "thread.json"), root)()
    lap("read head file + base blob (git cat-file)")
    head = read_model(head_data, "model/thread.json")
    lap("parse head")
    old = read_model(base_data, "base:model/thread.json")
    lap("parse base")
    head_findings = run_rules(head, config)
    lap("rules head")
    base_findings = run_rules(old, config)
    lap("rules base")
    diff = diff_models(old, head, config, with_checks=False, with_picture=False).summary()
    lap("diff (no checks, no picture)")
    del head, old
    lap("free both models")
    before = {f.fingerprint for f in base_findings}
    new = [f for f in head_findings if f.fingerprint not in before]
    result = GateResult(findings=new, inputs=[], base={"commit": base, "how": "bench"}, head={})
    sarif(result, RenderOptions())
    lap(f"compare + render sarif ({len(new)} new; diff changed={diff['changed']})")
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--elements", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp) / "repo"
        root.mkdir()
        t = time.perf_counter()
        build(root, args.elements)
        print(f"built a {args.elements:,}-element model in 20 commits in {time.perf_counter() - t:.1f} s "
              f"({(root / 'model' / 'thread.json').stat().st_size / 1e6:.1f} MB)\n")
        out = Path(tmp) / "out"
        runs = {
            "check (baseline)": ("check", "'model/thread.json'", "json"),
            "gate --format json": ("gate", "['model/thread.json'], base='main'", "json"),
            "gate --format sarif": ("gate", "['model/thread.json'], base='main'", "sarif"),
        }
        adopt_descendants()
        times = {name: min(timed(root, *spec, out) for _ in range(args.repeat)) for name, spec in runs.items()}
        walls, cpus = zip(*(cli(root, out) for _ in range(args.repeat)), strict=True)
        times["gate CLI, start-up included"] = (min(walls), min(cpus))
        base = times["check (baseline)"]
        print("load average (1, 5, 15 min) at the end: " + ", ".join(f"{x:.1f}" for x in os.getloadavg())
              + f" on {os.cpu_count()} cores\n")
        print("| run | wall s | CPU s | wall ratio to check | CPU ratio to check |")
        print("|---|---:|---:|---:|---:|")
        for name, (wall, cpu) in times.items():
            print(f"| {name} | {wall:.2f} | {cpu:.2f} | {wall / base[0]:.2f}x | {cpu / base[1]:.2f}x |")
        print("\nWhere the time goes (one in-process gate run):\n")
        print("| phase | wall s | CPU s |")
        print("|---|---:|---:|")
        rows = phases(root)
        for name, seconds, cpu in rows:
            print(f"| {name} | {seconds:.2f} | {cpu:.2f} |")
        print(f"| total | {sum(r[1] for r in rows):.2f} | {sum(r[2] for r in rows):.2f} |")


if __name__ == "__main__":
    main()
