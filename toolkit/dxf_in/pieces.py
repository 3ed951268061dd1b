"""Drawing entities -> pieces: vertex runs with bulges, in drawing units relative to a reference point.

Straight and circular pieces keep their bulges (DXF reference: bulge = tan(theta/4), theta the included arc
angle, positive counter-clockwise), so the outline check can tell a straight side from a curved one and
arcs are flattened the same way whatever entity drew them. Ellipses, splines and hatch boundaries are
flattened at once with ezdxf's own flattening.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from ezdxf import path as ezpath
from ezdxf.edgesmith import is_closed_entity
from ezdxf.math import arc_angle_span_deg

from ..arcs import bulge_of
from ..errors import LacunaError

# Points further than this from the reference point (drawing units; a million km in mm) are damage, not
# drafting: their squared distances would overflow. NaN fails the comparison too.
FARTHEST = 1e12

ANNOTATION = frozenset({"TEXT", "MTEXT", "DIMENSION", "ARC_DIMENSION", "LARGE_RADIAL_DIMENSION", "LEADER",
                        "MULTILEADER", "MLEADER", "TOLERANCE", "ATTRIB"})


@dataclass
class Piece:
    """A run of vertices in drawing units, relative to the reading's reference point.

    ``bulges[i]`` belongs to the segment from vertex i to i + 1 (the last one closes a closed piece).
    ``curved`` marks a flattened free curve (ellipse, spline, hatch edge) that has no straight sides.
    """

    points: np.ndarray
    bulges: np.ndarray
    closed: bool
    kinds: tuple[str, ...]
    handles: tuple[str, ...]
    curved: bool = False

    @property
    def label(self) -> str:
        return ", ".join(f"{k} {h}" for k, h in zip(self.kinds, self.handles))


def pieces_from(item, ref: np.ndarray, flat_tol: float, where: str) -> list[Piece]:
    """The pieces one entity draws; a LacunaError for entities that draw no outline or region."""
    try:
        pieces = _pieces_of(item, ref, flat_tol, where)
    except ENTITY_DATA_ERRORS as error:
        raise damaged_entity(item, where, error) from None
    for piece in pieces:
        # A damaged file can hold "nan", "inf" or 1e300 where a coordinate, radius or bulge should be;
        # nothing downstream (joining, shapely, the FE grid) can work with such a point.
        if not (np.isfinite(piece.bulges).all() and (np.abs(piece.points) <= FARTHEST).all()):
            raise LacunaError(
                f"{item.kind} {item.handle} has a coordinate, radius or bulge that is not a finite number, "
                f"or lies more than {FARTHEST:.0e} drawing units from the panel.",
                where=where_of(where, item),
                hint="Redraw the entity, or delete it if it is not part of the panel.",
            )
    return pieces


def _pieces_of(item, ref: np.ndarray, flat_tol: float, where: str) -> list[Piece]:
    e = item.entity
    kind = e.dxftype()
    one = ((kind,), (item.handle,))

    if kind == "LINE":
        pts = _xy([e.dxf.start, e.dxf.end], ref)
        return [Piece(pts, np.zeros(1), False, *one)]
    if kind in ("ARC", "CIRCLE"):
        sign = _extrusion_sign(e, where, item)
        centre = _xy([e.ocs().to_wcs(e.dxf.center)], ref)[0]
        r = float(e.dxf.radius)
        if r <= 0:
            raise LacunaError(f"{kind} has no radius.", where=where_of(where, item), hint="Delete or redraw it.")
        if kind == "CIRCLE" or is_closed_entity(e):
            pts = np.array([centre + (r, 0.0), centre - (r, 0.0)])
            return [Piece(pts, np.ones(2), True, *one)]
        span = arc_angle_span_deg(e.dxf.start_angle, e.dxf.end_angle)
        pts = _xy([e.start_point, e.end_point], ref)
        return [Piece(pts, np.array([sign * bulge_of(math.radians(span))]), False, *one)]
    if kind == "LWPOLYLINE":
        sign = _extrusion_sign(e, where, item)
        pts = _xy(e.vertices_in_wcs(), ref)
        bulges = np.array([b for (b,) in e.get_points("b")], dtype=float) * sign
        return [_polyline_piece(pts, bulges, bool(e.closed), one)]
    if kind == "POLYLINE":
        if e.is_2d_polyline:
            sign = _extrusion_sign(e, where, item)
            ocs = e.ocs()
            z = e.dxf.elevation.z
            vertices = [v for v in e.vertices if not v.dxf.flags & 16]  # 16: spline frame control point
            pts = _xy([ocs.to_wcs((v.dxf.location.x, v.dxf.location.y, z)) for v in vertices], ref)
            bulges = np.array([v.dxf.bulge for v in vertices], dtype=float) * sign
            return [_polyline_piece(pts, bulges, bool(e.is_closed), one)]
        if e.is_3d_polyline:
            pts = _xy([v.dxf.location for v in e.vertices], ref)
            return [_polyline_piece(pts, np.zeros(len(pts)), bool(e.is_closed), one)]
        raise unsupported(item, where, "a mesh POLYLINE draws no outline")
    if kind in ("ELLIPSE", "SPLINE"):
        closed = is_closed_entity(e)
        pts = _xy(e.flattening(flat_tol), ref)
        if closed and len(pts) > 1 and np.allclose(pts[0], pts[-1], rtol=0, atol=flat_tol * 1e-6):
            pts = pts[:-1]
        pts = _drop_repeats(pts, closed)
        return [Piece(pts, np.zeros(len(pts) if closed else len(pts) - 1), closed, *one, curved=True)]
    if kind in ("HATCH", "MPOLYGON"):
        pieces = []
        for boundary in ezpath.from_hatch(e):
            pts = _drop_repeats(_xy(boundary.flattening(flat_tol), ref), True)
            if len(pts) >= 3:
                pieces.append(Piece(pts, np.zeros(len(pts)), True, *one, curved=True))
        if not pieces:
            raise unsupported(item, where, "the HATCH has no boundary path")
        return pieces
    raise unsupported(item, where, "this kind of entity draws no outline or closed shape")


# What reading an entity of a damaged file raises when it lacks a value (a VERTEX without a location: TypeError
# from Vec3(None), AttributeError from None.x) or holds one of the wrong kind (ValueError). Found by fuzzing.
ENTITY_DATA_ERRORS = (TypeError, ValueError, AttributeError)


def damaged_entity(item, where: str, error: Exception) -> LacunaError:
    """The error for an entity whose data ezdxf could not turn into geometry."""
    return LacunaError(
        f"{item.kind} {item.handle} cannot be read: its data is incomplete or damaged ({error}).",
        where=where_of(where, item),
        hint="Redraw the entity, or delete it if it is not part of the panel.",
    )


def unsupported(item, where: str, why: str) -> LacunaError:
    return LacunaError(
        f"{item.kind} {item.handle} cannot be read here: {why}.",
        where=where_of(where, item),
        hint="Use lines, arcs, polylines, circles, ellipses, splines or hatches on this layer, "
        "or move the entity to another layer.",
    )


def where_of(where: str, item) -> str:
    return f"{where}, layer {item.layer}, {item.kind} {item.handle}"


def _polyline_piece(pts: np.ndarray, bulges: np.ndarray, closed: bool, one) -> Piece:
    # Zero-length segments (a vertex drawn twice) carry no direction; drop them with their bulges.
    keep = np.ones(len(pts), dtype=bool)
    nxt = np.roll(pts, -1, axis=0)
    same = np.all(pts == nxt, axis=1)
    if not closed:
        same[-1] = False
    keep &= ~same
    if closed and keep.sum() >= 2 and np.all(pts[keep][-1] == pts[keep][0]):
        keep[np.flatnonzero(keep)[-1]] = False
    pts, bulges = pts[keep], bulges[keep]
    if closed and len(pts) >= 2:
        return Piece(pts, bulges, True, *one)
    if len(pts) < 2:
        return Piece(pts, np.zeros(0), False, *one)
    return Piece(pts, bulges[: len(pts) - 1], False, *one)


def _drop_repeats(pts: np.ndarray, closed: bool) -> np.ndarray:
    if len(pts) < 2:
        return pts
    keep = np.ones(len(pts), dtype=bool)
    keep[1:] = np.any(pts[1:] != pts[:-1], axis=1)
    pts = pts[keep]
    if closed and len(pts) > 1 and np.all(pts[-1] == pts[0]):
        pts = pts[:-1]
    return pts


def _xy(points, ref: np.ndarray) -> np.ndarray:
    """Drawing points -> (n, 2) relative to ``ref``: the subtraction comes first, to keep site coordinates exact."""
    arr = np.array([(p[0], p[1]) for p in points], dtype=float).reshape(-1, 2)
    return arr - ref


def _extrusion_sign(e, where: str, item) -> float:
    # Entities in an object coordinate system drawn upside down (extrusion -Z, e.g. from a mirrored block)
    # run clockwise in plan; any other tilt is not a plan drawing.
    ex = e.dxf.get("extrusion", (0.0, 0.0, 1.0))
    if abs(ex[0]) > 1e-9 or abs(ex[1]) > 1e-9:
        raise LacunaError(
            f"{item.kind} {item.handle} is not drawn in the plan (its extrusion is {tuple(ex)}).",
            where=where_of(where, item),
            hint="Redraw it in the XY plane of the world coordinate system.",
        )
    return 1.0 if ex[2] > 0 else -1.0
