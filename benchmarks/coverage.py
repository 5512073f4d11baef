"""Coverage benchmark: ``coverage`` at 10k / 100k (/ 1M) elements against parsing the file.

Uses the synthetic ferry shore-charging thread of ``scale.py``. Each measurement runs
in a fresh subprocess, so peak resident memory is the process's own:

* the baselines: read the bytes and ``json.loads`` them, and ``orjson.loads`` them
  when orjson is importable (not a dependency, only a second yardstick), each in its
  own process (wall time, peak memory of the parsed document);
* ``coverage --format json`` through ``commands.coverage.run`` (read, decode,
  validate, audit, render, write), timed after importing the command module and every
  renderer (the registry imports them all on first render; that import is the same at
  every size and is printed apart); the same process then times ``json.loads`` of the
  file once more, a ratio that machine load cannot skew between processes;
* the same report split into its steps in one process, with the cyclic collector
  paused as the command pauses it: reading the model (the parse) and the rest (audit,
  render, write), so the audit's cost shows apart from the reader's;
* the full audit: HTML with the matrix table, plus the matrix CSV, grouped by
  integrity.

Prints a markdown table with ratios against the baselines. Each measurement is the
best of ``--repeat`` runs.

    python benchmarks/coverage.py --sizes 10000,100000
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
from scale import BASELINE, ORJSON, best, has_orjson  # noqa: E402


def generate_apart(n: int, path: Path) -> None:
    """``scale.generate`` in a child process. On Linux a child inherits its parent's
    peak resident memory through fork and exec (``ru_maxrss``), so a parent that built
    the thread itself would put a floor under every peak measured after it."""
    script = f"import sys; sys.path.insert(0, {str(HERE)!r}); from pathlib import Path; from scale import generate; generate({n}, Path(sys.argv[1]))"
    subprocess.run([sys.executable, "-c", script, str(path)], check=True)

IMPORTS = """
import io, json, resource, sys, time
t = time.perf_counter()
from tracecheck.commands import coverage
from tracecheck.commands.common import Streams
from tracecheck.report import renderers
renderers()  # the registry imports every renderer module on first use
imports = time.perf_counter() - t
"""

COVERAGE = IMPORTS + """
t = time.perf_counter()
coverage.run(sys.argv[1], fmt='json', output=sys.argv[2], streams=Streams(io.StringIO(), sys.stderr))
elapsed = time.perf_counter() - t
rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
t = time.perf_counter(); data = open(sys.argv[1], 'rb').read(); json.loads(data)
print(elapsed, rss, time.perf_counter() - t, imports)
"""

STEPS = IMPORTS + """
from tracecheck.audit import apply_profile, build_report, settings_from
from tracecheck.collection import collection_paused
from tracecheck.commands.common import emit, load
from tracecheck.report import RenderOptions, render
with collection_paused():  # as commands.coverage.run does
    t = time.perf_counter()
    loaded = load(sys.argv[1])
    parsed = time.perf_counter()
    settings = settings_from(loaded.config)
    config, profile = apply_profile(loaded.config, settings.profile)
    report = build_report(loaded.source, loaded.model, config, settings, profile)
    emit(render('coverage', 'json', report, RenderOptions()), sys.argv[2], Streams(io.StringIO(), sys.stderr))
    done = time.perf_counter()
print(parsed - t, done - parsed)
"""

AUDIT = IMPORTS + """
t = time.perf_counter()
coverage.run(sys.argv[1], fmt='html', output=sys.argv[2], matrix=sys.argv[3], group_by=('integrity',),
             streams=Streams(io.StringIO(), sys.stderr))
print(time.perf_counter() - t, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
"""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--sizes", default="10000,100000")
    parser.add_argument("--repeat", type=int, default=2)
    parser.add_argument("--no-audit", action="store_true", help="leave out the HTML + matrix CSV run")
    args = parser.parse_args()
    orjson = has_orjson()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in (int(s) for s in args.sizes.split(",")):
            path = Path(tmp) / f"thread-{n}.json"
            generate_apart(n, path)
            out = str(Path(tmp) / "out")
            json_t, json_m = best(BASELINE, args.repeat, str(path))
            fast_t, fast_m = best(ORJSON, args.repeat, str(path)) if orjson else (float("nan"),) * 2
            cov_t, cov_m, inner_t, imports = best(COVERAGE, args.repeat, str(path), out + ".json")
            parse_t, rest_t = best(STEPS, args.repeat, str(path), out + ".json")
            audit = (float("nan"),) * 2 if args.no_audit else best(AUDIT, args.repeat, str(path), out + ".html",
                                                                   out + ".csv")
            rows.append((n, json_t, fast_t, cov_t, inner_t, parse_t, rest_t, audit[0], imports,
                         json_m, fast_m, cov_m))
            path.unlink()
    print("| elements | json.loads s | orjson.loads s | coverage json s | / orjson | / json.loads (same process) "
          "| parse s | rest s | rest / orjson | audit html+csv s | renderer imports s | peak MiB | "
          "/ peak of json.loads | / peak of orjson.loads |")
    print("|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for n, jt, ft, ct, it, pt, rt, at, imp, jm, fm, cm in rows:
        print(f"| {n:,} | {jt:.2f} | {ft:.2f} | {ct:.2f} | {ct / ft:.2f}x | {ct / it:.2f}x | {pt:.2f} | {rt:.2f} | "
              f"{rt / ft:.2f}x | {at:.2f} | {imp:.2f} | {cm / 1024:.0f} | {cm / jm:.2f}x | {cm / fm:.2f}x |")
    if len(rows) > 1:
        steps = ", ".join(f"{b[0]:,} -> {a[0]:,}: {a[3] / b[3]:.1f}x" for b, a in zip(rows, rows[1:], strict=False))
        print(f"\nGrowth of the coverage time per step (linear in size: 10x per decade): {steps}")


if __name__ == "__main__":
    main()
