"""DXF -> DXF in another length unit: model space scaled about the origin and $INSUNITS set together."""

from __future__ import annotations

from ezdxf.document import Drawing as DxfDocument
from ezdxf.lldxf import const
from ezdxf.math import Matrix44

from ..dxf_in.pieces import ENTITY_DATA_ERRORS
from ..errors import LacunaError
from ..units import INSUNITS_TO_UNIT, MM_PER_UNIT, UNIT_TO_INSUNITS, mm_per
from ..write.dxf_file import serialise


def change_units(doc: DxfDocument, unit: str, *, where: str = "<document>",
                 messages: list[str] | None = None) -> bytes:
    """The drawing in ``unit``: model space scaled about the origin and $INSUNITS set, as DXF bytes.

    The scale is the exact ratio of the two units (1 in = 25.4 mm exactly, the international yard and pound
    of 1959). Line-type, dimension and text sizes in the header and dimension styles scale with it, and each
    paper-space viewport looks at the same part of the model. Paper-space geometry and block definitions are
    left as they are (block references scale their contents).
    """
    notes = messages if messages is not None else []
    target_mm = mm_per(unit, where=f"{where}, --units")
    if doc.dxfversion <= const.DXF12:
        raise LacunaError("a DXF R12 drawing cannot record its length unit ($INSUNITS came with R2000).",
                          where=where, hint="Save the drawing as DXF R2000 or later first.")
    code = int(doc.header.get("$INSUNITS", 0) or 0)
    if code not in INSUNITS_TO_UNIT:
        said = "unitless ($INSUNITS = 0)" if code == 0 else f"in a unit lacuna does not read ($INSUNITS = {code})"
        raise LacunaError(
            f"the drawing is {said}, so there is nothing to convert from.", where=f"{where}, header $INSUNITS",
            hint=f"Set the drawing's units ({', '.join(f'{c} = {u}' for u, c in UNIT_TO_INSUNITS.items())}) "
            "in the drafting program, then convert.",
        )
    source = INSUNITS_TO_UNIT[code]
    factor = MM_PER_UNIT[source] / target_mm
    if factor != 1.0:
        _scale_document(doc, factor, where, notes)
    doc.header["$INSUNITS"] = UNIT_TO_INSUNITS[unit]
    doc.header["$MEASUREMENT"] = 0 if unit in ("in", "ft") else 1
    return serialise(doc)


_HEADER_POINTS = ("$EXTMIN", "$EXTMAX", "$LIMMIN", "$LIMMAX", "$INSBASE")
_HEADER_SIZES = ("$LTSCALE", "$TEXTSIZE", "$DIMSCALE")


def _scale_document(doc: DxfDocument, factor: float, where: str, notes: list[str]) -> None:
    from ezdxf import transform

    m = Matrix44.scale(factor, factor, factor)
    log = []
    for entity in list(doc.modelspace()):  # one at a time, so a damaged entity is named
        try:
            log += list(transform.inplace([entity], m))
        except ENTITY_DATA_ERRORS as error:
            handle = entity.dxf.get("handle", "?")
            raise LacunaError(
                f"the {entity.dxftype()} {handle} cannot be scaled: its data is incomplete or damaged ({error}).",
                where=f"{where}, entity {handle}",
                hint="Redraw or delete it in the drafting program and convert again.",
            ) from None
    for entry in log:
        entity = getattr(entry, "entity", None)
        handle = entity.dxf.handle if entity is not None else "?"
        raise LacunaError(
            f"the {entity.dxftype() if entity is not None else 'entity'} {handle} cannot be scaled "
            f"({getattr(entry, 'msg', entry)}).",
            where=f"{where}, entity {handle}", hint="Explode it in the drafting program and convert again.",
        )
    for name in _HEADER_POINTS:
        if name in doc.header:
            doc.header[name] = tuple(float(v) * factor for v in doc.header[name])
    for name in _HEADER_SIZES:
        if name in doc.header:
            doc.header[name] = float(doc.header[name]) * factor
    for style in doc.dimstyles:
        style.dxf.dimscale = float(style.dxf.get("dimscale", 1.0)) * factor
    for paper in doc.layouts:
        if paper.is_modelspace:
            continue
        for vp in paper.query("VIEWPORT"):
            if vp.dxf.get("status", 1) == 1:
                continue  # the paper-space view of the sheet itself
            vp.dxf.view_center_point = tuple(float(v) * factor for v in vp.dxf.view_center_point)
            vp.dxf.view_height = float(vp.dxf.view_height) * factor
    notes.append(f"{where}: model space scaled by {factor:.12g}.")
