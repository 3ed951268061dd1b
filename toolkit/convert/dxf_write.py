"""SVG -> DXF: the closed outlines of an SVG (:mod:`toolkit.convert.svg_read`) written as a new drawing, each a
closed LWPOLYLINE with its arcs as bulges, or a CIRCLE, on the layer it was drawn on."""

from __future__ import annotations

import ezdxf

from ..write.dxf_file import dxf_version_code, serialise
from ..units import UNIT_TO_INSUNITS
from .svg_read import read_outlines


def svg_to_dxf(text: str, *, layers: list[str] | None = None, unit: str | None = None, where: str = "<svg>",
               chord_mm: float = 0.01, dxf_version: str = "R2018", messages: list[str] | None = None) -> bytes:
    """Closed outlines of an SVG as a DXF drawing (bytes) in ``unit`` (default: mm, or the unit recorded by
    :func:`toolkit.convert.svg_draw.dxf_to_svg`). ``layers`` picks groups by layer name (as recorded)."""
    shapes, out_unit = read_outlines(text, layers=layers, unit=unit, where=where, chord_mm=chord_mm,
                                     messages=messages)
    doc = ezdxf.new(dxf_version_code(dxf_version))
    doc.header["$INSUNITS"] = UNIT_TO_INSUNITS[out_unit]
    doc.header["$MEASUREMENT"] = 0 if out_unit in ("in", "ft") else 1
    msp = doc.modelspace()
    for layer, kind, data in shapes:
        if layer not in doc.layers:
            doc.layers.add(layer)
        if kind == "circle":
            (cx, cy), r = data
            msp.add_circle((cx, cy), r, dxfattribs={"layer": layer})
        else:
            msp.add_lwpolyline(data, format="xyb", close=True, dxfattribs={"layer": layer})
    return serialise(doc)
