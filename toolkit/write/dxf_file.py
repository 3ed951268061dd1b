"""DXF files as bytes: the versions we write and the one serialiser, shared by the drawing copy and the
converter."""

from __future__ import annotations

import io

from ezdxf.document import Drawing as DxfDocument
from ezdxf.lldxf import const

from ..errors import LacunaError


# Writable DXF versions (ezdxf writes these), by release name and by $ACADVER code.
VERSIONS: dict[str, str] = {
    name: code for code, name in const.acad_release.items() if code in const.versions_supported_by_save
}


def dxf_version_code(version: str, *, where: str = "dxf_version") -> str:
    """A release name ("R2013") or $ACADVER code ("AC1027") -> the code; a clear error for anything else."""
    text = str(version).strip().upper()
    if text in VERSIONS:
        return VERSIONS[text]
    if text in VERSIONS.values():
        return text
    raise LacunaError(
        f"unknown DXF version {version!r}.",
        where=where,
        hint=f"Use one of {', '.join(VERSIONS)} (or their codes {', '.join(VERSIONS.values())}).",
    )


def serialise(doc: DxfDocument, *, binary: bool = False) -> bytes:
    """The document as DXF file bytes (ASCII in the document's own encoding, or binary DXF)."""
    if binary:
        stream = io.BytesIO()
        doc.write(stream, fmt="bin")
        return stream.getvalue()
    stream = io.StringIO()
    doc.write(stream)
    return stream.getvalue().encode(doc.output_encoding, errors="dxfreplace")
