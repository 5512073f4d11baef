"""Embedding benchmark: exact fit and verify on ferry shore-charging threads of growing size.

Synthetic directed threads with the structure of a real one (system requirements
derived into subsystem and software requirements, functions satisfying them and
allocated to components, components assembled into subsystems, interface
requirements, tests verifying requirements and functions, hazards mitigated by
requirements), plus the bundled demo stages. For each size it reports the time to the
first exact fit, the total time of the dimension search and the smallest exact
dimension found (an upper bound), with the attempts. The baseline, measured in the
same run, is the same search with BLAS's thread pool left free instead of held to one
thread by threadpoolctl (ratio = one thread / pool, on the sizes given to --baseline). Verify is timed at 20k and
50k elements in a fresh subprocess each, with its peak resident memory, against the
baseline of reading the model alone in the same kind of subprocess.

    python benchmarks/embedding.py                                  # demo stages; 1k, 5k fits; verify 20k, 50k
    python benchmarks/embedding.py --fit 20000 --max-seconds 600 --no-demo --verify ''
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

SUBSYSTEMS = ["CHG", "ARM", "MOR", "BMS", "OPS", "EST", "INS", "COM"]


def synthetic_thread(size: int, seed: int = 0) -> dict:
    """A thread JSON document of about ``size`` elements (and 1.6 links per element)."""
    rng = np.random.default_rng(seed)
    elements: list[dict] = []
    links: list[dict] = []
    counts = {kind: max(1, int(size * share)) for kind, share in
              [("hazard", 0.03), ("sysreq", 0.07), ("subreq", 0.22), ("swreq", 0.18),
               ("function", 0.14), ("component", 0.08), ("interface", 0.03), ("test", 0.25)]}

    def add(prefix: str, kind: str, n: int) -> list[str]:
        ids = [f"{prefix}-{i:05d}" for i in range(n)]
        elements.extend({"id": i, "kind": kind, "name": f"{kind} {i}"} for i in ids)
        return ids

    def link(source: str, target: str, relation: str) -> None:
        links.append({"source": source, "target": target, "relation": relation})

    def pick(pool: list[str], near: float, spread: float = 0.02) -> str:
        # Neighbouring ids belong to the same subsystem: links are local, as in real threads.
        j = int(np.clip(near + rng.normal(0, spread), 0, 0.999999) * len(pool))
        return pool[j]

    haz = add("HAZ", "hazard", counts["hazard"])
    sys_ = add("REQ-SYS", "requirement", counts["sysreq"])
    sub = add("REQ-SUB", "requirement", counts["subreq"])
    sw = add("REQ-SW", "requirement", counts["swreq"])
    fn = add("FN", "function", counts["function"])
    cmp_ = add("CMP", "component", counts["component"])
    itf = add("ITF", "interface", counts["interface"])
    tst = add("TST", "test", counts["test"])
    for pool, parents in ((sub, sys_), (sw, sub)):
        for i, child in enumerate(pool):
            link(child, pick(parents, i / len(pool)), "derives_from")
    for i, req in enumerate(sys_):
        if rng.random() < 0.5:
            link(req, pick(haz, i / len(sys_), 0.05), "mitigates")
    for i, f in enumerate(fn):
        where = i / len(fn)
        link(f, pick(cmp_, where), "allocated_to")
        for _ in range(1 + int(rng.random() < 0.4)):
            link(f, pick(sw if rng.random() < 0.7 else sub, where), "satisfies")
    for i, c in enumerate(cmp_[len(SUBSYSTEMS):]):
        link(c, cmp_[int(i / len(cmp_) * len(SUBSYSTEMS))], "part_of")
    for i, f in enumerate(itf):
        link(f, pick(sub, i / len(itf)), "satisfies")
    for i, t in enumerate(tst):
        where = i / len(tst)
        link(t, pick(sw + sub, where), "verifies")
        if rng.random() < 0.3:
            link(t, pick(fn, where), "verifies")
    unique = {(x["source"], x["target"], x["relation"]): x for x in links if x["source"] != x["target"]}
    return {"format": "tracecheck-thread/1", "model": {"name": "synthetic shore charger"},
            "elements": elements, "links": list(unique.values())}


def _model(document: dict):
    from tracecheck.formats import read_model

    return read_model(json.dumps(document).encode(), "<synthetic>")


def bench_fit(label: str, model, settings, pool: bool = False) -> dict:
    import contextlib

    import tracecheck.embedding.fit as fit
    from tracecheck.embedding import threads

    graph = fit.pair_graph(model)
    first_exact: list[float] = []
    attempt = fit._Problem.attempt
    started = time.perf_counter()

    def timed(self, *args, **kwargs):  # note when the first exact attempt ends
        found = attempt(self, *args, **kwargs)
        if found[1] == 0 and not first_exact:
            first_exact.append(time.perf_counter() - started)
        return found

    fit._Problem.attempt = timed
    limit = threads.single_blas_thread
    if pool:  # the baseline: leave BLAS's thread pool as the process found it
        threads.single_blas_thread = contextlib.nullcontext
    try:
        outcome = fit.fit_graph(graph, settings=settings)
    finally:
        fit._Problem.attempt, threads.single_blas_thread = attempt, limit
    seconds = time.perf_counter() - started
    failed = sum(1 for a in outcome.attempts if not a.exact)
    return {"case": label, "elements": graph.n, "links": graph.m, "blas": "pool" if pool else "1 thread",
            "exact": outcome.exact, "dimension": outcome.embedding.dimension,
            "attempts": len(outcome.attempts), "failed": failed, "seconds": seconds,
            "first_exact": first_exact[0] if first_exact else None, "timed_out": outcome.timed_out}


VERIFY = """
import sys, time
from pathlib import Path
from tracecheck.formats import read_model
from tracecheck.embedding.factors import load
from tracecheck.embedding.verify import verify
started = time.perf_counter()
model = read_model(Path(sys.argv[1]).read_bytes(), sys.argv[1])
read = time.perf_counter() - started
if sys.argv[2] != "-":
    result = verify(model, load(sys.argv[2]))
    assert result.exact is (sys.argv[3] == "exact"), result.exact
# VmHWM, not ru_maxrss: Linux carries ru_maxrss across exec, so a child of a big
# benchmark process would report its parent's peak.
peak = next(int(line.split()[1]) for line in open("/proc/self/status") if line.startswith("VmHWM:"))
print(read, time.perf_counter() - started, peak)
"""


def _planted_embedding(document: dict, model, k: int, path: Path) -> None:
    """A random k-dimensional embedding over the model's elements (verify cost does not
    depend on whether it is exact, only on n and k)."""
    from tracecheck.embedding.factors import Embedding, dumps

    rng = np.random.default_rng(1)
    n = len(model.by_id)
    x = rng.standard_normal((n, k))
    y = rng.standard_normal((n, k))
    x[:, 0], y[:, 0] = 1.0, -40.0 * np.sqrt(k)  # almost every logit far below 0
    path.write_bytes(dumps(Embedding(x, y, tuple(model.by_id))))


def bench_verify(size: int, k: int, folder: Path) -> dict:
    document = synthetic_thread(size)
    model_path = folder / f"thread-{size}.json"
    model_path.write_text(json.dumps(document))
    embedding_path = folder / f"thread-{size}.npz"
    _planted_embedding(document, _model(document), k, embedding_path)
    rows = {}
    for role, emb in (("read", "-"), ("verify", str(embedding_path))):
        out = subprocess.run([sys.executable, "-c", VERIFY, str(model_path), emb, "inexact"],
                             capture_output=True, text=True, check=True).stdout.split()
        rows[role] = [float(v) for v in out]
    return {"elements": size, "dimension": k, "read_seconds": rows["read"][1],
            "verify_seconds": rows["verify"][1], "peak_mb": rows["verify"][2] / 1024,
            "read_peak_mb": rows["read"][2] / 1024}


def _print_fits(rows: list[dict]) -> None:
    print(f"{'case':<28}{'elements':>9}{'links':>7}{'blas':>10}{'exact':>7}{'dim':>5}"
          f"{'attempts':>9}{'failed':>7}{'1st exact s':>12}{'total s':>9}")
    for r in rows:
        first = "-" if r["first_exact"] is None else f"{r['first_exact']:.1f}"
        total = f"{r['seconds']:.1f}" + ("*" if r["timed_out"] else "")
        print(f"{r['case']:<28}{r['elements']:>9}{r['links']:>7}{r['blas']:>10}{str(r['exact']):>7}"
              f"{r['dimension']:>5}{r['attempts']:>9}{r['failed']:>7}{first:>12}{total:>9}", flush=True)


def _sizes(text: str) -> list[int]:
    return [int(part) for part in text.split(",") if part.strip()]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--fit", default="1000,5000", help="synthetic sizes to fit (comma-separated)")
    parser.add_argument("--baseline", default="1000", help="sizes also fitted with BLAS's thread pool free")
    parser.add_argument("--verify", default="20000,50000", help="sizes to verify")
    parser.add_argument("--verify-dim", type=int, default=32)
    parser.add_argument("--max-seconds", type=float, default=None, help="bound on each fit (marked * when hit)")
    parser.add_argument("--no-demo", action="store_true", help="skip the demo stages")
    args = parser.parse_args()
    from tracecheck.embedding.fit import FitSettings

    settings = FitSettings(max_seconds=args.max_seconds)
    fits: list[dict] = []
    if not args.no_demo:
        from tracecheck.demo.stages import STAGE_NAMES, stage_bytes
        from tracecheck.formats import read_model

        for stage in STAGE_NAMES[:4]:
            fits.append(bench_fit(f"demo {stage}", read_model(stage_bytes(stage), stage), settings))
            _print_fits(fits[-1:])
    baseline = set(_sizes(args.baseline))
    for size in _sizes(args.fit):
        model = _model(synthetic_thread(size))
        fits.append(bench_fit(f"synthetic {size}", model, settings))
        _print_fits(fits[-1:])
        if size in baseline:
            fits.append(bench_fit(f"synthetic {size}", model, settings, pool=True))
            _print_fits(fits[-1:])
    if fits:
        print()
        _print_fits(fits)
        base = {r["case"]: r["seconds"] for r in fits if r["blas"] == "pool"}
        for r in fits:
            if r["blas"] != "pool" and r["case"] in base:
                print(f"{r['case']}: one BLAS thread / thread pool search time = {r['seconds'] / base[r['case']]:.2f}")
        if any(r["timed_out"] for r in fits):
            print("* the --max-seconds bound ended the search; the best fit so far was kept.")
    if _sizes(args.verify):
        print()
        with tempfile.TemporaryDirectory() as tmp:
            print(f"{'elements':>9}{'dim':>5}{'read s':>9}{'verify s':>10}{'ratio':>7}{'peak MB':>9}{'read MB':>9}")
            for size in _sizes(args.verify):
                r = bench_verify(size, args.verify_dim, Path(tmp))
                print(f"{r['elements']:>9}{r['dimension']:>5}{r['read_seconds']:>9.2f}{r['verify_seconds']:>10.2f}"
                      f"{r['verify_seconds'] / r['read_seconds']:>7.1f}{r['peak_mb']:>9.0f}{r['read_peak_mb']:>9.0f}",
                      flush=True)
    print("\nTargets: exact fit 5k < 180 s, 20k < 600 s (2 cores); verify 50k < 30 s and < 1024 MB.")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
