"""Thread JSON (``tracecheck-thread/1``), the native format.

The reader first decodes the bytes with msgspec's typed decoder into small structs
(:class:`_ElementItem`, :class:`_LinkItem`) whose field types and length limits are the
rules of ``schemas/thread.schema.json``: decoding *is* the schema check, in one pass of
C code, with no second parse. The structs' columns go to a lazy
:class:`~tracecheck.model.Model`: no Element or Link object is built unless someone
asks for one. The line each element and link starts on is found by a vectorised byte
scan (:mod:`tracecheck.formats.json_lines`) when a location is first needed.

When the typed decoder refuses the document (a schema violation, malformed JSON, or
one of the few inputs the schema allows and msgspec does not take: a lone surrogate
escape, a number beyond the range of a float), the reader falls back to the standard
library's decoder and checks the decoded document column by column (a few C-level
``map``/``set`` passes). When those checks find anything wrong, or the document is
not JSON, it decodes it again item by item to learn every item's line, and runs the
schema itself so the user gets *all* violations, each with its file, line and JSON
path.

The published contract is ``schemas/thread.schema.json``; both the typed decoder and
the column checks accept exactly what that schema accepts (property tests hold them
to it, with jsonschema as the oracle).
"""

from __future__ import annotations

import json
import re
from collections.abc import Mapping
from functools import lru_cache
from importlib import resources
from itertools import chain, repeat
from operator import attrgetter, itemgetter
from typing import Annotated, Any, Literal, Union

import msgspec

from tracecheck.arrays import ModelArrays
from tracecheck.collection import collection_paused
from tracecheck.errors import InputError
from tracecheck.formats import register
from tracecheck.model import Element, Link, Location, Model

__all__ = ["ThreadJson", "parse", "write", "schema", "FORMAT_ID"]

FORMAT_ID = "tracecheck-thread/1"
MAX_REPORTED = 50

_WS = re.compile(r"[ \t\n\r]*")
_ELEMENT_KEYS = frozenset({"id", "kind", "name", "text", "parent", "attributes"})
_LINK_KEYS = frozenset({"source", "target", "relation", "id", "attributes"})
_TOP_KEYS = frozenset({"format", "model", "elements", "links"})
_ID_MAX, _SHORT_MAX, _LONG_MAX, _SCALAR_MAX = 1000, 10000, 1_000_000, 100_000


@lru_cache(maxsize=1)
def schema() -> dict[str, Any]:
    """The published thread JSON schema (JSON Schema 2020-12)."""
    text = resources.files("tracecheck").joinpath("schemas/thread.schema.json").read_text("utf-8")
    return json.loads(text)


# --- the typed decoder: the schema's rules as field types ------------------------------

_Identifier = Annotated[str, msgspec.Meta(min_length=1, max_length=_ID_MAX)]
_ScalarValue = Union[Annotated[str, msgspec.Meta(max_length=_SCALAR_MAX)], int, float, bool]  # noqa: UP007
_Attributes = dict[_Identifier, Union[_ScalarValue, list[_ScalarValue]]]  # noqa: UP007


class _Item(msgspec.Struct, forbid_unknown_fields=True, gc=False):
    """A decoded item read like the dict the standard decoder gives: ``item["id"]``,
    ``item.get("name")`` (an absent optional field is ``None``; the decoder refuses an
    explicit null, as the schema does). ``gc=False``: decoded items hold no cycles."""

    def __getitem__(self, key: str) -> Any:
        return getattr(self, key)

    def get(self, key: str, default: Any = None) -> Any:
        value = getattr(self, key)
        return default if value is None else value


class _ElementItem(_Item, forbid_unknown_fields=True, gc=False):
    id: _Identifier
    kind: _Identifier
    name: Annotated[str, msgspec.Meta(max_length=_SHORT_MAX)] = None  # type: ignore[assignment]
    text: Annotated[str, msgspec.Meta(max_length=_LONG_MAX)] = None  # type: ignore[assignment]
    parent: _Identifier = None  # type: ignore[assignment]
    attributes: _Attributes = None  # type: ignore[assignment]


class _LinkItem(_Item, forbid_unknown_fields=True, gc=False):
    source: _Identifier
    target: _Identifier
    relation: _Identifier
    id: _Identifier = None  # type: ignore[assignment]
    attributes: _Attributes = None  # type: ignore[assignment]


class _Document(msgspec.Struct, forbid_unknown_fields=True, gc=False):
    format: Literal["tracecheck-thread/1"]
    elements: list[_ElementItem]
    links: list[_LinkItem]
    model: dict[str, _ScalarValue] = None  # type: ignore[assignment]


_TYPED = msgspec.json.Decoder(_Document)


def _decode_typed(data: bytes) -> _Document | None:
    """The document as structs, or ``None`` when the typed decoder refuses it (the
    caller then takes the standard decoder's path, which explains what is wrong)."""
    try:
        return _TYPED.decode(data[3:] if data.startswith(b"\xef\xbb\xbf") else data)
    except (msgspec.DecodeError, RecursionError):  # ValidationError is a DecodeError
        return None


def _reject_constant(name: str) -> None:
    raise ValueError(f"{name} is not a JSON value")


_DECODER = json.JSONDecoder(parse_constant=_reject_constant)


class _Positions:
    """Start offsets of the items of the top-level ``elements`` and ``links`` arrays."""

    def __init__(self) -> None:
        self.items: dict[str, list[int]] = {"elements": [], "links": []}


def _decode_text(data: bytes, origin: str) -> str:
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as error:
        line = data.count(b"\n", 0, error.start) + 1
        column = error.start - (data.rfind(b"\n", 0, error.start) + 1) + 1
        raise InputError(
            f"{origin}:{line}:{column}: the file is not UTF-8 text "
            f"(byte 0x{data[error.start]:02x}); thread JSON must be UTF-8."
        ) from None


def _skip(text: str, index: int) -> int:
    return _WS.match(text, index).end()  # type: ignore[union-attr]


def _expect(text: str, index: int, char: str, what: str) -> None:
    if text[index : index + 1] != char:
        raise json.JSONDecodeError(f"Expecting {what}", text, index)


_SEPARATOR = re.compile(r"[ \t\n\r]*([,\]])[ \t\n\r]*")


def _decode_array(text: str, index: int, starts: list[int]) -> tuple[list[Any], int]:
    # The hot loop of the reader: one call of the C scanner per item, one regex match
    # per separator.
    items: list[Any] = []
    index = _skip(text, index + 1)
    if text[index : index + 1] == "]":
        return items, index + 1
    scan, separator, append, mark = _DECODER.scan_once, _SEPARATOR.match, items.append, starts.append
    while True:
        mark(index)
        try:
            value, index = scan(text, index)
        except StopIteration as stop:
            raise json.JSONDecodeError("Expecting value", text, stop.value) from None
        append(value)
        found = separator(text, index)
        if found is None:
            raise json.JSONDecodeError("Expecting ',' delimiter", text, _skip(text, index))
        if found.group(1) == "]":
            return items, found.end()
        index = found.end()


def _decode_document(text: str, positions: _Positions) -> Any:
    """Decode JSON, remembering where each array item starts; any other shape decodes whole."""
    index = _skip(text, 0)
    if text[index : index + 1] != "{":
        return _DECODER.decode(text)
    document: dict[str, Any] = {}
    index = _skip(text, index + 1)
    if text[index : index + 1] == "}":
        index += 1
    else:
        while True:
            _expect(text, index, '"', "property name enclosed in double quotes")
            key, index = json.decoder.scanstring(text, index + 1)
            index = _skip(text, index)
            _expect(text, index, ":", "':' delimiter")
            index = _skip(text, index + 1)
            if key in positions.items and text[index : index + 1] == "[":
                starts = positions.items[key]
                starts.clear()
                document[key], index = _decode_array(text, index, starts)
            else:
                document[key], index = _DECODER.raw_decode(text, index)
            index = _skip(text, index)
            if text[index : index + 1] == "}":
                index += 1
                break
            _expect(text, index, ",", "',' delimiter")
            index = _skip(text, index + 1)
    if _skip(text, index) != len(text):
        raise json.JSONDecodeError("Extra data", text, _skip(text, index))
    return document


def _lines(text: str, starts: list[int]) -> list[int]:
    lines, line, previous = [], 1, 0
    for start in starts:
        line += text.count("\n", previous, start)
        lines.append(line)
        previous = start
    return lines


# --- fast validation: mirrors schemas/thread.schema.json, one column at a time ---------


def _is_scalar(value: Any) -> bool:
    if type(value) is str:
        return len(value) <= _SCALAR_MAX
    return type(value) in (int, float, bool)


def _strings(values: list[Any], low: int, high: int) -> bool:
    """Every value is a string of ``low`` to ``high`` characters (schema minLength/maxLength)."""
    if not values:
        return True
    if set(map(type, values)) != {str}:
        return False
    return (low == 0 or min(map(len, values)) >= low) and max(map(len, values)) <= high


def _optional(items: list[dict], keys: set[str], key: str, low: int, high: int) -> bool:
    return _strings(_present(items, key, keys), low, high)


_SCALAR_TYPES = frozenset({str, int, float, bool})


def _valid_attribute_maps(maps: list[Any]) -> bool:
    """Each map is an object of non-empty keys whose values are scalars or lists of them."""
    if not maps:
        return True
    if set(map(type, maps)) != {dict}:
        return False
    keys = set().union(*maps)  # few distinct keys: check those
    if keys and (min(map(len, keys)) < 1 or max(map(len, keys)) > _ID_MAX):
        return False
    values = list(chain.from_iterable(map(dict.values, maps)))
    types = set(map(type, values))
    if not types <= _SCALAR_TYPES | {list}:
        return False
    if types == {str}:
        return not values or max(map(len, values)) <= _SCALAR_MAX
    for value in values:
        if type(value) is list:
            if not all(map(_is_scalar, value)):
                return False
        elif type(value) is str and len(value) > _SCALAR_MAX:
            return False
    return True


def _keys(items: list[Any], allowed: frozenset[str]) -> set[str] | None:
    """The keys the items use, if every item is an object with no key outside ``allowed``."""
    if not items:
        return set()
    if set(map(type, items)) != {dict}:
        return None
    keys = set().union(*items)
    return keys if keys <= allowed else None


def _present(items: list[dict], key: str, keys: set[str]) -> list[Any]:
    """The values of ``key`` in the items that have it (``keys``: every key used)."""
    if key not in keys:
        return []
    try:  # the usual case when some item has the key: every item has it
        return list(map(itemgetter(key), items))
    except KeyError:
        return [item[key] for item in items if key in item]


def _required(items: list[dict], key: str) -> list[Any] | None:
    try:
        return list(map(itemgetter(key), items))
    except KeyError:
        return None


def _valid_top(document: Any) -> bool:
    return (
        type(document) is dict
        and document.keys() <= _TOP_KEYS
        and document.get("format") == FORMAT_ID
        and type(document.get("format")) is str
        and type(document.get("elements")) is list
        and type(document.get("links")) is list
        and (
            "model" not in document
            or (
                type(document["model"]) is dict
                and all(_is_scalar(v) for v in document["model"].values())
            )
        )
    )


def _element_columns(elements: list[Any]) -> tuple[list[str], list[str]] | None:
    """The id and kind columns, if the elements pass the checks that need no codes.

    Ids, kinds and parents are checked on the distinct values :class:`ModelArrays`
    collects anyway (see :func:`_codes_valid`); here: item shape, keys, optional strings
    (a parent present must not be null) and attributes.
    """
    keys = _keys(elements, _ELEMENT_KEYS)
    if keys is None:
        return None
    ids, kinds = _required(elements, "id"), _required(elements, "kind")
    if ids is None or kinds is None:
        return None
    if not (
        _optional(elements, keys, "name", 0, _SHORT_MAX)
        and _optional(elements, keys, "text", 0, _LONG_MAX)
        and None not in _present(elements, "parent", keys)
        and _valid_attribute_maps(_present(elements, "attributes", keys))
    ):
        return None
    return ids, kinds


def _link_columns(links: list[Any]) -> tuple[list[str], list[str], list[str]] | None:
    """The end and relation columns, if the links pass the checks that need no codes."""
    keys = _keys(links, _LINK_KEYS)
    if keys is None:
        return None
    ends = [_required(links, key) for key in ("source", "target", "relation")]
    if any(column is None for column in ends):
        return None
    # A null end would be coded as "no element" (as a null parent is) and so escape
    # _codes_valid; the schema requires a string.
    if any(None in column for column in ends):  # type: ignore[operator]
        return None
    if not (
        _optional(links, keys, "id", 1, _ID_MAX)
        and _valid_attribute_maps(_present(links, "attributes", keys))
    ):
        return None
    return ends[0], ends[1], ends[2]  # type: ignore[return-value]


def _codes_valid(arrays: ModelArrays) -> bool:
    """Ids, kinds, parents, link ends and relations are identifiers (1 to 1000 characters).

    Checked on distinct values: ``names`` holds every distinct element id and every
    other name a parent or a link end uses, ``kind_names`` and ``rel_names`` the
    distinct kinds and relations. A value that equals a checked string is itself one.
    """
    return (
        _strings(arrays.names, 1, _ID_MAX)
        and _strings(arrays.kind_names, 1, _ID_MAX)
        and _strings(arrays.rel_names, 1, _ID_MAX)
    )


def fast_valid(document: Any) -> bool:
    """True when ``document`` satisfies the thread schema (without running jsonschema)."""
    return _ThreadColumns.build(document, b"", "<document>") is not None


# --- error reporting -----------------------------------------------------------------


def _json_path(path: Any) -> str:
    out = "$"
    for part in path:
        if isinstance(part, int):
            out += f"[{part}]"
        elif re.fullmatch(r"[A-Za-z_][A-Za-z0-9_]*", part):
            out += f".{part}"
        else:
            out += "[" + json.dumps(part) + "]"
    return out


def _short(value: Any) -> str:
    text = json.dumps(value, ensure_ascii=False) if not isinstance(value, str) else repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _describe(error: Any) -> str:
    if error.validator == "maxLength":
        return f"string of {len(error.instance)} characters exceeds the limit of {error.validator_value}"
    if error.validator == "additionalProperties" and isinstance(error.instance, dict):
        allowed = set(error.schema.get("properties", {}))
        extra = sorted(k for k in error.instance if k not in allowed)
        if extra and allowed:
            return (
                f"unknown key(s) {', '.join(map(repr, extra))} (allowed: "
                f"{', '.join(sorted(allowed))}; user data belongs in 'attributes')"
            )
    if error.validator in ("anyOf", "type", "const", "minLength") and error.validator != "anyOf":
        return error.message if len(error.message) < 200 else error.message[:197] + "..."
    if error.validator == "anyOf":
        return f"{_short(error.instance)} is not a string, number, boolean or list of those"
    return error.message if len(error.message) < 200 else error.message[:197] + "..."


def _schema_errors(document: Any, origin: str, lines: dict[str, list[int]]) -> InputError:
    import jsonschema

    validator = jsonschema.Draft202012Validator(schema())
    errors = sorted(validator.iter_errors(document), key=lambda e: [str(p) for p in e.path])
    details = []
    for error in errors[:MAX_REPORTED]:
        path = list(error.absolute_path)
        line = None
        if len(path) >= 2 and path[0] in lines and isinstance(path[1], int):
            line = lines[path[0]][path[1]]
        where = f"{origin}:{line}" if line else origin
        details.append(f"{where}: {_json_path(path)}: {_describe(error)}")
    if len(errors) > MAX_REPORTED:
        details.append(f"... and {len(errors) - MAX_REPORTED} more schema violations")
    if not errors:  # the fast checks and the schema disagree: report it, do not guess
        details.append(f"{origin}: the document failed the built-in checks of {FORMAT_ID}")
    count = len(errors) or 1
    return InputError(
        f"{origin}: {count} schema violation{'s' if count != 1 else ''} of {FORMAT_ID} "
        "(schemas/thread.schema.json):",
        details=details,
    )


# --- building the model ----------------------------------------------------------------


def parse(data: bytes, origin: str) -> Model:
    """Parse thread JSON bytes into a :class:`Model`.

    Raises
    ------
    InputError
        Not UTF-8, not JSON (with line and column), or not valid against the schema
        (every violation, with line and JSON path).
    """
    with collection_paused():
        typed = _decode_typed(data)
        if typed is not None:
            elements, links = typed.elements, typed.links
            columns = _ThreadColumns(
                elements, links, data, origin,
                (list(map(attrgetter("id"), elements)), list(map(attrgetter("kind"), elements)),
                 list(map(attrgetter("parent"), elements))),
                (list(map(attrgetter("source"), links)), list(map(attrgetter("target"), links)),
                 list(map(attrgetter("relation"), links))),
            )
            del elements, links
            columns.arrays = ModelArrays(columns)
            return Model.from_columns(columns, meta=typed.model, origin=origin, arrays=columns.take_arrays())
        text = _decode_text(data, origin)
        try:
            document = _DECODER.decode(text)
        except (ValueError, RecursionError):
            document = None  # decode again item by item for the located message
        del text
        columns = None if document is None else _ThreadColumns.build(document, data, origin)
    if columns is None:
        return _parse_slowly(data, origin)
    return Model.from_columns(columns, meta=document.get("model"), origin=origin, arrays=columns.take_arrays())


def _parse_slowly(data: bytes, origin: str) -> Model:
    """Decode item by item, knowing every item's line; report what is wrong."""
    text = _decode_text(data, origin)
    positions = _Positions()
    try:
        document = _decode_document(text, positions)
    except json.JSONDecodeError as error:
        raise InputError(
            f"{origin}:{error.lineno}:{error.colno}: malformed JSON: {error.msg}."
        ) from None
    except (ValueError, RecursionError) as error:
        raise InputError(f"{origin}: malformed JSON: {error}.") from None
    lines = {key: _lines(text, starts) for key, starts in positions.items.items()}
    if not fast_valid(document):
        raise _schema_errors(document, origin, lines)
    columns = _ThreadColumns.build(document, data, origin)
    assert columns is not None
    columns.lines = lines
    return Model.from_columns(columns, meta=document.get("model"), origin=origin, arrays=columns.take_arrays())


class _ThreadColumns:
    """The columns of a decoded, valid thread document (see :class:`tracecheck.model.Columns`).

    Keeps the decoded item dictionaries; Element and Link objects are built from them
    only on :meth:`materialise` (or one link at a time for a finding).
    """

    def __init__(self, element_items: list[Any], link_items: list[Any], data: bytes, origin: str,
                 elements: tuple[list[str], list[str], list[str | None]],
                 links: tuple[list[str], list[str], list[str]]) -> None:
        # The items are dicts (standard decoder) or _Item structs (typed decoder); both
        # answer item["key"] and item.get("key").
        self._element_items: list[Any] = element_items
        self._link_items: list[Any] = link_items
        self.element_ids, self.element_kinds, self.element_parents = elements
        self.link_sources, self.link_targets, self.link_relations = links
        self._data: bytes | None = data
        self._origin = origin
        self.lines: dict[str, list[int]] | None = None
        self._lazy: Any = None  # json_lines.LazyLines once the bytes were scanned
        self.arrays: ModelArrays | None = None

    @classmethod
    def build(cls, document: Any, data: bytes, origin: str) -> _ThreadColumns | None:
        """The columns with their integer codes, or ``None`` when the document breaks the schema."""
        if not _valid_top(document):
            return None
        elements = _element_columns(document["elements"])
        links = None if elements is None else _link_columns(document["links"])
        if elements is None or links is None:
            return None
        items = document["elements"]
        parents = list(map(dict.get, items, repeat("parent")))
        columns = cls(items, document["links"], data, origin, (*elements, parents), links)
        try:
            columns.arrays = ModelArrays(columns)
        except TypeError:  # an unhashable id, kind, parent, end or relation
            return None
        if not _codes_valid(columns.arrays):
            return None
        if columns.arrays.n != len(columns.element_ids):
            # Codes describe the first element of each id; check the later copies too.
            parents = [p for p in columns.element_parents if p is not None]
            if not (_strings(columns.element_kinds, 1, _ID_MAX) and _strings(parents, 1, _ID_MAX)):
                return None
        return columns

    def take_arrays(self) -> ModelArrays | None:
        """Hand the integer columns to the model and forget them here: the arrays refer
        to these columns, and a reference back would be a cycle that keeps the whole
        decoded document alive until the cyclic collector walks it (about 0.25 s per
        100k elements, at exit or when a paused collector resumes)."""
        arrays, self.arrays = self.arrays, None
        return arrays

    def _scan(self) -> None:
        """Scan the bytes for item offsets once (lines then come one at a time); when
        the scan cannot vouch, decode item by item for every line."""
        from tracecheck.formats.json_lines import LazyLines

        data = self._data or b""
        if data.startswith(b"\xef\xbb\xbf"):
            data = data[3:]
        counts = {"elements": len(self._element_items), "links": len(self._link_items)}
        self._lazy = LazyLines.scan(data, counts)
        if self._lazy is None:  # the byte scan could not vouch: decode item by item
            text = _decode_text(data, self._origin)
            positions = _Positions()
            _decode_document(text, positions)
            self.lines = {key: _lines(text, starts) for key, starts in positions.items.items()}
        self._data = None

    def _line(self, name: str, index: int) -> int:
        if self.lines is None and self._lazy is None:
            self._scan()
        if self.lines is not None:
            return self.lines[name][index]
        return self._lazy.line(name, index)  # type: ignore[union-attr]

    def _lines(self) -> dict[str, list[int]]:
        """Every item's line (for building every object)."""
        if self.lines is None:
            if self._lazy is None:
                self._scan()
            if self.lines is None:
                lazy = self._lazy
                assert lazy is not None
                self.lines = {"elements": lazy.lines("elements"), "links": lazy.lines("links")}
                self._lazy = None
        return self.lines

    def element_attributes(self, index: int) -> Mapping[str, Any]:
        return self._element_items[index].get("attributes") or {}

    def element_location(self, index: int) -> Location:
        return Location(self._origin, self._line("elements", index))

    def element_content(self, index: int) -> Element:
        """Element ``index`` for reading its fields; its location is set only when the
        lines are known already (finding them scans the whole file)."""
        e = self._element_items[index]
        location = None if self.lines is None else Location(self._origin, self.lines["elements"][index])
        return Element(e["id"], e["kind"], e.get("name"), e.get("text"), e.get("parent"),
                       e.get("attributes") or {}, location)

    @property
    def element_items(self) -> list[dict[str, Any]]:
        """The decoded element items in file order (read only): the diff compares
        them whole before it compares fields."""
        return self._element_items

    def link_location(self, index: int) -> Location:
        return Location(self._origin, self._line("links", index))

    def link(self, index: int) -> Link:
        x = self._link_items[index]
        return Link(x["source"], x["target"], x["relation"], x.get("id"),
                    x.get("attributes") or {}, self.link_location(index))

    def materialise(self) -> tuple[tuple[Element, ...], tuple[Link, ...]]:
        return self.materialise_elements(), self.materialise_links()

    def materialise_elements(self) -> tuple[Element, ...]:
        origin = self._origin
        return tuple(
            Element(e["id"], e["kind"], e.get("name"), e.get("text"), e.get("parent"),
                    e.get("attributes") or {}, Location(origin, line))
            for e, line in zip(self._element_items, self._lines()["elements"], strict=True)
        )

    def materialise_links(self) -> tuple[Link, ...]:
        origin = self._origin
        return tuple(
            Link(x["source"], x["target"], x["relation"], x.get("id"),
                 x.get("attributes") or {}, Location(origin, line))
            for x, line in zip(self._link_items, self._lines()["links"], strict=True)
        )


def to_document(model: Model) -> dict[str, Any]:
    """The thread JSON document of ``model`` (optional fields only when set)."""
    elements = []
    for e in model.elements:
        item: dict[str, Any] = {"id": e.id, "kind": e.kind}
        for key in ("name", "text", "parent"):
            if getattr(e, key) is not None:
                item[key] = getattr(e, key)
        if e.attributes:
            item["attributes"] = dict(e.attributes)
        elements.append(item)
    links = []
    for x in model.links:
        item = {"source": x.source, "target": x.target, "relation": x.relation}
        if x.id is not None:
            item["id"] = x.id
        if x.attributes:
            item["attributes"] = dict(x.attributes)
        links.append(item)
    document: dict[str, Any] = {"format": FORMAT_ID}
    if model.meta:
        document["model"] = dict(model.meta)
    document["elements"] = elements
    document["links"] = links
    return document


def write(model: Model) -> bytes:
    """Serialise ``model`` as thread JSON (UTF-8, two-space indent, trailing newline)."""
    return (json.dumps(to_document(model), indent=2, ensure_ascii=False) + "\n").encode("utf-8")


class ThreadJson:
    name = "thread-json"
    extensions = (".json",)

    def sniff(self, head: bytes, name: str) -> bool:
        stripped = head.lstrip(b"\xef\xbb\xbf \t\r\n")
        return stripped.startswith(b"{") and b'"format"' in head or (
            stripped.startswith(b"{") and name.lower().endswith(".json")
        )

    def read(self, data: bytes, origin: str, options: Mapping[str, Any]) -> Model:
        return parse(data, origin)

    def write(self, model: Model, options: Mapping[str, Any] | None = None) -> bytes:
        return write(model)


register(ThreadJson())
