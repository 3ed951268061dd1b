"""Circular arcs given by a bulge: the one piece of arc geometry the readers, the fitting, the writers and the
converter share.

A run of (x, y, bulge) vertices describes a closed or open outline; the bulge of a vertex belongs to the segment
from it to the next vertex and is tan(theta / 4), theta the included angle of the arc, positive when the arc
turns counter-clockwise, 0 for a straight side (DXF reference, LWPOLYLINE group code 42, from memory). The bulge
keeps its value under rotation and uniform scaling, and changes sign under a mirror.

Plain functions of floats and numpy arrays: no file formats, no drawing library.
"""

from __future__ import annotations

import math

import numpy as np

# Each flattened arc gets at least one chord per 45 degrees, so a coarse chord tolerance on a small circle
# still gives a recognisable shape (a full circle has at least 8 sides).
MAX_CHORD_ANGLE = math.pi / 4


def bulge_of(sweep: float) -> float:
    """The bulge of an arc of included angle ``sweep`` (radians, positive counter-clockwise): tan(sweep / 4)."""
    return math.tan(sweep / 4.0)


def sweep_of(bulge: float) -> float:
    """The included angle (radians, positive counter-clockwise) of an arc of ``bulge``: 4 atan(bulge)."""
    return 4.0 * math.atan(bulge)


def arc_radius(chord: float, bulge: float) -> float:
    """Radius of the arc of ``bulge`` over a chord of length ``chord``: chord (1 + b^2) / (4 |b|)."""
    return chord * (1.0 + bulge * bulge) / (4.0 * abs(bulge))


def sagitta(p0: np.ndarray, p1: np.ndarray, bulge: float) -> float:
    """How far an arc segment bows away from its chord (zero for a straight one): chord / 2 |b|."""
    return math.dist(p0, p1) / 2 * abs(bulge)


def arc_centre(p0: np.ndarray, p1: np.ndarray, bulge: float) -> tuple[np.ndarray, float]:
    """Centre and radius of the arc from ``p0`` to ``p1`` with a nonzero ``bulge`` (the points distinct).

    The centre lies on the chord's perpendicular bisector, (chord / 2) / tan(theta / 2) to the left of the
    chord: on the left for a counter-clockwise arc of less than half a turn."""
    theta = sweep_of(bulge)
    d = p1 - p0
    chord = math.hypot(d[0], d[1])
    normal = np.array([-d[1], d[0]]) / chord
    centre = (p0 + p1) / 2 + normal * (chord / 2) / math.tan(theta / 2)
    return centre, abs(chord / 2 / math.sin(theta / 2))


def arc_chord_points(p0: np.ndarray, p1: np.ndarray, bulge: float, chord_tol: float) -> np.ndarray:
    """The inner chord points of the arc from p0 to p1 with the given bulge (end points excluded), spread evenly
    in angle, no chord further than ``chord_tol`` off the arc and none over ``MAX_CHORD_ANGLE``."""
    d = p1 - p0
    if math.hypot(d[0], d[1]) == 0.0:
        return np.empty((0, 2))
    theta = sweep_of(bulge)
    centre, radius = arc_centre(p0, p1, bulge)
    step = 2.0 * math.acos(max(-1.0, 1.0 - chord_tol / radius))
    count = max(math.ceil(abs(theta) / min(step, MAX_CHORD_ANGLE) - 1e-9), 1)
    start = math.atan2(p0[1] - centre[1], p0[0] - centre[0])
    angles = start + theta * np.arange(1, count) / count
    return centre + radius * np.column_stack([np.cos(angles), np.sin(angles)])


def flatten(points: np.ndarray, bulges: np.ndarray, closed: bool, chord_tol: float) -> np.ndarray:
    """Vertices of a run with every arc segment replaced by chords no further than ``chord_tol`` off it.

    Chord points are spread evenly in angle from the arc's start, so the same arc drawn as an ARC or as a
    polyline bulge flattens to the same points. The result has no repeated closing vertex.

    The same arithmetic as ``arc_centre`` and ``arc_chord_points``, in the same order, on plain floats (a void's
    outline is flattened each time the fitting makes a new draft, and numpy's per-call cost on two-element
    arrays was most of it): the points are those functions' to the bit.
    """
    n = len(points)
    xy = np.asarray(points, dtype=float).tolist()
    arcs = []  # (segment, centre x, centre y, radius, start angle, sweep, chords)
    for i, b in enumerate(np.asarray(bulges, dtype=float).tolist()):
        if b == 0.0:
            continue
        (x0, y0), (x1, y1) = xy[i], xy[(i + 1) % n]
        dx, dy = x1 - x0, y1 - y0
        chord = math.hypot(dx, dy)
        if chord == 0.0:
            continue
        theta = 4.0 * math.atan(b)
        half = math.tan(theta / 2)
        cx = (x0 + x1) / 2 + (-dy / chord) * (chord / 2) / half
        cy = (y0 + y1) / 2 + (dx / chord) * (chord / 2) / half
        radius = abs(chord / 2 / math.sin(theta / 2))
        step = 2.0 * math.acos(max(-1.0, 1.0 - chord_tol / radius))
        count = max(math.ceil(abs(theta) / min(step, MAX_CHORD_ANGLE) - 1e-9), 1)
        if count > 1:
            arcs.append((i, cx, cy, radius, math.atan2(y0 - cy, x0 - cx), theta, count))
    m = len(bulges)
    if not arcs:
        out = np.asarray(points, dtype=float)[:m].copy() if m else np.empty((0, 2))
        return out if closed or not len(points) else np.vstack([out, np.asarray(points, dtype=float)[-1:]])
    # Every arc's inner points at once: segment i's start, then its arc's count - 1 points.
    seg, cx, cy, radius, start, theta, count = (np.array(c) for c in zip(*arcs))
    inner = count - 1
    owner = np.repeat(np.arange(len(arcs)), inner)
    k = np.arange(len(owner)) - np.repeat(np.cumsum(inner) - inner, inner) + 1
    angles = start[owner] + theta[owner] * k / count[owner]
    extra = np.zeros(m, dtype=int)
    extra[seg] = inner
    total = m + int(inner.sum())
    out = np.empty((total + (0 if closed else 1), 2))
    at = np.arange(m) + np.concatenate(([0], np.cumsum(extra)[:-1]))
    out[at] = np.asarray(points, dtype=float)[:m]
    mask = np.ones(total, dtype=bool)
    mask[at] = False
    out[:total][mask] = np.column_stack([cx[owner] + radius[owner] * np.cos(angles),
                                         cy[owner] + radius[owner] * np.sin(angles)])
    if not closed:
        out[-1] = xy[-1]
    return out


def merge_arcs(pieces: list[tuple[np.ndarray, float]], rel_tol: float = 1e-7) -> list[tuple[np.ndarray, float]]:
    """A closed run of (start point, bulge) with neighbouring arcs on one circle, turning the same way, joined
    into one bulge (while the joined sweep stays under a whole turn)."""
    n = len(pieces)
    if n < 2:
        return pieces
    out: list[list] = []
    for i, (p, b) in enumerate(pieces):
        nxt = pieces[(i + 1) % n][0]
        if out and b != 0 and out[-1][1] != 0 and (out[-1][1] > 0) == (b > 0):
            a0 = out[-1][0]
            c0, r0 = arc_centre(a0, p, out[-1][1])
            c1, r1 = arc_centre(p, nxt, b)
            total = sweep_of(out[-1][1]) + sweep_of(b)
            if abs(r0 - r1) <= rel_tol * r0 and np.hypot(*(c0 - c1)) <= rel_tol * r0 and \
                    abs(total) < 2 * math.pi * (1 - 1e-9):
                out[-1][1] = bulge_of(total)
                continue
        out.append([p, b])
    return [(p, b) for p, b in out]


def whole_circle(pieces: list[tuple[np.ndarray, float]], rel_tol: float = 1e-7):
    """((cx, cy), r) when every piece of a closed run of (start point, bulge) is an arc of one circle turning
    one way and together they make a whole turn, else None."""
    if len(pieces) < 2 or any(b == 0 for _, b in pieces) or len({b > 0 for _, b in pieces}) != 1:
        return None
    n = len(pieces)
    circles = [arc_centre(pieces[i][0], pieces[(i + 1) % n][0], pieces[i][1]) for i in range(n)]
    (c, r) = circles[0]
    if all(abs(ri - r) <= rel_tol * r and np.hypot(*(ci - c)) <= rel_tol * r for ci, ri in circles[1:]):
        total = sum(sweep_of(b) for _, b in pieces)
        if abs(abs(total) - 2 * math.pi) < 1e-6:
            return (float(c[0]), float(c[1])), float(r)
    return None
