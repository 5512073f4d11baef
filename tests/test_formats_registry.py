"""Every format adapter: satisfies the protocol, and detection recognises by content
what its own writer produces, whatever the file is called."""

from __future__ import annotations

import io
import zipfile

import pytest

from tracecheck.demo.stages import stage_bytes
from tracecheck.errors import InputError, UsageError
from tracecheck.formats import Format, detect, get_format, read_model, registry

MODEL = read_model(stage_bytes("concept"), "thread.json")


def _written(adapter) -> bytes:
    if hasattr(adapter, "write_files"):
        return adapter.write_files(MODEL)["elements.csv"]
    if hasattr(adapter, "write"):
        return adapter.write(MODEL)
    buffer = io.BytesIO()  # the read-only archive format: pack what the ReqIF writer gives
    with zipfile.ZipFile(buffer, "w") as archive:
        archive.writestr("model.reqif", get_format("reqif").write(MODEL))
    return buffer.getvalue()


def test_the_registry_holds_every_format_of_the_design():
    assert set(registry()) == {"thread-json", "graphml", "reqif", "reqifz", "csv"}


@pytest.mark.parametrize("name", sorted(registry()))
def test_adapter_satisfies_the_protocol_and_is_detected_by_content(name):
    adapter = registry()[name]
    assert isinstance(adapter, Format)
    data = _written(adapter)
    for filename in ("upload", "export.txt", "-"):
        assert detect(data, filename).name == name


def test_forcing_an_unknown_format_names_the_known_ones():
    with pytest.raises(UsageError, match="known formats: csv, graphml, reqif, reqifz, thread-json"):
        read_model(b"{}", "x.json", input_format="yaml")


def test_forcing_the_wrong_format_gives_that_formats_error():
    with pytest.raises(InputError, match=r"x.json:1:1: malformed XML"):
        read_model(stage_bytes("concept"), "x.json", input_format="graphml")
