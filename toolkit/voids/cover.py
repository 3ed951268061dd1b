"""The largest shape of a family that a region holds: n-gons, slots and stock bores fitted *inside* a region.

Where ``fit`` asks "which shape looks most like this freeform void?", this module asks "how much of this region can
a shop remove?": every shape returned lies inside the region it was given (within the caller's tolerance), so a
void fitted inside the room the rules leave keeps them before any placing step moves it. All searches are
vectorised: many candidate shapes are built as one shapely array and tested in one call (no scalar search over
polygon overlays).

- **n-gon, irregular**: the region's convex hull cut down to ``sides`` corners (deleting a corner of a convex
  polygon cuts a triangle off, so the result stays inside the hull), corners closer than the least feature
  merged, corners sharper than ``MIN_INTERIOR_DEG`` or turning less than ``MIN_TURN_DEG`` removed, and sharp
  corners chamfered until there are ``sides`` again (a chamfer also cuts a triangle off); then scaled about the
  best of a few centres to the largest copy inside the region.
- **n-gon, regular**: equal sides and angles; for a few centres near the region's largest inscribed circle and a
  fan of turns, the largest circumradius inside the region, found by bisection on all candidates at once.
- **slot**: for each stock width, the region shrunk by half the width holds the slot's axis; the longest axis
  along a fan of directions about the region's major axis is found on a family of parallel chords.
- **bores**: a triangular lattice of one stock diameter along the region's major axis (pitch = diameter + web),
  the offset that places most bores; the room left is then filled with smaller stock sizes, largest circle first
  (graded where the region narrows). The greedy fill alone is also tried; the layout removing more wins.
- **split**: a region cut across its major axis into ``k`` pieces of equal area with a web between them, so that
  one long freeform void can become several voids.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from shapely.geometry import Polygon
from shapely.geometry.polygon import orient

from .measure import following, principal_axes

# Corners sharper than this are chamfered: a former's sharp arris spalls, a sharp corner in timber splits, a
# torch rounds it anyway (common practice, no source).
MIN_INTERIOR_DEG = 30.0
# A corner turning less than this is not one a drafter would count (common practice, no source).
MIN_TURN_DEG = 5.0
# Scales tried when a shape is shrunk into its region: the largest that fits wins (2 % steps).
_SCALES = np.linspace(1.0, 0.2, 41)
# fit_inside tries this many scales at a time, from the top.
_SCALES_AT_ONCE = 6
# Measures of two corners closer than this share of the largest are equal (``tidy_ngon``).
TIE = 1e-9
# Corners of a bay a cut may go through (``carve``), evenly taken along its edge when it has more.
CUT_CORNERS = 8
# Directions of the lines a region's bay is cut off by (``carve``): every 22.5 degrees.
_FAN = np.column_stack([np.cos(np.linspace(0, np.pi, 8, endpoint=False)),
                        np.sin(np.linspace(0, np.pi, 8, endpoint=False))])
# A shape counts as inside a region when it does once shrunk by this share of its size (``_shrunk``): far below
# any drawing's accuracy, far above the last bits of the coordinates.
COVER_SLACK = 1e-7
# Douglas-Peucker tolerance on the hull before it is cut down to n corners, as a share of the least feature.
HULL_SIMPLIFY = 0.05


def largest_part(geom) -> Polygon | None:
    """The polygon of largest area in ``geom`` (None when it has none)."""
    parts = [p for p in shapely.get_parts(geom) if isinstance(p, Polygon) and p.area > 0.0]
    return max(parts, key=lambda p: p.area) if parts else None


def major_axis_deg(region) -> float:
    """Direction of the region's major principal axis, degrees in [0, 180) (0 for a round region)."""
    return principal_axes(Polygon(region.exterior))[0]


def inscribed_circle(region, tol: float | None = None) -> tuple[np.ndarray, float]:
    """The centre and radius of the largest circle inside ``region`` (to a tolerance scaled to its size)."""
    tol = tol if tol is not None else max(1e-3, 5e-3 * math.sqrt(max(region.area, 1e-12)))
    mic = shapely.maximum_inscribed_circle(region, tol)
    xy = shapely.get_coordinates(mic)
    return xy[0], float(mic.length)


# --- n-gons ---------------------------------------------------------------------------------------------------


def _ccw(pts: np.ndarray) -> np.ndarray:
    x, y = pts[:, 0], pts[:, 1]
    area2 = np.sum(x * following(y) - following(x) * y)
    return pts if area2 >= 0 else pts[::-1]


def corner_measures(pts: np.ndarray):
    """Per corner of a counter-clockwise polygon: interior angle (deg), turn (deg), length of the side to the next
    corner, and the area of the triangle the corner would cut off if deleted."""
    prev = np.concatenate((pts[-1:], pts[:-1]))
    nxt = np.concatenate((pts[1:], pts[:1]))
    a, b = prev - pts, nxt - pts
    la, lb = np.sqrt(np.einsum("ij,ij->i", a, a)), np.sqrt(np.einsum("ij,ij->i", b, b))
    with np.errstate(invalid="ignore", divide="ignore"):
        cosang = np.einsum("ij,ij->i", a, b) / (la * lb)
    cosang = np.where(np.isfinite(cosang), cosang, -1.0)
    interior = np.degrees(np.arccos(np.clip(cosang, -1.0, 1.0)))
    tri = 0.5 * np.abs(a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0])
    return interior, 180.0 - interior, lb, tri


def _corner(pts: list, i: int) -> tuple[float, float, float]:
    """Corner ``i`` of a counter-clockwise polygon given as a list of (x, y): interior angle (deg), length of the
    side to the next corner, and the area of the triangle the corner would cut off if deleted (the arithmetic of
    ``corner_measures`` on plain floats)."""
    n = len(pts)
    px, py = pts[i]
    ax, ay = pts[i - 1][0] - px, pts[i - 1][1] - py
    bx, by = pts[(i + 1) % n][0] - px, pts[(i + 1) % n][1] - py
    la, lb = math.sqrt(ax * ax + ay * ay), math.sqrt(bx * bx + by * by)
    cosang = (ax * bx + ay * by) / (la * lb) if la * lb > 0.0 else -1.0
    interior = math.degrees(math.acos(min(max(cosang, -1.0), 1.0)))
    return interior, lb, 0.5 * abs(ax * by - ay * bx)


def _chamfer(pts: list, i: int, feature: float) -> list | None:
    """Corner ``i`` cut by a chamfer whose three sides are all at least ``feature`` long (None: no room)."""
    n = len(pts)
    p, prev, nxt = np.asarray(pts[i]), np.asarray(pts[i - 1]), np.asarray(pts[(i + 1) % n])
    a, b = np.linalg.norm(prev - p), np.linalg.norm(nxt - p)
    theta = math.radians(_corner(pts, i)[0])
    # A little over the least feature, so the chamfer survives the scaling into the region.
    need = 1.25 * feature / (2.0 * math.sin(theta / 2.0)) if theta > 0 else math.inf
    room = min(a, b) - 1.001 * feature
    if need > room:
        return None
    c = min(max(0.2 * min(a, b), need), room)
    q1 = p + c * (prev - p) / a
    q2 = p + c * (nxt - p) / b
    return pts[:i] + [q1.tolist(), q2.tolist()] + pts[i + 1:]


def tidy_ngon(pts: np.ndarray, sides: int, feature: float) -> np.ndarray | None:
    """A convex polygon brought to exactly ``sides`` corners a shop can make, every step cutting a triangle off.

    No side shorter than ``feature``, no corner turning less than ``MIN_TURN_DEG``, none sharper than
    ``MIN_INTERIOR_DEG`` (chamfered). None when the polygon is too small for that many corners of that size.

    Deleting a corner changes the measures of its two neighbours alone, so the measures are kept per corner and
    only those two worked again (plain floats: the polygons are a few dozen corners, where numpy's per-call cost
    was most of the time).
    """
    pts = _ccw(np.asarray(pts, dtype=float)).tolist()
    m = [_corner(pts, i) for i in range(len(pts))]  # (interior, side to the next corner, triangle) per corner

    def delete(i: int) -> None:
        del pts[i]
        del m[i]
        n = len(pts)
        if n:
            for j in ((i - 1) % n, i % n):
                m[j] = _corner(pts, j)

    def least(among, values) -> int:
        """The corner of ``among`` with the least value; corners within TIE of it are told apart by where they
        stand (their coordinates to the micrometre), not by their place in the ring, so a hull whose corners
        differ in their last bits, or start elsewhere, loses the same corner."""
        lo = min(values[k] for k in among)
        tol = TIE * max(max(values), 1e-300)
        return min((k for k in among if values[k] <= lo + tol), key=lambda k: _place(pts[k]))

    for _ in range(8 * sides + 4 * len(pts)):
        n = len(pts)
        if n < 3:
            return None
        interior = [c[0] for c in m]
        side = [c[1] for c in m]
        tri = [c[2] for c in m]
        flat = [k for k in range(n) if 180.0 - interior[k] < MIN_TURN_DEG]
        if flat and n > 3:
            delete(least(flat, tri))
            continue
        shortest = min(side)
        if shortest < feature and n > 3:
            i = least(range(n), side)
            j = (i + 1) % n
            delete(least((i, j), tri))
            continue
        if n > sides:
            delete(least(range(n), tri))
            continue
        sharp = [a < MIN_INTERIOR_DEG for a in interior]
        if n == sides and not any(sharp):
            return np.array(pts) if shortest >= feature - 1e-9 else None
        if n == sides:
            # A sharp corner with no corner to spare: give up the corner that cuts least (not a sharp one).
            blunt = [k for k in range(n) if not sharp[k]]
            if not blunt or n <= 3:
                return None
            delete(least(blunt, tri))
            continue
        # Fewer corners than asked: chamfer the sharpest corner that has room.
        for i in sorted(range(n), key=lambda k: (round(interior[k], 6), _place(pts[k]))):
            cut = _chamfer(pts, i, feature)
            if cut is not None:
                pts = cut
                m = [_corner(pts, k) for k in range(len(pts))]
                break
        else:
            return None
    return None


def _halfplanes(points: np.ndarray, directions: np.ndarray, keep: np.ndarray):
    """The half-planes bounded by the line through each point along each direction, on the side of ``keep``: a
    point on each line and the unit normal into the half-plane, ((k, 2), (k, 2)) for k = len(points) *
    len(directions)."""
    P = np.repeat(points, len(directions), axis=0)
    U = np.tile(directions, (len(points), 1))
    N = np.column_stack([-U[:, 1], U[:, 0]])
    side = np.sign(np.sum((keep - P) * N, axis=1))
    N *= np.where(side == 0, 1.0, side)[:, None]
    return P, N


def clipped_areas(geom, P: np.ndarray, N: np.ndarray) -> np.ndarray:
    """Area of ``geom`` (polygons, holes allowed) on the side ``N`` of the line through ``P``, for each of k
    half-planes at once: (k,).

    With the origin moved onto the line, the shoelace sum of the clipped polygon needs only the parts of its
    edges on the kept side (the pieces of the outline along the line pass through the origin and add nothing).
    An edge a -> b adds cross(a, b) when both ends are kept; when it crosses the line at x = a + t (b - a),
    cross(a, x) = t cross(a, b) or cross(x, b) = (1 - t) cross(a, b): every edge adds cross(a, b) times the share
    kept, and cross(a - p, b - p) = cross(a, b) - cross(a, p) + cross(b, p)."""
    out = np.zeros(len(P))
    px, py = P[:, 0:1], P[:, 1:2]
    offset = np.sum(P * N, axis=1)[:, None]
    for part in shapely.get_parts(geom):
        if part.is_empty or part.area <= 0.0:
            continue
        part = orient(part, 1.0)  # exterior counter-clockwise, holes clockwise
        for ring in shapely.get_rings(part):
            V = shapely.get_coordinates(ring)
            a, b = V[:-1], V[1:]  # each edge's ends (the ring repeats its first point)
            da = N @ a.T - offset  # signed distances of the edges' starts, (k, m)
            db = np.concatenate([da[:, 1:], da[:, :1]], axis=1)
            ax, ay, bx, by = a[:, 0], a[:, 1], b[:, 0], b[:, 1]
            c = (ax * by - ay * bx) - (ax * py - ay * px) + (bx * py - by * px)
            ina, inb = da >= 0.0, db >= 0.0
            with np.errstate(invalid="ignore", divide="ignore"):
                t = da / (da - db)
            share = np.where(ina, np.where(inb, 1.0, t), np.where(inb, 1.0 - t, 0.0))
            out += 0.5 * np.sum(c * share, axis=1)
    return np.maximum(out, 0.0)


def _halfplane_polygon(P: np.ndarray, N: np.ndarray, reach: float) -> Polygon:
    U = np.array([N[1], -N[0]])
    return Polygon([P - reach * U, P + reach * U, P + reach * U + reach * N, P - reach * U + reach * N])


def _place(xy) -> tuple[float, float]:
    """A point to the micrometre: the key that tells equal candidates apart by where they stand."""
    return round(float(xy[0]), 3), round(float(xy[1]), 3)


def carve(region, pts: np.ndarray, rounds: int = 8) -> np.ndarray | None:
    """The convex polygon ``pts`` cut by straight lines until ``region`` covers it, each cut losing least area.

    Each piece of the polygon outside the region is cut off by the line, through one of that piece's corners and
    along one of a fan of directions, that keeps most of the polygon and leaves none of the piece: a convex
    polygon stays convex under such cuts, and a re-entrant bay of the region costs a sliver, not a scaling of
    the whole shape. The areas of every candidate cut are taken at once (``clipped_areas``)."""
    Q = Polygon(pts)
    shapely.prepare(region)
    reach = 4.0 * (Q.length + 1.0)
    directions = _FAN
    boundary = region.boundary
    for _ in range(rounds):
        q_area = Q.area
        outside = shapely.difference(Q, region)
        if outside.is_empty or outside.area <= 1e-6 * q_area:
            break
        # the largest piece (equal ones told apart by where they stand), its ring from its lowest-left corner:
        # neither may follow where GEOS happened to start a ring
        parts = shapely.get_parts(outside)
        if len(parts) == 1:
            piece = parts[0]
        else:
            areas = shapely.area(parts).tolist()
            centres = shapely.get_coordinates(shapely.centroid(parts))
            piece = parts[max(range(len(parts)), key=lambda j: (round(areas[j] / q_area, 9), _place(centres[j])))]
        corners = shapely.get_coordinates(piece)[:-1]
        at = [(round(x, 3), round(y, 3)) for x, y in corners.tolist()]  # _place of each corner
        corners = np.roll(corners, -min(range(len(at)), key=at.__getitem__), axis=0)
        # The cut goes through a point where the region's edge enters the polygon: corners of the outside piece
        # on the region's boundary (at most CUT_CORNERS, evenly taken).
        on_edge = corners[shapely.dwithin(boundary, shapely.points(corners), 1e-6 * math.sqrt(Q.area))]
        corners = on_edge if len(on_edge) else corners
        if len(corners) > CUT_CORNERS:
            corners = corners[np.linspace(0, len(corners) - 1, CUT_CORNERS).astype(int)]
        centre = np.asarray(Q.centroid.coords[0])
        P, N = _halfplanes(corners, directions, centre)
        left = clipped_areas(piece, P, N)
        kept = clipped_areas(Q, P, N)
        clear = left <= 1e-6 * max(piece.area, 1e-12)
        # Cuts along one line through different corners keep the same area (a staircase's corners stand in
        # lines): areas are compared to a part in 10^9 of the polygon, and among equal ones the cut whose point
        # comes first (to the micrometre), then whose direction does, wins: not the one the last bits favour.
        if clear.any():
            worth = np.where(clear, np.round(kept / Q.area, 9), -np.inf)
        else:
            worth = -np.round(left / Q.area, 9) + 1e-9 * np.round(kept / Q.area, 9)
        tied = np.flatnonzero(worth == worth.max())
        k = int(min(tied, key=lambda j: (_place(P[j]), j % len(_FAN))))
        cut = largest_part(shapely.intersection(Q, _halfplane_polygon(P[k], N[k], reach)))
        if cut is None or cut.area <= 0:
            return None
        Q = shapely.convex_hull(cut)
    out = shapely.get_coordinates(Q.exterior)[:-1]
    return _ccw(out) if len(out) >= 3 else None


def _shrunk(pts: np.ndarray) -> np.ndarray:
    """The polygon ``pts`` shrunk about its corners' mean by ``COVER_SLACK``: what must lie in a region for
    ``pts`` to count as inside it.

    A fit is made from the region itself, so it often touches the region's edge, and an exact test of a touching
    shape falls either way with the last bits of the coordinates: without the slack, a fifth of the plate's fits
    changed (by 3 - 10 % of their area) when the region's coordinates moved by 1e-13 of themselves."""
    c = pts.mean(axis=-2, keepdims=True)
    return c + (1.0 - COVER_SLACK) * (pts - c)


def fit_inside(region, pts: np.ndarray, feature: float = 0.0) -> np.ndarray | None:
    """The largest copy of polygon ``pts`` scaled about one of a few centres that ``region`` covers (None: none).

    Centres tried: the polygon's own centroid and the region's largest inscribed circle's centre.
    """
    pts = np.asarray(pts, dtype=float)
    centres = [pts.mean(axis=0), inscribed_circle(region)[0]]
    shapely.prepare(region)
    best = None  # (index into _SCALES, polygon)
    for c in centres:
        # The largest scale covered, the scales tried from the top a few at a time (most fits are covered near the
        # top: the first covered is the same as with all at once); the second centre only above the first's.
        top = len(_SCALES) if best is None else best[0]
        for start in range(0, top, _SCALES_AT_ONCE):
            scales = _SCALES[start:min(start + _SCALES_AT_ONCE, top)]
            cand = c + scales[:, None, None] * (pts - c)[None, :, :]
            ok = shapely.covers(region, shapely.polygons(_shrunk(cand)))
            if ok.any():
                k = int(np.argmax(ok))
                best = (start + k, cand[k])
                break
    if best is None:
        return None
    out = best[1]
    if feature > 0 and corner_measures(out)[2].min() < feature - 1e-9:
        return None
    return out


def hull_ngon(region, sides: int, feature: float) -> np.ndarray | None:
    """An irregular convex ``sides``-gon inside ``region``, as large as the hull method finds (see module text)."""
    # The hull of the region's corners put on a 1e-6 mm grid: a freeform void's outline runs in steps of the
    # grid's elements, so its hull has runs of corners in a line, and which of them an exact hull keeps (and the
    # simplification after it) fell either way with the last bits of the coordinates.
    hull = shapely.convex_hull(shapely.multipoints(np.round(shapely.get_coordinates(shapely.convex_hull(region)), 6)))
    if not isinstance(hull, Polygon) or hull.area <= 0:
        return None
    # Douglas-Peucker only deletes corners, so the simplified hull is convex and inside the hull; it leaves the
    # few corners that matter for the cut-down below (a contoured hull has dozens).
    hull = shapely.simplify(hull, max(HULL_SIMPLIFY * feature, 2e-3 * math.sqrt(hull.area)))
    pts = shapely.get_coordinates(hull.exterior)[:-1]
    tidy = tidy_ngon(pts, sides, feature)
    if tidy is None:
        return None
    if not shapely.covers(region, Polygon(_shrunk(tidy))):
        cut = carve(region, tidy)
        if cut is not None:
            cut = tidy_ngon(cut, sides, feature)
        if cut is not None:
            tidy = cut
    return fit_inside(region, tidy, feature)


def regular_corners(centre, radius, turn, sides: int) -> np.ndarray:
    """(..., sides, 2) corners of regular n-gons; centre (..., 2), radius and turn (...) broadcast."""
    t = np.asarray(turn, dtype=float)[..., None] + 2.0 * np.pi * np.arange(sides) / sides
    r = np.asarray(radius, dtype=float)[..., None]
    c = np.asarray(centre, dtype=float)
    return np.stack([c[..., 0:1] + r * np.cos(t), c[..., 1:2] + r * np.sin(t)], axis=-1)


def regular_ngon(region, sides: int, feature: float = 0.0, turns: int = 12
                 ) -> tuple[np.ndarray, float, float] | None:
    """The largest regular ``sides``-gon inside ``region``: (centre, circumradius, turn of the first corner).

    Its inscribed circle is no larger than the region's, so the circumradius lies between the region's inscribed
    radius r0 times cos(pi/n) (fits at the circle's centre) and r0 / cos(pi/n); bisection on every (centre, turn)
    candidate at once.
    """
    c0, r0 = inscribed_circle(region)
    if r0 <= 0:
        return None
    ang = math.radians(major_axis_deg(region))
    u = np.array([math.cos(ang), math.sin(ang)])
    v = np.array([-u[1], u[0]])
    centres = np.array([c0, c0 + 0.25 * r0 * u, c0 - 0.25 * r0 * u, c0 + 0.25 * r0 * v, c0 - 0.25 * r0 * v])
    fan = ang + np.arange(turns) * (2.0 * np.pi / sides) / turns
    C = np.repeat(centres, turns, axis=0)
    T = np.tile(fan, len(centres))
    lo = np.full(len(C), 0.0)
    hi = np.full(len(C), r0 / math.cos(math.pi / sides) * (1.0 + 1e-9))
    shapely.prepare(region)
    for _ in range(18):
        mid = 0.5 * (lo + hi)
        ok = shapely.covers(region, shapely.polygons(regular_corners(C, mid, T, sides)))
        lo = np.where(ok, mid, lo)
        hi = np.where(ok, hi, mid)
    k = int(np.argmax(lo))
    if lo[k] <= 0.0:
        return None
    side = 2.0 * lo[k] * math.sin(math.pi / sides)
    if side < feature:
        return None
    return C[k], float(lo[k]), float(T[k])


# --- slots ----------------------------------------------------------------------------------------------------


def _rotate(xy: np.ndarray, angle: float) -> np.ndarray:
    """Points turned by ``-angle`` (radians) about the origin: a direction at ``angle`` comes to lie along x, so a
    search along x in the turned frame runs along ``angle``; ``_rotate(xy, -angle)`` turns the results back."""
    c, s = math.cos(angle), math.sin(angle)
    return xy @ np.array([[c, -s], [s, c]])


def longest_chords(region, angles_deg, lines: int = 24):
    """Longest segment inside ``region`` along each direction of ``angles_deg``, found on ``lines`` parallel chord
    lines across it: per direction (length, a, b), or None where no chord meets the region. GEOS cuts the chords
    that may hold the longest segment; the others are ruled out first by their inside spans worked out in numpy
    (``_chords_wanted``), so the answer is GEOS's for all of them (a slot's buffered core of some hundreds of
    corners: 120 chords cut in one intersection cost about 2 ms)."""
    angles = np.radians(np.atleast_1d(np.asarray(angles_deg, dtype=float)))
    x0, y0, x1, y1 = region.bounds
    centre = np.array([(x0 + x1) / 2.0, (y0 + y1) / 2.0])
    half = 0.5 * math.hypot(x1 - x0, y1 - y0) + 1.0
    U = np.column_stack([np.cos(angles), np.sin(angles)])
    V = np.column_stack([-U[:, 1], U[:, 0]])
    # The region's extent across each direction, from its vertices: the chord lines split it evenly.
    xy = shapely.get_coordinates(region)
    across = (xy - centre) @ V.T  # (vertices, directions)
    lo, hi = across.min(axis=0), across.max(axis=0)
    t = (np.arange(lines) + 0.5) / lines
    offsets = lo[:, None] + t[None, :] * (hi - lo)[:, None]  # (directions, lines)
    out: list = [None] * len(angles)
    wanted = _chords_wanted(region, centre, U, V, offsets, half)
    if not wanted.any():
        return out
    mid = centre + offsets[..., None] * V[:, None, :]
    ends = np.stack([mid - half * U[:, None, :], mid + half * U[:, None, :]], axis=2)  # (dirs, lines, 2, 2)
    number = np.flatnonzero(wanted.ravel())
    chords = shapely.linestrings(ends.reshape(-1, 2, 2)[number])
    shapely.prepare(region)
    cut = shapely.intersection(region, chords)
    parts, index = shapely.get_parts(cut, return_index=True)
    if len(parts) == 0:
        return out
    lengths = shapely.length(parts)
    direction = number[index] // lines
    for k in range(len(angles)):
        mine = np.flatnonzero(direction == k)
        if mine.size == 0:
            continue
        j = mine[np.argmax(lengths[mine])]
        pts = shapely.get_coordinates(parts[j])
        if len(pts) < 2:
            continue
        out[k] = (float(lengths[j]), pts[0], pts[-1])
    return out


# A chord whose longest inside span found in numpy is within this share of the chord line's length of its
# direction's longest is cut by GEOS as well: far above the round-off between the two ways of cutting it.
CHORD_TIE = 1e-7


def _chords_wanted(region, centre, U, V, offsets, half) -> np.ndarray:
    """(directions, lines) mask of the chords GEOS must cut: in each direction, those whose longest inside span
    (numpy, by parity of the crossings of the region's edges) is within ``CHORD_TIE`` of the direction's longest,
    and any chord passing within round-off of a corner of the region, where parity may miscount. All directions
    at once: (directions, lines, edges) arrays of a few tens of thousands of entries."""
    rings = [np.asarray(ring.coords) for g in shapely.get_parts(region) for ring in (g.exterior, *g.interiors)]
    a = np.vstack([r[:-1] for r in rings]) - centre  # each edge from a to b (closed rings: last = first)
    b = np.vstack([r[1:] for r in rings]) - centre
    nd, nl = offsets.shape
    scale = 2.0 * half
    # signed distance of each edge's ends from each chord line: (directions, lines, edges)
    sa = (a @ V.T).T[:, None, :] - offsets[:, :, None]
    sb = (b @ V.T).T[:, None, :] - offsets[:, :, None]
    doubtful = (np.abs(sa) <= 1e-9 * scale).any(axis=2).ravel()
    d, line, edge = np.nonzero((sa > 0) != (sb > 0))
    chord = d * nl + line
    ua, ub = np.einsum("ek,ek->e", a[edge], U[d]), np.einsum("ek,ek->e", b[edge], U[d])
    w = sa[d, line, edge] / (sa[d, line, edge] - sb[d, line, edge])
    at = ua + w * (ub - ua)
    order = np.lexsort((at, chord))
    chord, at = chord[order], at[order]
    count = np.bincount(chord, minlength=nd * nl)
    doubtful |= count % 2 == 1
    # consecutive crossings of a chord pair up: (1st, 2nd), (3rd, 4th), ...
    first = np.r_[0, np.cumsum(count)[:-1]]
    rank = np.arange(len(chord)) - first[chord]
    starts = np.flatnonzero(rank % 2 == 0)
    starts = starts[starts + 1 < len(chord)]
    starts = starts[chord[starts] == chord[starts + 1]]
    longest = np.zeros(nd * nl)
    np.maximum.at(longest, chord[starts], at[starts + 1] - at[starts])
    # the longest of the chords counted surely (a doubtful one's miscount must not raise the bar)
    sure = np.where(doubtful, 0.0, longest).reshape(nd, nl)
    bar = sure.max(axis=1, keepdims=True) - CHORD_TIE * scale
    return doubtful.reshape(nd, nl) | ((sure > 0) & (sure >= bar))


def inscribed_slot(region, widths, angle_deg: float | None = None, fan_deg=(0.0, -8.0, 8.0, -16.0, 16.0)):
    """The slot of a stock width removing most area inside ``region``: (centre, angle_deg, width, length) or None.

    The slot's axis lies in the region shrunk by half the width; along each direction of the fan about the major
    axis the longest such axis is found on parallel chords. Narrower widths are tried while a slot of that width
    as long as the region could still remove more than the best found.
    """
    angle = major_axis_deg(region) if angle_deg is None else angle_deg
    _, r0 = inscribed_circle(region)
    reach = 2.0 * float(shapely.minimum_bounding_radius(region))
    best = None
    fan = np.asarray(fan_deg, dtype=float)
    for w in sorted({float(x) for x in widths}, reverse=True):
        if w > 2.0 * r0 * (1.0 + 1e-6):
            continue
        if best is not None and w * max(reach - w, 0.0) + math.pi * w * w / 4.0 <= best[0]:
            break  # no slot this narrow, however long, removes more (nor any narrower one)
        core = shapely.buffer(region, -w / 2.0, quad_segs=8)
        if core.is_empty:
            continue
        for df, got in zip(fan, longest_chords(core, angle + fan)):
            if got is None:
                # the core is a point or a sliver: a slot as long as it is wide, at the inscribed circle
                continue
            length, p, q = got
            area = w * length + math.pi * w * w / 4.0
            if best is None or area > best[0]:
                centre = (p + q) / 2.0
                d = q - p
                ang = math.degrees(math.atan2(d[1], d[0])) if length > 0 else angle + df
                ang = round(ang, 9) % 180.0  # a direction within round-off of 180 degrees is 0
                best = (area, (float(centre[0]), float(centre[1])), ang, w, length + w)
        if best is not None and best[3] == w and w * w >= 0.5 * best[0]:
            break  # a wider cutter fills the region's width already: narrower ones only add length
    if best is None:
        return None
    return best[1], best[2], best[3], best[4]


# --- bores ----------------------------------------------------------------------------------------------------


def lattice_bores(region, diameter: float, web: float, angle_deg: float, offsets: int = 4) -> np.ndarray:
    """(k, 2) centres of a triangular lattice of bores of ``diameter`` along ``angle_deg`` inside ``region``,
    ``web`` clear between neighbours; the lattice offset placing most of them."""
    core = shapely.buffer(region, -diameter / 2.0, quad_segs=8)
    if core.is_empty:
        return np.zeros((0, 2))
    pitch = diameter + web
    row = pitch * math.sqrt(3.0) / 2.0
    a = math.radians(angle_deg)
    x0, y0, x1, y1 = shapely.transform(core, lambda xy: _rotate(xy, a)).bounds
    nx, ny = int((x1 - x0) / pitch) + 3, int((y1 - y0) / row) + 3
    i, j = np.meshgrid(np.arange(nx), np.arange(ny))
    base = np.column_stack([(i + 0.5 * (j % 2)).ravel() * pitch, j.ravel() * row]) + (x0 - pitch, y0 - row)
    shapely.prepare(core)
    best = np.zeros((0, 2))
    for ox in range(offsets):
        for oy in range(offsets):
            pts = _rotate(base + (ox * pitch / offsets, oy * row / offsets), -a)
            inside = pts[shapely.contains_xy(core, pts[:, 0], pts[:, 1])]
            if len(inside) > len(best):
                best = inside
    return best


def greedy_bores(region, stock, web_of, start=(), limit: int = 64) -> list[tuple[float, float, float]]:
    """Bores filling ``region`` largest circle first, the largest stock size that fits each time; ``start``:
    bores already placed (x, y, d) that the new ones keep their webs from. ``web_of(d1, d2)`` gives the web."""
    stock = sorted({float(d) for d in stock}, reverse=True)
    placed = list(start)
    room = region
    if placed:
        room = shapely.difference(room, shapely.union_all(
            [shapely.buffer(shapely.Point(x, y), d / 2.0 + web_of(d, stock[0]), quad_segs=16)
             for x, y, d in placed]))
    out = []
    while len(out) < limit and not room.is_empty and room.area > 0:
        c, r = inscribed_circle(room)
        fits = [d for d in stock if d / 2.0 <= r * (1.0 + 1e-9)]
        if not fits:
            break
        d = fits[0]
        out.append((float(c[0]), float(c[1]), d))
        room = shapely.difference(room, shapely.buffer(shapely.Point(c), d / 2.0 + web_of(d, stock[0]),
                                                       quad_segs=16))
    return out


def packed_bores(region, stock, web_of, angle_deg: float | None = None) -> list[tuple[float, float, float]]:
    """Bores (x, y, d) of stock diameters inside ``region``: the better of a lattice graded by a greedy fill and
    the greedy fill alone, by area removed."""
    stock = sorted({float(d) for d in stock}, reverse=True)
    if not stock:
        return []
    _, r0 = inscribed_circle(region)
    angle = major_axis_deg(region) if angle_deg is None else angle_deg
    options = [greedy_bores(region, stock, web_of)]
    for d in [s for s in stock if s <= 2.0 * r0][:3]:
        centres = lattice_bores(region, d, web_of(d, d), angle)
        if len(centres) == 0:
            continue
        lattice = [(float(x), float(y), d) for x, y in centres]
        options.append(lattice + greedy_bores(region, [s for s in stock if s <= d], web_of, start=lattice))
    return max(options, key=lambda bores: sum(d * d for _, _, d in bores))


# --- splitting ------------------------------------------------------------------------------------------------


def split(region, k: int, gap: float, angle_deg: float | None = None) -> list[Polygon]:
    """``region`` cut across its major axis into ``k`` pieces of about equal area, ``gap`` apart."""
    if k <= 1:
        return [region]
    a = math.radians(major_axis_deg(region) if angle_deg is None else angle_deg)
    turned = shapely.transform(region, lambda xy: _rotate(xy, a))
    x0, y0, x1, y1 = turned.bounds
    ts = np.linspace(x0, x1, 65)
    # the area left of each x = t, by the half-plane sum (no overlay: a freeform void has hundreds of corners)
    left = clipped_areas(turned, np.column_stack([ts, np.zeros_like(ts)]),
                         np.tile([-1.0, 0.0], (len(ts), 1)))
    cuts = np.interp(np.arange(1, k) / k * turned.area, left, ts)
    edges = np.concatenate([[x0 - 1.0], cuts, [x1 + 1.0]])
    pieces = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        lo2 = lo + (gap / 2.0 if lo > x0 else 0.0)
        hi2 = hi - (gap / 2.0 if hi < x1 else 0.0)
        if hi2 <= lo2:
            continue
        part = largest_part(shapely.intersection(turned, shapely.box(lo2, y0 - 1.0, hi2, y1 + 1.0)))
        if part is not None:
            pieces.append(shapely.transform(part, lambda xy: _rotate(xy, -a)))
    return pieces


def hex_cells(region, pitch: float, web: float, angle_deg: float, offset: tuple[float, float] = (0.0, 0.0)
              ) -> list[Polygon]:
    """``region`` cut by a honeycomb of pitch ``pitch`` (distance between neighbouring cell centres), lined up with
    ``angle_deg``, into pieces ``web`` apart: each cell shrunk by half the web on every side, within the region.

    The pieces are where several voids side by side can go when one void would need a web wider than the bars
    round it (a web tied to the void's size)."""
    inner = pitch - web  # across flats of the shrunk cell
    if inner <= 0:
        return []
    a = math.radians(angle_deg)
    turned = shapely.transform(region, lambda xy: _rotate(xy, a))
    x0, y0, x1, y1 = turned.bounds
    row = pitch * math.sqrt(3.0) / 2.0
    nx, ny = int((x1 - x0) / pitch) + 3, int((y1 - y0) / row) + 3
    i, j = np.meshgrid(np.arange(nx), np.arange(ny))
    centres = np.column_stack([(i + 0.5 * (j % 2)).ravel() * pitch, j.ravel() * row])
    centres += (x0 - pitch + offset[0] * pitch, y0 - row + offset[1] * row)
    # Flat-topped along the rows: corners at 30 + 60 k degrees, circumradius inner / sqrt(3).
    t = np.radians(30.0 + 60.0 * np.arange(6))
    hexagon = (inner / math.sqrt(3.0)) * np.column_stack([np.cos(t), np.sin(t)])
    cells = shapely.polygons(centres[:, None, :] + hexagon[None, :, :])
    hit = shapely.intersects(turned, cells)
    pieces = shapely.intersection(turned, cells[hit])
    out = []
    for g in pieces:
        part = largest_part(g)
        if part is not None:
            out.append(shapely.transform(part, lambda xy: _rotate(xy, -a)))
    return out


def slot_rows(region, widths, web_of, angle_deg: float | None = None, most: int = 24
              ) -> list[tuple[tuple[float, float], float, float, float]]:
    """Slots of one stock width side by side along the region's major axis, a web apart: (centre, angle_deg,
    width, length) each; the width and row offset removing most area.

    Each row is a strip one slot wide; the slot's axis is the longest chord of the strip's part of the region shrunk
    by half the width. With a web tied to the slot's size the rows are set a web for the longest slot apart."""
    angle = major_axis_deg(region) if angle_deg is None else angle_deg
    a = math.radians(angle)
    turned = shapely.transform(region, lambda xy: _rotate(xy, a))
    x0, y0, x1, y1 = turned.bounds
    _, r0 = inscribed_circle(region)
    best: tuple[float, list] = (0.0, [])
    for w in sorted({float(x) for x in widths if x <= 2.0 * r0}, reverse=True)[:3]:
        core = shapely.buffer(turned, -w / 2.0, quad_segs=8)
        if core.is_empty:
            continue
        for length_guess in (x1 - x0, 0.5 * (x1 - x0)):
            pitch = w + web_of(max(length_guess, w), max(length_guess, w))
            for offset in (0.0, 0.5):
                ys = np.arange(y0 + w / 2.0 + offset * pitch, y1, pitch)
                if ys.size == 0 or ys.size > most:
                    continue
                lines = shapely.linestrings(np.stack([np.column_stack([np.full(ys.size, x0 - 1.0), ys]),
                                                      np.column_stack([np.full(ys.size, x1 + 1.0), ys])], axis=1))
                cut = shapely.intersection(core, lines)
                slots, area = [], 0.0
                for g in cut:
                    parts = [p for p in shapely.get_parts(g) if p.length > 0]
                    if not parts:
                        continue
                    seg = max(parts, key=lambda p: p.length)
                    xy = _rotate(shapely.get_coordinates(seg)[[0, -1]], -a)
                    length = float(seg.length) + w
                    if length > length_guess + w + 1e-6:
                        continue  # longer than the web was set for
                    c = xy.mean(axis=0)
                    slots.append(((float(c[0]), float(c[1])), angle % 180.0, w, length))
                    area += w * (length - w) + math.pi * w * w / 4.0
                if area > best[0]:
                    best = (area, slots)
    return best[1]
