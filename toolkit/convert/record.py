"""The record an SVG made by `lacuna convert` keeps of its drawing: the drawing's unit and the exact map from the
SVG's coordinates back to the drawing's, in a ``metadata`` element of our own namespace. Written by
:mod:`toolkit.convert.svg_draw`, read by :mod:`toolkit.convert.svg_read`.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import numpy as np

from ..errors import LacunaError
from ..units import mm_per

LACUNA_NS = "urn:lacuna:svg:drawing:1"

ET.register_namespace("lacuna", LACUNA_NS)


def add_record(root: ET.Element, m, unit: str, scale: float) -> None:
    """Record the map SVG -> drawing of the forward matrix ``m`` (ezdxf's Matrix44, drawing -> SVG):
    x_d = a x + c y + e, y_d = b x + d y + f (SVG matrix order)."""
    forward = np.array([[m[0, 0], m[1, 0], m[3, 0]], [m[0, 1], m[1, 1], m[3, 1]], [0.0, 0.0, 1.0]])
    back = np.linalg.inv(forward)
    a, c, e = back[0]
    b, d, f = back[1]
    meta = ET.Element("metadata")
    info = ET.SubElement(meta, f"{{{LACUNA_NS}}}drawing")
    info.set("unit", unit)
    info.set("scale", f"1:{scale:g}")
    info.set("to-drawing", " ".join(repr(float(v)) for v in (a, b, c, d, e, f)))
    root.insert(0, meta)


def read_record(root: ET.Element, where: str) -> tuple[np.ndarray, str] | None:
    """The recorded 3x3 affine from the SVG's user units to the drawing, and the drawing's unit; None when the
    SVG holds no record (it was not made here)."""
    for meta in root.iter(f"{{{LACUNA_NS}}}drawing"):
        try:
            a, b, c, d, e, f = (float(v) for v in meta.get("to-drawing", "").split())
            unit = meta.get("unit", "mm")
            mm_per(unit)
        except (ValueError, LacunaError):
            raise LacunaError("the SVG's lacuna drawing record is damaged.", where=f"{where}, metadata",
                              hint="Delete the <metadata> element to read the SVG at its printed size.") from None
        return np.array([[a, c, e], [b, d, f], [0.0, 0.0, 1.0]]), unit
    return None
