"""`lacuna convert`: DXF -> SVG (chosen layers), SVG -> DXF (closed paths), DXF -> DXF in another length unit.

One module a way: :mod:`~toolkit.convert.svg_draw` (DXF -> SVG, with :mod:`~toolkit.convert.record`, the map
back to the drawing an SVG made here keeps), :mod:`~toolkit.convert.svg_read` (SVG -> closed outlines with
bulges) and :mod:`~toolkit.convert.dxf_write` (those outlines -> a new drawing), :mod:`~toolkit.convert.rescale`
(a drawing in another unit). The arcs' geometry is :mod:`toolkit.arcs`, shared with the readers and writers.

The functions return the new file's content; writing it (atomically) is the caller's job.
"""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING

from ..errors import LacunaError
from ..units import MM_PER_UNIT
from .dxf_write import svg_to_dxf
from .rescale import change_units
from .svg_draw import dxf_to_svg

if TYPE_CHECKING:
    from ezdxf.document import Drawing as DxfDocument

__all__ = ["change_units", "convert", "dxf_to_svg", "svg_to_dxf"]


def convert(in_path, out_path, *, layers: list[str] | None = None, units: str | None = None,
            scale: float = 1.0, messages: list[str] | None = None) -> bytes:
    """``lacuna convert IN OUT``: the content of OUT (bytes), chosen by the two file suffixes."""
    src, dst = Path(in_path), Path(out_path)
    kinds = (src.suffix.lower(), dst.suffix.lower())
    where = str(src)
    if src.resolve() == dst.resolve():
        raise LacunaError("the output would overwrite the input.", where=str(dst),
                          hint="Name another output file; lacuna never modifies the files it is given.")
    if kinds == (".dxf", ".svg"):
        if units is not None:
            raise LacunaError("--units changes a DXF drawing's unit; an SVG is always sized in millimetres.",
                              where=where, hint="Leave out --units, or convert to a .dxf file.")
        return dxf_to_svg(_open(src), layers=layers, scale=scale, where=where).encode("utf-8")
    if kinds == (".svg", ".dxf"):
        text = _read_text(src)
        return svg_to_dxf(text, layers=layers, unit=units, where=where, messages=messages)
    if kinds == (".dxf", ".dxf"):
        if layers:
            raise LacunaError("--layers picks what to draw in an SVG; a unit change scales the whole drawing.",
                              where=where, hint="Leave out --layers.")
        if units is None:
            raise LacunaError("converting DXF to DXF changes its length unit, and no --units was given.",
                              where=where, hint=f"Add --units with one of {', '.join(MM_PER_UNIT)}.")
        return change_units(_open(src), units, where=where, messages=messages)
    raise LacunaError(
        f"cannot convert {src.suffix or 'a file without suffix'} to {dst.suffix or 'a file without suffix'}.",
        where=f"{src} -> {dst}",
        hint="Convert .dxf to .svg, .svg to .dxf, or .dxf to .dxf with --units.",
    )


def _open(path: Path) -> DxfDocument:
    from ..dxf_in.source import open_document

    doc, _warnings = open_document(os.fspath(path))
    return doc


def _read_text(path: Path) -> str:
    if not path.is_file():
        raise LacunaError("no such file.", where=str(path), hint="Check the path and the file name.")
    try:
        return path.read_text(encoding="utf-8")
    except UnicodeDecodeError:
        raise LacunaError("the file is not UTF-8 text, so not an SVG file.", where=str(path),
                          hint="Save it again as SVG (UTF-8).") from None
