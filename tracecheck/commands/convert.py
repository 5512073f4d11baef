"""``tracecheck convert MODEL -o OUT [--to FORMAT]``: write a model in another format.

The output format is ``--to``, else the one whose file extension ``OUT`` has
(``.json`` thread JSON, ``.graphml``, ``.reqif``); an existing folder, or a name
ending in ``/``, means the CSV pair (``elements.csv`` and ``links.csv`` inside it).
Every file is written atomically: an existing one is replaced only once the new
content is complete. Converting does not check the model; run ``check`` for that.
"""

from __future__ import annotations

from pathlib import Path

from tracecheck.commands.common import Streams, atomic_write, emit, load
from tracecheck.errors import InputError, UsageError
from tracecheck.formats import Format, get_format, registry
from tracecheck.model import Model

__all__ = ["run", "target_format"]


def _writable(adapter: Format) -> bool:
    return callable(getattr(adapter, "write", None)) or callable(getattr(adapter, "write_files", None))


def _writable_names() -> str:
    return ", ".join(sorted(name for name, adapter in registry().items() if _writable(adapter)))


def target_format(output: str, to: str | None) -> Format:
    """The adapter to write with: ``--to`` when given, else from ``output``."""
    if to:
        adapter = get_format(to)
        if not _writable(adapter):
            raise UsageError(f"tracecheck reads {to} but does not write it; --to accepts: {_writable_names()}.")
        return adapter
    if output.endswith(("/", "\\")) or Path(output).is_dir():
        return get_format("csv")
    suffix = Path(output).suffix.lower()
    for adapter in sorted(registry().values(), key=lambda a: a.name):
        if _writable(adapter) and suffix and suffix == adapter.extensions[0]:
            return adapter
    raise UsageError(
        f"{output}: cannot tell the output format from the name; give --to (one of: {_writable_names()})."
    )


def _write_folder(folder: Path, files: dict[str, bytes]) -> list[Path]:
    if folder.exists() and not folder.is_dir():
        raise UsageError(f"{folder}: exists and is not a folder; the CSV pair is written into a folder.")
    if not folder.parent.is_dir():
        raise InputError(f"{folder}: the parent folder {folder.parent} does not exist.")
    folder.mkdir(exist_ok=True)
    written = []
    for name in sorted(files):
        atomic_write(folder / name, files[name])
        written.append(folder / name)
    return written


def _serialise(adapter: Format, model: Model, options, origin: str):
    try:
        if callable(getattr(adapter, "write_files", None)):
            return adapter.write_files(model, options)  # type: ignore[attr-defined]
        return adapter.write(model, options)  # type: ignore[attr-defined]
    except InputError as error:
        raise InputError(f"{origin}: cannot be written as {adapter.name}: {error.message}",
                         details=error.details) from None


def run(
    spec: str,
    *,
    output: str,
    to: str | None = None,
    input_format: str | None = None,
    config_option: str | None = None,
    quiet: bool = False,
    streams: Streams | None = None,
) -> int:
    streams = streams or Streams.default()
    adapter = target_format(output, to)
    loaded = load(spec, config_option=config_option, input_format=input_format, stdin=streams.stdin)
    model = loaded.model
    data = _serialise(adapter, model, loaded.config.section("formats"), loaded.source.origin)
    if isinstance(data, dict):
        if output == "-":
            raise UsageError(f"the {adapter.name} format is a pair of files; give a folder to -o, not -.")
        written = ", ".join(str(p) for p in _write_folder(Path(output.rstrip("/\\") or "."), data))
    else:
        emit(data, output, streams)
        written = "standard output" if output == "-" else output
    if not quiet and output != "-":
        streams.stderr.write(
            f"tracecheck: wrote {len(model.elements)} elements and {len(model.links)} links "
            f"from {loaded.source.origin} ({model.format}) as {adapter.name} to {written}.\n"
        )
    return 0
