"""Results -> layers in a copy of the drawing: voids, freeform outlines, centre marks, ordinate dimensions of the
void centres, schedule and check markers.

Results are computed in the panel's local frame (mm); everything drawn here goes through the panel's
:class:`~toolkit.model.Frame` into the drawing's unit, position and rotation, so a panel drawn turned 30 degrees
six kilometres from the origin gets its voids back turned and placed with it. Arcs stay true arcs: a bulge is
tan(sweep / 4) and keeps its value under rotation and uniform scaling.

The drawing is changed only by adding: new layers (one line type and one dimension style) of our own, entities on
them and the blocks that hold our dimensions' lines. Every
entity, table entry and handle of the input stays as it was. docs/layers.md describes the layers, their look,
and what happens when a drawing already holds results from an earlier run.
"""

from __future__ import annotations

import math
import os
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
from ezdxf import colors, disassemble
from ezdxf.document import Drawing as DxfDocument
from ezdxf.lldxf import const, validator

from ..errors import LacunaError
from ..model import Frame, Void, lengths_in_unit
from ..units import mm_per
from .dxf_file import dxf_version_code, serialise
from .layers import CENTRE, CHECK, DASH_MM, DASHED, DIM, FREEFORM, GAP_MM, LOOKS, NOTE, OUR_LAYERS, VOID_LAYERS
from .ordinates import decimals, ordinate_features, ordinate_text, spread
from .shapes import Marker, as_marker, check_void, freeform_rings, schedule_decimals, short_number


@dataclass
class Added:
    """Handles of the entities added, per layer, and the layers created (existing ones are reused)."""

    handles: dict[str, list[str]] = field(default_factory=dict)
    layers_created: list[str] = field(default_factory=list)
    removed: int = 0

    def count(self, layer: str) -> int:
        return len(self.handles.get(layer, []))


def add_results(
    doc: DxfDocument,
    frame: Frame,
    *,
    voids: Iterable[Void] = (),
    freeform=(),
    centres: bool = True,
    dimensions: bool = True,
    notes: Sequence[str] = (),
    schedule: Sequence[Sequence[str]] | None = None,
    check_markers: Iterable[Marker | Mapping] = (),
    panel_size_mm: tuple[float, float] | None = None,
    text_height_mm: float | None = None,
    centre_mark_mm: float = 20.0,
    replace: bool = False,
) -> Added:
    """Add results to ``doc``'s model space in place, on the LACUNA-* layers; return the handles added.

    ``voids`` are drawn on the layer of their family; ``freeform`` is a shapely (Multi)Polygon or a sequence of
    them, one closed polyline per ring. With ``dimensions``, LACUNA-DIM gets an ordinate dimension (a DIMENSION
    entity) from the datum, the panel's lower-left corner, to each void centre's x, set out under the panel, and
    to its y, left of it, clear of the drawing's own lines there. ``schedule`` rows (the first is the heading;
    default: one row per void) and ``notes`` go on LACUNA-NOTE below the panel and its ordinates, in the panel's
    frame, clear of its envelope (``panel_size_mm``, default: the extent of the results). ``check_markers`` are :class:`Marker` values or
    mappings with ``where`` and ``rule`` (and optionally ``measured``, ``required``) as in the check JSON.
    A drawing that already holds entities on any LACUNA-* layer is refused unless ``replace`` is true, which
    deletes those entities from model space first.
    """
    _check_frame(frame)
    voids = list(voids)
    rings = freeform_rings(freeform)
    markers = [as_marker(m, k) for k, m in enumerate(check_markers)]
    for void in voids:
        check_void(void)
    extent = _extent(voids, rings, panel_size_mm)
    h_mm = text_height_mm if text_height_mm is not None else _default_text_height(extent)
    if not (math.isfinite(h_mm) and h_mm > 0):
        raise LacunaError(f"text height must be a positive length, got {h_mm!r} mm.", where="text_height_mm")
    if not (math.isfinite(centre_mark_mm) and centre_mark_mm > 0):
        raise LacunaError(
            f"centre-mark size must be a positive length, got {centre_mark_mm!r} mm.", where="centre_mark_mm"
        )

    added = Added()
    added.removed = _clear_or_refuse(doc, replace)
    # Measured before anything of ours is added: the drafter's own annotation under and left of the panel stays
    # readable.
    floor, wall = (_clear_below_and_left(doc, frame, extent) if voids or schedule or notes
                   else (extent[1], extent[0]))
    added.layers_created = _ensure_layers(doc, frame)
    msp = doc.modelspace()
    out = _Pen(msp, frame, added, legacy=doc.dxfversion <= const.DXF12)

    for void in voids:
        layer = VOID_LAYERS[void.family]
        if void.family == "bore":
            out.circle(void.centre, void.size_mm / 2.0, layer)
        else:
            outline = void.outline or tuple((x, y, 0.0) for x, y in list(void.shape.exterior.coords)[:-1])
            out.closed(outline, layer)
        if centres:
            half = min(centre_mark_mm, void.size_mm / 2.0) / 2.0
            cx, cy = void.centre
            out.line((cx - half, cy), (cx + half, cy), CENTRE)
            out.line((cx, cy - half), (cx, cy + half), CENTRE)
    for ring in rings:
        out.closed(tuple((x, y, 0.0) for x, y in ring), FREEFORM)
    _draw_markers(out, markers, h_mm)
    if dimensions and voids:
        floor = _ordinates(out, voids, floor, wall, h_mm)

    rows = [list(map(str, row)) for row in (schedule if schedule is not None else _schedule_rows(voids, frame))]
    if rows or notes:
        _note_block(out, rows, list(notes), (extent[0], floor, extent[2], extent[3]), h_mm)
    return added


def add_check_markers(
    doc: DxfDocument,
    frame: Frame,
    *,
    check_markers: Iterable[Marker | Mapping] = (),
    panel_size_mm: tuple[float, float] | None = None,
    text_height_mm: float | None = None,
    replace: bool = False,
) -> Added:
    """Add rule-violation markers on LACUNA-CHECK in place, leaving every other layer alone.

    This is what ``check`` needs: the voids it checked sit on the LACUNA-VOID-* layers and stay. Only earlier
    markers on LACUNA-CHECK are refused (or, with ``replace``, deleted from model space first).
    """
    _check_frame(frame)
    markers = [as_marker(m, k) for k, m in enumerate(check_markers)]
    extent = _extent([], [], panel_size_mm)
    h_mm = text_height_mm if text_height_mm is not None else _default_text_height(extent)
    added = Added()
    added.removed = _clear_or_refuse(doc, replace, layers=(CHECK,))
    added.layers_created = _ensure_layers(doc, frame)
    out = _Pen(doc.modelspace(), frame, added, legacy=doc.dxfversion <= const.DXF12)
    _draw_markers(out, markers, h_mm)
    return added


def _draw_markers(out, markers, h_mm: float) -> None:
    for marker in markers:
        r = marker.radius_mm if marker.radius_mm is not None else 1.5 * h_mm
        out.circle(marker.where, r, CHECK)
        at = (marker.where[0] + r * math.sqrt(0.5) + 0.3 * h_mm, marker.where[1] + r * math.sqrt(0.5))
        out.text(marker.label, at, 0.8 * h_mm, CHECK)


def refuse_earlier_results(input_path, *, replace: bool = False) -> None:
    """Fail fast, before any long computation, when the drawing already holds results and ``replace`` is off."""
    from ..dxf_in.source import open_document

    doc, _warnings = open_document(os.fspath(input_path))
    _clear_or_refuse(doc, replace)  # on a throwaway copy in memory: with replace it only checks placement


def _clear_or_refuse(doc: DxfDocument, replace: bool, layers=None) -> int:
    """Refuse a drawing holding entities on ``layers`` (default: all of ours), or (``replace``) delete them
    from model space.

    Entities on our layers in paper space or inside blocks are refused even with ``replace``: they were put
    there by hand, and deleting them would change the drafter's work.
    """
    ours = {name.casefold() for name in (OUR_LAYERS if layers is None else layers)}
    msp = doc.modelspace()
    # The block holding the lines of one of our dimensions in model space is part of that dimension (DXF
    # reference, DIMENSION group code 2): it goes with it, and is no entity drawn by hand.
    dimension_blocks = {e.dxf.geometry.casefold() for e in msp.query("DIMENSION")
                        if e.dxf.get("layer", "0").casefold() in ours and e.dxf.hasattr("geometry")}
    found: dict[str, list[tuple[str, str]]] = {}
    for layout in doc.layouts_and_blocks():
        if layout.name.casefold() in dimension_blocks:
            continue
        for entity in layout:
            layer = entity.dxf.get("layer", "0")
            if layer.casefold() in ours:
                found.setdefault(layer, []).append((layout.name, entity.dxf.handle))
    if not found:
        return 0
    elsewhere = {layer: [(n, h) for n, h in items if n.casefold() != "*model_space"] for layer, items in found.items()}
    elsewhere = {layer: items for layer, items in elsewhere.items() if items}
    if not replace or elsewhere:
        layer, items = next(iter((elsewhere or found).items()))
        handles = ", ".join(h for _, h in items[:5]) + (" …" if len(items) > 5 else "")
        if elsewhere:
            layout = items[0][0]
            raise LacunaError(
                f"layer {layer} holds entities outside model space (in {layout!r}, handles {handles}); these "
                "layers are reserved for lacuna's results.",
                where=f"layer {layer}",
                hint="Move those entities to another layer, or rename the layer, and run again.",
            )
        total = sum(len(v) for v in found.values())
        raise LacunaError(
            f"the drawing already holds {total} entities on lacuna's result layers (layer {layer}: handles "
            f"{handles}), probably from an earlier run.",
            where=f"layer {layer}",
            hint="Start from the original drawing, or ask to replace earlier results (replace=True; on the "
            "command line --replace), which deletes the entities on the LACUNA-* layers first.",
        )
    removed = 0
    for items in found.values():
        for _, handle in items:
            entity = doc.entitydb.get(handle)
            if entity is not None and entity.is_alive:
                block = entity.dxf.get("geometry") if entity.dxftype() == "DIMENSION" else None
                msp.delete_entity(entity)
                if block is not None and block.casefold() in dimension_blocks and block in doc.blocks:
                    doc.blocks.delete_block(block, safe=False)
                removed += 1
    return removed


def nearest_aci(rgb: tuple[int, int, int]) -> int:
    """The ACI colour index (1..255) nearest to ``rgb`` in plain RGB distance, for readers without true colour."""
    target = np.asarray(rgb, dtype=float)
    table = np.array([colors.aci2rgb(i) for i in range(1, 256)], dtype=float)
    return int(np.argmin(((table - target) ** 2).sum(axis=1))) + 1


def _ensure_plot_style(doc: DxfDocument) -> None:
    """Give a damaged drawing back the plot style "Normal" that ezdxf ties every new layer to (DXF R2000+)."""
    if doc.dxfversion <= const.DXF12:
        return
    root = doc.rootdict
    names = root.get("ACAD_PLOTSTYLENAME")
    if names is None:
        names = doc.objects.add_dictionary_with_default(owner=root.dxf.handle, hard_owned=False)
        root["ACAD_PLOTSTYLENAME"] = names
    if "Normal" not in names:
        names["Normal"] = doc.objects.add_placeholder(owner=names.dxf.handle)


# Our dimension style: the sizes that depend on the panel (text height, leader offsets, decimals) are set on each
# dimension, so a style of this name already in the drawing is used as it is.
DIMSTYLE = "LACUNA-DIM"


def _ensure_layers(doc: DxfDocument, frame: Frame) -> list[str]:
    _ensure_plot_style(doc)  # a file read in recovery mode may have lost it: no layer could be added then
    if DASHED not in doc.linetypes:
        dash, gap = DASH_MM / frame.mm_per_unit, GAP_MM / frame.mm_per_unit
        doc.linetypes.add(DASHED, pattern=[dash + gap, dash, -gap], description="lacuna dashed __ __ __")
    created = []
    true_colour = doc.dxfversion >= const.DXF2004
    for look in LOOKS:
        if look.name in doc.layers:
            continue  # an empty layer of that name, maybe set up by the drafter: keep their look
        doc.layers.add(
            look.name,
            color=nearest_aci(look.rgb),
            true_color=colors.rgb2int(look.rgb) if true_colour else None,
            linetype=look.linetype,
            lineweight=look.lineweight if doc.dxfversion > const.DXF12 else -1,
        )
        created.append(look.name)
    return created


class _Pen:
    """Draws local-frame (mm) geometry into a layout through a Frame, keeping the handles per layer."""

    def __init__(self, layout, frame: Frame, added: Added, legacy: bool):
        self.layout, self.frame, self.added, self.legacy = layout, frame, added, legacy

    def _keep(self, entity, layer: str):
        self.added.handles.setdefault(layer, []).append(entity.dxf.handle)
        return entity

    def _xy(self, local) -> tuple[float, float]:
        x, y = self.frame.to_drawing(np.asarray(local, dtype=float))
        return float(x), float(y)

    def circle(self, centre, radius_mm: float, layer: str):
        radius = self.frame.length_to_drawing(radius_mm)
        return self._keep(self.layout.add_circle(self._xy(centre), radius, dxfattribs={"layer": layer}), layer)

    def line(self, a, b, layer: str):
        return self._keep(self.layout.add_line(self._xy(a), self._xy(b), dxfattribs={"layer": layer}), layer)

    def closed(self, outline: Sequence[Sequence[float]], layer: str):
        """A closed outline of (x, y, bulge) vertices; the bulge is unchanged by rotation and uniform scale."""
        pts = np.asarray([v[:2] for v in outline], dtype=float)
        xy = self.frame.to_drawing(pts)
        vertices = [(float(x), float(y), float(v[2])) for (x, y), v in zip(xy, outline)]
        if self.legacy:  # DXF R12 has no LWPOLYLINE
            entity = self.layout.add_polyline2d(vertices, format="xyb", close=True, dxfattribs={"layer": layer})
        else:
            entity = self.layout.add_lwpolyline(vertices, format="xyb", close=True, dxfattribs={"layer": layer})
        return self._keep(entity, layer)

    def ordinate(self, feature, leader_end, along_x: bool, offset_mm: float, height_mm: float, places: int):
        """An ordinate DIMENSION on LACUNA-DIM from the datum (local 0, 0) to ``feature``, its leader starting
        ``offset_mm`` from the feature (DIMEXO) and ending at ``leader_end`` (local mm), measuring along the
        panel's x (``along_x``) or y, lettering ``height_mm`` high to ``places`` decimals."""
        at, end, datum = (np.asarray(self._xy(p)) for p in (feature, leader_end, (0.0, 0.0)))
        d = self.frame.length_to_drawing
        override = {"dimtxt": d(height_mm), "dimasz": d(height_mm) / 2.0, "dimgap": d(height_mm) / 4.0,
                    "dimexo": d(offset_mm), "dimdec": places, "dimzin": 0}
        # Our frame's turn goes on the entity (group code 51, the measuring axes' direction, clockwise) rather than
        # through the factory's rotation, which turns the leader's end about the drawing's origin instead of the
        # datum (ezdxf 1.4, add_ordinate_dim): far from the origin the leader would land kilometres away.
        style = self.layout.add_ordinate_dim(
            feature_location=tuple(at), offset=tuple(end - at), dtype=1 if along_x else 0, origin=tuple(datum),
            dimstyle=DIMSTYLE, override=override, dxfattribs={"layer": DIM},
        )
        if self.frame.angle_deg % 360.0:
            style.dimension.dxf.horizontal_direction = -float(self.frame.angle_deg)
        style.render()
        entity = style.dimension
        # The dimension's lines are drawn on block layer 0, which viewers resolve differently; on our layer they
        # take its look everywhere.
        block = entity.get_geometry_block()
        for part in block if block is not None else ():
            if part.dxf.get("layer", "0") == "0":
                part.dxf.layer = DIM
        return self._keep(entity, DIM)

    def text(self, content: str, at, height_mm: float, layer: str):
        entity = self.layout.add_text(
            content,
            dxfattribs={
                "layer": layer,
                "insert": self._xy(at),
                "height": self.frame.length_to_drawing(height_mm),
                "rotation": float(self.frame.angle_deg),
            },
        )
        return self._keep(entity, layer)


# Text layout, in text heights (common practice, no source): lines 1.6 apart, columns 2 apart, a clear gap of
# 3 between the panel's bottom edge and the top of the first line; a character is taken as 0.9 wide at most.
LINE_PITCH, COLUMN_GAP, TOP_GAP, CHAR_WIDTH = 1.6, 2.0, 3.0, 0.9


def _note_block(out: _Pen, rows: list[list[str]], notes: list[str], extent, h: float) -> None:
    """Schedule rows in columns, then the notes, below the panel's extent in its local frame."""
    x0, y_top = extent[0], extent[1] - TOP_GAP * h
    line = 0

    def baseline(k: int) -> float:
        # The first line's cap height (h) ends TOP_GAP * h below the extent.
        return y_top - h - k * LINE_PITCH * h

    if rows:
        ncols = max(len(r) for r in rows)
        widths = [max((len(r[c]) if c < len(r) else 0) for r in rows) for c in range(ncols)]
        xs = np.concatenate([[0.0], np.cumsum([(w * CHAR_WIDTH + COLUMN_GAP) * h for w in widths])])
        for row in rows:
            for c, cell in enumerate(row):
                if cell:
                    out.text(cell, (x0 + xs[c], baseline(line)), h, NOTE)
            line += 1
        line += 1 if notes else 0
    for note in notes:
        out.text(note, (x0, baseline(line)), h, NOTE)
        line += 1


# Ordinate dimensions, in text heights of the notes (common practice, no source): lettering 0.8 high; leaders start
# one height clear of the panel and of the drawing's own lines beside it, run four heights out, and jog where
# neighbours crowd so that lettering stands at least 1.5 of its heights apart.
DIM_TEXT, DIM_CLEAR, DIM_LEADER, DIM_PITCH = 0.8, 1.0, 4.0, 1.5


def _ordinates(out: _Pen, voids: list[Void], floor: float, wall: float, h: float) -> float:
    """Ordinates of every void centre from the datum: the x values under the panel (below ``floor``), the y values
    left of it (beyond ``wall``), as a drafter sets them out. Returns the lowest local y they reach, for the notes
    to start below."""
    t = DIM_TEXT * h
    places = decimals(out.frame.unit)
    doc = out.layout.doc
    if DIMSTYLE not in doc.dimstyles:
        doc.dimstyles.new(DIMSTYLE, dxfattribs={"dimtxsty": "Standard", "dimdsep": ord("."), "dimlfac": 1.0,
                                                "dimscale": 1.0, "dimzin": 0, "dimclrd": 256, "dimclre": 256,
                                                "dimclrt": 256})
    lowest = floor
    end_y = floor - (DIM_CLEAR + DIM_LEADER) * h
    features = ordinate_features(voids, 0, out.frame)
    for (value, (fx, fy)), at in zip(features, spread(np.array([f[0] for f in features]), DIM_PITCH * t)):
        out.ordinate((fx, fy), (at, end_y), True, fy - (floor - DIM_CLEAR * h), t, places)
        length = len(ordinate_text(out.frame, value)) * CHAR_WIDTH * t
        lowest = min(lowest, end_y - length - t)
    end_x = wall - (DIM_CLEAR + DIM_LEADER) * h
    features = ordinate_features(voids, 1, out.frame)
    for (_value, (fx, fy)), at in zip(features, spread(np.array([f[0] for f in features]), DIM_PITCH * t)):
        out.ordinate((fx, fy), (end_x, at), False, fx - (wall - DIM_CLEAR * h), t, places)
    return lowest


def _schedule_rows(voids: list[Void], frame: Frame) -> list[list[str]]:
    """The default schedule: one row per void, positions and sizes in the drawing's unit, centres to the schedule
    CSV's decimals (a drawing far from its origin keeps every digit a shop sets out from)."""
    if not voids:
        return []
    u = frame.unit
    d = schedule_decimals(u)
    rows = [["id", "family", f"centre x ({u})", f"centre y ({u})", f"size ({u})", "tool", f"area ({u}2)"]]
    for v in voids:
        cx, cy = frame.to_drawing(np.asarray(v.centre, dtype=float))
        rows.append([
            v.id, v.family, f"{cx:.{d}f}", f"{cy:.{d}f}", short_number(frame.length_to_drawing(v.size_mm)),
            lengths_in_unit(v.tool, frame) if v.tool else "-", short_number(v.area_mm2 / frame.mm_per_unit ** 2),
        ])
    return rows


def _clear_below_and_left(doc: DxfDocument, frame: Frame, extent) -> tuple[float, float]:
    """The lowest local y of the drawing's model-space entities standing under the panel (overlapping its local
    x range and reaching below it), and the least local x of those standing left of it (overlapping its y range),
    or the extent's own bottom and left: the ordinates and the notes go beyond all of them."""
    floor, wall = extent[1], extent[0]
    # Each entity's own points taken into the panel's frame (curves flattened, text as its box): the drawing's
    # axis-aligned boxes of a turned panel's lines would reach far below and beside it.
    for primitive in disassemble.to_primitives(disassemble.recursive_decompose(doc.modelspace())):
        points = [(v.x, v.y) for v in primitive.vertices()]
        if not points:
            continue
        local = frame.to_local(np.asarray(points, dtype=float))
        if not np.isfinite(local).all():
            continue
        lo, hi = local.min(axis=0), local.max(axis=0)
        if hi[0] >= extent[0] and lo[0] <= extent[2] and lo[1] < floor:
            floor = float(lo[1])
        if hi[1] >= extent[1] and lo[1] <= extent[3] and lo[0] < wall:
            wall = float(lo[0])
    return floor, wall


def _default_text_height(extent) -> float:
    # About a sixtieth of the panel's longer side, never under 2.5 mm (common practice, no source).
    span = max(extent[2] - extent[0], extent[3] - extent[1])
    return max(2.5, span / 60.0)


def _extent(voids: list[Void], rings: list[np.ndarray], panel_size_mm) -> tuple[float, float, float, float]:
    """(xmin, ymin, xmax, ymax) in local mm that the notes must stay clear of."""
    boxes = []
    if panel_size_mm is not None:
        w, h = (float(v) for v in panel_size_mm)
        if not (w > 0 and h > 0 and math.isfinite(w) and math.isfinite(h)):
            raise LacunaError(f"panel size must be two positive lengths, got {panel_size_mm!r} mm.",
                              where="panel_size_mm")
        boxes.append((0.0, 0.0, w, h))
    for v in voids:
        boxes.append(v.shape.bounds if not v.shape.is_empty else (*v.centre, *v.centre))
        if v.family == "bore":
            r = v.size_mm / 2
            boxes.append((v.centre[0] - r, v.centre[1] - r, v.centre[0] + r, v.centre[1] + r))
    for ring in rings:
        boxes.append((*ring.min(axis=0), *ring.max(axis=0)))
    if not boxes:
        return (0.0, 0.0, 0.0, 0.0)
    b = np.asarray(boxes, dtype=float)
    return (float(b[:, 0].min()), float(b[:, 1].min()), float(b[:, 2].max()), float(b[:, 3].max()))


def _check_frame(frame: Frame) -> None:
    if not (math.isfinite(frame.mm_per_unit) and frame.mm_per_unit > 0):
        raise LacunaError(f"the drawing scale must be positive, got {frame.mm_per_unit} mm per unit.", where="frame")
    if not all(math.isfinite(v) for v in (*frame.origin, frame.angle_deg)):
        raise LacunaError("the drawing frame has a non-finite origin or angle.", where="frame")


def result_copy_bytes(input_path, frame: Frame, *, dxf_version: str | None = None, add=None, **results) -> bytes:
    """Read the drawing at ``input_path`` (never written), add the results, return the new file's bytes.

    ``results`` are the keywords of ``add`` (default :func:`add_results`; :func:`add_check_markers` for a
    check). The copy keeps the input's DXF version, format
    (ASCII or binary) and units unless ``dxf_version`` names a later version to write instead.
    """
    from ..dxf_in.source import open_document  # the one reader of drawing files

    path = os.fspath(input_path)
    target = dxf_version_code(dxf_version) if dxf_version is not None else None
    doc, _warnings = open_document(path)
    if target is not None and target != doc.dxfversion:
        if target < doc.dxfversion:
            raise LacunaError(
                f"the drawing is DXF {const.acad_release.get(doc.dxfversion, doc.dxfversion)}; writing it as the "
                f"older {const.acad_release[target]} would lose entities and attributes.",
                where=f"{path}, dxf_version",
                hint=f"Ask for {const.acad_release.get(doc.dxfversion, doc.dxfversion)} or a later version.",
            )
        if doc.dxfversion <= const.DXF12:
            raise LacunaError(
                "a DXF R12 drawing cannot be rewritten as a later version here (its entities would need "
                "converting).",
                where=f"{path}, dxf_version",
                hint="Keep R12, or save the drawing as a later DXF version in the drafting program first.",
            )
        doc.dxfversion = target
    mm_per(frame.unit, where=f"{path}, frame unit")
    (add or add_results)(doc, frame, **results)
    # The reader stamps the drawing's creation date with the time it loaded it: the copy keeps the drafter's.
    for var, value in _creation_dates(path).items():
        doc.header[var] = value
    return serialise(doc, binary=validator.is_binary_dxf_file(path))


def _creation_dates(path: str) -> dict[str, float]:
    """$TDCREATE and $TDUCREATE as the file at ``path`` holds them (an ASCII DXF's header: the variable's name
    on one line, its group code 40 and value on the next two); none for a binary file or where they are absent."""
    out: dict[str, float] = {}
    try:
        with open(path, "rb") as f:
            head = f.read(1 << 20)
    except OSError:
        return out
    if head.startswith(b"AutoCAD Binary DXF"):
        return out
    lines = head.decode("latin-1").splitlines()
    for k, line in enumerate(lines[:-2]):
        name = line.strip()
        if name in ("$TDCREATE", "$TDUCREATE") and lines[k + 1].strip() == "40":
            try:
                out[name] = float(lines[k + 2].strip())
            except ValueError:
                pass
        if name == "ENDSEC" and out:
            break
    return out
