"""Shared by the interchange adapters: their ``[formats.NAME]`` options and the typing of
attribute values that formats without lists or numbers need to spell out."""

from __future__ import annotations

import json
import math
import re
from collections.abc import Mapping
from typing import Any

from tracecheck.errors import ConfigError, InputError

__all__ = ["adapter_options", "value_type", "format_scalar", "check_xml_text", "json_list"]

# A spec maps option name -> (default, kind); kind is "str", "str?" (may be unset),
# "map" (string -> string table) or "list?" (list of strings, may be unset).
OptionSpec = Mapping[str, tuple[Any, str]]


def _bad(section: str, key: str, want: str) -> ConfigError:
    return ConfigError(f"configuration formats.{section}.{key}: expected {want}.")


def _checked(section: str, key: str, value: Any, kind: str) -> Any:
    if kind in ("str", "str?"):
        if not isinstance(value, str) or not value:
            raise _bad(section, key, "a non-empty string")
    elif kind == "map":
        if not isinstance(value, Mapping) or not all(
            isinstance(k, str) and isinstance(v, str) and v for k, v in value.items()
        ):
            raise _bad(section, key, "a table of strings")
        value = dict(value)
    elif kind == "list?":
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            raise _bad(section, key, "a list of strings")
    return value


def adapter_options(options: Mapping[str, Any], section: str, spec: OptionSpec) -> dict[str, Any]:
    """The options of ``[formats.<section>]`` merged over the defaults in ``spec``.

    Raises
    ------
    ConfigError
        An unknown key (a typo must not pass silently) or a value of the wrong type.
    """
    raw = options.get(section, {}) if isinstance(options, Mapping) else {}
    if not isinstance(raw, Mapping):
        raise ConfigError(f"configuration formats.{section}: expected a table.")
    unknown = sorted(set(raw) - set(spec))
    if unknown:
        raise ConfigError(
            f"configuration formats.{section}.{unknown[0]}: unknown option; known options: "
            f"{', '.join(sorted(spec))}."
        )
    merged = {key: default for key, (default, _kind) in spec.items()}
    for key, value in raw.items():
        merged[key] = _checked(section, key, value, spec[key][1])
    return merged


def value_type(value: Any) -> str:
    """``bool``, ``int``, ``float``, ``str`` or ``list`` (bool before int: True is an int)."""
    for name, kind in (("bool", bool), ("int", int), ("float", float), ("str", str)):
        if isinstance(value, kind):
            return name
    return "list"


def format_scalar(value: Any) -> str:
    """Text form of a bool, int or float that Python's ``float``/``int`` read back exactly."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        if math.isinf(value):
            return "INF" if value > 0 else "-INF"
        return repr(value)
    return str(value)


def parse_bool(text: str) -> bool:
    lowered = text.strip().lower()
    if lowered in ("true", "1"):
        return True
    if lowered in ("false", "0"):
        return False
    raise ValueError(f"{text!r} is not a boolean (true or false)")


def json_list(value: list) -> str:
    """A list attribute as compact JSON text (for formats that have no list type)."""
    return json.dumps(value, ensure_ascii=False, separators=(",", ":"))


_XML_BAD = re.compile("[\x00-\x08\x0b\x0c\x0e-\x1f\ud800-\udfff\ufffe\uffff]")


def check_xml_text(text: str, what: str) -> str:
    """XML 1.0 cannot carry most control characters; say which value holds one."""
    bad = _XML_BAD.search(text)
    if bad is not None:
        raise InputError(
            f"{what} contains the character U+{ord(bad.group()):04X}, which XML 1.0 cannot "
            "represent; remove it or keep the model in thread JSON."
        )
    return text
