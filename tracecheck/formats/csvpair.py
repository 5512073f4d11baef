"""A pair of CSV files: one row per element, one row per link.

The model spec is a folder holding ``elements.csv`` and ``links.csv``, or the two
paths joined by a comma (``model/req.csv,model/trace.csv``, elements first). A single
CSV file given alone is read as elements only (or links only, when its header has the
link columns). UTF-8 (a byte-order mark is allowed), comma-separated, first row the
header naming the columns (RFC 4180 quoting; cells may span lines).

Columns (``[formats.csv]``; defaults in brackets):

``id`` ["id"], ``kind`` ["kind"], ``name`` ["name"], ``text`` ["text"], ``parent`` ["parent"]
    element columns; ``id`` and ``kind`` are required.
``source`` ["source"], ``target`` ["target"], ``relation`` ["relation"], ``link_id`` ["id"]
    link columns; the first three are required.
``attributes`` [every other column]
    the columns that become attributes; other columns are ignored.
``delimiter`` [","]
    one character.

An empty cell means "not set". Attribute values are strings unless the header gives a
type after a colon: ``level:int``, ``ratio:float``, ``safety:bool`` (``true``/``false``),
``tags:json`` (any JSON value, used for lists and the empty string), ``note:str``
(explicitly a string: for names that end in a colon and a type word or that are also
element columns). The writer uses exactly these, so a model survives the round trip
except for its ``model`` block (CSV has nowhere to keep it) and empty names or texts.
Every element and link remembers the line its row starts on.
"""

from __future__ import annotations

import csv
import io
import json
import math
from collections.abc import Mapping
from typing import Any

from tracecheck.errors import ConfigError, InputError
from tracecheck.formats import register
from tracecheck.formats.mapping import adapter_options, format_scalar, parse_bool, value_type
from tracecheck.model import Element, Link, Location, Model

__all__ = ["CsvPair", "parse_elements", "parse_links", "read_pair", "write_pair", "OPTIONS",
           "ELEMENTS_FILE", "LINKS_FILE"]

ELEMENTS_FILE, LINKS_FILE = "elements.csv", "links.csv"
OPTIONS = {
    "id": ("id", "str"),
    "kind": ("kind", "str"),
    "name": ("name", "str"),
    "text": ("text", "str"),
    "parent": ("parent", "str"),
    "source": ("source", "str"),
    "target": ("target", "str"),
    "relation": ("relation", "str"),
    "link_id": ("id", "str"),
    "attributes": (None, "list?"),
    "delimiter": (",", "str"),
}
_ELEMENT_FIELDS = ("id", "kind", "name", "text", "parent")
_LINK_FIELDS = ("source", "target", "relation", "link_id")
_TYPES = {"str": str, "int": int, "float": float, "bool": parse_bool, "json": json.loads}
_FIELD_LIMIT = 1_100_000  # thread JSON allows texts of a million characters


def _options(options: Mapping[str, Any]) -> dict[str, Any]:
    opts = adapter_options(options, "csv", OPTIONS)
    if len(opts["delimiter"]) != 1:
        raise ConfigError("configuration formats.csv.delimiter: expected one character.")
    return opts


def _decode(data: bytes, origin: str) -> str:
    try:
        return data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        line = data.count(b"\n", 0, error.start) + 1
        raise InputError(f"{origin}:{line}: the file is not UTF-8 text (byte 0x{data[error.start]:02x}).") from None


class _Table:
    """The rows of one CSV file with the line each starts on, and its header."""

    def __init__(self, data: bytes, origin: str, delimiter: str) -> None:
        self.origin = origin
        if csv.field_size_limit() < _FIELD_LIMIT:
            csv.field_size_limit(_FIELD_LIMIT)
        self._reader = csv.reader(io.StringIO(_decode(data, origin), newline=""), delimiter=delimiter, strict=True)
        self._line = 0
        header = self._next()
        if header is None:
            raise InputError(f"{origin}: the file is empty; the first row must name the columns.")
        self.header = [cell.strip() for cell in header[1]]
        seen: dict[str, int] = {}
        for number, name in enumerate(self.header, 1):
            if name in seen:
                raise self.error(1, number, f"column {name!r} appears twice in the header (also column {seen[name]})")
            seen[name] = number

    def _next(self) -> tuple[int, list[str]] | None:
        start = self._line + 1
        try:
            row = next(self._reader)
        except StopIteration:
            return None
        except csv.Error as error:
            raise InputError(f"{self.origin}:{self._reader.line_num}: malformed CSV: {error}.") from None
        self._line = self._reader.line_num
        return start, row

    def rows(self):
        """``(line, row number, cells)`` for each data row; blank rows are skipped."""
        number = 1
        while (item := self._next()) is not None:
            number += 1
            line, cells = item
            if not any(cell.strip() for cell in cells):
                continue
            if len(cells) > len(self.header):
                raise self.error(line, len(self.header) + 1, f"row {number} has {len(cells)} cells but the "
                                 f"header names {len(self.header)} columns", row=number)
            yield line, number, cells + [""] * (len(self.header) - len(cells))

    def error(self, line: int, column: int, message: str, row: int = 1) -> InputError:
        name = self.header[column - 1] if hasattr(self, "header") and column <= len(self.header) else None
        label = f"column {column}" + (f" ({name!r})" if name else "")
        return InputError(f"{self.origin}:{line}: row {row}, {label}: {message}.")


def _columns(table: _Table, opts: Mapping[str, Any], fields: tuple[str, ...], required: tuple[str, ...]):
    """Positions of the field columns and the attribute columns ``(position, name, convert)``."""
    where = {name: n for n, name in enumerate(table.header)}
    positions = {}
    for field in fields:
        column = opts[field]
        if column in where:
            positions[field] = where[column]
        elif field in required:
            raise InputError(
                f"{table.origin}:1: the header has no {column!r} column (columns: "
                f"{', '.join(table.header) or 'none'}); set formats.csv.{field} if it is named otherwise."
            )
    taken = set(positions.values())
    wanted = opts["attributes"]
    attributes = []
    for n, header in enumerate(table.header):
        if n in taken or not header:
            continue
        name, _, type_name = header.rpartition(":")
        if not name or type_name not in _TYPES:
            name, type_name = header, "str"
        if wanted is None or name in wanted or header in wanted:
            attributes.append((n, name, _TYPES[type_name]))
    return positions, attributes


def _attributes(table: _Table, line: int, number: int, cells: list[str], columns) -> dict[str, Any]:
    values: dict[str, Any] = {}
    for n, name, convert in columns:
        cell = cells[n]
        if cell == "":
            continue
        if name in values:
            raise table.error(line, n + 1, f"attribute {name!r} already has a value in another column", number)
        try:
            value = convert(cell if convert is str else cell.strip())
        except ValueError as error:
            raise table.error(line, n + 1, str(error), number) from None
        if not _keepable(value):
            raise table.error(line, n + 1, f"{cell!r} is not a string, number, boolean or list of those", number)
        values[name] = value
    return values


def _scalar(value: Any) -> bool:
    if isinstance(value, float):
        return math.isfinite(value)
    return isinstance(value, (str, int, bool))


def _keepable(value: Any) -> bool:
    return _scalar(value) or isinstance(value, list) and all(_scalar(v) for v in value)


def _cell(cells: list[str], positions: Mapping[str, int], field: str) -> str | None:
    n = positions.get(field)
    return None if n is None or cells[n] == "" else cells[n]


def parse_elements(data: bytes, origin: str, options: Mapping[str, Any] | None = None) -> list[Element]:
    """The elements of an elements CSV file (see the module docstring)."""
    opts = _options(options or {})
    table = _Table(data, origin, opts["delimiter"])
    positions, columns = _columns(table, opts, _ELEMENT_FIELDS, ("id", "kind"))
    elements = []
    for line, number, cells in table.rows():
        for field in ("id", "kind"):
            if _cell(cells, positions, field) is None:
                raise table.error(line, positions[field] + 1, f"empty; every element needs its {field}", number)
        elements.append(Element(
            cells[positions["id"]], cells[positions["kind"]], _cell(cells, positions, "name"),
            _cell(cells, positions, "text"), _cell(cells, positions, "parent"),
            _attributes(table, line, number, cells, columns), Location(origin, line),
        ))
    return elements


def parse_links(data: bytes, origin: str, options: Mapping[str, Any] | None = None) -> list[Link]:
    """The links of a links CSV file (see the module docstring)."""
    opts = _options(options or {})
    table = _Table(data, origin, opts["delimiter"])
    positions, columns = _columns(table, opts, _LINK_FIELDS, ("source", "target", "relation"))
    links = []
    for line, number, cells in table.rows():
        for field in ("source", "target", "relation"):
            if _cell(cells, positions, field) is None:
                raise table.error(line, positions[field] + 1, f"empty; every link needs its {field}", number)
        links.append(Link(
            cells[positions["source"]], cells[positions["target"]], cells[positions["relation"]],
            _cell(cells, positions, "link_id"), _attributes(table, line, number, cells, columns),
            Location(origin, line),
        ))
    return links


def read_pair(elements: tuple[bytes, str], links: tuple[bytes, str], options: Mapping[str, Any] | None = None) -> Model:
    """A model from an elements file and a links file, each given as ``(data, origin)``."""
    return Model(parse_elements(*elements, options), parse_links(*links, options),
                 origin=elements[1], format="csv")


# --- writing ---------------------------------------------------------------------------


def _spelled(value: Any) -> str:
    kind = value_type(value)
    if kind == "list" or value == "":
        return "json"
    return kind


def _header_of(name: str, kind: str, fields: set[str]) -> str:
    _, colon, suffix = name.rpartition(":")
    if kind == "str" and not (colon and suffix in _TYPES) and name not in fields:
        return name
    return f"{name}:{kind}"


def _text_of(value: Any, kind: str) -> str:
    if kind == "json":
        return json.dumps(value, ensure_ascii=False, separators=(",", ":"))
    return value if kind == "str" else format_scalar(value)


def _write_table(owners, fields: list[tuple[str, Any]], delimiter: str) -> bytes:
    field_names = {column for column, _get in fields}
    columns = sorted({(name, _spelled(v)) for owner in owners for name, v in owner.attributes.items()})
    out = io.StringIO()
    writer = csv.writer(out, delimiter=delimiter, lineterminator="\n")
    # The csv module quotes a cell holding "\n" but not one holding a lone "\r", which
    # readers take for a line end; rows with one are written fully quoted.
    quoted = csv.writer(out, delimiter=delimiter, lineterminator="\n", quoting=csv.QUOTE_ALL)
    writer.writerow([column for column, _get in fields] + [_header_of(n, k, field_names) for n, k in columns])
    for owner in owners:
        row = ["" if get(owner) is None else get(owner) for _column, get in fields]
        for name, kind in columns:
            value = owner.attributes.get(name)
            row.append(_text_of(value, kind) if value is not None and _spelled(value) == kind else "")
        (quoted if any("\r" in cell for cell in row) else writer).writerow(row)
    return out.getvalue().encode("utf-8")


def write_pair(model: Model, options: Mapping[str, Any] | None = None) -> dict[str, bytes]:
    """``{"elements.csv": ..., "links.csv": ...}`` for ``model`` (deterministic)."""
    opts = _options(options or {})
    element_fields = [(opts[f], lambda e, f=f: getattr(e, f)) for f in _ELEMENT_FIELDS]
    link_fields = [(opts[f], lambda x, f=f: getattr(x, "id" if f == "link_id" else f)) for f in _LINK_FIELDS]
    return {
        ELEMENTS_FILE: _write_table(model.elements, element_fields, opts["delimiter"]),
        LINKS_FILE: _write_table(model.links, link_fields, opts["delimiter"]),
    }


class CsvPair:
    name = "csv"
    extensions = (".csv",)

    def _header(self, head: bytes) -> set[str]:
        first = head.decode("utf-8", errors="ignore").lstrip("\ufeff").split("\n", 1)[0]
        return {cell.strip() for cell in first.rstrip("\r").split(",")}

    def sniff(self, head: bytes, name: str) -> bool:
        header = self._header(head)
        return {"id", "kind"} <= header or {"source", "target", "relation"} <= header

    def read(self, data: bytes, origin: str, options: Mapping[str, Any]) -> Model:
        # One file alone: elements, or links when its header has the link columns.
        opts = _options(options)
        header = self._header(data[:65536])
        if {opts["source"], opts["target"], opts["relation"]} <= header and opts["kind"] not in header:
            return Model([], parse_links(data, origin, options), origin=origin, format="csv")
        return Model(parse_elements(data, origin, options), [], origin=origin, format="csv")

    def write_files(self, model: Model, options: Mapping[str, Any] | None = None) -> dict[str, bytes]:
        return write_pair(model, options)


register(CsvPair())
