"""Pieces every command shares: loading a model spec with its configuration, and
writing output atomically."""

from __future__ import annotations

import os
import sys
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import BinaryIO, TextIO

from tracecheck.config import Config, find_config, load_config
from tracecheck.errors import InputError, UsageError
from tracecheck.formats import read_model
from tracecheck.model import Model
from tracecheck.sources import Source, read_source

__all__ = ["Loaded", "load", "resolve_config", "emit", "atomic_write", "Streams"]


@dataclass
class Streams:
    """Where a command writes; tests pass their own."""

    stdout: TextIO
    stderr: TextIO
    stdin: BinaryIO | None = None

    @classmethod
    def default(cls) -> Streams:
        return cls(sys.stdout, sys.stderr, sys.stdin.buffer)


@dataclass
class Loaded:
    source: Source
    model: Model
    config: Config


def resolve_config(config_option: str | None, near: Path | None) -> Config:
    """``--config`` if given, else the nearest configuration upwards from ``near``."""
    if config_option:
        path = Path(config_option)
        if not path.is_file():
            raise InputError(f"{path}: no such configuration file.")
        return load_config(path)
    found = find_config(near or Path.cwd())
    return load_config(found) if found else Config()


def _config_anchor(source: Source) -> Path:
    if source.path is not None:
        return source.path.parent
    if source.repo_path is not None:  # REV:PATH: the same folder in the work tree
        return (Path.cwd() / source.repo_path).parent
    return Path.cwd()


def load(
    spec: str,
    *,
    config_option: str | None = None,
    input_format: str | None = None,
    stdin: BinaryIO | None = None,
    config: Config | None = None,
) -> Loaded:
    source = read_source(spec, stdin=stdin)
    if config is None:
        config = resolve_config(config_option, _config_anchor(source))
    options = config.section("formats")
    if source.companion is not None:
        model = _read_csv_pair(source, input_format, options)
    else:
        model = read_model(source.data, source.origin, input_format=input_format, options=options)
    return Loaded(source, model, config)


def _read_csv_pair(source: Source, input_format: str | None, options) -> Model:
    from tracecheck.formats import csvpair

    if input_format not in (None, "csv"):
        raise UsageError(
            f"{source.origin}: the model spec names a CSV pair, which --input-format {input_format} cannot read."
        )
    companion = source.companion
    return csvpair.read_pair((source.data, source.origin), (companion.data, companion.origin), options)


def atomic_write(path: Path, data: str | bytes) -> None:
    """Write ``data`` (text as UTF-8) to ``path`` via a temporary file and a rename.

    An existing file is replaced only once the new content is complete on disk; on any
    failure it is left untouched and the temporary file removed.
    """
    if isinstance(data, str):
        data = data.encode("utf-8")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputError(f"{path}: the output folder {folder} does not exist.")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
    try:
        with os.fdopen(fd, "wb") as handle:
            handle.write(data)
            handle.flush()
            os.fsync(handle.fileno())
        if path.exists():
            os.chmod(tmp, path.stat().st_mode & 0o777)
        else:
            os.chmod(tmp, 0o666 & ~_umask())
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


def _umask() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return mask


def emit(output: str | bytes, destination: str | None, streams: Streams) -> None:
    """Send rendered output to ``-o`` (atomically) or to stdout."""
    if destination and destination != "-":
        try:
            atomic_write(Path(destination), output)
        except PermissionError:
            raise InputError(f"{destination}: permission denied; nothing was written.") from None
        except IsADirectoryError:
            raise InputError(f"{destination}: is a folder; give a file name.") from None
        return
    if isinstance(output, bytes):
        output = output.decode("utf-8")
    streams.stdout.write(output)
    streams.stdout.flush()
