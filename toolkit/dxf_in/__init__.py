"""Drawing -> panel geometry: read a DXF drawing's outline, openings, keep zones and markers.

The reader never writes to the drawing. Everything it returns is in the panel's local frame (mm, N), see
:class:`toolkit.model.Frame`; ``Drawing.warnings`` lists what it healed or assumed. Bad drawings raise
:class:`toolkit.errors.LacunaError` naming the file, layer and entity handles at fault. docs/drawings.md
describes what may be drawn and the tolerances.
"""

from __future__ import annotations

import math
import os
from itertools import combinations

import numpy as np
from ezdxf import bbox
from ezdxf.document import Drawing as DxfDocument

from ..errors import LacunaError
from ..model import Drawing, Layers
from ..units import mm_per
from .chains import join
from .markers import DEFAULT_CASE, XDATA_APPID, loads, marker_xdata, supports
from .outline import ANGLE_TOL_DEG, rectangle
from .pieces import ANNOTATION, ENTITY_DATA_ERRORS, Piece, pieces_from
from .reading import Reading
from .regions import regions
from .source import RECOVERED, Item, drawing_unit, model_items, open_document

__all__ = ["read_drawing", "read_document", "marker_xdata", "XDATA_APPID", "DEFAULT_CASE", "ANGLE_TOL_DEG"]


def read_drawing(
    path, layers: Layers = Layers(), *, join_tolerance_mm: float = 0.5, chord_tolerance_mm: float = 0.1
) -> Drawing:
    """Read the panel drawn in the DXF file at ``path`` (opened read-only; damaged files are recovered)."""
    path = os.fspath(path)
    doc, warnings = open_document(path)
    return _read(doc, layers, path, join_tolerance_mm, chord_tolerance_mm, warnings)


def read_document(
    doc: DxfDocument,
    layers: Layers = Layers(),
    *,
    path: str = "<document>",
    join_tolerance_mm: float = 0.5,
    chord_tolerance_mm: float = 0.1,
    voids_on: tuple[str, ...] | None = None,
) -> Drawing:
    """Read the panel drawn in an ezdxf document already in memory; ``path`` only names it in messages.
    ``voids_on``: layers the caller reads voids from itself (``lacuna check``): closed shapes there are not named
    as unread, and those on a layer read by nobody are named with --layers as a way to check them."""
    return _read(doc, layers, path, join_tolerance_mm, chord_tolerance_mm, [], voids_on)


def _read(doc, layers: Layers, path: str, join_mm: float, chord_mm: float, warnings: list[str],
          voids_on: tuple[str, ...] | None = None) -> Drawing:
    for name, value in (("join_tolerance_mm", join_mm), ("chord_tolerance_mm", chord_mm)):
        if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
            raise LacunaError(f"{name} must be a positive length in mm, got {value!r}.", where=name)
    unit, unit_warnings = drawing_unit(doc, path)
    warnings = warnings + unit_warnings
    markers = [layers.support, layers.load]
    wanted = [layers.outline, layers.openings, layers.keep] + markers
    items = model_items(doc, markers, path, warnings, only_layers=wanted)
    if not items:
        # Nothing on the panel's layers: walk everything once more to tell an empty drawing from a misnamed layer.
        items = model_items(doc, markers, path, [])
    if not items:
        if any(RECOVERED in w for w in warnings):  # a truncated file: nothing of its model space was saved
            raise LacunaError(
                f"the drawing is empty: its model space holds no entities ({RECOVERED}; nothing of its model "
                "space could be saved).",
                where=path,
                hint="Open the drawing in the drafting program it came from and save it again as DXF.",
            )
        raise LacunaError(
            "the drawing is empty: its model space holds no entities.",
            where=path,
            hint=f"Draw the panel outline as a closed rectangle on layer {layers.outline}.",
        )
    by_layer: dict[str, list[Item]] = {}
    for item in items:
        by_layer.setdefault(item.layer.casefold(), []).append(item)

    outline_items = by_layer.get(layers.outline.casefold(), [])
    if not outline_items:
        every = model_items(doc, markers, path, [])  # the error names every layer in use, not only ours
        names = sorted({item.layer for item in every} | {layer.dxf.name for layer in doc.layers})
        raise LacunaError(
            f"nothing is drawn on the outline layer {layers.outline!r}; the drawing has the layers "
            f"{', '.join(repr(n) for n in names)}.",
            where=f"{path}, layer {layers.outline}",
            hint=f"Draw the panel outline on layer {layers.outline}, or name the layer that holds it under "
            "[layers] outline in the job file.",
        )
    r = Reading(path, unit, mm_per(unit), _reference_point(outline_items), join_mm, chord_mm, warnings)

    width, height, outline_handles = _outline(outline_items, layers.outline, r)
    openings = regions(closed_loops(by_layer.get(layers.openings.casefold(), []), layers.openings, "opening", r),
                       layers.openings, "opening", width, height, r)
    keep = regions(closed_loops(by_layer.get(layers.keep.casefold(), []), layers.keep, "keep zone", r),
                   layers.keep, "keep zone", width, height, r)
    found_supports = supports(by_layer.get(layers.support.casefold(), []), layers.support, width, height, openings, r)
    found_loads = loads(by_layer.get(layers.load.casefold(), []), layers.load, width, height, openings, r)
    r.warnings.extend(_closed_shapes_elsewhere(doc, layers, markers, path, outline_items, voids_on))
    return Drawing(
        path=path,
        unit=unit,
        frame=r.frame(),
        width_mm=width,
        height_mm=height,
        outline_handles=outline_handles,
        openings=openings,
        keep=keep,
        supports=found_supports,
        loads=found_loads,
        warnings=tuple(r.warnings),
    )


# Closed shapes a drafter draws an opening or a zone with: found on a layer lacuna does not read, inside the panel,
# they are named in a warning (an opening on a layer called "OPENINGS" would otherwise be left solid unsaid).
# Layers of lacuna's own output (voids to make, freeform outlines, marks: shared/CONTRACT.md) are read where they
# are meant to be (``lacuna check``) and never named.
CLOSED_KINDS = ("CIRCLE", "ELLIPSE", "LWPOLYLINE", "POLYLINE", "SPLINE")
OWN_LAYER_PREFIX = "LACUNA-"


def _closed_shapes_elsewhere(doc, layers: Layers, markers: list[str], path: str, outline_items: list[Item],
                             voids_on: tuple[str, ...] | None = None) -> list[str]:
    """A warning per layer not read that holds closed shapes within the outline's extents. ``voids_on``: the layers
    ``lacuna check`` reads voids from (None: the drawing is read for a job, which reads none)."""
    read = {name.casefold() for name in (layers.outline, layers.openings, layers.keep, *markers, *(voids_on or ()))}
    try:
        panel = bbox.extents([item.entity for item in outline_items], fast=True)
    except ENTITY_DATA_ERRORS:
        return []
    if not panel.has_data:
        return []
    found: dict[str, list[str]] = {}
    for item in model_items(doc, markers, path, []):
        entity = item.entity
        kind = entity.dxftype()
        if (item.layer.casefold() in read or item.layer.upper().startswith(OWN_LAYER_PREFIX)
                or kind not in CLOSED_KINDS):
            continue
        closed = kind == "CIRCLE" or (kind == "ELLIPSE" and math.isclose(
            abs(entity.dxf.end_param - entity.dxf.start_param), math.tau, rel_tol=1e-9))
        if kind in ("LWPOLYLINE", "POLYLINE", "SPLINE"):
            closed = bool(getattr(entity, "closed", False) or getattr(entity, "is_closed", False))
        if not closed:
            continue
        try:
            box = bbox.extents([entity], fast=True)
        except ENTITY_DATA_ERRORS:
            continue
        if box.has_data and panel.inside(box.extmin) and panel.inside(box.extmax):
            found.setdefault(item.layer, []).append(f"{kind} {item.handle}")
    return [f"{path}, layer {layer!r}: {len(shapes)} closed shape(s) inside the panel ({', '.join(shapes[:5])}"
            f"{', ...' if len(shapes) > 5 else ''}) on a layer lacuna does not read; ignored. Openings are read from "
            f"layer {layers.openings!r} and zones kept solid from {layers.keep!r}: if these are openings, name "
            "their layer under [layers] openings in the job file"
            + (f"; if they are voids to check, pass --layers {layer}." if voids_on is not None else ".")
            for layer, shapes in sorted(found.items())]


def _reference_point(items: list[Item]) -> np.ndarray:
    # Any point near the panel will do: it is subtracted from every coordinate before any arithmetic.
    centre = _centre([item.entity for item in items])
    for item in items if centre is None else ():
        # A damaged entity spoils the extents of all: take the first sound one (the piece reader names the bad).
        centre = _centre([item.entity])
        if centre is not None:
            break
    return np.zeros(2) if centre is None else centre


def _centre(entities) -> np.ndarray | None:
    try:
        box = bbox.extents(entities, fast=True)
    except ENTITY_DATA_ERRORS:
        return None
    if not box.has_data:
        return None
    centre = np.array([box.center.x, box.center.y], dtype=float)
    return centre if np.isfinite(centre).all() else None


def _outline(items: list[Item], layer: str, r: Reading) -> tuple[float, float, tuple[str, ...]]:
    pieces: list[Piece] = []
    for item in items:
        if item.kind in ANNOTATION or item.kind in ("HATCH", "MPOLYGON", "POINT"):
            r.warnings.append(f"{r.where(layer, [f'{item.kind} {item.handle}'])}: not part of the outline; ignored.")
            continue
        pieces += pieces_from(item, r.ref, r.chord_tol, r.path)
    joined = join(pieces, r.join_tol, r.exact, lambda labels: r.where(layer, labels), r.fmt)
    _report_healing(joined, layer, "outline", r)
    loops = [p for p in joined.loops if len(p.points) >= 2]
    if not loops:
        if not joined.open_chains:
            raise LacunaError(
                "the outline layer holds no closed shape.",
                where=r.where(layer),
                hint="Draw the panel outline as a closed rectangle.",
            )
        a, b, gap = _nearest_gap(joined.open_chains)
        labels = [c.label for c in joined.open_chains]
        raise LacunaError(
            f"the outline is open: a gap of {gap * r.mm_per_unit:.4g} mm between {r.fmt(a)} and {r.fmt(b)} "
            f"(ends closer than the join tolerance, {r.join_mm:g} mm, are joined).",
            where=r.where(layer, labels),
            hint="Close the outline: extend the lines to meet, or close the polyline.",
        )
    if len(loops) > 1:
        labels = [loop.label for loop in loops]
        raise LacunaError(
            f"the outline layer holds {_count(len(loops))} candidate outlines ({'; '.join(labels)}); "
            "the panel must be one closed shape.",
            where=r.where(layer, labels),
            hint="Keep one closed rectangle on the outline layer and move the others to another layer.",
        )
    for chain in joined.open_chains:
        r.warnings.append(f"{r.where(layer, [chain.label])}: loose pieces beside the closed outline; ignored.")
    loop = loops[0]
    rect = rectangle(loop, r.join_tol, r.mm_per_unit, r.where(layer, [loop.label]), r.fmt)
    r.angle_deg = rect.angle_deg
    local = r.to_local(rect.corners)  # local_min is still zero here
    r.local_min = local.min(axis=0)
    width, height = local.max(axis=0) - local.min(axis=0)
    return float(width), float(height), tuple(loop.handles)


def closed_loops(items: list[Item], layer: str, what: str, r: Reading) -> list[Piece]:
    """The closed loops drawn on ``layer`` (annotation skipped with a warning; an open chain refused)."""
    pieces: list[Piece] = []
    for item in items:
        if item.kind in ANNOTATION:
            r.warnings.append(f"{r.where(layer, [f'{item.kind} {item.handle}'])}: annotation ignored.")
            continue
        pieces += pieces_from(item, r.ref, r.chord_tol, r.path)
    joined = join(pieces, r.join_tol, r.exact, lambda labels: r.where(layer, labels), r.fmt)
    _report_healing(joined, layer, what, r)
    for chain in joined.open_chains:
        a, b = chain.points[0], chain.points[-1]
        gap = float(np.hypot(*(a - b))) * r.mm_per_unit
        kinds = sorted(set(chain.kinds))
        raise LacunaError(
            f"an open {'/'.join(kinds)} ({chain.label}) cannot be {_a(what)}: its ends {r.fmt(a)} and {r.fmt(b)} "
            f"are {gap:.4g} mm apart (the join tolerance is {r.join_mm:g} mm).",
            where=r.where(layer, [chain.label]),
            hint=f"Close the shape, or move the entity to another layer if it is not {_a(what)}.",
        )
    return [loop for loop in joined.loops if len(loop.points) >= 2]


def _report_healing(joined, layer: str, what: str, r: Reading) -> None:
    for gap, at in joined.gaps_closed:
        r.warnings.append(
            f"{r.where(layer)}: closed a gap of {gap * r.mm_per_unit:.4g} mm in the {what} at {r.fmt(at)} "
            f"(join tolerance {r.join_mm:g} mm)."
        )
    if joined.merged:
        r.warnings.append(
            f"{r.where(layer, sorted(set(joined.merged)))}: pieces drawn on top of each other were merged."
        )


def _a(noun: str) -> str:
    return f"{'an' if noun[:1] in 'aeiou' else 'a'} {noun}"


def _count(n: int) -> str:
    return {2: "two", 3: "three", 4: "four", 5: "five"}.get(n, str(n))


def _nearest_gap(chains: list[Piece]) -> tuple[np.ndarray, np.ndarray, float]:
    """The two loose ends nearest each other (of different chains, when there are several)."""
    ends = [(k, c.points[i]) for k, c in enumerate(chains) for i in (0, -1)]
    pairs = [(a, b) for (i, a), (j, b) in combinations(ends, 2) if i != j or len(chains) == 1]
    a, b = min(pairs, key=lambda ab: float(np.hypot(*(ab[0] - ab[1]))))
    return a, b, float(np.hypot(*(a - b)))
