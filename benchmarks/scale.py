"""Scale benchmark: ``check`` at 10k / 100k / 1M elements against ``json.loads``.

Generates a synthetic ferry shore-charging thread (about three links per element,
engineering-like text), then measures in fresh subprocesses, so peak memory is the
process's own: the baseline (read the bytes and ``json.loads`` them) and
``tracecheck check`` (read, parse, validate, run every rule, render JSON). Prints a
table with wall times, peak resident memory and ratios against the baseline.

    python benchmarks/scale.py --sizes 10000,100000
"""

from __future__ import annotations

import argparse
import json
import random
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

BASELINE = """
import json, resource, sys, time
t = time.perf_counter(); data = open(sys.argv[1], 'rb').read(); json.loads(data)
print(time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""

CHECK = """
import io, resource, sys, time
from tracecheck.commands import check
from tracecheck.commands.common import Streams
t = time.perf_counter()
code = check.run(sys.argv[1], fmt='json', output=sys.argv[2], streams=Streams(io.StringIO(), sys.stderr))
print(time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
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
    path.write_text(json.dumps({"format": "tracecheck-thread/1", "elements": elements, "links": links},
                               indent=1), encoding="utf-8")


def measure(script: str, *args: str) -> tuple[float, float]:
    out = subprocess.run([sys.executable, "-c", script, *args], check=True, capture_output=True, text=True)
    seconds, rss_kib = out.stdout.split()
    return float(seconds), float(rss_kib) / 1024


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--sizes", default="10000,100000")
    args = parser.parse_args()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in (int(s) for s in args.sizes.split(",")):
            path = Path(tmp) / f"thread-{n}.json"
            generate(n, path)
            base_t, base_m = min(measure(BASELINE, str(path)) for _ in range(2))
            check_t, check_m = min(measure(CHECK, str(path), str(Path(tmp) / "out.json")) for _ in range(2))
            rows.append((n, path.stat().st_size / 1e6, base_t, check_t, base_m, check_m))
    print("| elements | MB | json.loads s | check s | ratio | json.loads MiB | check MiB | mem ratio |")
    print("|---:|---:|---:|---:|---:|---:|---:|---:|")
    for n, mb, bt, ct, bm, cm in rows:
        print(f"| {n:,} | {mb:.1f} | {bt:.2f} | {ct:.2f} | {ct / bt:.2f}x | {bm:.0f} | {cm:.0f} | {cm / bm:.2f}x |")


if __name__ == "__main__":
    main()
