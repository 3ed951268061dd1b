"""Void outlines as (x, y, bulge) vertex runs, and the drafts they are built from.

A :class:`Draft` is a void before it has an id: its family, centre and the few numbers that define it. Every
change the later stages make (scale about the centre, move, mirror, snap) is a change of those numbers, and
the outline is rebuilt from them, so an eased corner keeps the radius or chamfer the rules ask for whatever the
void's size. Bulge = tan(theta / 4), theta the included angle of the arc to the next vertex, positive
counter-clockwise (DXF reference, LWPOLYLINE). Every outline runs counter-clockwise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np
import shapely
from shapely.geometry import Polygon

from ..arcs import bulge_of, flatten
from ..model import Point, Void
from .measure import following, preceding

# Arcs are flattened to chords no further than this off the true arc when a void becomes a shapely polygon,
# so the checks on the flattened shape are out by at most this much (mm).
CHORD_TOL_MM = 0.01
# Slots' and bores' radii about their cores (``Draft.radii``), kept by family, width and point count: measured
# on the first outline, widened by this (mm) for another's rounding; at most this many kept.
_RADII: dict[tuple, tuple[float, float]] = {}
RADII_SLACK_MM = 1e-9
RADII_HELD = 4096


@dataclass(frozen=True)
class Draft:
    """A void before it gets its id (local mm).

    - polygon: ``corners`` are the sharp n-gon's vertices relative to ``centre`` (counter-clockwise), ``size``
      twice the largest centre-to-vertex distance;
    - slot: ``size`` the width, ``length`` the overall length, ``angle_deg`` the direction of its axis;
    - bore: ``size`` the diameter.

    ``source`` is the index of the freeform void it was fitted to and ``part`` its number among the voids
    fitted to that one (bores: several); ``corner`` / ``corner_mm`` the easing of a
    polygon's corners ("none", "chamfer" or "radius"). ``fixed`` names the panel mid-lines ("x": the vertical
    one, "y": the horizontal one) the void stands on and is itself symmetric about, in a symmetric layout:
    its centre stays on them whatever the later stages do (see ``symmetry``).
    """

    family: str
    centre: Point
    size: float
    source: int
    part: int = 0
    length: float = 0.0
    angle_deg: float = 0.0
    corners: tuple[Point, ...] = ()
    corner: str = "none"
    corner_mm: float = 0.0
    fixed: tuple[str, ...] = ()
    regular: bool = False
    # The schedule's words for what makes it: the plain ones here; a job gives its profile's (Rules.tool_words).
    tools: tuple[str, str, str] = ("cut", "slot", "bore")

    def scaled(self, size: float) -> Draft:
        """The same void at another size, about the same centre (a slot keeps its straight part's ratio)."""
        if self.family == "polygon":
            k = size / self.size
            return replace(self, size=size, corners=tuple((x * k, y * k) for x, y in self.corners))
        if self.family == "slot":
            return replace(self, size=size, length=max(size, self.length * size / self.size))
        return replace(self, size=size)

    def with_length(self, length: float) -> Draft:
        return replace(self, length=max(self.size, length))

    def moved(self, dx: float, dy: float) -> Draft:
        out = replace(self, centre=(self.centre[0] + dx, self.centre[1] + dy))
        # A move changes neither size nor the circle round the void: carry them, and the shape, moved.
        _carry(self, out, lambda xy: xy + (dx, dy))
        return out

    def at(self, centre: Point) -> Draft:
        return replace(self, centre=(float(centre[0]), float(centre[1])))

    def corners_snapped(self, snap: float, origin=(0.0, 0.0), inward: bool = True) -> Draft | None:
        """An irregular n-gon with every corner moved to the ``snap`` grid: to the grid point next to it towards the
        centre (the shape shrinks rather than grows), or with ``inward`` False to the nearest one. None when two
        corners would meet."""
        pts = self.sharp - np.asarray(origin, dtype=float)
        if inward:
            towards = np.asarray(self.centre, dtype=float) - np.asarray(origin, dtype=float) - pts
            snapped = np.where(towards >= 0, np.ceil(pts / snap - 1e-9), np.floor(pts / snap + 1e-9)) * snap
        else:
            snapped = np.round(pts / snap) * snap
        snapped = snapped + np.asarray(origin, dtype=float)
        if len(np.unique(np.round(snapped, 9), axis=0)) < len(snapped):
            return None
        x, y = snapped[:, 0], snapped[:, 1]
        a2 = x * following(y) - following(x) * y
        area = a2.sum() / 2.0
        if area <= 0:
            return None
        c = (float(np.sum((x + following(x)) * a2) / (6 * area)), float(np.sum((y + following(y)) * a2) / (6 * area)))
        rel = snapped - c
        return replace(self, centre=c, size=2.0 * float(np.max(np.linalg.norm(rel, axis=1))),
                       corners=tuple((float(px), float(py)) for px, py in rel))

    def mirrored(self, axis: str, about: float) -> Draft:
        """Mirror image about the line x = about (axis "x": the vertical mid-line) or y = about (axis "y")."""
        cx, cy = self.centre
        if axis == "x":
            centre, flip = (2.0 * about - cx, cy), (-1.0, 1.0)
        else:
            centre, flip = (cx, 2.0 * about - cy), (1.0, -1.0)
        # A mirror turns a counter-clockwise run clockwise: reverse it to keep every outline counter-clockwise.
        corners = tuple((x * flip[0], y * flip[1]) for x, y in reversed(self.corners))
        out = replace(self, centre=centre, corners=corners, angle_deg=(-self.angle_deg) % 180.0)
        k = 0 if axis == "x" else 1
        _carry(self, out, lambda xy: np.column_stack([2.0 * about - xy[:, 0], xy[:, 1]]) if k == 0
               else np.column_stack([xy[:, 0], 2.0 * about - xy[:, 1]]), turn=True)
        return out

    @property
    def sharp(self) -> np.ndarray:
        """(n, 2) absolute vertices of a polygon's sharp n-gon."""
        return np.asarray(self.corners, dtype=float) + np.asarray(self.centre, dtype=float)

    def outline(self) -> tuple[tuple[float, float, float], ...]:
        if self.family == "polygon":
            return eased_outline(self.sharp, self.corner, self.corner_mm)
        if self.family == "slot":
            return stadium_outline(self.centre, self.angle_deg, self.size, self.length)
        return circle_outline(self.centre, self.size)

    def extent(self) -> float:
        """Diameter of the smallest circle round the void (the size a web ratio is taken of): a slot's length, a
        bore's diameter (the true outline's, a hair over the flattened one's), an n-gon's measured on its
        flattened outline. Kept per draft."""
        got = self.__dict__.get("_extent")
        if got is None:
            if self.family == "slot":
                got = float(max(self.length, self.size))
            elif self.family == "bore":
                got = float(self.size)
            else:
                got = 2.0 * float(shapely.minimum_bounding_radius(self.shape()))
            object.__setattr__(self, "_extent", got)
        return got

    def reach(self) -> float:
        """Radius of a circle about ``centre`` holding the whole void (a bound for quick distance checks)."""
        got = self.__dict__.get("_reach")
        if got is None:
            if self.family in ("slot", "bore"):
                got = 0.5 * float(max(self.length, self.size))
            else:
                xy = shapely.get_coordinates(self.shape())
                got = float(np.max(np.hypot(xy[:, 0] - self.centre[0], xy[:, 1] - self.centre[1]))) if len(xy) else 0.0
            object.__setattr__(self, "_reach", got)
        return got

    def core(self) -> tuple[float, float, float, float]:
        """The segment (ax, ay, bx, by) a slot's outline is drawn round (a bore's, a polygon's: its centre twice)."""
        cx, cy = self.centre
        if self.family == "slot":
            half = max(self.length - self.size, 0.0) / 2.0
            a = math.radians(self.angle_deg)
            ux, uy = half * math.cos(a), half * math.sin(a)
            return cx - ux, cy - uy, cx + ux, cy + uy
        return cx, cy, cx, cy

    def radii(self) -> tuple[float, float]:
        """(inner, outer) about ``core``: a slot's or bore's drawn outline holds every point within ``inner`` of
        its core and lies within ``outer`` of it (its arcs are drawn as chords, a little inside the true ones);
        inner is -1 for a polygon (no such bound kept). Worked out once per draft, carried by moved copies."""
        got = self.__dict__.get("_radii")
        if got is None:
            if self.family in ("slot", "bore"):
                xy = shapely.get_coordinates(self.shape())
                # Every slot of one width drawn with as many points is the same outline moved and turned, its
                # straight part apart (its arcs are flattened to the same chords): its bounds are measured once,
                # widened past any rounding of another's (they only decide which pairs are measured exactly).
                key = (self.family, self.size, len(xy))
                got = _RADII.get(key)
                if got is None:
                    ax, ay, bx, by = self.core()
                    outer = float(np.max(point_segment_distances(xy[:, 0], xy[:, 1], ax, ay, bx, by)))
                    inner = float(np.min(segment_distances(ax, ay, bx, by, xy[:-1, 0], xy[:-1, 1], xy[1:, 0],
                                                           xy[1:, 1])))
                    got = (inner - RADII_SLACK_MM, outer + RADII_SLACK_MM)
                    if len(_RADII) >= RADII_HELD:
                        _RADII.clear()
                    _RADII[key] = got
            else:
                got = (-1.0, self.reach())
            object.__setattr__(self, "_radii", got)
        return got

    def shape(self) -> Polygon:
        """The flattened outline as a shapely polygon, built once per draft (drafts are immutable; the fitting
        and shape optimisation ask for the same draft's shape many times)."""
        got = self.__dict__.get("_shape")
        if got is None:
            got = outline_polygon(self.outline())
            object.__setattr__(self, "_shape", got)
        return got

    def void(self, id: str) -> Void:
        """The finished :class:`~toolkit.model.Void`."""
        outline = self.outline()
        shape = outline_polygon(outline)
        polygon_tool, slot_tool, bore_tool = self.tools
        if self.family == "polygon":
            pts = self.sharp
            n = len(pts)
            extent = float(np.max(np.linalg.norm(pts[:, None, :] - pts[None, :, :], axis=2)))
            corners = tuple((float(x), float(y)) for x, y in pts)
            if self.regular:
                # The size of a regular n-gon is across corners: twice its centre-to-corner distance (the corners
                # are built from it, so the drawing measures the same to rounding). Its turn is that of the first
                # corner, within one n-th of a revolution.
                size = self.size
                first = self.corners[0]
                angle = (math.degrees(math.atan2(first[1], first[0])) + 360.0) % (360.0 / n)
                tool = f"regular {n}-gon {polygon_tool}, {size:.0f} mm across corners"
            else:
                size = 2.0 * float(shapely.minimum_bounding_radius(shapely.multipoints(pts)))
                angle = principal_direction(pts)
                tool = f"irregular {n}-gon {polygon_tool} to the corner list, {size:.0f} mm overall"
            return Void(id=id, family="polygon", centre=self.centre, size_mm=size, shape=shape,
                        outline=outline, sides=n, length_mm=extent, angle_deg=angle, tool=tool,
                        corners=corners, regular=self.regular)
        if self.family == "slot":
            # A slot no longer than it is wide (to the half millimetre its length is written to) has no travel:
            # the cutter or former makes a round hole, and the schedule says so rather than "50 mm, 50 mm long".
            travel = f"{self.length:.0f} mm long" if self.length - self.size >= 0.5 else \
                "as long as it is wide (a round hole)"
            return Void(id=id, family="slot", centre=self.centre, size_mm=self.size, shape=shape, outline=outline,
                        length_mm=self.length, angle_deg=self.angle_deg, tool=f"{slot_tool} {self.size:g} mm, {travel}")
        return Void(id=id, family="bore", centre=self.centre, size_mm=self.size, shape=shape, outline=(),
                    tool=f"{bore_tool} {self.size:g} mm")


def point_segment_distances(px, py, ax, ay, bx, by):
    """Distance from each point (px, py) to the segment(s) (ax, ay)-(bx, by); numpy broadcasting throughout."""
    vx, vy = np.subtract(bx, ax), np.subtract(by, ay)
    length2 = vx * vx + vy * vy
    with np.errstate(invalid="ignore", divide="ignore"):
        t = np.where(length2 > 0.0, ((px - ax) * vx + (py - ay) * vy) / length2, 0.0)
    t = np.clip(t, 0.0, 1.0)
    return np.hypot(px - (ax + t * vx), py - (ay + t * vy))


def segment_distances(ax, ay, bx, by, cx, cy, dx, dy):
    """Distance between the segments (ax, ay)-(bx, by) and (cx, cy)-(dx, dy), broadcast (a segment may be a point).
    Where they cross properly it is 0; everywhere else the least distance of an end to the other segment (an end
    on the other segment, as where they touch or overlap on one line, gives 0 there)."""
    ends = np.minimum.reduce([point_segment_distances(ax, ay, cx, cy, dx, dy),
                              point_segment_distances(bx, by, cx, cy, dx, dy),
                              point_segment_distances(cx, cy, ax, ay, bx, by),
                              point_segment_distances(dx, dy, ax, ay, bx, by)])
    o1 = (bx - ax) * (cy - ay) - (by - ay) * (cx - ax)
    o2 = (bx - ax) * (dy - ay) - (by - ay) * (dx - ax)
    o3 = (dx - cx) * (ay - cy) - (dy - cy) * (ax - cx)
    o4 = (dx - cx) * (by - cy) - (dy - cy) * (bx - cx)
    return np.where((o1 * o2 < 0.0) & (o3 * o4 < 0.0), 0.0, ends)


def _point_segment(px: float, py: float, ax: float, ay: float, bx: float, by: float) -> float:
    vx, vy = bx - ax, by - ay
    length2 = vx * vx + vy * vy
    t = min(max(((px - ax) * vx + (py - ay) * vy) / length2, 0.0), 1.0) if length2 > 0.0 else 0.0
    return math.hypot(px - (ax + t * vx), py - (ay + t * vy))


def segment_distance(ax: float, ay: float, bx: float, by: float, cx: float, cy: float, dx: float, dy: float) -> float:
    """``segment_distances`` for one pair, in plain floats (a few pairs at a time cost less so than as arrays)."""
    o1 = (bx - ax) * (cy - ay) - (by - ay) * (cx - ax)
    o2 = (bx - ax) * (dy - ay) - (by - ay) * (dx - ax)
    o3 = (dx - cx) * (ay - cy) - (dy - cy) * (ax - cx)
    o4 = (dx - cx) * (by - cy) - (dy - cy) * (bx - cx)
    if o1 * o2 < 0.0 and o3 * o4 < 0.0:
        return 0.0
    return min(_point_segment(ax, ay, cx, cy, dx, dy), _point_segment(bx, by, cx, cy, dx, dy),
               _point_segment(cx, cy, ax, ay, bx, by), _point_segment(dx, dy, ax, ay, bx, by))


def _carry(source: Draft, target: Draft, move, turn: bool = False) -> None:
    """Hand ``source``'s kept extent and reach to ``target`` (a moved or mirrored copy: both unchanged), and its
    shape with its coordinates mapped by ``move`` (no re-flattening of the arcs); ``turn``: the map is a mirror,
    so the outline is turned back counter-clockwise."""
    for key in ("_extent", "_reach", "_radii", "_slack"):  # _slack: how far an n-gon's sharp corners stand off it
        if key in source.__dict__:
            object.__setattr__(target, key, source.__dict__[key])
    shape = source.__dict__.get("_shape")
    if shape is not None:
        moved = shapely.transform(shape, move)
        object.__setattr__(target, "_shape", shapely.orient_polygons(moved) if turn else moved)


def principal_direction(pts: np.ndarray) -> float:
    """Direction of the major principal axis of a polygon's area, degrees in [0, 180)."""
    from .measure import principal_axes

    return principal_axes(Polygon(pts))[0]


def outline_polygon(outline) -> Polygon:
    """The shapely polygon of a closed (x, y, bulge) run, arcs flattened to within ``CHORD_TOL_MM``."""
    v = np.asarray(outline, dtype=float)
    ring = flatten(v[:, :2], v[:, 2], True, CHORD_TOL_MM)
    return shapely.make_valid(Polygon(ring)) if len(ring) >= 3 else Polygon()


def circle_outline(centre: Point, diameter: float) -> tuple[tuple[float, float, float], ...]:
    """A circle as two half-circle arcs (bulge 1 each), counter-clockwise."""
    cx, cy = centre
    r = diameter / 2.0
    return ((cx - r, cy, 1.0), (cx + r, cy, 1.0))


def stadium_outline(centre: Point, angle_deg: float, width: float, length: float):
    """Two semicircles of diameter ``width`` joined by straight sides; ``length`` overall, along ``angle_deg``."""
    a = math.radians(angle_deg)
    u = np.array([math.cos(a), math.sin(a)])
    n = np.array([-u[1], u[0]])
    c = np.asarray(centre, dtype=float)
    half, r = max(length - width, 0.0) / 2.0, width / 2.0
    if half <= 0.0:
        return circle_outline(centre, width)
    p = [c - half * u - r * n, c + half * u - r * n, c + half * u + r * n, c - half * u + r * n]
    return tuple((float(q[0]), float(q[1]), b) for q, b in zip(p, (0.0, 1.0, 0.0, 1.0)))


def eased_outline(points: np.ndarray, corner: str, size: float):
    """A convex counter-clockwise polygon with every corner chamfered or rounded.

    A chamfer of ``size`` cuts each corner ``size`` back along both sides (two vertices for one); a radius puts a
    true arc of radius ``size`` tangent to both sides. Where a side is too short for the easing at both its
    ends, the easing of its corners is reduced to fit (just under half the side each).
    """
    pts = np.asarray(points, dtype=float)
    if corner == "none" or size <= 0.0:
        return tuple((float(x), float(y), 0.0) for x, y in pts)
    n = len(pts)
    prev, nxt = preceding(pts), following(pts)
    to_prev, to_next = prev - pts, nxt - pts
    len_prev = np.linalg.norm(to_prev, axis=1)
    len_next = np.linalg.norm(to_next, axis=1)
    u_prev, u_next = to_prev / len_prev[:, None], to_next / len_next[:, None]
    # The turning angle at each corner (pi minus the interior angle).
    turn = np.pi - np.arccos(np.clip(np.sum(u_prev * u_next, axis=1), -1.0, 1.0))
    if corner == "chamfer":
        back = np.full(n, float(size))
    else:
        back = size * np.tan(turn / 2.0)
    room = 0.49 * np.minimum(len_prev, len_next)
    back = np.minimum(back, room)
    a = (pts + back[:, None] * u_prev).tolist()
    b = (pts + back[:, None] * u_next).tolist()
    bulges = [0.0] * n if corner == "chamfer" else [bulge_of(t) for t in turn.tolist()]
    out = []
    for (ax, ay), (bx, by), bulge in zip(a, b, bulges):
        out.append((ax, ay, bulge))
        out.append((bx, by, 0.0))
    return tuple(out)
