"""Formats benchmark: reading GraphML and ReqIF against the floor of lxml itself.

Generates the synthetic ferry shore-charging thread of ``benchmarks/scale.py`` (about
three links per element), writes it as GraphML and ReqIF with tracecheck's writers,
then measures in fresh subprocesses, so peak memory is the process's own:

* floor: read the bytes and run ``lxml.etree.iterparse`` over them, clearing each
  node/edge (SPEC-OBJECT/SPEC-RELATION) and its earlier siblings once seen: the least
  any streaming reader of the same file must do;
* bare columns: the same file parsed the way tracecheck parses it (pull parser fed in
  chunks, one XPath per column over each chunk's finished records, records deleted),
  taking only the raw strings of the columns: no checks, typing, errors or assembly.
  It is not a floor to be measured against but the cost a reader of this design
  cannot go below;
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


def _scale_module():
    spec = importlib.util.spec_from_file_location("scale", Path(__file__).with_name("scale.py"))
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)  # type: ignore[union-attr]
    return module


# Peak resident memory of the measuring process alone (VmHWM, reset by exec, unlike
# ru_maxrss): the snippet scale.py puts in front of its measuring scripts.
PEAK = _scale_module().PEAK

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

# The least a reader can do to get the raw strings of the columns a model needs, with the
# same hardened parser and chunked pull parsing tracecheck uses, but no checks, typing,
# errors or assembly: after each chunk, one compiled XPath per column over the finished
# records of the open container (ids, keys and values, link ends, reference texts; the
# record proxies for their source lines), then the records are deleted. The queries are
# given per container tag ({r} stands for its record step); hierarchy trees are walked
# for their object references by lxml's iteration.
COLUMNS = PEAK + """
import sys, time
from operator import attrgetter
from lxml import etree
NS = {"g": "http://graphml.graphdrawing.org/xmlns", "h": "http://www.w3.org/1999/xhtml",
      "r": "http://www.omg.org/spec/ReqIF/20110401/reqif.xsd"}
PLAN = {
    "graphml": {"g:graph": [("g:node", ["{r}/@id", "{r}/g:data/@key", "{r}/g:data/node()[1]"]),
                            ("g:edge", ["{r}/@source", "{r}/@target", "{r}/@id", "{r}/g:data/@key",
                                        "{r}/g:data/node()[1]"])]},
    "reqif": {"r:SPEC-OBJECTS": [("r:SPEC-OBJECT", [
                  "{r}/@IDENTIFIER", "{r}/@LONG-NAME", "{r}/r:TYPE/r:SPEC-OBJECT-TYPE-REF/text()",
                  "{r}/r:VALUES/*/r:DEFINITION/*/text()", "{r}/r:VALUES/*/@THE-VALUE",
                  "{r}/r:VALUES/*/r:THE-VALUE/h:div/text()"])],
              "r:SPEC-RELATIONS": [("r:SPEC-RELATION", [
                  "{r}/r:SOURCE/r:SPEC-OBJECT-REF/text()", "{r}/r:TARGET/r:SPEC-OBJECT-REF/text()",
                  "{r}/r:TYPE/r:SPEC-RELATION-TYPE-REF/text()"])],
              "r:CHILDREN": []},
}[sys.argv[2]]
def clark(name):
    prefix, local = name.split(":")
    return "{" + NS[prefix] + "}" + local
def compiled(step, paths):
    return {but_last: (etree.XPath(step + ("[position() < last()]" if but_last else ""), namespaces=NS),
                       [etree.XPath(p.format(r=step + ("[position() < last()]" if but_last else "")),
                                    namespaces=NS, smart_strings=False) for p in paths])
            for but_last in (False, True)}
plan = {clark(c): [(clark(step), compiled(step, paths)) for step, paths in records] for c, records in PLAN.items()}
REF = clark("r:SPEC-OBJECT-REF")
line = attrgetter("sourceline")
columns, lines = [], []
def take(container, last):
    count = len(container)
    pending = container[-1] if count and not last else None
    if pending is not None and isinstance(pending.tag, str):
        count -= 1
    else:
        pending = None
    for tag, queries in plan[container.tag]:
        records, paths = queries[pending is not None and pending.tag == tag]
        lines.extend(map(line, records(container)))
        for path in paths:
            columns.extend(path(container))
    if not plan[container.tag]:  # hierarchy trees: their object references
        for top in container[:count]:
            columns.extend(top.itertext(REF))
    del container[:count]
t = time.process_time()
data = open(sys.argv[1], "rb").read()
parser = etree.XMLPullParser(events=("start",), tag=list(plan), resolve_entities=False, no_network=True,
                             load_dtd=False, huge_tree=False)
active = None
for offset in range(0, len(data), 1 << 15):
    parser.feed(data[offset:offset + (1 << 15)])
    for _event, element in parser.read_events():
        if active is not None:
            if any(a is active for a in element.iterancestors()):
                continue
            take(active, True)
        active = element
    if active is not None:
        take(active, False)
parser.close()
if active is not None:
    take(active, True)
print(time.process_time() - t, peak_kib())
"""

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
                bare = min(measure(COLUMNS, str(path), fmt)[0] for _ in range(args.repeat))
                ours = [measure(READ, str(path), str(n)) for _ in range(args.repeat)]
                objects = min(measure(READ, str(path), str(n), "objects")[0] for _ in range(args.repeat))
                rows.append((fmt, n, path.stat().st_size / 1e6, min(t for t, _ in floor), min(t for t, _ in ours),
                             min(m for _, m in floor), min(m for _, m in ours), model_mib, touch, objects, bare))
    print("| format | elements | MB | floor CPU s | floor + touch s | bare columns s | tracecheck CPU s | ratio "
          "| + objects s | floor MiB | tracecheck MiB | mem ratio | same model from thread JSON MiB |")
    print("|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|")
    for fmt, n, mb, ft, tt, fm, tm, jm, touch, objects, bare in rows:
        print(f"| {fmt} | {n:,} | {mb:.1f} | {ft:.2f} | {touch:.2f} ({touch / ft:.2f}x) | {bare:.2f} ({bare / ft:.2f}x) "
              f"| {tt:.2f} | {tt / ft:.2f}x | {objects:.2f} ({objects / ft:.2f}x) | {fm:.0f} | {tm:.0f} | {tm / fm:.2f}x "
              f"| {jm:.0f} |")
    print("Target: 1.5x the floor (lxml iterparse with clearing of the same file). 'bare columns': the raw strings")
    print("of the columns by XPath over chunked pull parsing, without checks, typing or assembly (see COLUMNS).")


if __name__ == "__main__":
    main()
