"""Voids drawn by hand -> :class:`toolkit.model.Void` values in the panel's local frame, for checking.

What each drawn shape becomes (docs/check.md says the same for drafters):

- CIRCLE (or a closed polyline of two half-circle arcs): a bore, ``size_mm`` the diameter, exact.
- a closed LWPOLYLINE / POLYLINE (or a loop of LINEs and ARCs) shaped as a stadium — two straight sides of
  equal length, parallel, joined at both ends by a half circle (bulge of magnitude 1) — a slot: ``size_mm`` the
  width, ``length_mm`` the overall length, ``angle_deg`` the direction of its axis (0 to 180).
- any other closed polyline or LINE / ARC loop: a polygon. ``sides`` counts its corners: places where one
  straight side turns into the next. An eased corner — an arc tangent to the straight sides on both sides of
  it, turning less than a half circle — is one corner, not a side; a vertex between two sides on one line is
  no corner. A chamfer is a short straight side and counts as one. When any arc is not such an easing (a
  curved side), ``sides`` is 0.
- ELLIPSE, SPLINE and HATCH: a polygon with ``sides`` 0 (the free curve flattened).

Voids are not merged, clipped or healed against each other or the outline: overlaps and voids outside the
panel are findings of the check, not faults of the drawing. An open shape on a void layer is refused, naming
its handle. Each void's id is "H" followed by the handle of the (first) entity that draws it.
"""

from __future__ import annotations

import math
from dataclasses import replace
from typing import Sequence

import numpy as np
import shapely
from ezdxf.document import Drawing as DxfDocument
from shapely.geometry import Polygon

from ..arcs import flatten
from ..errors import LacunaError
from ..model import Frame, Void
from . import closed_loops
from .pieces import Piece
from .reading import Reading
from .regions import loop_polygon
from .source import Item, model_items

# CONTRACT.md output layers; a hand-drawn layout for `lacuna check` uses the same ones.
VOID_LAYERS = ("LACUNA-VOID-POLYGON", "LACUNA-VOID-SLOT", "LACUNA-VOID-BORE")
LAYER_FAMILY = {"LACUNA-VOID-POLYGON": "polygon", "LACUNA-VOID-SLOT": "slot", "LACUNA-VOID-BORE": "bore"}

# Arcs are flattened to chords no further than this off the true arc (mm): the check measures polygons on
# the flattened outline, so it can be out by this much where a polygon has arcs (bores and slots are exact).
CHORD_MM = 0.01
# A drawn shape is a circle or a stadium when it is one to within this (mm): the check's own tolerance.
SHAPE_TOL_MM = 0.01
# Directions this close are one straight line; an easing meets its sides this nearly tangent (degrees).
# Our choice (no source): well above drawing round-off, well below anything a drafter draws on purpose.
STRAIGHT_DEG = 0.5
TANGENT_DEG = 1.0


def read_voids(doc: DxfDocument, frame: Frame, layers: Sequence[str] | None = None, path: str = "<document>",
               *, warnings: list[str] | None = None, join_tolerance_mm: float = 0.5) -> list[Void]:
    """The voids drawn on ``layers`` (default :data:`VOID_LAYERS`) of ``doc``'s model space, in local mm.

    ``frame`` is the panel's (``Drawing.frame``); ``path`` names the drawing in messages. Notes on what was
    assumed (a polygon drawn on the slot layer, a named layer that holds nothing) are appended to ``warnings``. A
    circle on the slot layer is a slot as long as it is wide.
    Open pieces on a layer are joined end to end within ``join_tolerance_mm``, as for openings.
    """
    names = list(dict.fromkeys(VOID_LAYERS if layers is None else layers))
    notes: list[str] = [] if warnings is None else warnings
    r = _reading(frame, path, join_tolerance_mm, notes)
    wanted = {name.casefold(): name for name in names}
    by_layer: dict[str, list[Item]] = {}
    for item in model_items(doc, [], path, notes):
        if item.layer.casefold() in wanted:
            by_layer.setdefault(item.layer.casefold(), []).append(item)

    voids: list[Void] = []
    for key, name in wanted.items():
        items = by_layer.get(key, [])
        if not items:
            if name not in VOID_LAYERS:
                notes.append(f"{r.where(name)}: the layer holds nothing to check.")
            continue
        layer = items[0].layer
        hatches: dict[str, list[Polygon]] = {}
        for loop in closed_loops(items, layer, "void", r):
            if loop.kinds[0] in ("HATCH", "MPOLYGON"):
                hatches.setdefault(loop.handles[0], []).append(loop_polygon(loop, layer, r))
            else:
                voids.append(_void_of(loop, layer, r))
        for handle, polys in hatches.items():
            voids += _hatch_voids(handle, polys, layer)
    _unique_ids(voids)
    for k, v in enumerate(voids):
        expected = LAYER_FAMILY.get(v.layer.upper())
        if expected == "slot" and v.family == "bore":
            # A stadium whose straight sides have shrunk to nothing is a circle: on the slot layer, a slot as long
            # as it is wide (the round hole a slot's cutter or former makes, as the schedule words it), its width
            # checked against the slot widths.
            voids[k] = replace(v, family="slot", length_mm=v.size_mm, angle_deg=0.0)
        elif expected and expected != v.family:
            notes.append(f"{r.where(v.layer, [f'handle {v.handle}'])}: drawn as a {v.family} on the {expected} "
                         f"layer; checked as a {v.family}.")
    return voids


def _reading(frame: Frame, path: str, join_mm: float, warnings: list[str]) -> Reading:
    # Reading points relative to the frame's origin with no further shift makes Reading.to_local equal
    # Frame.to_local, while keeping the subtraction first (site coordinates stay exact).
    if not (math.isfinite(frame.mm_per_unit) and frame.mm_per_unit > 0):
        raise LacunaError(f"the drawing scale must be positive, got {frame.mm_per_unit} mm per unit.", where=path)
    if not (isinstance(join_mm, (int, float)) and math.isfinite(join_mm) and join_mm > 0):
        raise LacunaError(f"join_tolerance_mm must be a positive length in mm, got {join_mm!r}.",
                          where="join_tolerance_mm")
    return Reading(path, frame.unit, frame.mm_per_unit, np.asarray(frame.origin, dtype=float), join_mm, CHORD_MM,
                   warnings, angle_deg=frame.angle_deg)


# --- one loop -> voids -----------------------------------------------------------------------------------------


def _void_of(loop: Piece, layer: str, r: Reading) -> Void:
    handles = ",".join(loop.handles)
    ident = f"H{loop.handles[0]}"
    pts = r.to_local(loop.points)
    bulges = np.asarray(loop.bulges, dtype=float)
    if not loop.curved:
        pts, bulges = _counter_clockwise(pts, bulges)
        circle = _circle(pts, bulges)
        if circle is not None:
            centre, diameter = circle
            ring = flatten(np.array([[centre[0] - diameter / 2, centre[1]], [centre[0] + diameter / 2, centre[1]]]),
                           np.ones(2), True, CHORD_MM)
            return Void(id=ident, family="bore", centre=centre, size_mm=diameter, shape=Polygon(ring),
                        handle=handles, layer=layer)
    shape = loop_polygon(loop, layer, r)  # refuses a shape with no area or one that crosses itself
    outline = tuple((float(x), float(y), float(b)) for (x, y), b in zip(pts, bulges)) if not loop.curved else ()
    if not loop.curved:
        slot = _stadium(pts, bulges)
        if slot is not None:
            centre, width, length, angle = slot
            return Void(id=ident, family="slot", centre=centre, size_mm=width, shape=shape, outline=outline,
                        length_mm=length, angle_deg=angle, handle=handles, layer=layer)
    sides = 0 if loop.curved else corner_count(pts, bulges)
    return _polygon_void(ident, shape, outline, sides, handles, layer)


def _hatch_voids(handle: str, polys: list[Polygon], layer: str) -> list[Void]:
    """A hatch's boundaries combined as it shows them (nested ones alternate filled and empty): the filled
    parts are voids with ``sides`` 0."""
    combined = polys[0]
    for p in polys[1:]:
        combined = shapely.symmetric_difference(combined, p)
    parts = [p for p in getattr(combined, "geoms", [combined]) if isinstance(p, Polygon) and p.area > 0]
    return [_polygon_void(f"H{handle}" if len(parts) == 1 else f"H{handle}.{k}", part, (), 0, handle, layer)
            for k, part in enumerate(parts, start=1)]


def _polygon_void(ident: str, shape: Polygon, outline, sides: int, handles: str, layer: str) -> Void:
    hull = np.asarray(shape.convex_hull.exterior.coords, dtype=float)[:-1]
    d = hull[:, None, :] - hull[None, :, :]
    dist = np.hypot(d[..., 0], d[..., 1])
    i, j = np.unravel_index(int(np.argmax(dist)), dist.shape)
    along = hull[j] - hull[i]
    c = shape.centroid
    return Void(id=ident, family="polygon", centre=(float(c.x), float(c.y)),
                size_mm=2.0 * float(shapely.minimum_bounding_radius(shape)), shape=shape, outline=outline,
                sides=sides, length_mm=float(dist[i, j]),
                angle_deg=math.degrees(math.atan2(along[1], along[0])) % 180.0, handle=handles, layer=layer)


def _counter_clockwise(pts: np.ndarray, bulges: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The same closed run turning counter-clockwise (a reversed run's arcs turn the other way)."""
    ring = flatten(pts, bulges, True, 10 * CHORD_MM)
    x, y = ring[:, 0], ring[:, 1]
    area2 = float(np.dot(x, np.roll(y, -1)) - np.dot(np.roll(x, -1), y))
    if area2 >= 0:
        return pts, bulges
    return pts[::-1].copy(), -np.roll(bulges[::-1], -1)


def _circle(pts: np.ndarray, bulges: np.ndarray) -> tuple[tuple[float, float], float] | None:
    """Centre and diameter when the run is two half-circle arcs, else None."""
    if len(pts) != 2:
        return None
    d = float(np.hypot(*(pts[1] - pts[0])))
    if d <= 0 or np.any(np.abs(np.abs(bulges) - 1.0) * d / 2 > SHAPE_TOL_MM) or np.any(bulges <= 0):
        return None
    c = pts.mean(axis=0)
    return (float(c[0]), float(c[1])), d


def _stadium(pts: np.ndarray, bulges: np.ndarray) -> tuple[tuple[float, float], float, float, float] | None:
    """(centre, width, overall length, axis angle) when a counter-clockwise run is a stadium, else None."""
    if len(pts) != 4:
        return None
    k = 0 if bulges[0] == 0.0 else 1  # start on a straight side: straight, arc, straight, arc
    p = np.roll(pts, -k, axis=0)
    b = np.roll(bulges, -k)
    if list(b != 0.0) != [False, True, False, True]:
        return None
    w1, w2 = float(np.hypot(*(p[2] - p[1]))), float(np.hypot(*(p[0] - p[3])))
    s1, s2 = float(np.hypot(*(p[1] - p[0]))), float(np.hypot(*(p[3] - p[2])))
    tol = SHAPE_TOL_MM
    if min(w1, w2, s1, s2) <= tol or abs(w1 - w2) > tol or abs(s1 - s2) > tol:
        return None
    # half circles bowing outwards: bulge +1 on a counter-clockwise run, its sagitta within tol of w / 2
    if abs(b[1] - 1.0) * w1 / 2 > tol or abs(b[3] - 1.0) * w2 / 2 > tol:
        return None
    u = (p[1] - p[0]) / s1
    if abs(float(np.dot(p[2] - p[1], u))) > tol:  # the end chord square to the sides (equal sides: a rectangle)
        return None
    width = (w1 + w2) / 2
    c = p.mean(axis=0)
    angle = math.degrees(math.atan2(u[1], u[0])) % 180.0
    return (float(c[0]), float(c[1])), width, (s1 + s2) / 2 + width, angle


def corner_count(pts: np.ndarray, bulges: np.ndarray) -> int:
    """Corners of a closed counter-clockwise (x, y, bulge) run: straight sides meeting at an angle.

    Eased corners (an arc tangent to the straight sides either side, turning less than a half circle) count
    once; sides on one straight line are one side. Any other arc makes the shape curved: 0. Fewer than three
    corners: 0.
    """
    n = len(pts)
    nxt = np.roll(pts, -1, axis=0)
    chord = nxt - pts
    length = np.hypot(chord[:, 0], chord[:, 1])
    straight = np.abs(bulges) * length / 2 <= 1e-9 * max(1.0, float(length.max(initial=0.0)))
    if not straight.any():
        return 0
    heading = np.arctan2(chord[:, 1], chord[:, 0])
    sweep = 4.0 * np.arctan(bulges)
    tangent = math.radians(TANGENT_DEG)
    for i in np.flatnonzero(~straight):
        before, after = (i - 1) % n, (i + 1) % n
        if not (straight[before] and straight[after]) or abs(sweep[i]) >= math.pi - 1e-9:
            return 0
        start, end = heading[i] - sweep[i] / 2, heading[i] + sweep[i] / 2
        if _turn(heading[before], start) > tangent or _turn(end, heading[after]) > tangent:
            return 0
    sides = heading[straight]
    turns = np.abs(np.angle(np.exp(1j * (np.roll(sides, -1) - sides))))
    corners = int(np.sum(turns > math.radians(STRAIGHT_DEG)))
    return corners if corners >= 3 else 0


def _turn(a: float, b: float) -> float:
    return abs(math.remainder(b - a, 2 * math.pi))


# --- hatches and ids -------------------------------------------------------------------------------------------


def _unique_ids(voids: list[Void]) -> None:
    seen: dict[str, int] = {}
    for k, v in enumerate(voids):
        if v.id in seen:
            seen[v.id] += 1
            voids[k] = _with_id(v, f"{v.id}.{seen[v.id]}")
        else:
            seen[v.id] = 1


def _with_id(v: Void, ident: str) -> Void:
    return replace(v, id=ident)
