"""Formats benchmark: reading GraphML and ReqIF against the floor of lxml itself.

Generates the synthetic ferry shore-charging thread of ``benchmarks/scale.py`` (about
three links per element), writes it as GraphML and ReqIF with tracecheck's writers,
then measures in fresh subprocesses, so peak memory is the process's own:

* floor: read the bytes and run ``lxml.etree.iterparse`` over them, clearing each
  node/edge (SPEC-OBJECT/SPEC-RELATION) and its earlier siblings once seen: the least
  any streaming reader of the same file must do;
* tracecheck: read the bytes and build the model with ``formats.read_model``
  (hardened parser, prolog check, typed values, locations). The XML readers return
  the model as columns, which is what ``check`` and ``coverage`` work on; the
  "+ objects" column adds building every Element and Link, which only some commands
  (``convert``, ``diff``) ask for.

Prints a table with CPU time (``time.process_time``: the machines this runs on are
shared, and wall time mostly measures the neighbours), peak resident memory and the
ratios against the floor. The target is 1.5x the floor. For memory, the same model
read from thread JSON is shown as well: a streaming reader should stay near that
(the model's own size), not grow with the XML tree.

    python benchmarks/formats.py --sizes 100000
"""

from __future__ import annotations

import argparse
import importlib.util
import subprocess
import sys
import tempfile
from pathlib import Path

# Peak resident memory of this process alone: VmHWM is reset by exec, unlike ru_maxrss,
# which Linux carries over from the (large) parent process.
PEAK = """
def peak_kib():
    for line in open('/proc/self/status'):
        if line.startswith('VmHWM:'):
            return int(line.split()[1])
"""

FLOOR = PEAK + """
import io, sys, time
from lxml import etree
tags = sys.argv[2].split(",")
t = time.process_time()
data = open(sys.argv[1], 'rb').read()
for _event, element in etree.iterparse(io.BytesIO(data), events=("end",), tag=tags):
    element.clear()
    parent = element.getparent()
    while element.getprevious() is not None:
        del parent[0]
print(time.process_time() - t, peak_kib())
"""

# The floor plus looking at every value of every record once (each descendant's text
# and attributes): what any reader that builds a model from the records cannot skip.
TOUCH = FLOOR.replace("    element.clear()", "    for part in element.iter():\n        part.text, part.attrib.items()\n    element.clear()")

READ = PEAK + """
import sys, time
from tracecheck.formats import read_model
t = time.process_time()
data = open(sys.argv[1], 'rb').read()
model = read_model(data, sys.argv[1])
assert model.element_count == int(sys.argv[2]), model.element_count
if sys.argv[3:] == ["objects"]:
    assert len(model.elements) == int(sys.argv[2])
print(time.process_time() - t, peak_kib())
"""

GRAPHML = "{http://graphml.graphdrawing.org/xmlns}"
REQIF = "{http://www.omg.org/spec/ReqIF/20110401/reqif.xsd}"
TAGS = {"graphml": f"{GRAPHML}node,{GRAPHML}edge", "reqif": f"{REQIF}SPEC-OBJECT,{REQIF}SPEC-RELATION"}


def _scale_module():
    spec = importlib.util.spec_from_file_location("scale", Path(__file__).with_name("scale.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)  # type: ignore[union-attr]
    return module


def measure(script: str, *args: str) -> tuple[float, float]:
    out = subprocess.run([sys.executable, "-c", script, *args], check=True, capture_output=True, text=True)
    seconds, rss_kib = out.stdout.split()
    return float(seconds), float(rss_kib) / 1024


def write_inputs(n: int, folder: Path) -> dict[str, Path]:
    from tracecheck.formats import get_format, read_model

    source = folder / f"thread-{n}.json"
    _scale_module().generate(n, source)
    model = read_model(source.read_bytes(), str(source))
    paths = {"thread-json": source}
    for fmt in ("graphml", "reqif"):
        paths[fmt] = folder / f"thread-{n}.{fmt}"
        paths[fmt].write_bytes(get_format(fmt).write(model))  # type: ignore[attr-defined]
    return paths


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--sizes", default="100000")
    parser.add_argument("--repeat", type=int, default=2, help="runs per measurement (the best is kept)")
    args = parser.parse_args()
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for n in (int(s) for s in args.sizes.split(",")):
            paths = write_inputs(n, Path(tmp))
            source = str(paths.pop("thread-json"))
            model_mib = min(measure(READ, source, str(n))[1] for _ in range(args.repeat))
            for fmt, path in paths.items():
                floor = [measure(FLOOR, str(path), TAGS[fmt]) for _ in range(args.repeat)]
                touch = min(measure(TOUCH, str(path), TAGS[fmt])[0] for _ in range(args.repeat))
                ours = [measure(READ, str(path), str(n)) for _ in range(args.repeat)]
                objects = min(measure(READ, str(path), str(n), "objects")[0] for _ in range(args.repeat))
                rows.append((fmt, n, path.stat().st_size / 1e6, min(t for t, _ in floor), min(t for t, _ in ours),
                             min(m for _, m in floor), min(m for _, m in ours), model_mib, touch, objects))
    print("| format | elements | MB | floor CPU s | floor + touch s | tracecheck CPU s | ratio | + objects s "
          "| floor MiB | tracecheck MiB | mem ratio | same model from thread JSON MiB |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for fmt, n, mb, ft, tt, fm, tm, jm, touch, objects in rows:
        print(f"| {fmt} | {n:,} | {mb:.1f} | {ft:.2f} | {touch:.2f} ({touch / ft:.2f}x) | {tt:.2f} | {tt / ft:.2f}x "
              f"| {objects:.2f} ({objects / ft:.2f}x) | {fm:.0f} | {tm:.0f} | {tm / fm:.2f}x | {jm:.0f} |")
    print("Target: 1.5x the floor (lxml iterparse with clearing of the same file).")


if __name__ == "__main__":
    main()
