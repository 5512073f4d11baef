"""Thread JSON (``tracecheck-thread/1``), the native format.

The reader decodes the two big arrays one item at a time so it knows the line every
element and link starts on, and validates while it builds the model. The published
contract is ``schemas/thread.schema.json``; the fast checks here accept exactly what
that schema accepts (a property test holds them to it). When the fast checks find
anything wrong, the schema itself is run over the document so the user gets *all*
violations, each with its file, line and JSON path.
"""

from __future__ import annotations

import json
import re
from collections.abc import Mapping
from functools import lru_cache
from importlib import resources
from typing import Any

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


# --- fast validation: mirrors schemas/thread.schema.json ------------------------------


def _is_id(value: Any) -> bool:
    return type(value) is str and 0 < len(value) <= _ID_MAX


def _is_scalar(value: Any) -> bool:
    if type(value) is str:
        return len(value) <= _SCALAR_MAX
    return type(value) in (int, float, bool)


def _valid_attributes(value: Any) -> bool:
    if type(value) is not dict:
        return False
    for key, item in value.items():
        if not 0 < len(key) <= _ID_MAX:
            return False
        if type(item) is list:
            if not all(_is_scalar(x) for x in item):
                return False
        elif not _is_scalar(item):
            return False
    return True


def _optional_string(obj: dict, key: str, limit: int) -> bool:
    value = obj.get(key)
    return value is None and key not in obj or (type(value) is str and len(value) <= limit)


def _valid_element(obj: Any) -> bool:
    return (
        type(obj) is dict
        and obj.keys() <= _ELEMENT_KEYS
        and _is_id(obj.get("id"))
        and _is_id(obj.get("kind"))
        and _optional_string(obj, "name", _SHORT_MAX)
        and _optional_string(obj, "text", _LONG_MAX)
        and ("parent" not in obj or _is_id(obj["parent"]))
        and ("attributes" not in obj or _valid_attributes(obj["attributes"]))
    )


def _valid_link(obj: Any) -> bool:
    return (
        type(obj) is dict
        and obj.keys() <= _LINK_KEYS
        and _is_id(obj.get("source"))
        and _is_id(obj.get("target"))
        and _is_id(obj.get("relation"))
        and ("id" not in obj or _is_id(obj["id"]))
        and ("attributes" not in obj or _valid_attributes(obj["attributes"]))
    )


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


def fast_valid(document: Any) -> bool:
    """True when ``document`` satisfies the thread schema (without running jsonschema)."""
    return (
        _valid_top(document)
        and all(_valid_element(e) for e in document["elements"])
        and all(_valid_link(x) for x in document["links"])
    )


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
    return _build(document, origin, lines)


def _build(document: dict[str, Any], origin: str, lines: dict[str, list[int]]) -> Model:
    element_lines = lines["elements"] or [None] * len(document["elements"])
    link_lines = lines["links"] or [None] * len(document["links"])
    elements = [
        Element(
            e["id"],
            e["kind"],
            e.get("name"),
            e.get("text"),
            e.get("parent"),
            e.get("attributes") or {},
            Location(origin, line),
        )
        for e, line in zip(document["elements"], element_lines, strict=True)
    ]
    links = [
        Link(
            x["source"],
            x["target"],
            x["relation"],
            x.get("id"),
            x.get("attributes") or {},
            Location(origin, line),
        )
        for x, line in zip(document["links"], link_lines, strict=True)
    ]
    return Model(elements, links, meta=document.get("model"), origin=origin)


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
