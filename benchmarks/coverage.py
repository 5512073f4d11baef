"""Coverage benchmark: ``coverage`` at 10k / 100k elements against ``check``.

Uses the synthetic ferry shore-charging thread of ``scale.py``. Each measurement runs
in a fresh subprocess (wall time of the command function, peak resident memory of the
process): the baseline is ``check`` (read, parse, every rule, JSON), then ``coverage``
as JSON grouped by integrity, and the full audit (HTML with the matrix table, plus the
matrix CSV). Prints a table with ratios against the baseline.

    python benchmarks/coverage.py --sizes 10000,100000
"""

from __future__ import annotations

import argparse
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
from scale import CHECK, generate, measure  # noqa: E402

COVERAGE = """
import io, resource, sys, time
from tracecheck.commands import coverage
from tracecheck.commands.common import Streams
t = time.perf_counter()
extra = {'fmt': 'html', 'matrix': sys.argv[3]} if sys.argv[3] != '-' else {'fmt': 'json'}
coverage.run(sys.argv[1], output=sys.argv[2], group_by=('integrity',),
             streams=Streams(io.StringIO(), sys.stderr), **extra)
print(time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--sizes", default="10000,100000")
    args = parser.parse_args()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in (int(s) for s in args.sizes.split(",")):
            path = Path(tmp) / f"thread-{n}.json"
            generate(n, path)
            out = str(Path(tmp) / "out")
            base = min(measure(CHECK, str(path), out + ".json") for _ in range(2))
            as_json = min(measure(COVERAGE, str(path), out + ".cov.json", "-") for _ in range(2))
            audit = min(measure(COVERAGE, str(path), out + ".html", out + ".csv") for _ in range(2))
            size = Path(out + ".html").stat().st_size / 1e6
            rows.append((n, base, as_json, audit, size))
    print("| elements | check s | coverage json s | ratio | audit html+csv s | ratio | html MB | check MiB | audit MiB | mem ratio |")
    print("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for n, (bt, bm), (jt, _), (at, am), size in rows:
        print(f"| {n:,} | {bt:.2f} | {jt:.2f} | {jt / bt:.2f}x | {at:.2f} | {at / bt:.2f}x | {size:.1f} | "
              f"{bm:.0f} | {am:.0f} | {am / bm:.2f}x |")


if __name__ == "__main__":
    main()
