"""Fitting one freeform void with a shape a shop can make: an n-gon, a slot, or stock-size bores.

Pure functions of shapely geometry in the panel's local frame (mm). Each returns :class:`~.outline.Draft`
values; ``Draft.void(id)`` makes the finished :class:`~toolkit.model.Void` with its (x, y, bulge) outline.

**Fit error** of a shape S to a freeform void T: area(S symmetric-difference T) / area(T). 0 is a perfect
fit; 1 is as bad as no void at all (or a void of the same area beside it).

**Polygon.** Convex, exactly ``sides`` corners. Convex because the void is made either by a former that
has to be drawn out of the cast or cut by straight passes of a saw or torch: a re-entrant corner traps the
former and cannot be reached by a straight cut. Fitted in two stages, both by Nelder-Mead (scipy) on the
fit error plus a penalty on area outside the allowed region (weight ``OUTSIDE_WEIGHT``):

1. an affine image of the regular n-gon (centre, turn, two semi-axes), started from the void's centroid and
   principal axes and from several turns within one n-th of a revolution (the principal axes do not fix the
   turn of a regular n-gon, whose second moments are the same about every axis);
2. the n sides as half-planes (direction and offset of each), which keeps the polygon convex by
   construction; a side shrinking to nothing is penalised so the corner count stays exactly ``sides``.

**Slot.** A stadium along the void's major principal axis; for each stock width the offsets, turn and
length are fitted; the width with the least fit error wins.

The main layout now fits voids *inside* their room (``cover``); these best-fit shapes serve the seeds a symmetric
layout puts on a mid-line (``symmetry``), and ``bore_room`` the symmetric bores.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from shapely.geometry import LineString, Polygon

from ..errors import LacunaError
from .measure import principal_axes, second_moments
from .outline import Draft


def minimize(*args, **kwargs):
    """scipy.optimize.minimize, imported when first used (it adds about 0.2 s to every start, and most jobs
    never call it: only symmetric seeds and the earlier best-fit shapes do)."""
    from scipy.optimize import minimize as found

    return found(*args, **kwargs)

# Weight of the area outside the allowed region against the fit error (both as shares of the void's area).
OUTSIDE_WEIGHT = 4.0
# Smallest turn at a polygon's corner: below it the corner is not one a drafter would count.
MIN_TURN = math.radians(2.0)


def overlay(op, a, b):
    """A shapely overlay (``shapely.difference`` and the like) that survives nearly coincident edges.

    Floating-point overlay can fail on edges that almost touch; snap rounding to a micrometre grid then
    gives the same area to far better than any length the rules care about.
    """
    try:
        return op(a, b)
    except shapely.errors.GEOSException:
        pass
    try:
        return op(a, b, grid_size=1e-3)
    except shapely.errors.GEOSException:
        snapped = [shapely.make_valid(shapely.set_precision(g, 1e-3)) for g in (a, b)]
        return op(*snapped)


def fit_error(shape, target: Polygon) -> float:
    """area(shape symmetric-difference target) / area(target)."""
    if target.area <= 0.0:
        raise ValueError("the freeform void has no area")
    return float(shapely.area(overlay(shapely.symmetric_difference, shape, target)) / target.area)


def overlay_error(target: Polygon, allowed):
    """A cost of a candidate shape: its symmetric difference from ``target`` (and a penalty outside ``allowed``)
    as a share of the target's area."""
    area = target.area
    shapely.prepare(target)

    def cost(poly) -> float:
        e = shapely.area(overlay(shapely.symmetric_difference, poly, target)) / area
        if allowed is not None:
            e += OUTSIDE_WEIGHT * shapely.area(overlay(shapely.difference, poly, allowed)) / area
        return float(e)

    return cost


# --- polygon ----------------------------------------------------------------------------------------------


def _affine_ngon(p: np.ndarray, n: int) -> np.ndarray:
    cx, cy, turn, a, b = p
    t = 2.0 * np.pi * np.arange(n) / n
    local = np.column_stack([abs(a) * np.cos(t), abs(b) * np.sin(t)])
    c, s = math.cos(turn), math.sin(turn)
    return local @ np.array([[c, s], [-s, c]]) + (cx, cy)


def _halfplane_vertices(phi: np.ndarray, h: np.ndarray, centre: np.ndarray):
    """Corners of the polygon bounded by sides with outward normals at angles ``phi`` and offsets ``h``.

    Returns the corners (corner i between side i - 1 and side i) and each side's signed length (negative:
    the side has vanished and the polygon is not the n-gon asked for).
    """
    normals = np.column_stack([np.cos(phi), np.sin(phi)])
    prev_n, prev_h = np.roll(normals, 1, axis=0), np.roll(h, 1)
    det = prev_n[:, 0] * normals[:, 1] - prev_n[:, 1] * normals[:, 0]
    with np.errstate(divide="ignore", invalid="ignore"):
        x = (prev_h * normals[:, 1] - h * prev_n[:, 1]) / det
        y = (prev_n[:, 0] * h - normals[:, 0] * prev_h) / det
    corners = np.column_stack([x, y]) + centre
    tangent = np.column_stack([-normals[:, 1], normals[:, 0]])
    lengths = np.sum((np.roll(corners, -1, axis=0) - corners) * tangent, axis=1)
    return corners, lengths


def fit_polygon(target: Polygon, sides: int, *, allowed=None, refine: bool = True, source: int = 0,
                corner: str = "none", corner_mm: float = 0.0, max_evaluations: int = 1500) -> Draft:
    """The convex ``sides``-gon closest to ``target`` (least fit error; area outside ``allowed`` penalised)."""
    if not (isinstance(sides, int) and 3 <= sides <= 12):
        raise LacunaError(f"a polygon void has 3 to 12 sides, got {sides!r}.", where="[voids] sides",
                          hint="Set sides to a whole number from 3 to 12, e.g. 6.")
    n = sides
    cost = overlay_error(target, allowed)
    area, (cx, cy), _ = second_moments(target)
    angle, (r1, r2) = principal_axes(target)
    # Semi-axes of the affine n-gon with the void's area and its principal-axis aspect ratio.
    ab = area / (0.5 * n * math.sin(2.0 * math.pi / n))
    ratio = r1 / r2 if r2 > 0 else 1.0
    a, b = math.sqrt(ab * ratio), math.sqrt(ab / ratio)

    def stage1(p):
        return cost(shapely.polygons(_affine_ngon(p, n)))

    base = math.radians(angle)
    starts = [np.array([cx, cy, base + k * (2.0 * math.pi / n) / 8.0, a, b]) for k in range(8)]
    starts.sort(key=stage1)
    best = None
    for p0 in starts[:2]:
        res = minimize(stage1, p0, method="Nelder-Mead",
                       options={"maxfev": 400, "xatol": 1e-3 * math.sqrt(area), "fatol": 1e-5})
        if best is None or res.fun < best.fun:
            best = res
    corners = _affine_ngon(best.x, n)
    hull = _reduced_hull(target, n)
    if hull is not None and cost(shapely.polygons(hull)) < best.fun:
        corners = hull
    if refine:
        corners = _refine(corners, cost, max_evaluations, math.sqrt(area))
    poly = Polygon(corners)
    if not (np.all(np.isfinite(corners)) and poly.is_valid and poly.area > 0.0):
        # A degenerate fit (a void far thinner than any n-gon): the regular n-gon of the void's area instead.
        corners = _affine_ngon(np.array([cx, cy, base, math.sqrt(ab), math.sqrt(ab)]), n)
        poly = Polygon(corners)
    _, (px, py), _ = second_moments(poly)
    rel = corners - (px, py)
    size = 2.0 * float(np.max(np.linalg.norm(rel, axis=1)))
    return Draft(family="polygon", centre=(float(px), float(py)), size=size, source=source,
                 corners=tuple((float(x), float(y)) for x, y in rel), corner=corner, corner_mm=corner_mm)


def _reduced_hull(target: Polygon, n: int) -> np.ndarray | None:
    """The void's convex hull cut down to ``n`` corners, each time cutting off the corner of least area."""
    hull = shapely.convex_hull(target)
    if not isinstance(hull, Polygon):
        return None
    pts = np.asarray(shapely.normalize(hull).exterior.coords)[:-1, :2]
    if not Polygon(pts).exterior.is_ccw:
        pts = pts[::-1]
    pts = list(map(tuple, pts))
    while len(pts) < n:
        # Too few hull corners: split the longest side, its new corner bowed out just past MIN_TURN.
        p = np.asarray(pts)
        side = np.roll(p, -1, axis=0) - p
        i = int(np.argmax(np.linalg.norm(side, axis=1)))
        out = np.array([side[i, 1], -side[i, 0]])
        pts.insert(i + 1, tuple(p[i] + side[i] / 2.0 + out * math.tan(MIN_TURN) / 2.0))
    while len(pts) > n:
        p = np.asarray(pts)
        a, b = np.roll(p, 1, axis=0) - p, np.roll(p, -1, axis=0) - p
        cut = np.abs(a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0])
        del pts[int(np.argmin(cut))]
    return np.asarray(pts)


def _refine(corners: np.ndarray, cost, max_evaluations: int, scale: float) -> np.ndarray:
    """Move the sides of a convex polygon (direction and offset each) to lower ``cost``; stays convex."""
    n = len(corners)
    centre = corners.mean(axis=0)
    edge = np.roll(corners, -1, axis=0) - corners  # side i runs from corner i to corner i + 1
    phi0 = np.unwrap(np.arctan2(-edge[:, 0], edge[:, 1]))  # outward normal of a counter-clockwise side
    h0 = np.sum(np.column_stack([np.cos(phi0), np.sin(phi0)]) * (corners - centre), axis=1)
    min_side = 1e-3 * scale

    def unpack(q):
        return phi0 + q[:n] / scale, h0 + q[n:]

    def f(q):
        if not np.all(np.isfinite(q)):
            return 1e6
        phi, h = unpack(q)
        turns = np.diff(np.append(phi, phi[0] + 2.0 * np.pi))
        pts, lengths = _halfplane_vertices(phi, h, centre)
        bad = np.sum(np.maximum(min_side - lengths, 0.0)) / scale + np.sum(np.maximum(-turns, 0.0))
        bad += np.sum(np.maximum(turns - (np.pi - 1e-6), 0.0)) + np.sum(np.maximum(MIN_TURN - turns, 0.0))
        if not (np.all(np.isfinite(pts)) and math.isfinite(bad)):
            return 1e6
        if bad > 0.0:
            return 10.0 + bad
        return cost(shapely.polygons(pts))

    q0 = np.zeros(2 * n)
    res = minimize(f, q0, method="Powell",
                   options={"maxfev": max_evaluations, "xtol": 1e-3 * scale, "ftol": 1e-6})
    start = f(q0)
    if not (math.isfinite(res.fun) and res.fun < start and f(res.x) < min(start, 10.0)):
        return corners  # only a valid n-gon that fits better replaces the start
    pts, _ = _halfplane_vertices(*unpack(res.x), centre)
    return pts


# --- slot -------------------------------------------------------------------------------------------------


def _stadium(cx, cy, turn, width, length) -> Polygon:
    half = max(length - width, 0.0) / 2.0
    u = np.array([math.cos(turn), math.sin(turn)]) * max(half, 1e-9)
    return shapely.buffer(LineString([(cx - u[0], cy - u[1]), (cx + u[0], cy + u[1])]), width / 2.0, quad_segs=16)


def fit_slot(target: Polygon, widths, *, allowed=None, source: int = 0) -> Draft | None:
    """The stadium of a stock width closest to ``target``, along its major principal axis (None: no width fits).

    Widths wider than the void's length along its axis are not tried.
    """
    widths = sorted({float(w) for w in widths})
    if not widths:
        raise LacunaError("no slot widths to choose from.", where="[voids] slot_widths",
                          hint="List the cutter widths, e.g. slot_widths = [20, 32, 50].")
    cost = overlay_error(target, allowed)
    area, (cx, cy), _ = second_moments(target)
    angle, _ = principal_axes(target)
    turn = math.radians(angle)
    u = np.array([math.cos(turn), math.sin(turn)])
    xy = np.asarray(target.exterior.coords)[:, :2] - (cx, cy)
    along = xy @ u
    extent = float(along.max() - along.min())
    tried = []
    for w in widths:
        if w > extent * 1.05:
            continue
        length0 = max(w, min(extent, area / w + w * (1.0 - math.pi / 4.0)))  # same area as the void

        def f(p, w=w):
            return cost(_stadium(cx + p[0], cy + p[1], turn + p[2], w, max(w, length0 + p[3])))

        tried.append((f(np.zeros(4)), w, f, length0))
    if not tried:
        return None
    tried.sort(key=lambda t: t[0])
    best = None
    for _, w, f, length0 in tried[:3]:
        simplex = np.vstack([np.zeros(4), np.diag([w / 4.0, w / 4.0, 0.1, w / 2.0])])
        res = minimize(f, np.zeros(4), method="Nelder-Mead",
                       options={"maxfev": 300, "initial_simplex": simplex, "xatol": 1e-3 * w, "fatol": 1e-6})
        if best is None or res.fun < best[0]:
            best = (res.fun, w, res.x, length0)
    _, w, p, length0 = best
    return Draft(family="slot", centre=(float(cx + p[0]), float(cy + p[1])), size=w,
                 length=float(max(w, length0 + p[3])), angle_deg=math.degrees(turn + p[2]) % 180.0, source=source)


# --- bores ------------------------------------------------------------------------------------------------


def bore_room(target: Polygon, diameters, smallest_mm: float, tolerance_mm: float, allowed):
    """The stock diameters usable (largest first) and the region bores may fill: the void grown by the
    tolerance, within ``allowed``."""
    stock = sorted({float(d) for d in diameters if d >= smallest_mm}, reverse=True)
    region = shapely.buffer(target, tolerance_mm) if tolerance_mm > 0 else target
    if allowed is not None:
        region = overlay(shapely.intersection, region, allowed)
    return stock, region
