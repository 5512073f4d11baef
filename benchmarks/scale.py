"""Scale benchmark: ``check``, ``diff``, ``coverage`` and ``gate`` at 10k / 100k / 1M elements.

Generates a synthetic ferry shore-charging thread (about three links per element,
engineering-like text, a handful of planted defects so that findings, locations and
the cycle rule's follow-up work are part of the run), then measures each step in a
fresh subprocess, so peak memory is the process's own:

* the baseline: read the bytes and ``json.loads`` them (and ``orjson.loads`` when
  orjson is importable; it is not a dependency, only a second yardstick);
* ``tracecheck check FILE --format json -o OUT`` through ``commands.check.run`` (read,
  decode, validate, every rule, render, write), timed after importing the command
  module; the same process then times ``json.loads`` of the file once more, which gives
  a ratio that machine load cannot skew between processes.

A second table does the same for the other commands, each beside its own baseline:

* ``diff --format json`` of the thread and a second version (``diff.py``'s ~1 % of
  elements changed, reordered; and the same changes in the original order), both
  parses included, against ``git diff --no-index
  --stat`` of the same two files (wall and CPU: git's CPU is its own process's). git
  treats a file above ``core.bigFileThreshold`` (512 MiB) as binary and only compares
  bytes; the 1M-element files are just above it, so the baseline raises the threshold
  to keep git doing the line diff it does at every other size;
* ``coverage --format json`` against ``json.loads`` of the file in the same process,
  and against ``orjson.loads`` (the check table's, separate process);
* ``gate --base main --format json`` in a 20-commit repository (``gate.py``'s, head
  = working tree on a feature branch), against ``json.loads`` of the file in the same
  process; CPU includes the gate's forked child. Skipped with ``--no-gate`` (building
  the repository rewrites the file 20 times).

Each measurement is the best of ``--repeat`` runs. Prints the machine, then markdown
tables of wall times, peak resident memory and the ratios.

    python benchmarks/scale.py --sizes 10000,100000
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import random
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

PHRASES = [
    "The shore charger shall limit the charging current to the value requested by the battery management system",
    "The charging arm shall stop its motion within 200 ms when the emergency stop is pressed",
    "The mooring detection shall confirm the vessel position within 0.3 m before the arm is released",
    "The insulation monitor shall open the main contactor when the insulation resistance falls below 100 kOhm",
    "The operator panel shall display the state of charge and the charging power once per second",
]

# Peak resident memory of the measuring process alone. VmHWM starts afresh at exec;
# ru_maxrss does not: Linux carries the parent's peak over through fork and exec, so
# every child of this script (which holds the generated thread for a while) reported at
# least the script's own peak.
PEAK = """
def peak_kib():
    for line in open('/proc/self/status'):
        if line.startswith('VmHWM:'):
            return int(line.split()[1])
"""

# User and system CPU seconds of the measuring process (and of its waited-for children,
# the gate's forked ones) since ``SPLIT_START``. System time is mostly page faults:
# on this machine (a virtual machine) a fault costs more the more memory the process
# holds, so it is printed apart from the user time the code itself spends.
SPLIT = """
import resource
def split_since(start):
    now = [resource.getrusage(who) for who in (resource.RUSAGE_SELF, resource.RUSAGE_CHILDREN)]
    return (sum(u.ru_utime for u in now) - start[0], sum(u.ru_stime for u in now) - start[1])
def split_start():
    return split_since((0.0, 0.0))
"""

BASELINE = PEAK + SPLIT + """
import json, resource, sys, time
s = split_start(); t, c = time.perf_counter(), time.process_time(); data = open(sys.argv[1], 'rb').read(); json.loads(data)
print(time.perf_counter() - t, peak_kib(), time.process_time() - c, *split_since(s))
"""

ORJSON = PEAK + SPLIT + """
import orjson, resource, sys, time
s = split_start(); t, c = time.perf_counter(), time.process_time(); data = open(sys.argv[1], 'rb').read(); orjson.loads(data)
print(time.perf_counter() - t, peak_kib(), time.process_time() - c, *split_since(s))
"""

CHECK = PEAK + SPLIT + """
import io, json, resource, sys, time
from tracecheck.commands import check
from tracecheck.commands.common import Streams
s = split_start(); t, c = time.perf_counter(), time.process_time()
code = check.run(sys.argv[1], fmt='json', output=sys.argv[2], streams=Streams(io.StringIO(), sys.stderr))
elapsed, cpu, (user, system) = time.perf_counter() - t, time.process_time() - c, split_since(s)
rss = peak_kib()
t = time.perf_counter(); data = open(sys.argv[1], 'rb').read(); json.loads(data)
print(elapsed, rss, time.perf_counter() - t, cpu, user, system)
"""


COMMAND = PEAK + SPLIT + """
import io, json, resource, sys, time
from tracecheck.commands import {module}
from tracecheck.commands.common import Streams
s = split_start(); t, cpu = time.perf_counter(), time.process_time()
code = {module}.run({args}, fmt='json', output=sys.argv[1], streams=Streams(io.StringIO(), io.StringIO()))
elapsed, cpu, (user, system) = time.perf_counter() - t, time.process_time() - cpu, split_since(s)
child = resource.getrusage(resource.RUSAGE_CHILDREN)  # the gate's forked child
rss = peak_kib()
t = time.perf_counter(); data = open(sys.argv[2], 'rb').read(); json.loads(data)
print(elapsed, cpu + child.ru_utime + child.ru_stime, rss, time.perf_counter() - t, user, system)
"""

GIT_STAT = """
import resource, subprocess, sys, time
t = time.perf_counter()
try:
    subprocess.run(['git', '-c', 'core.bigFileThreshold=8g', 'diff', '--no-index', '--stat', sys.argv[1], sys.argv[2]],
                   capture_output=True, timeout=float(sys.argv[3]))
    stopped = 0
except subprocess.TimeoutExpired:
    stopped = 1
usage = resource.getrusage(resource.RUSAGE_CHILDREN)
print(time.perf_counter() - t, usage.ru_utime + usage.ru_stime, usage.ru_maxrss, stopped)
"""


def generate(n: int, path: Path, seed: int = 7) -> None:
    rng = random.Random(seed)
    kinds = ["requirement"] * 4 + ["function", "component", "test", "test", "hazard", "interface"]
    elements, links = [], []
    ids = []
    for i in range(n):
        kind = kinds[i % len(kinds)]
        element_id = f"{kind[:3].upper()}-{i:07d}"
        ids.append((element_id, kind))
        element = {"id": element_id, "kind": kind, "name": f"{kind} {i}",
                   "text": rng.choice(PHRASES) + f" (item {i}).",
                   "attributes": {"integrity": rng.choice("ABCD"), "status": "approved"}}
        if kind == "requirement" and i > 10:
            element["parent"] = ids[rng.randrange(0, 10)][0]
        elements.append(element)
    by_kind: dict[str, list[str]] = {}
    for element_id, kind in ids:
        by_kind.setdefault(kind, []).append(element_id)
    requirements = by_kind["requirement"]

    def link(source, target, relation):
        links.append({"source": source, "target": target, "relation": relation})

    # A thread in good shape, as a gate mostly sees: a few gaps, no structural errors.
    for n, requirement in enumerate(requirements):
        if n > 10:
            link(requirement, requirements[rng.randrange(0, n)], "derives_from")
    for kind, relation, targets in (("test", "verifies", requirements),
                                    ("component", "satisfies", requirements),
                                    ("interface", "satisfies", requirements),
                                    ("function", "allocated_to", by_kind["component"])):
        sources = by_kind[kind]
        for n, target in enumerate(targets):
            link(sources[n % len(sources)], target, relation)
    for hazard in by_kind["hazard"]:
        link(requirements[rng.randrange(len(requirements))], hazard, "mitigates")
    for element_id, _ in ids:  # free traces bring the thread to about three links per element
        target = requirements[rng.randrange(len(requirements))]
        if target != element_id:
            link(element_id, target, "traces_to")
    # A few defects, as a gate sees them: a derives_from loop, a dangling link, a copied
    # link, a misspelt relation, and the coverage gaps these leave.
    a, b, c = requirements[3], requirements[5], requirements[7]
    link(a, b, "derives_from"), link(b, c, "derives_from"), link(c, a, "derives_from")
    link(by_kind["test"][0], "REQ-DELETED", "verifies")
    links.append(dict(links[len(links) // 2]))
    link(by_kind["function"][0], by_kind["component"][0], "allocated-to")
    path.write_text(json.dumps({"format": "tracecheck-thread/1", "elements": elements, "links": links},
                               indent=1), encoding="utf-8")


ROOT = Path(__file__).resolve().parents[1]
# git's line diff of a reordered 1M-element pair ran for more than 15 minutes (7 CPU
# minutes and counting) on the 2-core machine of RESULTS.md; the row then says it was
# stopped, and the ratio is an upper bound.
GIT_LIMIT = 600.0


def measure(script: str, *args: str, cwd: Path | None = None, env: dict | None = None) -> tuple[float, ...]:
    # This checkout first, so the run measures the code beside the script.
    env = {**(env or os.environ),
           "PYTHONPATH": os.pathsep.join(filter(None, [str(ROOT), os.environ.get("PYTHONPATH")]))}
    out = subprocess.run([sys.executable, "-c", script, *args], check=True, capture_output=True, text=True,
                         env=env, cwd=cwd)
    return tuple(float(x) for x in out.stdout.split())


def best(script: str, repeat: int, *args: str, **where) -> tuple[float, ...]:
    """Fastest of ``repeat`` runs; memory is each run's own peak, so take the smallest too."""
    runs = [measure(script, *args, **where) for _ in range(repeat)]
    return tuple(min(column) for column in zip(*runs, strict=True))


def has_orjson() -> bool:
    return subprocess.run([sys.executable, "-c", "import orjson"], capture_output=True).returncode == 0


def machine() -> str:
    load = ", ".join(f"{x:.1f}" for x in os.getloadavg())
    import numpy
    import scipy

    return (
        f"{platform.machine()}, {os.cpu_count()} cores (load average at start {load}), "
        f"Python {platform.python_version()}, numpy {numpy.__version__}, scipy {scipy.__version__}, "
        f"orjson {'installed (baseline only)' if has_orjson() else 'not installed'}"
    )


def other_commands(n: int, path: Path, tmp: Path, repeat: int, gate: bool,
                   only: set[str] = frozenset({"diff", "coverage"})) -> list[tuple]:
    """Rows (elements, command, baseline name, s, CPU s, baseline s, baseline CPU s, MiB)."""
    steps = ", ".join(sorted(only - {"gate"}) + ["gate"] * gate)
    print(f"  {n:,} elements: {steps} ...", file=sys.stderr, flush=True)
    from diff import second_version  # noqa: PLC0415  (diff.py and gate.py import this module)
    from gate import ENV, build  # noqa: PLC0415

    out = str(tmp / "out.json")
    rows = []
    second = tmp / f"second-{n}.json"
    for shuffle, name in ((True, "diff (both parses)"), (False, "diff, same order (both parses)")) * ("diff" in only):
        second_version(path, second, shuffle=shuffle)
        git_t, git_cpu, _, stopped = best(GIT_STAT, 1 if n >= 1_000_000 else repeat, str(path), str(second),
                                          str(GIT_LIMIT))
        baseline = "git diff --no-index --stat" + (f" (stopped at {GIT_LIMIT:.0f} s)" if stopped else "")
        t, cpu, rss, _, user, system = best(COMMAND.format(module="diff", args=f"{str(path)!r}, {str(second)!r}"),
                                            repeat, out, str(path))
        rows.append((n, name, baseline, t, cpu, git_t, git_cpu, rss, user, system))
        second.unlink()
    if "coverage" in only:
        t, cpu, rss, inner, user, system = best(COMMAND.format(module="coverage", args=repr(str(path))), repeat, out,
                                                str(path))
        rows.append((n, "coverage", "json.loads, same process", t, cpu, inner, inner, rss, user, system))
    if gate:
        root = tmp / f"repo-{n}"
        root.mkdir()
        build(root, n)
        model = str(root / "model" / "thread.json")
        t, cpu, rss, inner, user, system = best(COMMAND.format(module="gate", args="['model/thread.json'], base='main'"),
                                                repeat, out, model, cwd=root, env=ENV)
        rows.append((n, "gate (20 commits)", "json.loads, same process", t, cpu, inner, inner, rss, user, system))
        shutil.rmtree(root)
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", default="10000,100000")
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--no-gate", action="store_true", help="leave out the gate rows")
    parser.add_argument("--commands", default="diff,coverage,gate",
                        help="which of diff, coverage, gate to measure beside check (default: all)")
    parser.add_argument("--gate-sizes", default=None,
                        help="sizes that get gate rows (default: every size; building the 20-commit "
                             "repository of a 1M-element thread writes about 11 GB)")
    parser.add_argument("--large-repeat", type=int, default=None,
                        help="runs per measurement at 1M elements and above (default: --repeat)")
    args = parser.parse_args()
    print(f"Machine: {machine()}")
    orjson = has_orjson()
    rows, others, cpu_rows, splits = [], [], [], []
    with tempfile.TemporaryDirectory() as tmp:
        gate_sizes = None if args.gate_sizes is None else {int(s) for s in args.gate_sizes.split(",")}
        for n in (int(s) for s in args.sizes.split(",")):
            repeat = args.repeat if n < 1_000_000 or args.large_repeat is None else args.large_repeat
            print(f"  {n:,} elements: generating, json.loads, orjson.loads, check ...", file=sys.stderr, flush=True)
            path = Path(tmp) / f"thread-{n}.json"
            generate(n, path)
            base_t, base_m, base_c, base_u, base_s = best(BASELINE, repeat, str(path))
            fast_t, fast_m, fast_c, fast_u, fast_s = best(ORJSON, repeat, str(path)) if orjson else (float("nan"),) * 5
            check_t, check_m, inner_t, check_c, check_u, check_s = best(CHECK, repeat, str(path),
                                                                        str(Path(tmp) / "out.json"))
            rows.append((n, path.stat().st_size / 1e6, base_t, fast_t, check_t, inner_t, base_m, fast_m, check_m))
            cpu_rows.append((n, base_c, fast_c, check_c))
            splits += [(n, "json.loads", base_u, base_s), (n, "orjson.loads", fast_u, fast_s),
                       (n, "check", check_u, check_s)]
            only = set(args.commands.split(","))
            gate = "gate" in only and not args.no_gate and (gate_sizes is None or n in gate_sizes)
            for row in other_commands(n, path, Path(tmp), repeat, gate, only):
                others.append((*row[:8], fast_t, base_m))
                splits.append((n, row[1], *row[8:]))
            path.unlink()
    print()
    print("| elements | MB | json.loads s | orjson.loads s | check s | check / json.loads "
          "| check / json.loads, same process | check / orjson.loads | json.loads MiB | orjson.loads MiB "
          "| check MiB | memory / json.loads | memory / orjson.loads |")
    print("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for n, mb, bt, ft, ct, it, bm, fm, cm in rows:
        print(f"| {n:,} | {mb:.0f} | {bt:.2f} | {ft:.2f} | {ct:.2f} | {ct / bt:.2f}x | {ct / it:.2f}x "
              f"| {ct / ft:.2f}x | {bm / 1024:.0f} | {fm / 1024:.0f} | {cm / 1024:.0f} | {cm / bm:.2f}x | {cm / fm:.2f}x |")
    print()
    print("CPU seconds (time.process_time of each process; less sensitive to other load on the machine):")
    print()
    print("| elements | json.loads CPU s | orjson.loads CPU s | check CPU s | check / json.loads | check / orjson.loads |")
    print("|---:|---:|---:|---:|---:|---:|")
    for n, bc, fc, cc in cpu_rows:
        print(f"| {n:,} | {bc:.2f} | {fc:.2f} | {cc:.2f} | {cc / bc:.2f}x | {cc / fc:.2f}x |")
    print()
    print("Growth per decade (time at this size / time at the size ten times smaller):")
    print()
    names = ["check CPU", *sorted({name for _, name, *_ in others})]
    print("| elements | check | " + " | ".join(names) + " |")
    print("|---:|---:|" + "---:|" * len(names))
    times = {(n, "check"): ct for n, _, _, _, ct, *_ in rows}
    times.update({(n, "check CPU"): cc for n, _, _, cc in cpu_rows})
    times.update({(n, name): t for n, name, _, t, *_ in others})
    for n, *_ in rows:
        if n % 10 == 0 and any(k[0] == n // 10 for k in times):
            cells = [times.get((n, c)) / times[(n // 10, c)] if (n // 10, c) in times and (n, c) in times else None
                     for c in ["check", *names]]
            print(f"| {n:,} | " + " | ".join("-" if x is None else f"{x:.1f}x" for x in cells) + " |")
    print()
    print("| elements | command | s | CPU s | baseline | baseline s | baseline CPU s | ratio | CPU ratio "
          "| / orjson.loads | MiB | MiB / json.loads MiB of one file |")
    print("|---:|---|---:|---:|---|---:|---:|---:|---:|---:|---:|---:|")
    for n, name, baseline, t, cpu, bt, bcpu, rss, ft, bm in others:
        vs_orjson = "-" if name.startswith("diff") else f"{t / ft:.2f}x"
        print(f"| {n:,} | {name} | {t:.2f} | {cpu:.2f} | {baseline} | {bt:.2f} | {bcpu:.2f} | {t / bt:.2f}x "
              f"| {cpu / bcpu:.2f}x | {vs_orjson} | {rss / 1024:.0f} | {rss / bm:.2f}x |")
    print_splits(splits)


def print_splits(splits: list[tuple]) -> None:
    """User and system CPU seconds of each measurement, and their growth per decade."""
    print()
    print("User and system CPU seconds (system time is mostly page faults; see SPLIT):")
    print()
    print("| elements | measured | user CPU s | system CPU s | user growth per decade | system growth per decade |")
    print("|---:|---|---:|---:|---:|---:|")
    seen = {(n, name): (user, system) for n, name, user, system in splits}
    for n, name, user, system in splits:
        before = seen.get((n // 10, name)) if n % 10 == 0 else None
        growth = ("-", "-") if before is None else (f"{user / before[0]:.1f}x", f"{system / before[1]:.1f}x")
        print(f"| {n:,} | {name} | {user:.2f} | {system:.2f} | {growth[0]} | {growth[1]} |")


if __name__ == "__main__":
    main()
