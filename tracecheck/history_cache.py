"""An on-disk cache of per-revision history metrics, keyed by git blob id.

A git blob id names file content exactly, so the metrics of a blob under one tool
version and one configuration never change. Entries live under the user cache folder
(``$XDG_CACHE_HOME/tracecheck/history``, else ``~/.cache/tracecheck/history``); the
folder can be deleted at any time. Entries are written atomically (a temporary file
and a rename), and one that cannot be read or has the wrong shape is treated as
absent: a cache never makes a run fail.
"""

from __future__ import annotations

import hashlib
import json
import os
import tempfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

from tracecheck import __version__

__all__ = ["Cache", "cache_folder", "FORMAT"]

# Bumped when the shape or meaning of an entry changes, so old entries are not read.
FORMAT = "history-cache/1"


def cache_folder() -> Path:
    base = os.environ.get("XDG_CACHE_HOME") or str(Path.home() / ".cache")
    return Path(base) / "tracecheck" / "history"


class Cache:
    """Entries keyed by a tuple of strings; ``salt`` (configuration hash, input format)
    and the tool version are part of every key.

    ``folder=None`` is a cache that remembers nothing (``--no-cache``).
    """

    def __init__(self, folder: Path | None, salt: str) -> None:
        self.folder = folder
        self.salt = salt
        self.hits = 0
        self.misses = 0

    def _file(self, parts: tuple[str, ...]) -> Path:
        assert self.folder is not None
        key = "\x1f".join((FORMAT, __version__, self.salt, *parts))
        digest = hashlib.sha256(key.encode("utf-8")).hexdigest()
        return self.folder / digest[:2] / f"{digest}.json"

    def get(self, parts: tuple[str, ...], valid: Callable[[Any], bool]) -> Any | None:
        """The stored value, or ``None`` when absent, unreadable or not ``valid``."""
        if self.folder is None:
            return None
        try:
            document = json.loads(self._file(parts).read_bytes())
            value = document["value"] if document.get("format") == FORMAT else None
        except (OSError, ValueError, TypeError, AttributeError, KeyError):
            value = None
        try:
            usable = value is not None and valid(value)
        except Exception:  # any shape the validator did not foresee: still only a miss
            usable = False
        if not usable:
            self.misses += 1
            return None
        self.hits += 1
        return value

    def put(self, parts: tuple[str, ...], value: Any) -> None:
        """Store ``value`` (JSON-able); a folder that cannot be written is passed over."""
        if self.folder is None:
            return
        path = self._file(parts)
        data = json.dumps({"format": FORMAT, "value": value}, sort_keys=True).encode("utf-8")
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(prefix=".entry.", suffix=".tmp", dir=path.parent)
            try:
                with os.fdopen(fd, "wb") as handle:
                    handle.write(data)
                os.replace(tmp, path)
            except BaseException:
                Path(tmp).unlink(missing_ok=True)
                raise
        except OSError:
            return
