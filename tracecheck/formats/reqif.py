"""ReqIF 1.2 (OMG, namespace ``http://www.omg.org/spec/ReqIF/20110401/reqif.xsd``).

Reading (``.reqif``; ``.reqifz`` archives through :mod:`tracecheck.formats.reqifz`):

* every ``SPEC-OBJECT`` is an element: its id is the ``IDENTIFIER``, its name the
  ``LONG-NAME``, its kind the ``LONG-NAME`` of its ``SPEC-OBJECT-TYPE`` lower-cased with
  spaces as hyphens (DESIGN.md);
* every ``SPEC-RELATION`` is a link ``SOURCE relation TARGET``, the relation being the
  relation type's ``LONG-NAME`` normalised the same way; a reference to an identifier
  that no ``SPEC-OBJECT`` has is kept as written (the schema cannot catch a dangling
  relation; the ``dangling-link`` rule does);
* ``SPEC-HIERARCHY`` nesting gives ``parent`` (the object of the enclosing hierarchy);
* other attribute values become attributes under their definition's ``LONG-NAME``:
  string and date as text, integer as int, real as float, boolean as bool,
  enumeration as the enum values' ``LONG-NAME`` (a list when ``MULTI-VALUED``), XHTML
  flattened to text for diffing; a definition's ``DEFAULT-VALUE`` fills in missing
  values.

Options (``[formats.reqif]``; defaults in brackets):

``kinds`` [{}], ``relations`` [{}]
    tables from a type's ``LONG-NAME`` to the kind / relation to use instead of the
    normalised name (e.g. ``"Functional Requirement" = "requirement"``).
``text`` ["ReqIF.Text"]
    the attribute definition whose value is the element's ``text``.
``name`` ["LONG-NAME"]
    ``LONG-NAME`` or the attribute definition whose value is the ``name``.
``id_attribute`` ["tracecheck.id"], ``parent_attribute`` ["tracecheck.parent"]
    attribute definitions that, when present, give the id and parent explicitly. The
    writer uses them only where ReqIF cannot say it otherwise: ids that are not XML
    names (``IDENTIFIER`` is an ``xsd:ID``), repeated ids, link ids, and parents that
    are missing, cyclic or nested deeper than :data:`MAX_DEPTH`.
``source_attribute`` ["tracecheck.source"], ``target_attribute`` ["tracecheck.target"]
    likewise for a link end that names no element and that a reference cannot carry
    exactly (empty, or with surrounding whitespace).

Writing produces ReqIF 1.2 that validates against the OMG schema. Lists of strings are
multi-valued enumerations; other lists are JSON text in a string attribute whose
definition's ``DESC`` is ``tracecheck:json``. The model's ``meta`` travels in a
``REQ-IF-TOOL-EXTENSION``. The output is deterministic: every ``LAST-CHANGE`` and the
``CREATION-TIME`` are :data:`EPOCH` unless the caller passes a timestamp.
"""

from __future__ import annotations

import io
import json
import re
from collections.abc import Mapping
from dataclasses import dataclass
from itertools import repeat
from operator import attrgetter
from typing import Any

from lxml import etree

from tracecheck import __version__
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

__all__ = ["ReqIF", "parse", "write", "NAMESPACE", "XHTML", "OPTIONS", "EPOCH", "MAX_DEPTH"]

NAMESPACE = "http://www.omg.org/spec/ReqIF/20110401/reqif.xsd"
XHTML = "http://www.w3.org/1999/xhtml"
EXTENSION = "urn:x-tracecheck:reqif-extension:1"
EPOCH = "1970-01-01T00:00:00Z"
MAX_DEPTH = 100  # libxml2 refuses documents nested deeper than 256 without "huge tree"
JSON_MARK = "tracecheck:json"

_R = "{" + NAMESPACE + "}"
_H = "{" + XHTML + "}"
_X = "{" + EXTENSION + "}"

OPTIONS = {
    "kinds": ({}, "map"),
    "relations": ({}, "map"),
    "text": ("ReqIF.Text", "str"),
    "name": ("LONG-NAME", "str"),
    "id_attribute": ("tracecheck.id", "str"),
    "parent_attribute": ("tracecheck.parent", "str"),
    "source_attribute": ("tracecheck.source", "str"),
    "target_attribute": ("tracecheck.target", "str"),
}

_VALUE_KINDS = ("BOOLEAN", "DATE", "ENUMERATION", "INTEGER", "REAL", "STRING", "XHTML")
_VALUE_TAGS = {_R + f"ATTRIBUTE-VALUE-{k}": k for k in _VALUE_KINDS}
_DEFINITION_REF = {k: _R + f"ATTRIBUTE-DEFINITION-{k}-REF" for k in _VALUE_KINDS}
_VALUES, _DEFINITION = _R + "VALUES", _R + "DEFINITION"
_SOURCE, _TARGET, _TYPE = _R + "SOURCE", _R + "TARGET", _R + "TYPE"
_OBJECT_REF, _RELATION_TYPE_REF = _R + "SPEC-OBJECT-REF", _R + "SPEC-RELATION-TYPE-REF"
_DEFINITION_TAGS = {_R + f"ATTRIBUTE-DEFINITION-{k}": k for k in _VALUE_KINDS}
_SCALAR = {"BOOLEAN": parse_bool, "INTEGER": int, "REAL": float, "STRING": str, "DATE": str}
_BLOCKS = frozenset(
    "address blockquote caption dd div dl dt h1 h2 h3 h4 h5 h6 li ol p pre table td th tr ul".split()
)


def normalise(name: str) -> str:
    """A type's ``LONG-NAME`` as a kind or relation: lower-case, spaces as hyphens."""
    return re.sub(r"\s+", "-", name.strip()).lower()


# --- reading ---------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Definition:
    name: str
    kind: str  # one of _VALUE_KINDS
    multi: bool
    as_json: bool
    default: Any


class _Reader:
    """State of one streaming read of a ReqIF document."""

    def __init__(self, origin: str, options: Mapping[str, Any]) -> None:
        self.origin = origin
        self.opts = adapter_options(options, "reqif", OPTIONS)
        self.enum_names: dict[str, str] = {}
        self.definitions: dict[str, _Definition] = {}
        self.types: dict[str, tuple[str, list[tuple[str, _Definition]]]] = {}
        self.records: list[tuple] = []  # one per SPEC-OBJECT, built into Elements at the end
        self.links: list[tuple] = []  # one per SPEC-RELATION, built into Links at the end
        self.exact: dict[str, str] = {}  # type IDENTIFIER -> kind or relation written by tracecheck
        self.ident_to_id: dict[str, str] = {}  # only where the id differs from IDENTIFIER
        self.parent_of: dict[str, str] = {}  # child IDENTIFIER -> parent IDENTIFIER
        # Objects of SPEC-HIERARCHYs that ended, by nesting depth, waiting for their parent.
        self.waiting: dict[int, list[str]] = {}
        self.title: str | None = None
        self.meta: dict[str, Any] | None = None

    def fail(self, line: int | None, message: str) -> InputError:
        where = f"{self.origin}:{line}" if line else self.origin
        return InputError(f"{where}: {message}")

    def ref(self, elem: Any, children: dict[str, Any], outer: str, inner: str, what: str) -> str:
        """The text of ``elem/outer/inner`` (both in the ReqIF namespace), stripped.

        ``children`` maps ``elem``'s child tags to children (built once per record).
        """
        text = _leaf_text(children.get(_R + outer), _R + inner)
        if not text or not text.strip():
            raise self.fail(elem.sourceline, f"{what} has no {outer}/{inner}.")
        return text.strip()

    # --- declarations ------------------------------------------------------------------

    def enumeration(self, elem: Any) -> None:
        for value in elem.iter(_R + "ENUM-VALUE"):
            ident = value.get("IDENTIFIER")
            self.enum_names[ident] = value.get("LONG-NAME", ident)

    def spec_type(self, elem: Any, relation: bool) -> None:
        ident = elem.get("IDENTIFIER")
        if not ident:
            raise self.fail(elem.sourceline, "a spec type has no IDENTIFIER.")
        long_name = elem.get("LONG-NAME") or ident
        table = self.opts["relations" if relation else "kinds"]
        defaults: list[tuple[str, _Definition]] = []
        for definition in elem.iterfind(_R + "SPEC-ATTRIBUTES/*"):
            kind = _DEFINITION_TAGS.get(definition.tag)
            if kind is None:
                continue
            def_id = definition.get("IDENTIFIER")
            entry = _Definition(
                definition.get("LONG-NAME") or def_id,
                kind,
                definition.get("MULTI-VALUED", "false").strip() in ("true", "1"),
                definition.get("DESC") == JSON_MARK,
                None,
            )
            self.definitions[def_id] = entry
            default = definition.find(_R + "DEFAULT-VALUE/*")
            if default is not None:
                value = self.value(default, entry, "a DEFAULT-VALUE")
                entry = _Definition(entry.name, kind, entry.multi, entry.as_json, value)
                self.definitions[def_id] = entry
                defaults.append((def_id, entry))
        self.types[ident] = (table.get(long_name) or normalise(long_name), defaults)

    # --- values ------------------------------------------------------------------------

    def value(self, elem: Any, definition: _Definition, what: str) -> Any:
        kind = definition.kind
        try:
            if kind == "XHTML":
                the_value = _first(elem, _R + "THE-VALUE")
                return "" if the_value is None else flatten_xhtml(the_value)
            if kind == "ENUMERATION":
                names = [self.enum_names.get(r.text.strip(), r.text.strip())
                         for r in elem.iterfind(_R + "VALUES/" + _R + "ENUM-VALUE-REF") if r.text]
                return names if definition.multi or len(names) != 1 else names[0]
            text = elem.get("THE-VALUE")
            if text is None:
                raise ValueError("THE-VALUE is missing")
            value = _SCALAR[kind](text if kind == "STRING" else text.strip())
            return json.loads(value) if definition.as_json else value
        except ValueError as error:
            raise self.fail(elem.sourceline, f"{what}: attribute {definition.name!r}: {error}.") from None

    def values(self, values: Any, type_defaults: list, what: str) -> dict[str, Any]:
        """Attribute values by definition name, defaults filled in."""
        found: dict[str, Any] = {}
        seen: set[str] = set()
        for item in () if values is None else values:
            kind = _VALUE_TAGS.get(item.tag)
            if kind is None:
                continue
            def_id = ""
            for part in item:  # DEFINITION, and THE-VALUE or VALUES for XHTML and enumerations
                if part.tag == _DEFINITION:
                    def_id = (_leaf_text(part, _DEFINITION_REF[kind]) or "").strip()
                    break
            definition = self.definitions.get(def_id)
            if definition is None:
                raise self.fail(item.sourceline, f"{what}: a value refers to an unknown attribute definition.")
            seen.add(def_id)
            if definition.kind == "STRING" and not definition.as_json and item.get("THE-VALUE") is not None:
                found[definition.name] = item.get("THE-VALUE")
            else:
                found[definition.name] = self.value(item, definition, what)
        for def_id, definition in type_defaults:
            if def_id not in seen:
                found.setdefault(definition.name, definition.default)
        return found

    # --- records -----------------------------------------------------------------------

    def spec_object(self, elem: Any) -> None:
        line, ident = elem.sourceline, elem.get("IDENTIFIER")
        if not ident:
            raise self.fail(line, "a SPEC-OBJECT has no IDENTIFIER.")
        what = f"SPEC-OBJECT {ident!r}"
        children = {child.tag: child for child in elem}
        type_ref = self.ref(elem, children, "TYPE", "SPEC-OBJECT-TYPE-REF", what)
        if type_ref not in self.types:
            raise self.fail(line, f"{what} refers to an unknown SPEC-OBJECT-TYPE {type_ref!r}.")
        _kind, defaults = self.types[type_ref]
        attributes = self.values(children.get(_VALUES), defaults, what)
        opts = self.opts
        element_id = _as_text(attributes.pop(opts["id_attribute"], None)) or ident
        if element_id != ident:
            self.ident_to_id[ident] = element_id
        text = _as_text(attributes.pop(opts["text"], None))
        if opts["name"] == "LONG-NAME":
            name = elem.get("LONG-NAME")
        else:
            name = _as_text(attributes.pop(opts["name"], None))
        parent = _as_text(attributes.pop(opts["parent_attribute"], None))
        self.records.append((ident, element_id, type_ref, name, text, parent, attributes, line))

    def spec_relation(self, elem: Any) -> None:
        line, ident = elem.sourceline, elem.get("IDENTIFIER") or "?"
        what = f"SPEC-RELATION {ident!r}"
        # One pass over the children: the hot path of the reader (most records are links).
        source = target = type_ref = values = None
        for child in elem:
            tag = child.tag
            if tag == _VALUES:
                values = child
            elif len(child) == 1:
                inner = child[0]
                if tag == _SOURCE and inner.tag == _OBJECT_REF:
                    source = (inner.text or "").strip()
                elif tag == _TARGET and inner.tag == _OBJECT_REF:
                    target = (inner.text or "").strip()
                elif tag == _TYPE and inner.tag == _RELATION_TYPE_REF:
                    type_ref = (inner.text or "").strip()
        if not (source and target and type_ref):  # the general path says what is missing
            children = {child.tag: child for child in elem}
            type_ref = self.ref(elem, children, "TYPE", "SPEC-RELATION-TYPE-REF", what)
            source = self.ref(elem, children, "SOURCE", "SPEC-OBJECT-REF", what)
            target = self.ref(elem, children, "TARGET", "SPEC-OBJECT-REF", what)
        if type_ref not in self.types:
            raise self.fail(line, f"{what} refers to an unknown SPEC-RELATION-TYPE {type_ref!r}.")
        _relation, defaults = self.types[type_ref]
        # Most relations carry no values and their types no defaults: skip the call.
        attributes = self.values(values, defaults, what) if values is not None or defaults else {}
        link_id = exact_source = exact_target = None
        if attributes:  # most relations carry none: skip the look-ups
            link_id = _as_text(attributes.pop(self.opts["id_attribute"], None))
            exact_source = _as_text(attributes.pop(self.opts["source_attribute"], None))
            exact_target = _as_text(attributes.pop(self.opts["target_attribute"], None))
        ident_to_id = self.ident_to_id
        source = ident_to_id.get(source, source) if exact_source is None else exact_source
        target = ident_to_id.get(target, target) if exact_target is None else exact_target
        self.links.append((source, target, type_ref, link_id, attributes, line))

    def hierarchy_end(self, elem: Any) -> None:
        obj = self.ref(elem, {c.tag: c for c in elem}, "OBJECT", "SPEC-OBJECT-REF", "a SPEC-HIERARCHY")
        # Children end before their parent, so when a hierarchy at depth d ends, the
        # objects waiting at depth d + 1 are exactly its children.
        depth = sum(1 for _ in elem.iterancestors(_HIERARCHY))
        for child in self.waiting.pop(depth + 1, ()):
            self.parent_of.setdefault(child, obj)
        self.waiting.setdefault(depth, []).append(obj)

    def tool_extension(self, elem: Any) -> None:
        for entry in elem.iter(_X + "type"):
            # Types whose kind or relation is not their normalised LONG-NAME.
            if entry.get("ref") and entry.get("name"):
                self.exact[entry.get("ref")] = entry.get("name")
        model = elem.find(_X + "model")
        if model is None:
            return
        self.meta = {}
        for entry in model.iterfind(_X + "entry"):
            text = entry.text or ""
            kind = entry.get("type", "str")
            convert = {"str": str, "int": int, "float": float, "bool": parse_bool}.get(kind)
            if convert is None:
                raise self.fail(entry.sourceline, f"model entry of unknown type {kind!r}.")
            try:
                self.meta[entry.get("name", "")] = convert(text)
            except ValueError as error:
                raise self.fail(entry.sourceline, f"model entry: {error}.") from None

    def model(self) -> Model:
        """The model as columns: Element and Link objects are built only when asked for."""
        ident_to_id, parent_of = self.ident_to_id, self.parent_of
        names = {ref: self.exact.get(ref, name) for ref, (name, _defaults) in self.types.items()}
        columns = xmlsafe.RecordColumns(self.origin)
        records = self.records
        if records:
            idents, columns.element_ids, type_refs, columns.element_names, columns.element_texts, parents, \
                columns.element_attrs, columns.element_lines = (list(c) for c in zip(*records, strict=True))
            columns.element_kinds = [names[t] for t in type_refs]
            if parent_of:
                for n, (ident, parent) in enumerate(zip(idents, parents, strict=True)):
                    if parent is None and ident in parent_of:
                        parents[n] = ident_to_id.get(parent_of[ident], parent_of[ident])
            columns.element_parents = parents
        if self.links:
            columns.link_sources, columns.link_targets, type_refs, columns.link_ids, columns.link_attrs, \
                columns.link_lines = (list(c) for c in zip(*self.links, strict=True))
            columns.link_relations = [names[t] for t in type_refs]
        meta = self.meta if self.meta is not None else ({"name": self.title} if self.title else {})
        return Model.from_columns(columns, meta=meta, origin=self.origin, format="reqif")


def _first(elem: Any, tag: str) -> Any:
    """The first child of ``elem`` with ``tag`` (``None`` when either is missing).

    ``iterchildren`` filters in C; ``find`` with a path goes through ElementPath and
    was the reader's largest cost.
    """
    if elem is None:
        return None
    for child in elem.iterchildren(tag):
        return child
    return None


def _leaf_text(outer: Any, tag: str) -> str | None:
    """The text of the child of ``outer`` with ``tag`` (``None`` when either is missing)."""
    if outer is None:
        return None
    for child in outer:  # one child in practice; plain iteration beats tag-filtered lookups
        if child.tag == tag:
            return child.text
    return None


def _as_text(value: Any) -> str | None:
    if value is None:
        return None
    if isinstance(value, list):
        return "\n".join(str(v) for v in value)
    return format_scalar(value) if not isinstance(value, str) else value


def flatten_xhtml(the_value: Any) -> str:
    """XHTML content as plain text: blocks on their own lines, markup dropped.

    A single ``<div>`` holding only text (what tracecheck writes) comes back verbatim;
    anything else has each line's surrounding whitespace removed and empty lines dropped,
    so pretty-printing differences between tools do not show up as text changes.
    """
    children = [c for c in the_value if isinstance(c.tag, str)]
    if len(children) == 1 and len(children[0]) == 0 and children[0].tag == _H + "div":
        return children[0].text or ""
    parts: list[str] = [the_value.text or ""]
    _walk(the_value, parts)
    lines = (line.strip() for line in "".join(parts).splitlines())
    return "\n".join(line for line in lines if line)


def _walk(node: Any, parts: list[str]) -> None:
    for child in node:
        if isinstance(child.tag, str):
            local = etree.QName(child).localname
            if local == "br":
                parts.append("\n")
            else:
                block = local in _BLOCKS
                if block:
                    parts.append("\n")
                parts.append(child.text or "")
                _walk(child, parts)
                if block:
                    parts.append("\n")
        parts.append(child.tail or "")


_SPEC_OBJECT, _SPEC_RELATION, _HIERARCHY = _R + "SPEC-OBJECT", _R + "SPEC-RELATION", _R + "SPEC-HIERARCHY"


def parse(data: bytes, origin: str, options: Mapping[str, Any] | None = None) -> Model:
    """Parse ReqIF bytes into a :class:`Model` (streaming).

    Raises
    ------
    InputError
        Refused or malformed XML, a root that is not ``REQ-IF`` in the ReqIF 1.2
        namespace, a reference to an unknown type or attribute definition, a value that
        does not fit its datatype.
    """
    with collection_paused():  # see tracecheck.collection
        return _parse(data, origin, options)


_CONTAINERS = (_R + "SPEC-OBJECTS", _R + "SPEC-RELATIONS", _R + "CHILDREN")
_DECLARATIONS = (_R + "DATATYPE-DEFINITION-ENUMERATION", _R + "SPEC-OBJECT-TYPE", _R + "SPEC-RELATION-TYPE",
                 _R + "TITLE")
_NS = {"r": NAMESPACE, "h": XHTML}


def _xpath(path: str) -> Any:
    return etree.XPath(path, namespaces=_NS, smart_strings=False)


class _RelationQueries:
    """Columns of a batch of SPEC-RELATIONs, each one compiled XPath evaluated in C.

    The batch is the container's SPEC-RELATION children, all but the last when
    ``but_last`` (the parser may still be inside it). Each reference is the first
    child node of the first reference element of the first SOURCE, TARGET or TYPE,
    taken when it is text (which is when ``.text`` finds it); one count of the
    elements two levels down says whether there was nothing else (six a relation: no
    second SOURCE, no VALUES), otherwise the one-by-one path reads the batch.
    """

    def __init__(self, but_last: bool) -> None:
        r = "r:SPEC-RELATION[position() < last()]" if but_last else "r:SPEC-RELATION"
        # Child steps only: libxml2 merges the results of a descendant step per context
        # node with a duplicate check, which grows with the square of the batch.
        self.records, self.count = _xpath(r), _xpath("count(r:SPEC-RELATION)")
        self.inside = _xpath(f"count({r}/*) + count({r}/*/*)")
        self.refs = [_xpath(f"{r}/r:{outer}[1]/r:{inner}[1]/node()[1]")
                     for outer, inner in (("SOURCE", "SPEC-OBJECT-REF"), ("TARGET", "SPEC-OBJECT-REF"),
                                          ("TYPE", "SPEC-RELATION-TYPE-REF"))]


_RELATION_QUERIES = {but_last: _RelationQueries(but_last) for but_last in (False, True)}


class _ObjectQueries:
    """Columns of a batch of SPEC-OBJECTs whose values are strings and XHTML, in C.

    As :class:`_RelationQueries`: lists taken with ``[1]`` steps have at most one entry
    per object or value, so a list as long as the batch has exactly one; then one
    count of the elements inside the objects (down to the values' references and
    ``<div>``) says whether there was nothing else (each object: VALUES, TYPE and its
    reference; each value: itself, DEFINITION and its reference, and for XHTML a
    THE-VALUE holding one ``<div>``). An XHTML value is
    read this way only when that ``<div>`` holds one text node, which is what
    ``flatten_xhtml`` returns verbatim.
    """

    def __init__(self, but_last: bool) -> None:
        r = "r:SPEC-OBJECT[position() < last()]" if but_last else "r:SPEC-OBJECT"
        v = f"{r}/r:VALUES[1]"
        s, x = f"{v}/r:ATTRIBUTE-VALUE-STRING", f"{v}/r:ATTRIBUTE-VALUE-XHTML"
        div = f"{x}/r:THE-VALUE[1]/h:div[1]"
        self.records, self.count = _xpath(r), _xpath("count(r:SPEC-OBJECT)")
        self.inside = _xpath(f"count({r}/*) + count({r}/*/*) + count({r}/r:VALUES/*/*) + count({r}/r:VALUES/*/*/*)")
        self.idents, self.long_names = _xpath(f"{r}/@IDENTIFIER"), _xpath(f"{r}/@LONG-NAME")
        self.types = _xpath(f"{r}/r:TYPE[1]/r:SPEC-OBJECT-TYPE-REF[1]/node()[1]")
        self.values = _xpath(v)
        self.definitions = _xpath(f"{v}/*/r:DEFINITION[1]/*[1]/node()[1]")
        self.string_definitions = _xpath(f"{s}/r:DEFINITION[1]/r:ATTRIBUTE-DEFINITION-STRING-REF[1]/node()[1]")
        self.xhtml_definitions = _xpath(f"{x}/r:DEFINITION[1]/r:ATTRIBUTE-DEFINITION-XHTML-REF[1]/node()[1]")
        self.strings, self.texts = _xpath(f"{s}/@THE-VALUE"), _xpath(f"{div}/text()[1]")
        self.div_nodes = _xpath(f"count({div}/node())")


_OBJECT_QUERIES: dict[bool, _ObjectQueries] = {}


_TREES = ((False, "r:SPEC-HIERARCHY"), (True, "r:SPEC-HIERARCHY[position() < last()]"))
_TOP_OBJECTS = {but_last: _xpath(f"{r}/r:OBJECT[1]/r:SPEC-OBJECT-REF[1]/node()[1]") for but_last, r in _TREES}
_TOP_COUNT = _xpath("count(r:SPEC-HIERARCHY) + count(r:SPEC-HIERARCHY/r:OBJECT)")
_GROUP_PARENT = _xpath("../r:OBJECT[1]/r:SPEC-OBJECT-REF[1]/node()[1]")
_TREE_SIZE = {but_last: _xpath(f"count({r}/descendant-or-self::r:SPEC-HIERARCHY)") for but_last, r in _TREES}
_GROUPS = {but_last: _xpath(f"{r}/descendant::r:CHILDREN") for but_last, r in _TREES}
_ELEMENT_COUNT = _xpath("count(*)")
_GROUP_MEMBERS = _xpath("r:SPEC-HIERARCHY/r:OBJECT[1]/r:SPEC-OBJECT-REF[1]/node()[1]")


def _texts(values: list[Any]) -> list[str] | None:
    """References as stripped text, or ``None`` if one is not text or is blank."""
    if values and set(map(type, values)) != {str}:
        return None
    stripped = list(map(str.strip, values))
    return None if "" in stripped else stripped


def _hierarchy_columns(reader: _Reader, container: Any, count: int, in_progress: bool) -> bool:
    """Parents from a batch of hierarchy trees by columns; ``False`` if it cannot vouch.

    Taken this way only when no object is placed twice (then the order in which
    hierarchies end, which decides the one-by-one path's first-wins, does not matter)
    and the parents are few (one XPath pair per CHILDREN element).
    """
    if int(_ELEMENT_COUNT(container)) - in_progress != count:
        return False  # something besides hierarchies
    objects = _texts(_TOP_OBJECTS[in_progress](container))
    if objects is None or len(objects) != count or _TOP_COUNT(container) != 2 * (count + in_progress):
        return False  # a hierarchy without an object, or with two: the one-by-one path
    # The descendant steps merge their results with a duplicate check; a batch holds a
    # few hundred hierarchies (or one big tree, a single context node), so that is cheap.
    hierarchies = int(_TREE_SIZE[in_progress](container))
    groups = _GROUPS[in_progress](container)
    if len(groups) > max(8, hierarchies // 8):
        return False
    pairs: list[tuple[str, str]] = []
    for group in groups:
        parent, members = _texts(_GROUP_PARENT(group)), _texts(_GROUP_MEMBERS(group))
        if parent is None or len(parent) != 1 or members is None:
            return False
        if _TOP_COUNT(group) != 2 * len(members):
            return False
        pairs.extend(zip(members, repeat(parent[0])))
    del groups
    objects.extend(child for child, _parent in pairs)
    parent_of = reader.parent_of
    placed = set(objects)
    if len(objects) != hierarchies or len(placed) != hierarchies or not parent_of.keys().isdisjoint(placed):
        return False  # a hierarchy outside CHILDREN, or an object placed twice
    parent_of.update(pairs)
    return True


def _object_queries(but_last: bool) -> _ObjectQueries:
    if but_last not in _OBJECT_QUERIES:
        _OBJECT_QUERIES[but_last] = _ObjectQueries(but_last)
    return _OBJECT_QUERIES[but_last]


def _object_columns(reader: _Reader, container: Any, count: int, in_progress: bool) -> bool:
    """Read a batch of SPEC-OBJECTs by columns; ``False`` if it cannot vouch for them.

    Only objects whose values are strings and single-``<div>`` XHTML of definitions
    that are not JSON-marked, of types without default values; anything else (and
    every error) goes through the one-by-one path.
    """
    queries = _object_queries(in_progress)
    size = int(queries.count(container)) - in_progress
    idents = queries.idents(container)
    if size != count or len(idents) != size or "" in idents:
        return False
    types = queries.types(container)
    if len(types) != size or (size and set(map(type, types)) != {str}):
        return False
    types = list(map(str.strip, types))
    known = reader.types
    if any(ref not in known or known[ref][1] for ref in set(types)):
        return False
    values = queries.values(container)
    if len(values) != size:
        return False  # some objects without VALUES: the one-by-one path
    counts = list(map(len, values))
    del values
    items = sum(counts)
    refs = queries.definitions(container)
    if len(refs) != items or (items and set(map(type, refs)) != {str}):
        return False
    refs = list(map(str.strip, refs))
    definitions = reader.definitions
    used = set(refs)
    if any(ref not in definitions or definitions[ref].as_json or definitions[ref].kind not in ("STRING", "XHTML")
           for ref in used):
        return False  # an unknown definition (the one-by-one path words it), or another kind of value
    kinds = [definitions[ref].kind for ref in refs]
    string_refs = [ref for ref, kind in zip(refs, kinds, strict=True) if kind == "STRING"]
    xhtml_refs = [ref for ref, kind in zip(refs, kinds, strict=True) if kind == "XHTML"]
    strings, texts = queries.strings(container), queries.texts(container)
    if (len(strings) != len(string_refs) or len(texts) != len(xhtml_refs)
            or list(map(str.strip, queries.string_definitions(container))) != string_refs
            or list(map(str.strip, queries.xhtml_definitions(container))) != xhtml_refs
            or queries.div_nodes(container) != len(texts)
            or queries.inside(container) != 3 * size + 3 * items + 2 * len(texts)):
        return False  # a value of another shape: the one-by-one path
    strings_in, texts_in = iter(strings), iter(texts)
    flat = [next(strings_in) if kind == "STRING" else next(texts_in) for kind in kinds]
    names = [definitions[ref].name for ref in refs]
    long_names = queries.long_names(container) if reader.opts["name"] == "LONG-NAME" else []
    if len(long_names) != size:
        if long_names:
            return False  # some objects have a LONG-NAME: which ones, the one-by-one path knows
        long_names = [None] * size
    records = queries.records(container)
    lines = list(map(_LINE, records))
    del records  # see xmlsafe.batches: the records are deleted next
    opts = reader.opts
    id_key, text_key, parent_key = opts["id_attribute"], opts["text"], opts["parent_attribute"]
    name_key = None if opts["name"] == "LONG-NAME" else opts["name"]
    start, out, ident_to_id = 0, reader.records, reader.ident_to_id
    for ident, type_ref, long_name, size_, line in zip(idents, types, long_names, counts, lines, strict=True):
        end = start + size_
        attributes = dict(zip(names[start:end], flat[start:end], strict=True))
        start = end
        element_id = attributes.pop(id_key, None) or ident
        if element_id != ident:
            ident_to_id[ident] = element_id
        text = attributes.pop(text_key, None)
        name = long_name if name_key is None else attributes.pop(name_key, None)
        parent = attributes.pop(parent_key, None)
        out.append((ident, element_id, type_ref, name, text, parent, attributes, line))
    return True
_LINE = attrgetter("sourceline")


def _parse(data: bytes, origin: str, options: Mapping[str, Any] | None) -> Model:
    reader = _Reader(origin, options or {})
    declared = False
    for element, count, _last, pending in xmlsafe.batches(data, origin, containers=_CONTAINERS,
                                                          root=_R + "REQ-IF", format_name="ReqIF 1.2"):
        if not declared:  # types and enumerations come before the objects (ReqIF 1.2, REQ-IF-CONTENT)
            _declarations(reader, element if count is None else element.getroottree().getroot())
            declared = True
        if count is None:  # the whole document has been read: what follows the containers
            for extension in element.iter(_R + "REQ-IF-TOOL-EXTENSION"):
                reader.tool_extension(extension)
        elif element.tag == _R + "SPEC-RELATIONS":
            in_progress = pending is not None and pending.tag == _SPEC_RELATION
            if not _relation_columns(reader, element, count, in_progress):
                _one_by_one(reader, element, count)
        elif element.tag == _R + "SPEC-OBJECTS":
            in_progress = pending is not None and pending.tag == _SPEC_OBJECT
            if not _object_columns(reader, element, count, in_progress):
                _one_by_one(reader, element, count)
        else:
            in_progress = pending is not None and pending.tag == _HIERARCHY
            if not _hierarchy_columns(reader, element, count, in_progress):
                _one_by_one(reader, element, count)
    return reader.model()


def _declarations(reader: _Reader, document: Any) -> None:
    for elem in document.iter(_DECLARATIONS):
        _dispatch(reader, elem)


def _one_by_one(reader: _Reader, container: Any, count: int) -> None:
    """Records of a batch one at a time, in the order their ends occur."""
    xmlsafe.walk_records(container, count, {_SPEC_RELATION: reader.spec_relation, _SPEC_OBJECT: reader.spec_object,
                                            _HIERARCHY: reader.hierarchy_end})


def _relation_columns(reader: _Reader, container: Any, count: int, in_progress: bool) -> bool:
    """Read a batch of SPEC-RELATIONs that carry no values by columns; ``False`` if it cannot.

    ``in_progress``: the container's child after the batch is a SPEC-RELATION the
    parser may still be inside (the queries leave it out).
    """
    queries = _RELATION_QUERIES[in_progress]
    size = int(queries.count(container)) - in_progress
    if size != count or queries.inside(container) != 6 * size:
        return False  # other children, values, or a reference missing or repeated: the one-by-one path
    columns = []
    for texts in queries.refs:
        column = texts(container)
        if len(column) != size or (size and set(map(type, column)) != {str}):
            return False  # a missing reference: the one-by-one path says which
        column = list(map(str.strip, column))
        if "" in column:
            return False
        columns.append(column)
    sources, targets, types = columns
    known = reader.types
    if any(ref not in known or known[ref][1] for ref in set(types)):
        return False  # an unknown type, or one whose defaults give the relations values
    ident_to_id = reader.ident_to_id
    if ident_to_id:
        sources = list(map(ident_to_id.get, sources, sources))
        targets = list(map(ident_to_id.get, targets, targets))
    records = queries.records(container)
    lines = list(map(_LINE, records))
    del records  # see xmlsafe.batches: the records are deleted next
    reader.links.extend(zip(sources, targets, types, [None] * size, [{} for _ in range(size)], lines, strict=True))
    return True


def _dispatch(reader: _Reader, elem: Any) -> None:
    tag = elem.tag
    if tag == _R + "DATATYPE-DEFINITION-ENUMERATION":
        reader.enumeration(elem)
    elif tag in (_R + "SPEC-OBJECT-TYPE", _R + "SPEC-RELATION-TYPE"):
        reader.spec_type(elem, relation=tag == _R + "SPEC-RELATION-TYPE")
    elif tag == _R + "TITLE":
        reader.title = (elem.text or "").strip() or None


# --- writing ---------------------------------------------------------------------------

_NCNAME = re.compile(r"[A-Za-z_][A-Za-z0-9_.\-]*\Z")


class _Identifiers:
    """``xsd:ID`` values: unique XML names across the whole document."""

    def __init__(self) -> None:
        self.used: set[str] = set()
        self.counters: dict[str, int] = {}

    def claim(self, wanted: str | None) -> str | None:
        if wanted is None or not _NCNAME.match(wanted) or wanted in self.used:
            return None
        self.used.add(wanted)
        return wanted

    def fresh(self, prefix: str) -> str:
        n = self.counters.get(prefix, 0)
        while True:
            n += 1
            candidate = f"_tc-{prefix}-{n}"
            if candidate not in self.used:
                self.counters[prefix] = n
                self.used.add(candidate)
                return candidate


def _spelled(value: Any) -> str:
    """The ReqIF value kind a model attribute value is written as."""
    kind = value_type(value)
    if kind == "list":
        return "ENUMERATION" if all(isinstance(v, str) for v in value) else "JSON"
    return {"bool": "BOOLEAN", "int": "INTEGER", "float": "REAL", "str": "STRING"}[kind]


class _Plan:
    """Everything the writer decides before the first byte: identifiers and types."""

    def __init__(self, model: Model, opts: Mapping[str, Any]) -> None:
        self.model, self.opts = model, opts
        ids = self.ids = _Identifiers()
        self.object_ident = [ids.claim(e.id) for e in model.elements]
        self.first_ident: dict[str, str] = {}
        self.relation_ident = [ids.claim(x.id) for x in model.links]
        ids.used.update(x.source for x in model.links)
        ids.used.update(x.target for x in model.links)
        for n, element in enumerate(model.elements):
            if self.object_ident[n] is None:
                self.object_ident[n] = ids.fresh("object")
            self.first_ident.setdefault(element.id, self.object_ident[n])
        self.relation_ident = [r or ids.fresh("relation") for r in self.relation_ident]
        self.expressible = _expressible_parents(model)
        self.specials = {opts["text"], opts["id_attribute"], opts["parent_attribute"],
                         opts["source_attribute"], opts["target_attribute"]}
        if opts["name"] != "LONG-NAME":
            self.specials.add(opts["name"])
        self.object_explicit = [self._explicit_object(n, e) for n, e in enumerate(model.elements)]
        self.endpoints: list[tuple[str, str]] = []
        self.relation_explicit = [self._explicit_relation(x) for x in model.links]
        self.object_types = self._types(
            [(e.kind, e, x) for e, x in zip(model.elements, self.object_explicit, strict=True)], "object-type")
        self.relation_types = self._types(
            [(x.relation, x, y) for x, y in zip(model.links, self.relation_explicit, strict=True)], "relation-type")
        self.specification_type = ids.fresh("specification-type")
        self.enums: dict[tuple[str, str, str], dict[str, str]] = {}
        self._plan_enums()
        self.datatypes = {k: ids.fresh(f"datatype-{k.lower()}") for k in
                          ("STRING", "INTEGER", "REAL", "BOOLEAN", "XHTML")}

    def _explicit_object(self, n: int, element: Element) -> list[tuple[str, str]]:
        """The id and parent values ReqIF cannot say through IDENTIFIER and nesting."""
        explicit = []
        if self.object_ident[n] != element.id:
            explicit.append((self.opts["id_attribute"], element.id))
        if element.parent is not None and not self.expressible[n]:
            explicit.append((self.opts["parent_attribute"], element.parent))
        return explicit

    def _explicit_relation(self, link: Link) -> list[tuple[str, str]]:
        """The link id, and ends that a reference cannot carry exactly (readers strip
        whitespace from references), written as attributes; records the references."""
        explicit = [] if link.id is None else [(self.opts["id_attribute"], link.id)]
        refs = []
        for end, option in ((link.source, "source_attribute"), (link.target, "target_attribute")):
            ref = self.first_ident.get(end)
            if ref is None and (end != end.strip() or not end):
                ref = self.ids.fresh("dangling")
                explicit.append((self.opts[option], end))
            refs.append(ref or end)
        self.endpoints.append((refs[0], refs[1]))
        return explicit

    def _types(self, owners: list[tuple[str, Any, list]], prefix: str) -> dict[str, dict]:
        """Per kind (or relation): its type identifier and attribute definitions."""
        types: dict[str, dict] = {}
        for type_name, owner, explicit in owners:
            entry = types.setdefault(type_name, {"ident": None, "defs": {}})
            for name, _value in explicit:
                entry["defs"].setdefault((name, "STRING"), None)
            for name, kind in self._values_of(owner):
                entry["defs"].setdefault((name, kind), None)
        for type_name in sorted(types):
            entry = types[type_name]
            entry["ident"] = self.ids.fresh(prefix)
            entry["defs"] = {key: self.ids.fresh("attribute") for key in sorted(entry["defs"])}
        return types

    def _values_of(self, owner: Any) -> list[tuple[str, str]]:
        """(definition name, value kind) of every value ``owner`` will carry."""
        opts, out = self.opts, []
        is_element = isinstance(owner, Element)
        for name, value in owner.attributes.items():
            if name in self.specials:
                raise InputError(
                    f"{_describe(owner)}: attribute {name!r} has the name ReqIF uses for a "
                    "field; rename it or change [formats.reqif]."
                )
            out.append((name, _spelled(value)))
        if is_element:
            if owner.text is not None:
                out.append((opts["text"], "XHTML"))
            if owner.name is not None and opts["name"] != "LONG-NAME":
                out.append((opts["name"], "STRING"))
        return out

    def _plan_enums(self) -> None:
        for types, owners in ((self.object_types, [(e.kind, e) for e in self.model.elements]),
                              (self.relation_types, [(x.relation, x) for x in self.model.links])):
            for type_name, owner in owners:
                for name, value in owner.attributes.items():
                    if _spelled(value) == "ENUMERATION":
                        table = self.enums.setdefault((id(types), type_name, name), {})
                        for item in value:
                            table.setdefault(item, "")
        for key in sorted(self.enums, key=lambda k: (k[1], k[2])):
            table = self.enums[key]
            self.enums[key] = {item: self.ids.fresh("enum-value") for item in table}
            self.enums[key]["\0datatype"] = self.ids.fresh("datatype-enumeration")

    def enum_table(self, types: dict, type_name: str, name: str) -> dict[str, str]:
        return self.enums[(id(types), type_name, name)]


def _describe(owner: Any) -> str:
    if isinstance(owner, Element):
        return f"element {owner.id!r}"
    return f"link {owner.source} {owner.relation} {owner.target}"


def _expressible_parents(model: Model) -> list[bool]:
    """Whether each element's parent can be said by nesting ``SPEC-HIERARCHY``.

    Not when the parent is missing, when the parent chain loops, or when the element
    would sit deeper than :data:`MAX_DEPTH`; those parents are written as an attribute.
    """
    by_id = model.by_id
    depth: dict[str, int | None] = {}
    for start in by_id:
        path: list[str] = []
        on_path: set[str] = set()
        node: str | None = start
        base: int | None = None
        while True:
            if node in depth:
                base = depth[node]
                break
            if node in on_path or node not in by_id:
                base = None if node is not None else -1
                if node in on_path:
                    for member in path:
                        depth[member] = None
                    path = []
                break
            path.append(node)
            on_path.add(node)
            node = by_id[node].parent
            if node is None:
                base = -1
                break
        for member in reversed(path):
            base = None if base is None or base + 1 > MAX_DEPTH else base + 1
            depth[member] = base
    flags = []
    for element in model.elements:
        first = by_id[element.id] is element
        parent_depth = depth.get(element.parent) if element.parent is not None else None
        ok = element.parent is not None and parent_depth is not None and parent_depth + 1 <= MAX_DEPTH
        if first:
            ok = ok and depth.get(element.id) is not None
        flags.append(ok)
    return flags


def write(model: Model, options: Mapping[str, Any] | None = None, *, timestamp: str = EPOCH) -> bytes:
    """Serialise ``model`` as a ReqIF 1.2 document (UTF-8).

    Raises
    ------
    InputError
        A value XML cannot carry, or an attribute named like one the mapping uses.
    """
    opts = adapter_options(options or {}, "reqif", OPTIONS)
    plan = _Plan(model, opts)
    out = io.BytesIO()
    with etree.xmlfile(out, encoding="utf-8") as xf:
        xf.write_declaration()
        with xf.element(_R + "REQ-IF", nsmap={None: NAMESPACE, "xhtml": XHTML}):
            xf.write("\n")
            _header(xf, plan, timestamp)
            with xf.element(_R + "CORE-CONTENT"):
                with xf.element(_R + "REQ-IF-CONTENT"):
                    xf.write("\n")
                    _datatypes(xf, plan, timestamp)
                    _spec_types(xf, plan, timestamp)
                    _objects(xf, plan, timestamp)
                    _relations(xf, plan, timestamp)
                    _specification(xf, plan, timestamp)
            xf.write("\n")
            _extension(xf, plan)
            xf.write("\n")
    return out.getvalue() + b"\n"


def _leaf(xf: Any, tag: str, text: str) -> None:
    with xf.element(_R + tag):
        xf.write(text)


def _header(xf: Any, plan: _Plan, timestamp: str) -> None:
    title = plan.model.meta.get("name")
    with xf.element(_R + "THE-HEADER"):
        with xf.element(_R + "REQ-IF-HEADER", IDENTIFIER=plan.ids.fresh("header")):
            _leaf(xf, "COMMENT", "Written by tracecheck from a thread model.")
            _leaf(xf, "CREATION-TIME", timestamp)
            _leaf(xf, "REQ-IF-TOOL-ID", "tracecheck")
            _leaf(xf, "REQ-IF-VERSION", "1.0")
            _leaf(xf, "SOURCE-TOOL-ID", f"tracecheck {__version__}")
            _leaf(xf, "TITLE", check_xml_text(str(title), "the model name") if title else "thread model")
    xf.write("\n")


def _identifiable(ident: str, timestamp: str, **extra: str) -> dict[str, str]:
    attributes = {"IDENTIFIER": ident, "LAST-CHANGE": timestamp}
    attributes.update(extra)
    return attributes


def _datatypes(xf: Any, plan: _Plan, timestamp: str) -> None:
    model = plan.model
    strings = [len(e.text or "") for e in model.elements] + [len(e.name or "") for e in model.elements]
    ints = [v for owner in (*model.elements, *model.links) for v in owner.attributes.values()
            if _spelled(v) == "INTEGER"]
    for owner in (*model.elements, *model.links):
        strings.extend(len(v) if isinstance(v, str) else len(json_list(v))
                       for v in owner.attributes.values() if _spelled(v) in ("STRING", "JSON"))
        strings.append(len(owner.id or "") if owner.id else 0)
        strings.extend(len(x) for x in (getattr(owner, "parent", None),) if x)
    with xf.element(_R + "DATATYPES"):
        xf.write("\n")
        kinds = plan.datatypes
        xf.write(_empty("DATATYPE-DEFINITION-STRING", _identifiable(
            kinds["STRING"], timestamp, **{"LONG-NAME": "text", "MAX-LENGTH": str(max(strings, default=0) or 1)})))
        xf.write(_empty("DATATYPE-DEFINITION-INTEGER", _identifiable(
            kinds["INTEGER"], timestamp, **{"LONG-NAME": "integer", "MIN": str(min(ints, default=0)),
                                            "MAX": str(max(ints, default=0))})))
        xf.write(_empty("DATATYPE-DEFINITION-REAL", _identifiable(
            kinds["REAL"], timestamp, **{"LONG-NAME": "real", "ACCURACY": "17", "MIN": "-INF", "MAX": "INF"})))
        xf.write(_empty("DATATYPE-DEFINITION-BOOLEAN", _identifiable(kinds["BOOLEAN"], timestamp, **{"LONG-NAME": "boolean"})))
        xf.write(_empty("DATATYPE-DEFINITION-XHTML", _identifiable(kinds["XHTML"], timestamp, **{"LONG-NAME": "formatted text"})))
        for (_types, type_name, name), table in sorted(plan.enums.items(), key=lambda kv: (kv[0][1], kv[0][2])):
            attributes = _identifiable(table["\0datatype"], timestamp, **{"LONG-NAME": f"{type_name}: {name}"})
            with xf.element(_R + "DATATYPE-DEFINITION-ENUMERATION", attributes):
                with xf.element(_R + "SPECIFIED-VALUES"):
                    key = 0
                    for item, ident in table.items():
                        if item == "\0datatype":
                            continue
                        with xf.element(_R + "ENUM-VALUE", _identifiable(
                                ident, timestamp, **{"LONG-NAME": check_xml_text(item, f"enumeration value {item!r}")})):
                            with xf.element(_R + "PROPERTIES"):
                                xf.write(_empty("EMBEDDED-VALUE", {"KEY": str(key), "OTHER-CONTENT": ""}, tail=""))
                        key += 1
            xf.write("\n")
    xf.write("\n")


def _empty_x(tag: str, attributes: Mapping[str, str]) -> Any:
    return etree.Element(_X + tag, attributes, nsmap={"tc": EXTENSION})


def _empty(tag: str, attributes: Mapping[str, str], tail: str = "\n") -> Any:
    element = etree.Element(_R + tag, attributes, nsmap={None: NAMESPACE})
    element.tail = tail
    return element


def _definition_tag(kind: str) -> str:
    return "STRING" if kind == "JSON" else kind


def _spec_types(xf: Any, plan: _Plan, timestamp: str) -> None:
    with xf.element(_R + "SPEC-TYPES"):
        xf.write("\n")
        for types, tag in ((plan.object_types, "SPEC-OBJECT-TYPE"), (plan.relation_types, "SPEC-RELATION-TYPE")):
            for type_name in sorted(types):
                entry = types[type_name]
                attributes = _identifiable(entry["ident"], timestamp, **{"LONG-NAME": check_xml_text(type_name, "a kind")})
                with xf.element(_R + tag, attributes):
                    _definitions(xf, plan, types, type_name, entry["defs"], timestamp)
                xf.write("\n")
        with xf.element(_R + "SPECIFICATION-TYPE", _identifiable(
                plan.specification_type, timestamp, **{"LONG-NAME": "thread model"})):
            pass
        xf.write("\n")
    xf.write("\n")


def _definitions(xf: Any, plan: _Plan, types: dict, type_name: str, defs: dict, timestamp: str) -> None:
    if not defs:
        return
    with xf.element(_R + "SPEC-ATTRIBUTES"):
        for (name, kind), ident in defs.items():
            tag = _definition_tag(kind)
            extra = {"LONG-NAME": check_xml_text(name, "an attribute name")}
            if kind == "JSON":
                extra["DESC"] = JSON_MARK
            if kind == "ENUMERATION":
                extra["MULTI-VALUED"] = "true"
            with xf.element(_R + f"ATTRIBUTE-DEFINITION-{tag}", _identifiable(ident, timestamp, **extra)):
                with xf.element(_R + "TYPE"):
                    if kind == "ENUMERATION":
                        datatype = plan.enum_table(types, type_name, name)["\0datatype"]
                    else:
                        datatype = plan.datatypes[tag]
                    _leaf(xf, f"DATATYPE-DEFINITION-{tag}-REF", datatype)


def _write_value(xf: Any, plan: _Plan, types: dict, type_name: str, def_ident: str,
                 kind: str, name: str, value: Any, what: str) -> None:
    tag = _definition_tag(kind)
    if kind == "XHTML":
        with xf.element(_R + "ATTRIBUTE-VALUE-XHTML"):
            with xf.element(_R + "THE-VALUE"):
                with xf.element(_H + "div"):
                    xf.write(check_xml_text(value, what))
            with xf.element(_R + "DEFINITION"):
                _leaf(xf, "ATTRIBUTE-DEFINITION-XHTML-REF", def_ident)
        return
    if kind == "ENUMERATION":
        table = plan.enum_table(types, type_name, name)
        with xf.element(_R + "ATTRIBUTE-VALUE-ENUMERATION"):
            with xf.element(_R + "DEFINITION"):
                _leaf(xf, "ATTRIBUTE-DEFINITION-ENUMERATION-REF", def_ident)
            with xf.element(_R + "VALUES"):
                for item in value:
                    _leaf(xf, "ENUM-VALUE-REF", table[item])
        return
    text = json_list(value) if kind == "JSON" else value if kind == "STRING" else format_scalar(value)
    with xf.element(_R + f"ATTRIBUTE-VALUE-{tag}", {"THE-VALUE": check_xml_text(text, what)}):
        with xf.element(_R + "DEFINITION"):
            _leaf(xf, f"ATTRIBUTE-DEFINITION-{tag}-REF", def_ident)


def _owner_values(xf: Any, plan: _Plan, types: dict, type_name: str, owner: Any,
                  explicit: list[tuple[str, str]]) -> None:
    entry = types[type_name]
    items: list[tuple[str, str, Any]] = []
    opts = plan.opts
    for name, value in explicit:
        items.append((entry["defs"][(name, "STRING")], "STRING", (name, value)))
    if isinstance(owner, Element):
        if owner.text is not None:
            items.append((entry["defs"][(opts["text"], "XHTML")], "XHTML", (opts["text"], owner.text)))
        if owner.name is not None and opts["name"] != "LONG-NAME":
            items.append((entry["defs"][(opts["name"], "STRING")], "STRING", (opts["name"], owner.name)))
    for name, value in owner.attributes.items():
        kind = _spelled(value)
        items.append((entry["defs"][(name, kind)], kind, (name, value)))
    if not items:
        return
    what = _describe(owner)
    with xf.element(_R + "VALUES"):
        for def_ident, kind, (name, value) in items:
            _write_value(xf, plan, types, type_name, def_ident, kind, name, value, f"{what} {name!r}")


def _objects(xf: Any, plan: _Plan, timestamp: str) -> None:
    opts = plan.opts
    with xf.element(_R + "SPEC-OBJECTS"):
        xf.write("\n")
        for n, element in enumerate(plan.model.elements):
            ident = plan.object_ident[n]
            extra = {}
            if element.name is not None and opts["name"] == "LONG-NAME":
                extra["LONG-NAME"] = check_xml_text(element.name, f"element {element.id!r} name")
            with xf.element(_R + "SPEC-OBJECT", _identifiable(ident, timestamp, **extra)):
                _owner_values(xf, plan, plan.object_types, element.kind, element, plan.object_explicit[n])
                with xf.element(_R + "TYPE"):
                    _leaf(xf, "SPEC-OBJECT-TYPE-REF", plan.object_types[element.kind]["ident"])
            xf.write("\n")
    xf.write("\n")


def _relations(xf: Any, plan: _Plan, timestamp: str) -> None:
    with xf.element(_R + "SPEC-RELATIONS"):
        xf.write("\n")
        for n, link in enumerate(plan.model.links):
            what = _describe(link)
            with xf.element(_R + "SPEC-RELATION", _identifiable(plan.relation_ident[n], timestamp)):
                _owner_values(xf, plan, plan.relation_types, link.relation, link, plan.relation_explicit[n])
                source, target = plan.endpoints[n]
                with xf.element(_R + "SOURCE"):
                    _leaf(xf, "SPEC-OBJECT-REF", check_xml_text(source, what))
                with xf.element(_R + "TARGET"):
                    _leaf(xf, "SPEC-OBJECT-REF", check_xml_text(target, what))
                with xf.element(_R + "TYPE"):
                    _leaf(xf, "SPEC-RELATION-TYPE-REF", plan.relation_types[link.relation]["ident"])
            xf.write("\n")
    xf.write("\n")


def _specification(xf: Any, plan: _Plan, timestamp: str) -> None:
    model = plan.model
    children: dict[str, list[int]] = {}
    roots: list[int] = []
    for n, element in enumerate(model.elements):
        if plan.expressible[n]:
            children.setdefault(plan.first_ident[element.parent], []).append(n)
        else:
            roots.append(n)
    with xf.element(_R + "SPECIFICATIONS"):
        with xf.element(_R + "SPECIFICATION", _identifiable(
                plan.ids.fresh("specification"), timestamp, **{"LONG-NAME": "thread model"})):
            if roots:
                with xf.element(_R + "CHILDREN"):
                    xf.write("\n")
                    for n in roots:
                        _hierarchy(xf, plan, children, n, timestamp)
            with xf.element(_R + "TYPE"):
                _leaf(xf, "SPECIFICATION-TYPE-REF", plan.specification_type)
    xf.write("\n")


def _hierarchy(xf: Any, plan: _Plan, children: dict[str, list[int]], n: int, timestamp: str) -> None:
    ident = plan.object_ident[n]
    with xf.element(_R + "SPEC-HIERARCHY", _identifiable(plan.ids.fresh("node"), timestamp)):
        with xf.element(_R + "OBJECT"):
            _leaf(xf, "SPEC-OBJECT-REF", ident)
        below = children.get(ident) if plan.first_ident.get(plan.model.elements[n].id) == ident else None
        if below:
            with xf.element(_R + "CHILDREN"):
                xf.write("\n")
                for child in below:
                    _hierarchy(xf, plan, children, child, timestamp)
    xf.write("\n")


def _extension(xf: Any, plan: _Plan) -> None:
    model = plan.model
    with xf.element(_R + "TOOL-EXTENSIONS"):
        with xf.element(_R + "REQ-IF-TOOL-EXTENSION"):
            with xf.element(_X + "model", nsmap={"tc": EXTENSION}):
                # A kind or relation the reader's normalising would change ("traces to").
                for types in (plan.object_types, plan.relation_types):
                    for type_name in sorted(types):
                        if normalise(type_name) != type_name:
                            xf.write(_empty_x("type", {"ref": types[type_name]["ident"], "name": type_name}))
                for name, value in model.meta.items():
                    kind = value_type(value)
                    text = value if kind == "str" else format_scalar(value)
                    with xf.element(_X + "entry", name=check_xml_text(str(name), "a model key"), type=kind):
                        xf.write(check_xml_text(text, f"model {name!r}"))


class ReqIF:
    name = "reqif"
    extensions = (".reqif",)

    def sniff(self, head: bytes, name: str) -> bool:
        if xmlsafe.root_name(head) == "REQ-IF":
            return True
        return name.lower().endswith(".reqif") and xmlsafe.looks_like_xml(head)

    def read(self, data: bytes, origin: str, options: Mapping[str, Any]) -> Model:
        return parse(data, origin, options)

    def write(self, model: Model, options: Mapping[str, Any] | None = None) -> bytes:
        return write(model, options)


register(ReqIF())
