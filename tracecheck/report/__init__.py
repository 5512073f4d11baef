"""Renderers: each a function of a result object alone, registered per (command, format).

Only this package imports rich. A renderer returns the whole output as ``str`` (text
formats) or ``bytes``; the command writes it to stdout or, atomically, to ``-o``.
"""

from __future__ import annotations

import importlib
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Protocol

__all__ = ["RenderOptions", "Renderer", "renderer", "render", "formats_for", "renderers"]


@dataclass(frozen=True)
class RenderOptions:
    color: bool = False
    width: int = 100
    quiet: bool = False


class Renderer(Protocol):
    def __call__(self, result: Any, options: RenderOptions) -> str | bytes: ...


_RENDERERS: dict[tuple[str, str], Renderer] = {}

# Modules under tracecheck/report/ that register renderers on import.
_BUILTIN = ["check", "diff", "coverage", "coverage_html", "review", "ci", "gate", "history", "embed"]


def renderer(command: str, fmt: str) -> Callable[[Renderer], Renderer]:
    """Register a renderer for ``command`` in ``fmt``; a duplicate is a bug."""

    def register(function: Renderer) -> Renderer:
        key = (command, fmt)
        if key in _RENDERERS:
            raise RuntimeError(f"renderer {key} registered twice")
        _RENDERERS[key] = function
        return function

    return register


# The modules that register each command's renderers, so that rendering one command's
# result imports only those: importing every renderer module pulls in the embedding
# (scipy.optimize) and the diff, about 0.8-1.1 s of every `check` run's start-up.
# tests/test_report_registry.py checks this table against a full load.
_FOR_COMMAND: dict[str, tuple[str, ...]] = {
    "check": ("check", "ci"),
    "gate": ("gate", "ci"),
    "diff": ("diff",),
    "coverage": ("coverage", "coverage_html"),
    "history": ("history",),
    "review-status": ("review",),
    "embed fit": ("embed",),
    "embed verify": ("embed",),
    "embed suggest": ("embed",),
}


def _load(command: str | None = None) -> None:
    for module in _BUILTIN if command not in _FOR_COMMAND else _FOR_COMMAND[command]:  # type: ignore[index]
        importlib.import_module(f"tracecheck.report.{module}")


def renderers() -> dict[tuple[str, str], Renderer]:
    _load()
    return dict(_RENDERERS)


def formats_for(command: str) -> list[str]:
    _load()
    return sorted(fmt for cmd, fmt in _RENDERERS if cmd == command)


def render(command: str, fmt: str, result: Any, options: RenderOptions) -> str | bytes:
    _load(command)
    if (command, fmt) not in _RENDERERS:
        _load()
    return _RENDERERS[(command, fmt)](result, options)
