"""tracecheck: integrity checks, stage diffs and coverage reports for digital threads."""

from __future__ import annotations

__version__ = "0.1.0"
__all__ = ["__version__"]
