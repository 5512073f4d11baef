"""History benchmark: ``tracecheck history`` over N tagged revisions of a large model.

Builds a git repository whose model file (the synthetic ferry shore-charging thread of
``benchmarks/scale.py``) changes a little at every tagged revision — elements added,
removed and edited, links added — then measures, each in a fresh subprocess with its own
empty cache folder:

* baseline: read every revision's blob through gitpython and ``json.loads`` it (the
  floor any walk over the history pays);
* first run: ``history --format json`` with an empty cache (parse, check, coverage and
  diff every revision);
* cached run: the same command again, served from the on-disk cache.

Prints a table with wall times, peak resident memory and ratios against the baseline.

    python benchmarks/history.py --revisions 20 --size 100000
"""

from __future__ import annotations

import argparse
import json
import os
import random
import subprocess
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from scale import generate  # noqa: E402  (the generator the scale benchmark uses)

MODEL = "model/thread.json"

PEAK = """
def peak_mib():
    # VmHWM belongs to this process image; ru_maxrss would carry over the parent's peak
    # across fork and exec on Linux.
    try:
        for line in open('/proc/self/status'):
            if line.startswith('VmHWM:'):
                return int(line.split()[1]) / 1024
    except OSError:
        pass
    import resource
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
"""

BASELINE = PEAK + """
import json, sys, time
import git
t = time.perf_counter()
repo = git.Repo(sys.argv[1])
for tag in sorted(repo.tags, key=lambda t: t.name):
    json.loads((tag.commit.tree / sys.argv[2]).data_stream.read())
print(time.perf_counter() - t, peak_mib())
"""

HISTORY = PEAK + """
import io, os, sys, time
os.chdir(sys.argv[1])
from tracecheck.commands import history
from tracecheck.commands.common import Streams
t = time.perf_counter()
history.run(sys.argv[2], fmt='json', output=sys.argv[3], streams=Streams(io.StringIO(), sys.stderr))
print(time.perf_counter() - t, peak_mib())
"""


def git(root: Path, *args: str) -> None:
    subprocess.run(["git", *args], cwd=root, check=True, capture_output=True)


def mutate(document: dict, rng: random.Random, revision: int) -> None:
    """A stage's worth of change: about 0.5% of elements edited, 0.2% added, 0.05% removed."""
    elements = document["elements"]
    n = len(elements)
    for index in rng.sample(range(n), n // 200):
        elements[index] = dict(elements[index], text=elements[index]["text"] + f" Revised at stage {revision}.")
    for victim in sorted(rng.sample(range(n), n // 2000), reverse=True):
        del elements[victim]
    requirements = [e["id"] for e in elements[:2000] if e["kind"] == "requirement"]
    for k in range(n // 500):
        new_id = f"TST-R{revision:02d}-{k:05d}"
        elements.append({"id": new_id, "kind": "test", "name": f"test {new_id}",
                         "text": "The charging arm shall stop within 200 ms when the emergency stop is pressed."})
        document["links"].append({"source": new_id, "target": rng.choice(requirements), "relation": "verifies"})


def build(root: Path, size: int, revisions: int) -> None:
    root.mkdir()
    env_dates = {"GIT_AUTHOR_DATE": "2026-01-01T00:00:00+00:00", "GIT_COMMITTER_DATE": "2026-01-01T00:00:00+00:00"}
    os.environ.update(env_dates)
    git(root, "init", "-q", "-b", "main")
    git(root, "config", "user.name", "benchmark")
    git(root, "config", "user.email", "benchmark@tracecheck.invalid")
    model = root / MODEL
    model.parent.mkdir()
    generate(size, model)
    document = json.loads(model.read_bytes())
    rng = random.Random(13)
    for revision in range(revisions):
        if revision:
            mutate(document, rng, revision)
            model.write_text(json.dumps(document, indent=1), encoding="utf-8")
        git(root, "add", "-A")
        git(root, "commit", "-q", "-m", f"export {revision}")
        git(root, "tag", f"rev-{revision:02d}")


def measure(script: str, cache: Path, *args: str) -> tuple[float, float]:
    env = dict(os.environ, XDG_CACHE_HOME=str(cache))
    env.pop("CI", None)
    out = subprocess.run([sys.executable, "-c", script, *args], check=True, capture_output=True, text=True,
                         env=env)
    seconds, mib = out.stdout.split()
    return float(seconds), float(mib)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--revisions", type=int, default=20)
    parser.add_argument("--size", type=int, default=100_000)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        root, cache = Path(tmp) / "repo", Path(tmp) / "cache"
        build(root, args.size, args.revisions)
        out = str(Path(tmp) / "history.json")
        base_t, base_m = measure(BASELINE, cache, str(root), MODEL)
        first_t, first_m = measure(HISTORY, cache, str(root), MODEL, out)
        first = Path(out).read_bytes()
        cached_t, cached_m = measure(HISTORY, cache, str(root), MODEL, out)
        same = Path(out).read_bytes() == first
        rows = json.loads(first)["revisions"]
    print(f"{len(rows)} revisions, {rows[0]['elements']:,} to {rows[-1]['elements']:,} elements; "
          f"cached output byte-identical to the first: {same}")
    print("| run | wall s | vs baseline | peak MiB |")
    print("|---|---:|---:|---:|")
    for name, seconds, mib in (("baseline: read + json.loads every blob", base_t, base_m),
                               ("history, empty cache", first_t, first_m),
                               ("history, cached", cached_t, cached_m)):
        print(f"| {name} | {seconds:.2f} | {seconds / base_t:.2f}x | {mib:.0f} |")
    print(f"cached run is {first_t / cached_t:.0f}x faster than the first")


if __name__ == "__main__":
    main()
