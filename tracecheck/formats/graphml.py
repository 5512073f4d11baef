"""GraphML (``http://graphml.graphdrawing.org/xmlns``): nodes are elements, edges links.

Mapping (``[formats.graphml]``; defaults in brackets). Each option names the
``attr.name`` of a GraphML ``key``:

``kind`` ["kind"], ``name`` ["name"], ``text`` ["text"], ``parent`` ["parent"]
    node keys holding those element fields; every other node key becomes an attribute
    under its ``attr.name``, typed by ``attr.type`` (boolean, int, long, float, double,
    string). A node nested in another node's subgraph has that node as ``parent`` unless
    its ``parent`` data says otherwise.
``relation`` ["relation"]
    the edge key holding the relation; other edge keys become link attributes. The
    edge's ``id`` XML attribute is the link id.
``default_kind``, ``default_relation`` [unset]
    used when a node has no kind or an edge no relation; unset, that is an input error.

Graph-level data of the top graph becomes the model's ``meta``. A key's ``<default>``
applies to every node or edge without data for it (GraphML primer, section 2.4). Keys
without ``attr.name`` (drawing data of graph editors) are skipped. Lists, which GraphML
lacks, are written as JSON text in a string key whose ``<desc>`` is ``tracecheck:json``
and read back as lists. The edge direction is always source -> target.

The reader streams the document (:func:`xmlsafe.batches`: the nodes and edges finished
in each parsed chunk are read together by XPath columns, then deleted), so memory
follows the size of the model, not of the XML tree.
"""

from __future__ import annotations

import io
import json
from collections.abc import Mapping
from dataclasses import dataclass
from itertools import repeat
from operator import attrgetter
from typing import Any

import numpy as np
from lxml import etree

from tracecheck.collection import collection_paused
from tracecheck.errors import InputError
from tracecheck.formats import register, xmlsafe
from tracecheck.formats.mapping import (
    adapter_options,
    check_xml_text,
    format_scalar,
    json_list,
    parse_bool,
    value_type,
)
from tracecheck.model import Element, Link, Model

__all__ = ["GraphML", "parse", "write", "NAMESPACE", "OPTIONS"]

NAMESPACE = "http://graphml.graphdrawing.org/xmlns"
JSON_MARK = "tracecheck:json"
_N = "{" + NAMESPACE + "}"
_KEY, _GRAPH, _NODE, _EDGE, _DATA = _N + "key", _N + "graph", _N + "node", _N + "edge", _N + "data"
_HYPEREDGE, _DEFAULT, _DESC = _N + "hyperedge", _N + "default", _N + "desc"

OPTIONS = {
    "kind": ("kind", "str"),
    "name": ("name", "str"),
    "text": ("text", "str"),
    "parent": ("parent", "str"),
    "relation": ("relation", "str"),
    "default_kind": (None, "str?"),
    "default_relation": (None, "str?"),
}
_FIELDS = ("kind", "name", "text", "parent")
_CONVERT = {
    "string": str,
    "boolean": parse_bool,
    "int": int,
    "long": int,
    "float": float,
    "double": float,
}
_TYPE_OF = {"str": "string", "bool": "boolean", "int": "long", "float": "double", "list": "string"}


@dataclass(frozen=True, slots=True)
class _Key:
    name: str
    domain: str
    convert: Any
    as_json: bool
    default: Any
    plain: bool  # a string key: its data is taken as written


class _Reader:
    """State of one streaming read: declared keys and what was built.

    Only end events are used: when a node or edge ends, its data children are complete,
    and its enclosing graph (and, for a nested graph, the enclosing node) are still in
    the tree, so the nesting that gives ``parent`` can be read off it.
    """

    def __init__(self, origin: str, options: Mapping[str, Any]) -> None:
        self.origin = origin
        self.options = adapter_options(options, "graphml", OPTIONS)
        self.names = tuple(self.options[f] for f in _FIELDS)
        self.keys: dict[str, _Key] = {}
        self.columns = xmlsafe.RecordColumns(origin)
        self.relation_key = self.options["relation"]
        self.graph: Any = None  # the graph holding the last node read, and the node owning it
        self.graph_owner: str | None = None
        self.meta: dict[str, Any] = {}
        self.meta_done = False
        self.skipped: set[str] = set()  # keys without attr.name
        self.defaults: dict[str, list[tuple[str, Any]]] = {"node": [], "edge": [], "graph": []}
        self.plain: tuple[int, dict[str, str]] | None = None  # plain_names, for a number of keys

    def fail(self, line: int | None, message: str) -> InputError:
        where = f"{self.origin}:{line}" if line else self.origin
        return InputError(f"{where}: {message}")

    # --- keys and values -------------------------------------------------------------

    def add_key(self, elem: Any) -> None:
        key_id, name = elem.get("id"), elem.get("attr.name")
        if key_id is None:
            raise self.fail(elem.sourceline, "a <key> has no 'id'.")
        if name is None:  # drawing data of graph editors: not part of the model
            self.skipped.add(key_id)
            return
        type_name = elem.get("attr.type", "string")
        if type_name not in _CONVERT:
            raise self.fail(elem.sourceline, f"key {key_id!r} has unknown attr.type {type_name!r}.")
        desc = elem.find(_DESC)
        as_json = desc is not None and (desc.text or "").strip() == JSON_MARK
        convert = _CONVERT[type_name]
        key = _Key(name, elem.get("for", "all"), convert, as_json, None, convert is str and not as_json)
        default = elem.find(_DEFAULT)
        if default is not None:
            value = self.value(key, default.text or "", default.sourceline, f"the default of key {key_id!r}")
            key = _Key(key.name, key.domain, key.convert, key.as_json, value, key.plain)
            for domain in ("node", "edge", "graph"):
                if key.domain in (domain, "all"):
                    self.defaults[domain].append((name, value))
        self.keys[key_id] = key

    def plain_names(self) -> dict[str, str]:
        """Key id -> attr.name of the string keys (whose data is taken as written)."""
        if self.plain is None or self.plain[0] != len(self.keys):
            self.plain = (len(self.keys), {key_id: key.name for key_id, key in self.keys.items() if key.plain})
        return self.plain[1]

    def value(self, key: _Key, text: str, line: int | None, what: str) -> Any:
        try:
            value = key.convert(text if key.convert is str else text.strip())
            return json.loads(value) if key.as_json else value
        except ValueError as error:
            raise self.fail(line, f"data for {key.name!r} of {what}: {error}.") from None

    def data(self, elem: Any, what: Any, domain: str, children: Any = None) -> dict[str, Any]:
        """The typed data of a node, edge or graph, with key defaults filled in.

        ``children`` are the ``<data>`` elements to read (by default all of ``elem``'s).

        ``what`` is a callable giving the owner's description, built only for a message.
        """
        values: dict[str, Any] = {}
        keys = self.keys
        for child in elem.iterchildren(_DATA) if children is None else children:
            key_id = child.get("key")
            key = keys.get(key_id)
            if key is None:
                if key_id not in self.skipped:
                    raise self.fail(child.sourceline, f"data of {what()} refers to undeclared key {key_id!r}.")
                continue
            if key.plain:
                values[key.name] = child.text or ""
            else:
                values[key.name] = self.value(key, child.text or "", child.sourceline, what())
        defaults = self.defaults[domain]
        if defaults:
            setdefault = values.setdefault
            for name, default in defaults:
                setdefault(name, default)
        return values

    # --- records ---------------------------------------------------------------------

    def node(self, elem: Any) -> None:
        node_id = elem.get("id")
        line = elem.sourceline
        if not node_id:
            raise self.fail(line, "a <node> has no 'id'.")
        if not self.meta_done:
            self.graph_meta(elem.getparent())
        values = self.data(elem, lambda: f"node {node_id!r}", "node")
        kind_key, name_key, text_key, parent_key = self.names
        pop = values.pop
        kind = pop(kind_key, None)
        if kind is None or kind == "":
            kind = self.options["default_kind"]
            if not kind:
                raise self.fail(line, f"node {node_id!r} has no {kind_key!r} data "
                                "(set formats.graphml.default_kind to supply one).")
        name, text, parent = pop(name_key, None), pop(text_key, None), pop(parent_key, None)
        if parent is None:
            graph = elem.getparent()
            if graph is not self.graph:  # the proxy is kept alive, so lxml hands back the same one
                above = graph.getparent()
                self.graph = graph
                self.graph_owner = above.get("id") if above is not None and above.tag == _NODE else None
            parent = self.graph_owner
        columns = self.columns
        columns.element_ids.append(node_id)
        columns.element_kinds.append(kind if kind.__class__ is str else str(kind))
        columns.element_names.append(_text(name))
        columns.element_texts.append(_text(text))
        columns.element_parents.append(_text(parent) or None)
        columns.element_attrs.append(values)
        columns.element_lines.append(line)

    def edge(self, elem: Any) -> None:
        line = elem.sourceline
        source, target = elem.get("source"), elem.get("target")
        if not source or not target:
            raise self.fail(line, "an <edge> needs both 'source' and 'target'.")
        if not self.meta_done:
            self.graph_meta(elem.getparent())
        values = self.data(elem, lambda: f"edge {source!r} -> {target!r}", "edge")
        relation = values.pop(self.relation_key, None) or self.options["default_relation"]
        if not relation:
            raise self.fail(line, f"edge {source!r} -> {target!r} has no {self.relation_key!r} data "
                            "(set formats.graphml.default_relation to supply one).")
        columns = self.columns
        columns.link_sources.append(source)
        columns.link_targets.append(target)
        columns.link_relations.append(relation if relation.__class__ is str else str(relation))
        columns.link_ids.append(elem.get("id"))
        columns.link_attrs.append(values)
        columns.link_lines.append(line)

    def graph_meta(self, graph: Any) -> None:
        """Graph-level data of the top graph, read before its children are released."""
        if graph.tag == _GRAPH and graph.getparent() is not None and graph.getparent().tag == _N + "graphml":
            self.meta = self.data(graph, lambda: "the graph", "graph")
            self.meta_done = True


def _text(value: Any) -> str | None:
    return None if value is None else str(value)


_NS = {"g": NAMESPACE}


def _xpath(path: str) -> Any:
    return etree.XPath(path, namespaces=_NS, smart_strings=False)


class _Queries:
    """Columns of a batch of one record tag, each one compiled XPath evaluated in C.

    The batch is the graph's children with that tag, all but the last of them when
    ``but_last`` (the graph's last child, which the parser may still be inside). Of
    every ``<data>`` the first child node is taken: when it is text, that is what
    ``.text`` gives, which is how the one-by-one path reads a value.
    """

    def __init__(self, record: str, but_last: bool) -> None:
        r = f"g:{record}[position() < last()]" if but_last else f"g:{record}"
        self.records, self.count = _xpath(r), _xpath(f"count(g:{record})")
        self.ids, self.sources, self.targets = _xpath(f"{r}/@id"), _xpath(f"{r}/@source"), _xpath(f"{r}/@target")
        self.keys, self.values = _xpath(f"{r}/g:data/@key"), _xpath(f"{r}/g:data/node()[1]")


_QUERIES = {(tag, but_last): _Queries(tag[len(_N):], but_last) for tag in (_NODE, _EDGE) for but_last in (False, True)}
_ELEMENTS, _OTHERS = _xpath("count(*)"), _xpath("count(g:data) + count(g:desc)")
_LINE = attrgetter("sourceline")


def parse(data: bytes, origin: str, options: Mapping[str, Any] | None = None) -> Model:
    """Parse GraphML bytes into a :class:`Model` (streaming).

    Raises
    ------
    InputError
        Refused or malformed XML, a root that is not GraphML, a node without id or kind,
        an edge without ends or relation, a value that does not match its key's type.
    """
    with collection_paused():  # see tracecheck.collection
        return _parse(data, origin, options)


def _parse(data: bytes, origin: str, options: Mapping[str, Any] | None) -> Model:
    reader = _Reader(origin, options or {})
    keys_done = False
    for element, count, last, pending in xmlsafe.batches(data, origin, containers=(_GRAPH,),
                                                         root=_N + "graphml", format_name="GraphML"):
        if not keys_done:  # the keys come before the first graph (GraphML primer, section 2.4)
            document = element if count is None else element.getroottree().getroot()
            for key in document.iterchildren(_KEY):
                reader.add_key(key)
            keys_done = True
        if count is not None:
            _records(reader, element, count, last, None if pending is None else pending.tag)
    return Model.from_columns(reader.columns, meta=reader.meta, origin=origin, format="graphml")


def _records(reader: _Reader, graph: Any, count: int, last: bool, in_progress: str | None) -> None:
    """Read the first ``count`` children of a graph: by columns when it can, else one by one.

    ``in_progress`` is the tag of the child after them, which the parser may still be
    inside (the counts below leave it out).
    """
    top = graph.getparent() is not None and graph.getparent().tag == _N + "graphml"
    nodes, edges = _QUERIES[_NODE, in_progress == _NODE], _QUERIES[_EDGE, in_progress == _EDGE]
    n_nodes = int(nodes.count(graph)) - (in_progress == _NODE)
    n_edges = int(edges.count(graph)) - (in_progress == _EDGE)
    if top and not reader.meta_done:
        # The top graph's own <data> before its first record: the model's meta. They
        # may come over several batches; the pending child is read with the next one.
        children = [kid for kid in graph[:count] if kid.tag == _DATA]
        reader.meta.update(reader.data(graph, lambda: "the graph", "graph", children))
        reader.meta_done = bool(last or n_nodes or n_edges or in_progress in (_NODE, _EDGE))
    # By columns only when every element child is a node, an edge, or graph-level
    # <data>/<desc> (which the one-by-one path passes over as well).
    elements = int(_ELEMENTS(graph)) - (in_progress is not None)
    others = int(_OTHERS(graph)) - (in_progress in (_DATA, _DESC))
    if top and elements == n_nodes + n_edges + others:
        node_columns = _node_columns(reader, graph, nodes, n_nodes) if n_nodes else ()
        edge_columns = _edge_columns(reader, graph, edges, n_edges) if n_edges else ()
        if node_columns is not None and edge_columns is not None:
            _extend(reader.columns, node_columns, edge_columns)
            return
    # One by one, in the order their ends occur (a nested graph's records before the
    # node holding it), with the same code that words every error.
    def hyperedge(elem: Any) -> None:
        raise reader.fail(elem.sourceline, "hyperedges are not supported; use binary edges.")

    xmlsafe.walk_records(graph, count, {_NODE: reader.node, _EDGE: reader.edge, _HYPEREDGE: hyperedge})


def _extend(columns: xmlsafe.RecordColumns, nodes: tuple, edges: tuple) -> None:
    if nodes:
        ids, fields, attributes, lines = nodes
        columns.element_ids.extend(ids)
        for column, values in zip((columns.element_kinds, columns.element_names, columns.element_texts,
                                   columns.element_parents), fields, strict=True):
            column.extend(values)
        columns.element_attrs.extend_flat(*attributes)
        columns.element_lines.extend(lines)
    if edges:
        sources, targets, ids, fields, attributes, lines = edges
        columns.link_sources.extend(sources)
        columns.link_targets.extend(targets)
        columns.link_relations.extend(fields[0])
        columns.link_ids.extend(ids)
        columns.link_attrs.extend_flat(*attributes)
        columns.link_lines.extend(lines)


def _fields(reader: _Reader, graph: Any, queries: _Queries, size: int, names: tuple[str, ...]) -> tuple | None:
    """The ``<data>`` of a batch of ``size`` records: one list per field in ``names``
    (``None`` where a record has none), and the rest as flat attributes.

    ``None`` unless every ``<data>`` belongs to a declared string key and holds text,
    no record has a field twice, and the records' domain has no key defaults: the
    one-by-one path handles the rest (and says what is wrong).
    """
    records = queries.records(graph)
    counts = np.fromiter(map(len, records), dtype=np.int64, count=size)
    lines = list(map(_LINE, records))
    del records  # see xmlsafe.batches: the records are deleted next
    total = int(counts.sum())
    keys = queries.keys(graph)
    if len(keys) != total:  # a child that is not a <data> with a key
        return None
    values = queries.values(graph) if total else []
    if len(values) != total or (total and set(map(type, values)) != {str}):
        return None
    plain = reader.plain_names()
    try:
        key_names = [plain[key] for key in keys]
    except KeyError:
        return None
    code_of = {name: code for code, name in enumerate(names)}
    codes = np.fromiter(map(code_of.get, key_names, repeat(len(names))), dtype=np.int64, count=total)
    owner = np.repeat(np.arange(size), counts)
    value_array = np.array(values, dtype=object) if total else np.empty(0, dtype=object)
    columns = []
    for code in range(len(names)):
        at = np.flatnonzero(codes == code)
        owners = owner[at]
        if len(owners) > 1 and not (np.diff(owners) > 0).all():
            return None  # a field given twice: the one-by-one path keeps the last
        column = np.full(size, None, dtype=object)
        column[owners] = value_array[at]
        columns.append(column.tolist())
    rest = np.flatnonzero(codes == len(names))
    rest_counts = np.bincount(owner[rest], minlength=size).tolist()
    attributes = (rest_counts, [key_names[i] for i in rest.tolist()], value_array[rest].tolist())
    return columns, attributes, lines


def _node_columns(reader: _Reader, graph: Any, queries: _Queries, size: int) -> tuple | None:
    ids = queries.ids(graph)
    if len(ids) != size or "" in ids or reader.defaults["node"]:
        return None
    found = _fields(reader, graph, queries, size, reader.names)
    if found is None:
        return None
    (kinds, labels, texts, parents), attributes, lines = found
    if None in kinds or "" in kinds:
        default = reader.options["default_kind"]
        if not default:
            return None  # the one-by-one path words the error
        kinds = [kind or default for kind in kinds]
    if "" in parents:
        parents = [parent or None for parent in parents]
    return ids, (kinds, labels, texts, parents), attributes, lines


def _edge_columns(reader: _Reader, graph: Any, queries: _Queries, size: int) -> tuple | None:
    sources, targets = queries.sources(graph), queries.targets(graph)
    if len(sources) != size or len(targets) != size or "" in sources or "" in targets:
        return None
    if reader.defaults["edge"]:
        return None
    ids = queries.ids(graph)
    if len(ids) != size:
        if ids:
            return None  # some edges have an id: which ones, the one-by-one path knows
        ids = [None] * size
    found = _fields(reader, graph, queries, size, (reader.relation_key,))
    if found is None:
        return None
    (relations,), attributes, lines = found
    if None in relations or "" in relations:
        default = reader.options["default_relation"]
        if not default:
            return None  # the one-by-one path words the error
        relations = [relation or default for relation in relations]
    return sources, targets, ids, (relations,), attributes, lines


# --- writing ---------------------------------------------------------------------------


def _key_table(model: Model, fields: Mapping[str, str], relation: str) -> dict[tuple[str, str, str], str]:
    """Key ids for (domain, attr.name, value type), numbered in sorted order."""
    wanted: set[tuple[str, str, str]] = set()
    for name in model.meta:
        wanted.add(("graph", name, value_type(model.meta[name])))
    for element in model.elements:
        for field in _FIELDS:
            if field == "kind" or getattr(element, field) is not None:
                wanted.add(("node", fields[field], "str"))
        for name, value in element.attributes.items():
            if name in fields.values():
                raise InputError(
                    f"element {element.id!r}: attribute {name!r} has the name of the GraphML key "
                    f"for an element field; set another name in [formats.graphml]."
                )
            wanted.add(("node", name, value_type(value)))
    for link in model.links:
        wanted.add(("edge", relation, "str"))
        for name, value in link.attributes.items():
            if name == relation:
                raise InputError(f"link {link.triple}: attribute {name!r} has the name of the "
                                 "relation key; set formats.graphml.relation to another name.")
            wanted.add(("edge", name, value_type(value)))
    return {entry: f"d{n}" for n, entry in enumerate(sorted(wanted))}


def _data(xf: Any, keys: Mapping, domain: str, name: str, value: Any, what: str) -> None:
    key = keys[(domain, name, value_type(value))]
    text = json_list(value) if isinstance(value, list) else (
        value if isinstance(value, str) else format_scalar(value))
    with xf.element(_DATA, key=key):
        xf.write(check_xml_text(text, what))
    xf.write("\n")


def write(model: Model, options: Mapping[str, Any] | None = None) -> bytes:
    """Serialise ``model`` as GraphML (UTF-8, one node or edge per line group).

    Raises
    ------
    InputError
        A value XML cannot carry, or an attribute named like a field key.
    """
    opts = adapter_options(options or {}, "graphml", OPTIONS)
    fields = {f: opts[f] for f in _FIELDS}
    keys = _key_table(model, fields, opts["relation"])
    out = io.BytesIO()
    with etree.xmlfile(out, encoding="utf-8") as xf:
        xf.write_declaration()
        with xf.element(_N + "graphml", nsmap={None: NAMESPACE}):
            xf.write("\n")
            for (domain, name, kind), key_id in sorted(keys.items(), key=lambda kv: int(kv[1][1:])):
                attributes = {"id": key_id, "for": domain, "attr.name": name,
                              "attr.type": _TYPE_OF[kind]}
                with xf.element(_KEY, attributes):
                    if kind == "list":
                        with xf.element(_DESC):
                            xf.write(JSON_MARK)
                xf.write("\n")
            with xf.element(_GRAPH, edgedefault="directed"):
                xf.write("\n")
                for name, value in model.meta.items():
                    _data(xf, keys, "graph", name, value, f"model {name!r}")
                for element in model.elements:
                    _write_node(xf, keys, fields, element)
                for link in model.links:
                    _write_edge(xf, keys, opts["relation"], link)
            xf.write("\n")
    return out.getvalue() + b"\n"


def _write_node(xf: Any, keys: Mapping, fields: Mapping[str, str], element: Element) -> None:
    what = f"element {element.id!r}"
    with xf.element(_NODE, id=check_xml_text(element.id, what)):
        xf.write("\n")
        for field in _FIELDS:
            value = getattr(element, field)
            if value is not None:
                _data(xf, keys, "node", fields[field], value, f"{what} {field}")
        for name, value in element.attributes.items():
            _data(xf, keys, "node", name, value, f"{what} attribute {name!r}")
    xf.write("\n")


def _write_edge(xf: Any, keys: Mapping, relation: str, link: Link) -> None:
    what = f"link {link.source} {link.relation} {link.target}"
    attributes = {"source": check_xml_text(link.source, what), "target": check_xml_text(link.target, what)}
    if link.id is not None:
        attributes["id"] = check_xml_text(link.id, what)
    with xf.element(_EDGE, attributes):
        xf.write("\n")
        _data(xf, keys, "edge", relation, link.relation, what)
        for name, value in link.attributes.items():
            _data(xf, keys, "edge", name, value, f"{what} attribute {name!r}")
    xf.write("\n")


class GraphML:
    name = "graphml"
    extensions = (".graphml", ".xml")

    def sniff(self, head: bytes, name: str) -> bool:
        if xmlsafe.root_name(head) == "graphml":
            return True
        return name.lower().endswith(".graphml") and xmlsafe.looks_like_xml(head)

    def read(self, data: bytes, origin: str, options: Mapping[str, Any]) -> Model:
        return parse(data, origin, options)

    def write(self, model: Model, options: Mapping[str, Any] | None = None) -> bytes:
        return write(model, options)


register(GraphML())
