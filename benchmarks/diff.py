"""Diff benchmark: ``tracecheck diff`` of two versions against ``git diff --no-index --stat``.

Generates a synthetic ferry shore-charging thread with the generator of
``benchmarks/scale.py``, and a second version with about 1 % of its elements changed
the way a stage step changes them (text and attribute edits, removals, additions,
moves, renumberings, link additions and removals) and its elements reordered, as
exports do. Both commands run as fresh processes on the same two files, the whole
command timed (``python -m tracecheck diff --format json``: start-up, reading and
parsing both files, matching, the structural diff, impact, the rule engine on both
sides and the JSON rendering). Prints wall and CPU seconds and their ratios; the CPU
ratio is the steadier one on a shared machine.

    python benchmarks/diff.py --sizes 10000,100000
"""

from __future__ import annotations

import argparse
import json
import random
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from scale import generate  # noqa: E402  (the shared synthetic thread)


def second_version(path: Path, out: Path, seed: int = 11, shuffle: bool = True) -> dict[str, int]:
    """Write a changed copy of the thread at ``path`` to ``out``; return what was planted.

    ``shuffle`` reorders the elements, as an export that does not keep its order does
    (a line diff then sees most lines moved); without it the changed copy keeps the
    order, as successive exports of a tool that does."""
    rng = random.Random(seed)
    doc = json.loads(path.read_text(encoding="utf-8"))
    elements, n = doc["elements"], len(doc["elements"])
    picks = rng.sample(range(n), max(7, n // 100))
    share = len(picks) // 7
    planted = {"text": 0, "attributes": 0, "moved": 0, "renumbered": 0, "removed": 0}
    parents = [e["id"] for e in elements[:10]]
    removed: set[str] = set()
    renames: dict[str, str] = {}
    for k, index in enumerate(picks):
        element = elements[index]
        group = ("text", "attributes", "moved", "renumbered", "removed", "text", "attributes")[k // max(share, 1) % 7]
        if group == "text":
            element["text"] = element["text"].replace("shall", "shall always", 1) + " Revised."
        elif group == "attributes":
            element["attributes"]["status"] = "reviewed"
        elif group == "moved" and element["kind"] == "requirement":
            element["parent"] = rng.choice([p for p in parents if p not in (element.get("parent"), element["id"])])
        elif group == "renumbered":
            old_id = element["id"]
            element["id"] = renames[old_id] = f"{old_id}-R"
        elif group == "removed" and element["id"] not in parents:
            removed.add(element["id"])
        else:
            continue
        planted[group] += 1
    for link in doc["links"]:
        link["source"] = renames.get(link["source"], link["source"])
        link["target"] = renames.get(link["target"], link["target"])
    doc["elements"] = [e for e in elements if e["id"] not in removed]
    doc["links"] = [lk for lk in doc["links"] if lk["source"] not in removed and lk["target"] not in removed]
    for i in range(n // 200):
        doc["elements"].append({"id": f"NEW-{i:06d}", "kind": "requirement", "name": f"Added requirement {i}",
                                "text": f"The shore charger shall log event class {i} for the berth record."})
        doc["links"].append({"source": f"NEW-{i:06d}", "target": doc["elements"][i]["id"], "relation": "traces_to"})
    del doc["links"][: n // 200]
    if shuffle:
        rng.shuffle(doc["elements"])
    out.write_text(json.dumps(doc, indent=1), encoding="utf-8")
    return planted


def _children_cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def timed(command: list[str]) -> tuple[float, float]:
    """Wall and CPU seconds of one run of ``command`` (CPU is steadier on a shared box)."""
    cpu, start = _children_cpu(), time.perf_counter()
    subprocess.run(command, check=False, capture_output=True)
    return time.perf_counter() - start, _children_cpu() - cpu


def best(runs: list[tuple[float, float]]) -> tuple[float, float]:
    return min(r[0] for r in runs), min(r[1] for r in runs)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--sizes", default="10000,100000")
    parser.add_argument("--repeat", type=int, default=2, help="runs per command; the best is kept")
    args = parser.parse_args()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in (int(s) for s in args.sizes.split(",")):
            old, new = Path(tmp) / f"v1-{n}.json", Path(tmp) / f"v2-{n}.json"
            generate(n, old)
            planted = second_version(old, new)
            git = best([timed(["git", "diff", "--no-index", "--stat", str(old), str(new)]) for _ in range(args.repeat)])
            command = [sys.executable, "-m", "tracecheck", "diff", "--format", "json", "-o", str(Path(tmp) / "diff.json"),
                       str(old), str(new)]
            ours = best([timed(command) for _ in range(args.repeat)])
            report = json.loads((Path(tmp) / "diff.json").read_text(encoding="utf-8"))
            found = report["summary"]["elements"]
            rows.append((n, (old.stat().st_size + new.stat().st_size) / 1e6, git, ours, planted, found))
    print("| elements | MB (both) | git diff --stat wall s | tracecheck diff wall s | ratio | git CPU s "
          "| tracecheck CPU s | CPU ratio |")
    print("|---:|---:|---:|---:|---:|---:|---:|---:|")
    for n, mb, (git_wall, git_cpu), (wall, cpu), _, _ in rows:
        print(f"| {n:,} | {mb:.1f} | {git_wall:.2f} | {wall:.2f} | {wall / git_wall:.2f}x | {git_cpu:.2f} "
              f"| {cpu:.2f} | {cpu / git_cpu:.2f}x |")
    for n, _, _, _, planted, found in rows:
        print(f"{n:,}: planted {planted}; reported {found}")


if __name__ == "__main__":
    main()
