"""DXF -> SVG: a drawing's model space (chosen layers) drawn with ezdxf's drawing add-on and its SVG back end,
sized in millimetres at 1:1 (or 1:N). Each layer becomes a group; the record of :mod:`toolkit.convert.record`
holds the exact map from SVG coordinates back to the drawing (unit and affine), so an SVG made here converts
back to the drawing's own coordinates.
"""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET

import numpy as np
from ezdxf import bbox
from ezdxf.addons.drawing import Frontend, RenderContext, layout as draw_layout, svg as draw_svg
from ezdxf.addons.drawing.config import BackgroundPolicy, Configuration
from ezdxf.document import Drawing as DxfDocument

from ..dxf_in.pieces import ENTITY_DATA_ERRORS
from ..errors import LacunaError
from ..units import INSUNITS_TO_UNIT, MM_PER_UNIT
from .record import LACUNA_NS, add_record

# SVG coordinates are written as integers (ezdxf's SVG back end): mapping the drawing's extent onto 1e15 keeps
# a resolution of 1e-15 of the extent, far below 1e-6 of a drawing unit, and below 2**53 where doubles
# stop holding every integer.
COORDINATE_SPACE = 1e15
PAGE_MARGIN_MM = 5.0


def drawing_unit_mm(doc: DxfDocument) -> tuple[str, float]:
    """The drawing's unit name and mm per unit; unitless is read as mm, as everywhere in lacuna."""
    code = int(doc.header.get("$INSUNITS", 0) or 0)
    unit = INSUNITS_TO_UNIT.get(code, "mm")
    return unit, MM_PER_UNIT[unit]


class _LayerGroups(draw_svg.SVGRenderBackend):
    """ezdxf's SVG render back end, with each drawn element moved into a group of its DXF layer."""

    def __init__(self, page, settings):
        super().__init__(page, settings)
        self.groups: dict[str, ET.Element] = {}

    def _group(self, layer: str) -> ET.Element:
        key = layer.casefold()
        if key not in self.groups:
            group = ET.SubElement(self.entities, "g", id=_svg_id(layer, len(self.groups)))
            group.set(f"{{{LACUNA_NS}}}layer", layer)
            self.groups[key] = group
        return self.groups[key]

    def _move_last(self, properties) -> None:
        last = self.entities[-1] if len(self.entities) else None
        if last is not None and last.tag == "path":
            self.entities.remove(last)
            self._group(properties.layer).append(last)

    def add_strokes(self, d, properties):
        if d:
            super().add_strokes(d, properties)
            self._move_last(properties)

    def add_filling(self, d, properties):
        if d:
            super().add_filling(d, properties)
            self._move_last(properties)


class _Backend(draw_svg.SVGBackend):
    @staticmethod
    def make_backend(page, settings):
        return _LayerGroups(page, settings)


def _damaged(doc: DxfDocument, where: str) -> LacunaError:
    """The error for a drawing the drawing add-on cannot draw: it names the entities whose data is missing or
    not finite."""
    bad = []
    for entity in doc.modelspace():
        try:
            box = bbox.extents([entity], fast=True)
            sound = not box.has_data or np.isfinite([*box.extmin, *box.extmax]).all()
        except ENTITY_DATA_ERRORS:
            sound = False
        if not sound:
            bad.append(f"{entity.dxftype()} {entity.dxf.handle}")
    listed = ", ".join(bad[:10]) + (f" and {len(bad) - 10} more" if len(bad) > 10 else "")
    return LacunaError(
        "the drawing cannot be drawn: it has coordinates that are missing or not finite numbers (a damaged file?)"
        + (f" in {listed}." if bad else "."),
        where=f"{where}, {listed}" if bad else where,
        hint="Redraw or delete those entities, or pick other layers with --layers.",
    )


def _svg_id(layer: str, k: int) -> str:
    # XML ids must start with a letter and hold no spaces; the exact name lives in lacuna:layer.
    slug = re.sub(r"[^a-z0-9_.-]+", "-", layer.casefold()).strip("-")
    return slug if slug and slug[0].isalpha() else f"layer-{k}-{slug}".rstrip("-")


def dxf_to_svg(doc: DxfDocument, *, layers: list[str] | None = None, scale: float = 1.0,
               where: str = "<document>") -> str:
    """Draw ``doc``'s model space (``layers`` only, when given) as SVG text at 1:``scale`` in millimetres."""
    if not (isinstance(scale, (int, float)) and math.isfinite(scale) and scale > 0):
        raise LacunaError(f"the drawing scale 1:N needs a positive N, got {scale!r}.", where="scale")
    unit, mm = drawing_unit_mm(doc)
    ctx = RenderContext(doc)
    if layers:
        known = {layer.dxf.name.casefold(): layer.dxf.name for layer in doc.layers}
        missing = [name for name in layers if name.casefold() not in known]
        if missing:
            raise LacunaError(
                f"the drawing has no layer {', '.join(repr(m) for m in missing)}; it has "
                f"{', '.join(sorted(known.values()))}.",
                where=f"{where}, --layers", hint="Name layers that exist (case does not matter).",
            )
        chosen = {name.casefold() for name in layers}

        def only_chosen(all_layers) -> None:
            for props in all_layers:
                props.is_visible = props.layer.casefold() in chosen

        ctx.set_layer_properties_override(only_chosen)
    backend = _Backend()
    config = Configuration(background_policy=BackgroundPolicy.WHITE)
    try:
        Frontend(ctx, backend, config=config).draw_layout(doc.modelspace(), finalize=True)
    except ENTITY_DATA_ERRORS:
        raise _damaged(doc, where) from None
    page = draw_layout.Page(0, 0, draw_layout.Units.mm, margins=draw_layout.Margins.all(PAGE_MARGIN_MM))
    settings = draw_layout.Settings(fit_page=False, scale=mm / scale, output_coordinate_space=COORDINATE_SPACE)
    drawn = backend.player().bbox()
    if drawn.has_data and not np.isfinite([*drawn.extmin, *drawn.extmax]).all():
        raise _damaged(doc, where)
    root = backend.get_xml_root_element(page, settings=settings) if drawn.has_data else None
    if root is None or backend.transformation_matrix is None or next(root.iter("path"), None) is None:
        chosen_text = f" on the layers {', '.join(layers)}" if layers else ""
        raise LacunaError(f"there is nothing to draw{chosen_text} in model space.", where=where,
                          hint="Choose layers that hold entities in model space.")
    for rect in [child for child in root if child.tag == "rect"]:
        root.remove(rect)  # a transparent sheet: the drawing's colours were already chosen for white paper
    add_record(root, backend.transformation_matrix, unit, scale)
    return ET.tostring(root, encoding="unicode", xml_declaration=True)
