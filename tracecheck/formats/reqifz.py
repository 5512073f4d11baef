"""ReqIF archives (``.reqifz``): a zip file holding one or more ``.reqif`` documents.

Each ``.reqif`` member is read by :mod:`tracecheck.formats.reqif` (so through the same
hardened XML configuration) in member-name order, and the models are joined: elements
and links keep their order, and each location names ``ARCHIVE!MEMBER`` and the line in
that member. Attachments (other members) are ignored. Nothing is extracted to disk.

A damaged or truncated archive, a member whose size exceeds what tracecheck reads, or
an archive without a ``.reqif`` member is an input error (exit 2).
"""

from __future__ import annotations

import io
import zipfile
import zlib
from collections.abc import Mapping
from typing import Any

from tracecheck.errors import InputError
from tracecheck.formats import register, reqif
from tracecheck.model import Model
from tracecheck.sources import MAX_INPUT_BYTES

__all__ = ["ReqIFz", "parse"]

_MAGIC = b"PK\x03\x04"


def _damaged(origin: str, error: Exception) -> InputError:
    return InputError(
        f"{origin}: not a readable .reqifz archive ({error}); the zip file is damaged or "
        "truncated. Export it again."
    )


def _members(archive: zipfile.ZipFile, origin: str) -> list[zipfile.ZipInfo]:
    members = sorted(
        (info for info in archive.infolist() if info.filename.lower().endswith(".reqif")),
        key=lambda info: info.filename,
    )
    if not members:
        raise InputError(f"{origin}: the archive holds no .reqif document.")
    total = sum(info.file_size for info in members)
    if total > MAX_INPUT_BYTES:
        raise InputError(
            f"{origin}: the .reqif documents in the archive unpack to {total} bytes, more "
            "than tracecheck reads (4 GiB)."
        )
    return members


def _read_member(archive: zipfile.ZipFile, info: zipfile.ZipInfo, origin: str) -> bytes:
    # The size in the directory can lie; never read more than it promised.
    with archive.open(info) as handle:
        data = handle.read(info.file_size + 1)
    if len(data) > info.file_size:
        raise InputError(f"{origin}!{info.filename}: the member is larger than the archive says.")
    return data


def parse(data: bytes, origin: str, options: Mapping[str, Any] | None = None) -> Model:
    """Read every ``.reqif`` member of a ``.reqifz`` archive into one :class:`Model`.

    Raises
    ------
    InputError
        A damaged or truncated archive, no ``.reqif`` member, or any error of the
        ReqIF reader (named ``ARCHIVE!MEMBER:LINE``).
    """
    elements, links, meta = [], [], {}
    try:
        with zipfile.ZipFile(io.BytesIO(data)) as archive:
            for info in _members(archive, origin):
                model = reqif.parse(_read_member(archive, info, origin), f"{origin}!{info.filename}", options)
                elements.extend(model.elements)
                links.extend(model.links)
                meta = meta or dict(model.meta)
    except (zipfile.BadZipFile, zipfile.LargeZipFile, EOFError, NotImplementedError, zlib.error) as error:
        raise _damaged(origin, error) from None
    return Model(elements, links, meta=meta, origin=origin, format="reqifz")


class ReqIFz:
    name = "reqifz"
    extensions = (".reqifz",)

    def sniff(self, head: bytes, name: str) -> bool:
        # A zip's first local header carries the first member's name at offset 30.
        if not head.startswith(_MAGIC):
            return False
        length = int.from_bytes(head[26:28], "little")
        first = head[30 : 30 + length].decode("utf-8", errors="ignore").lower()
        return first.endswith(".reqif") or name.lower().endswith(".reqifz")

    def read(self, data: bytes, origin: str, options: Mapping[str, Any]) -> Model:
        return parse(data, origin, options)


register(ReqIFz())
