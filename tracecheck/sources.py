"""Model specs: a path, ``-`` for standard input, or ``REV:PATH`` read from git.

Everything downstream parses bytes, so files, stdin and git blobs share one path.
"""

from __future__ import annotations

import os
import sys
from dataclasses import dataclass, replace
from pathlib import Path
from typing import BinaryIO

from tracecheck.errors import InputError

__all__ = ["Source", "read_source", "split_rev_spec", "MAX_INPUT_BYTES"]

# A guard against feeding the parser something that is clearly not a model export.
MAX_INPUT_BYTES = 4 * 1024**3


@dataclass(frozen=True)
class Source:
    """The bytes of one model input and where they came from.

    ``origin`` is the display name used in every message and finding; ``path`` is the
    file on disk (``None`` for stdin); ``rev`` the git revision for ``REV:PATH`` specs,
    with ``repo_path`` the path inside the repository. For a CSV pair (a folder holding
    ``elements.csv`` and ``links.csv``, or ``ELEMENTS,LINKS``) this is the elements file
    and ``companion`` the links file.
    """

    data: bytes
    origin: str
    path: Path | None = None
    rev: str | None = None
    repo_path: str | None = None
    # The links file when the spec names a CSV pair (this Source is then the elements file).
    companion: Source | None = None


def split_rev_spec(spec: str) -> tuple[str, str] | None:
    """``"v1:model/t.json"`` -> ``("v1", "model/t.json")``; ``None`` when not a rev spec."""
    if ":" not in spec or os.path.exists(spec):
        return None
    rev, _, path = spec.partition(":")
    if not rev or not path or (len(rev) == 1 and rev.isalpha() and path.startswith("\\")):
        return None
    return rev, path


def read_source(spec: str, *, stdin: BinaryIO | None = None, cwd: Path | None = None) -> Source:
    """Read the bytes a model spec names.

    Raises
    ------
    InputError
        The file does not exist, is a directory, or cannot be read.
    GitError
        ``REV:PATH`` names an unknown revision, or a path absent at that revision.
    """
    if spec == "-":
        stream = stdin if stdin is not None else sys.stdin.buffer
        return Source(stream.read(), "<stdin>")
    pair = _csv_pair(spec)
    if pair is not None:
        elements, links = pair
        return replace(_read_file(elements), companion=_read_file(links))
    rev_spec = split_rev_spec(spec)
    if rev_spec is not None:
        from tracecheck import gitsource

        rev, path = rev_spec
        return Source(gitsource.read_blob(rev, path, cwd or Path.cwd()), spec, rev=rev, repo_path=path)
    return _read_file(Path(spec))


PAIR_FILES = ("elements.csv", "links.csv")


def _csv_pair(spec: str) -> tuple[Path, Path] | None:
    """The two files of a CSV pair spec: a folder holding both, or ``ELEMENTS,LINKS``."""
    path = Path(spec)
    if path.is_dir():
        elements, links = (path / name for name in PAIR_FILES)
        if elements.is_file() or links.is_file():
            return elements, links
        return None
    if "," in spec and not path.exists():
        first, _, second = spec.partition(",")
        if first and second and Path(first).is_file() and Path(second).is_file():
            return Path(first), Path(second)
    return None


def _read_file(path: Path) -> Source:
    try:
        if path.is_dir():
            raise InputError(
                f"{path}: is a folder; give the model export file (a folder is read only when it "
                "holds a CSV pair, elements.csv and links.csv)."
            )
        size = path.stat().st_size
        if size > MAX_INPUT_BYTES:
            raise InputError(f"{path}: {size} bytes is larger than tracecheck reads (4 GiB).")
        return Source(path.read_bytes(), str(path), path=path)
    except FileNotFoundError:
        raise InputError(f"{path}: no such file.") from None
    except PermissionError:
        raise InputError(f"{path}: permission denied.") from None
    except OSError as error:
        raise InputError(f"{path}: cannot be read ({error.strerror or error}).") from None
