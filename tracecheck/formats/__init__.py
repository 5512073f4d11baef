"""Format adapters: each parses bytes into the one :class:`~tracecheck.model.Model`.

An adapter is a module-level object satisfying :class:`Format`, registered with
:func:`register`. :func:`detect` sniffs content (not only the file name), and
:func:`read_model` is the single entry point every command uses.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any, Protocol, runtime_checkable

from tracecheck.errors import InputError, UsageError
from tracecheck.model import Model

__all__ = ["Format", "register", "registry", "detect", "read_model", "get_format"]


@runtime_checkable
class Format(Protocol):
    """What a format adapter provides.

    ``name`` is what ``--input-format`` / ``--to`` accept; ``extensions`` are hints only.
    ``sniff`` looks at the first bytes (and the name) and says whether the content is
    this format. ``read`` parses the whole input. ``write`` is optional (``None`` when the
    format is read-only) and returns the serialised bytes.
    """

    name: str
    extensions: tuple[str, ...]

    def sniff(self, head: bytes, name: str) -> bool: ...

    def read(self, data: bytes, origin: str, options: Mapping[str, Any]) -> Model: ...


_REGISTRY: dict[str, Format] = {}


def register(adapter: Format) -> Format:
    """Add an adapter to the registry; a second adapter of the same name is a bug."""
    if adapter.name in _REGISTRY:
        raise RuntimeError(f"format {adapter.name!r} registered twice")
    if not isinstance(adapter, Format):
        raise TypeError(f"{adapter!r} does not satisfy the Format protocol")
    _REGISTRY[adapter.name] = adapter
    return adapter


def registry() -> dict[str, Format]:
    _load_builtin()
    return dict(_REGISTRY)


def get_format(name: str) -> Format:
    formats = registry()
    if name not in formats:
        known = ", ".join(sorted(formats))
        raise UsageError(f"unknown format {name!r}; known formats: {known}.")
    return formats[name]


def detect(data: bytes, name: str) -> Format:
    """Choose the adapter by content; the extension only breaks ties."""
    formats = registry()
    head = data[:65536]
    if not head.strip() and not data.strip():  # strip the whole input only when its head is blank
        raise InputError(f"{name}: the input is empty; expected a model export.")
    candidates = [f for f in formats.values() if f.sniff(head, name)]
    if len(candidates) > 1:
        by_ext = [f for f in candidates if name.lower().endswith(f.extensions)]
        candidates = by_ext or candidates
    if not candidates:
        # Content said nothing clear (truncated, binary, ...): let the adapter the file
        # name points at give its precise, located error.
        candidates = [f for f in formats.values() if name.lower().endswith(f.extensions)]
    if not candidates:
        tried = ", ".join(sorted(formats))
        raise InputError(
            f"{name}: the content is not a model format tracecheck reads (tried: {tried}); "
            "use --input-format to force one."
        )
    return candidates[0]


def read_model(
    data: bytes,
    origin: str,
    *,
    input_format: str | None = None,
    options: Mapping[str, Any] | None = None,
) -> Model:
    adapter = get_format(input_format) if input_format else detect(data, origin)
    return adapter.read(data, origin, options or {})


_LOADED = False


def _load_builtin() -> None:
    # Imported lazily so that importing one adapter never pays for the others.
    global _LOADED
    if _LOADED:
        return
    _LOADED = True
    import importlib

    for module in _BUILTIN:
        importlib.import_module(f"tracecheck.formats.{module}")


# Modules under tracecheck/formats/ that register an adapter on import.
_BUILTIN = ["thread_json", "graphml", "reqif", "reqifz", "csvpair"]
