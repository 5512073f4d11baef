"""The one hardened XML parser configuration every XML reader uses.

Model exports arrive from other people's tools and repositories, so an XML input is
treated as hostile until proven otherwise:

* entity expansion, DTD loading, network access and the libxml2 "huge tree" mode are
  off (``resolve_entities=False, no_network=True, load_dtd=False, huge_tree=False``);
* a DOCTYPE that declares any entity (general or parameter, internal or external) or
  names an external subset (``SYSTEM`` / ``PUBLIC``) is refused before any content is
  read, with exit code 2 — billion laughs, external file or network entities and
  parameter-entity tricks never reach the model builder;
* a plain ``<!DOCTYPE name>`` (or an internal subset with only element and attribute-list
  declarations) is accepted, since it cannot pull anything in;
* parse errors become :class:`~tracecheck.errors.InputError` with file, line and column.

The prolog is checked twice: a byte-level scan (fast, independent of libxml2), then
the document's ``docinfo`` as libxml2 saw it at the root element's start tag (catches
encodings the scan cannot read). lxml >= 6.1.3 is required because earlier ``iterparse``
resolved entities by default (see pyproject.toml).
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from itertools import accumulate, repeat
from typing import Any, NamedTuple

from lxml import etree

from tracecheck.collection import collection_paused
from tracecheck.errors import InputError
from tracecheck.model import Element, Link, Location

__all__ = [
    "SAFE_OPTIONS", "check_prolog", "describe_tag", "head_text", "safe_parser",
    "looks_like_xml", "root_name",
    "syntax_error", "RecordColumns", "FlatMappings", "batches", "Batch", "CHUNK", "walk_records",
]

SAFE_OPTIONS: dict[str, Any] = {
    "resolve_entities": False,
    "no_network": True,
    "load_dtd": False,
    "huge_tree": False,
    "dtd_validation": False,
    "attribute_defaults": False,
}

# How much of the input the byte-level scan looks at for the DOCTYPE: the prolog of a
# real export is a few hundred bytes; a DOCTYPE later than this is found by libxml2.
_SCAN_LIMIT = 1 << 20
_DOCTYPE = re.compile(rb"<!DOCTYPE\s+[^\s\[>]+\s*(?P<external>SYSTEM|PUBLIC)?", re.IGNORECASE)
_ENTITY = re.compile(rb"<!ENTITY", re.IGNORECASE)
# The internal subset up to the first "]>"; an entity value containing "]>" ends the
# scan early, and the docinfo check below still sees the declaration.
_SUBSET = re.compile(rb"\s*\[.*?\]\s*>", re.DOTALL)


def safe_parser() -> etree.XMLParser:
    """A tree parser with the hardened options (for small documents such as tests)."""
    return etree.XMLParser(**SAFE_OPTIONS)


def _refuse(origin: str, why: str) -> InputError:
    return InputError(
        f"{origin}: refused: the XML document's DOCTYPE {why}. tracecheck reads XML with "
        "entity expansion, DTD loading and network access off, and does not read "
        "documents that declare entities or an external DTD; export the model without "
        "a DOCTYPE."
    )


def _scan_prolog(data: bytes, origin: str) -> None:
    head = data[:_SCAN_LIMIT]
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        head = head.decode("utf-16", errors="replace").encode("utf-8", errors="replace")
    match = _DOCTYPE.search(head)
    if match is None:
        return
    if match.group("external"):
        raise _refuse(origin, "names an external DTD (SYSTEM or PUBLIC)")
    subset = _SUBSET.match(head, match.end())
    if subset is not None and _ENTITY.search(subset.group(0)):
        raise _refuse(origin, "declares entities")


def _check_docinfo(root: Any, origin: str) -> None:
    docinfo = root.getroottree().docinfo
    if docinfo.system_url or docinfo.public_id:
        raise _refuse(origin, "names an external DTD (SYSTEM or PUBLIC)")
    subset = docinfo.internalDTD
    if subset is not None and any(True for _ in subset.entities()):
        raise _refuse(origin, "declares entities")


def check_prolog(data: bytes, origin: str) -> tuple[str, int | None]:
    """Refuse a document whose DOCTYPE declares entities or an external subset.

    Reads only up to the root element's start tag and returns that element's tag
    (``{namespace}local``) and line, so a reader can refuse the wrong document type
    before it reads any content.

    Raises
    ------
    InputError
        The DOCTYPE is refused, or the prolog itself is malformed.
    """
    _scan_prolog(data, origin)
    # lxml keeps a per-thread log of libxml2 errors across parses; syntax_error reads it,
    # so it must hold only this document's errors (a stale entry named another file's line).
    etree.clear_error_log()
    parser = etree.XMLPullParser(events=("start",), **SAFE_OPTIONS)
    try:
        for offset in range(0, max(len(data), 1), 1 << 16):
            parser.feed(data[offset : offset + (1 << 16)])
            for _event, root in parser.read_events():
                _check_docinfo(root, origin)
                return root.tag, root.sourceline
        parser.close()
    except etree.XMLSyntaxError as error:
        raise syntax_error(error, origin) from None
    raise InputError(f"{origin}: malformed XML: the document has no root element.")


def describe_tag(tag: str) -> str:
    """``{ns}name`` as words: ``<name> in the namespace ns`` or ``<name> without a namespace``."""
    if tag.startswith("{"):
        namespace, _, local = tag[1:].partition("}")
        return f"<{local}> in the namespace {namespace}"
    return f"<{tag}> without a namespace"


def syntax_error(error: etree.XMLSyntaxError, origin: str) -> InputError:
    """An :class:`InputError` naming the first fatal libxml2 error and its line."""
    message, line, column = error.msg, error.lineno, error.position[1]
    fatal = [entry for entry in error.error_log if entry.level_name == "FATAL"]
    if fatal:  # iterparse reports some errors as "no element found" at line 0
        message, line, column = fatal[0].message, fatal[0].line, fatal[0].column
    message = re.sub(r", line \d+, column \d+$", "", message or "not well-formed")
    where = f"{origin}:{line}:{column}" if line else origin
    return InputError(f"{where}: malformed XML: {message}.")


def _check_start(data: bytes, origin: str, root: str | None, format_name: str) -> None:
    found, line = check_prolog(data, origin)
    if root is not None and found != root:
        where = f"{origin}:{line}" if line else origin
        raise InputError(
            f"{where}: the root element is {describe_tag(found)}, not {describe_tag(root)}; "
            f"the document is not {format_name or 'the expected format'}."
        )
    etree.clear_error_log()


# Bytes handed to the pull parser at a time: large enough that the per-batch costs
# (one XPath evaluation per column) vanish, small enough that a batch of records stays
# a few hundred entries (libxml2's node-set merges grow faster than linearly).
CHUNK = 1 << 15


class Batch(NamedTuple):
    """What :func:`batches` hands over: complete children of a container, or the root.

    ``element`` is the container and its first ``count`` children (elements, comments
    and processing instructions) are complete; ``last`` is true for the container's
    final batch (``count`` may then be 0). ``pending`` is the child after them that the
    parser may still be inside (it comes in the next batch), or ``None``. The very last
    batch is the whole document: ``element`` is the root and ``count`` is ``None``.
    """

    element: Any
    count: int | None
    last: bool = False
    pending: Any = None


def walk_records(container: Any, count: int, handlers: Mapping[str, Callable[[Any], Any]]) -> None:
    """Hand each record under the first ``count`` children of ``container`` to the
    handler of its tag, in the order the records end (a nested record before the one
    holding it): the one-by-one path of the batch readers."""
    tags = tuple(handlers)
    for kid in container[:count]:
        if not isinstance(kid.tag, str):
            continue  # comments and processing instructions
        for _event, elem in etree.iterwalk(kid, events=("end",), tag=tags):
            handlers[elem.tag](elem)


def batches(
    data: bytes,
    origin: str,
    *,
    containers: Iterable[str],
    root: str | None = None,
    format_name: str = "",
    chunk: int | None = None,
) -> Iterator[Batch]:
    """Stream ``data`` with the hardened options, handing over records in batches.

    The document is fed to a pull parser ``chunk`` bytes (default :data:`CHUNK`) at a
    time. Records are the
    children of a *container* element (``containers`` are tags; one container is open
    at a time, and a container tag inside an open container's record is part of that
    record): after each chunk, the children the parser has finished are handed over
    together, so a reader can take their values with one compiled XPath per column
    instead of Python work per record. The parser reports only the start of each
    container: no Python event is made per record or per element end (lxml calls back
    into Python at every element end when end events are asked for, which alone cost
    a third of the iterparse floor). A container has ended when the next one starts
    outside it, or at the end of the document.

    Records handed over are deleted from their container when the consumer asks for
    the next batch, so memory follows one chunk, not the document. A consumer should
    let go of the records' proxies before that: lxml moves a deleted element that
    still has one into a document of its own, walking its whole subtree. What lies outside
    the containers (declarations before them, trailers after them) stays in the tree
    for the consumer to read when a container's first batch or the final one arrives.

    Raises
    ------
    InputError
        Refused DOCTYPE, malformed XML (with line and column), or the wrong root.
    """
    _check_start(data, origin, root, format_name)
    parser = etree.XMLPullParser(events=("start",), tag=tuple(containers), remove_blank_text=False,
                                 **SAFE_OPTIONS)
    active: Any = None
    chunk = chunk or CHUNK
    try:
        for offset in range(0, max(len(data), 1), chunk):
            parser.feed(data[offset : offset + chunk])
            for _event, element in parser.read_events():
                if active is not None:
                    if any(ancestor is active for ancestor in element.iterancestors()):
                        continue  # inside a record of the open container
                    yield from _drain(active, last=True)
                active = element
            if active is not None:
                yield from _drain(active, last=False)
        document = parser.close()
    except etree.XMLSyntaxError as error:
        raise syntax_error(error, origin) from None
    if active is not None:
        yield from _drain(active, last=True)
    yield Batch(document, None, last=True)


def _drain(container: Any, last: bool) -> Iterator[Batch]:
    count = len(container)
    pending = container[-1] if count and not last else None
    if pending is not None and isinstance(pending.tag, str):
        count -= 1
    else:
        pending = None  # a comment or processing instruction is complete when it appears
    if count or last:
        yield Batch(container, count, last, pending)
        del container[:count]


_COMMENT = re.compile(r"<!--.*?(?:-->|\Z)", re.DOTALL)
_PI = re.compile(r"<\?.*?(?:\?>|\Z)", re.DOTALL)
_START_TAG = re.compile(r"<(?:[A-Za-z_][\w.\-]*:)?([A-Za-z_][\w.\-]*)")


def looks_like_xml(head: bytes) -> bool:
    """Whether the first bytes could start an XML document (for content sniffing)."""
    return head_text(head).lstrip("\ufeff \t\r\n").startswith("<")


def root_name(head: bytes) -> str | None:
    """The local name of the first element in ``head``, or ``None`` when it is not XML.

    A sniffing heuristic: comments, processing instructions and declarations are
    skipped; a document mentioning ``<graphml>`` in prose is not GraphML.
    """
    if not looks_like_xml(head):
        return None
    text = _PI.sub("", _COMMENT.sub("", head_text(head)))
    found = _START_TAG.search(text)
    return found.group(1) if found else None


def head_text(head: bytes) -> str:
    """The first bytes of an input as text, for content sniffing (honours a UTF-16 BOM)."""
    if head.startswith((b"\xff\xfe", b"\xfe\xff")):
        return head.decode("utf-16", errors="ignore")
    return head.decode("utf-8", errors="ignore")


class FlatMappings(Sequence):
    """One mapping per record, kept as flat lists until a record's mapping is asked for.

    Record ``i`` owns ``names[starts[i]:starts[i + 1]]`` and the values beside them
    (a repeated name keeps its last value, as in a dict). Readers that take a batch's
    values by columns add them with :meth:`extend_flat`, without a dict per record;
    each ``[i]`` builds a fresh dict.
    """

    def __init__(self) -> None:
        self.starts: list[int] = [0]
        self.names: list[str] = []
        self.values: list[Any] = []

    def extend_flat(self, counts: Iterable[int], names: Iterable[str], values: Iterable[Any]) -> None:
        ends = accumulate(counts, initial=self.starts[-1])
        next(ends)  # the start of the first new record is the end of the last one
        self.starts.extend(ends)
        self.names.extend(names)
        self.values.extend(values)

    def append(self, mapping: Mapping[str, Any]) -> None:
        self.names.extend(mapping)
        self.values.extend(mapping.values())
        self.starts.append(len(self.names))

    def extend(self, mappings: Iterable[Mapping[str, Any]]) -> None:
        for mapping in mappings:
            self.append(mapping)

    def __len__(self) -> int:
        return len(self.starts) - 1

    def __getitem__(self, index: Any) -> Any:
        if isinstance(index, slice):
            return [self[i] for i in range(*index.indices(len(self)))]
        if index < 0:
            index += len(self)
        start, end = self.starts[index], self.starts[index + 1]
        return dict(zip(self.names[start:end], self.values[start:end], strict=True))

    def __iter__(self) -> Iterator[dict[str, Any]]:
        names, values, starts = self.names, self.values, self.starts
        for n in range(len(starts) - 1):
            start, end = starts[n], starts[n + 1]
            yield dict(zip(names[start:end], values[start:end], strict=True)) if end > start else {}


class RecordColumns:
    """Per-field lists an XML reader fills, one entry per record, in file order.

    Satisfies :class:`tracecheck.model.Columns`, so :meth:`Model.from_columns` can take
    it: the rules and coverage work on these lists, and Element and Link objects (with
    their :class:`Location`) are built only when someone asks for them. Appending to
    plain lists costs far less per record than building two objects.
    """

    def __init__(self, origin: str) -> None:
        self.origin = origin
        self.element_ids: list[str] = []
        self.element_kinds: list[str] = []
        self.element_names: list[str | None] = []
        self.element_texts: list[str | None] = []
        self.element_parents: list[str | None] = []
        self.element_attrs: FlatMappings = FlatMappings()
        self.element_lines: list[int | None] = []
        self.link_sources: list[str] = []
        self.link_targets: list[str] = []
        self.link_relations: list[str] = []
        self.link_ids: list[str | None] = []
        self.link_attrs: FlatMappings = FlatMappings()
        self.link_lines: list[int | None] = []

    def element_attributes(self, index: int) -> Mapping[str, Any]:
        return self.element_attrs[index]

    def element_location(self, index: int) -> Location | None:
        return Location(self.origin, self.element_lines[index])

    def link_location(self, index: int) -> Location | None:
        return Location(self.origin, self.link_lines[index])

    def link(self, index: int) -> Link:
        return Link(self.link_sources[index], self.link_targets[index], self.link_relations[index],
                    self.link_ids[index], self.link_attrs[index], self.link_location(index))

    def materialise(self) -> tuple[tuple[Element, ...], tuple[Link, ...]]:
        with collection_paused():  # many long-lived objects, no cycles: see tracecheck.collection
            return self._build()

    def _build(self) -> tuple[tuple[Element, ...], tuple[Link, ...]]:
        origin = repeat(self.origin)
        elements = tuple(map(Element, self.element_ids, self.element_kinds, self.element_names,
                             self.element_texts, self.element_parents, self.element_attrs,
                             map(Location, origin, self.element_lines)))
        links = tuple(map(Link, self.link_sources, self.link_targets, self.link_relations, self.link_ids,
                          self.link_attrs, map(Location, origin, self.link_lines)))
        return elements, links
