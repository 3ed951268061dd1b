"""Openings and keep zones: closed loops -> shapely polygons in the local frame, checked against the panel."""

from __future__ import annotations

import shapely
from shapely.geometry import Polygon, box
from shapely.strtree import STRtree

from ..arcs import flatten
from ..errors import LacunaError
from ..model import Region
from .pieces import Piece
from .reading import Reading


def regions(loops: list[Piece], layer: str, what: str, width: float, height: float, r: Reading) -> tuple[Region, ...]:
    """One Region per loop (hatch boundaries combined even-odd), overlapping ones united with a warning.

    Raises for a loop that crosses itself, crosses the outline or lies wholly outside the panel.
    """
    shapes: list[tuple[Polygon, tuple[str, ...]]] = []
    hatches: dict[str, list[Polygon]] = {}
    for loop in loops:
        poly = loop_polygon(loop, layer, r)
        if loop.kinds[0] in ("HATCH", "MPOLYGON"):
            hatches.setdefault(loop.handles[0], []).append(poly)
        else:
            shapes.append((poly, _handle_labels(loop)))
    for handle, polys in hatches.items():
        # Nested boundary paths of one hatch alternate between filled and empty, as the hatch shows them.
        combined = polys[0]
        for p in polys[1:]:
            combined = shapely.symmetric_difference(combined, p)
        for part in getattr(combined, "geoms", [combined]):
            if isinstance(part, Polygon) and part.area > 0:
                shapes.append((part, (f"HATCH {handle}",)))

    envelope = box(0.0, 0.0, width, height)
    eps = max(r.exact_mm, 1e-9 * max(width, height))
    grown = envelope.buffer(eps, join_style="mitre")
    inside: list[tuple[Polygon, tuple[str, ...]]] = []
    for poly, labels in shapes:
        if shapely.intersection(poly, envelope).area <= eps * poly.length:
            raise LacunaError(
                f"the {what} drawn by {'; '.join(labels)} lies wholly outside the panel "
                f"(its centre is at {r.fmt_local(poly.centroid.coords[0])}).",
                where=r.where(layer, labels),
                hint=f"Move it inside the outline, or put it on another layer if it is not "
                f"{'an' if what[:1] in 'aeiou' else 'a'} {what}.",
            )
        if not grown.contains(poly):
            crossing = shapely.intersection(poly.boundary, envelope.boundary)
            at = crossing.representative_point() if not crossing.is_empty else poly.difference(envelope).centroid
            raise LacunaError(
                f"the {what} drawn by {'; '.join(labels)} crosses the panel outline near "
                f"{r.fmt_local(at.coords[0])}.",
                where=r.where(layer, labels),
                hint=f"Keep every {what} inside the outline; to change the panel's shape, change the outline.",
            )
        inside.append((poly if envelope.contains(poly) else shapely.intersection(poly, envelope), labels))
    return _unite_overlaps(inside, layer, what, eps, r)


def _unite_overlaps(shapes, layer: str, what: str, eps: float, r: Reading) -> tuple[Region, ...]:
    polys = [p for p, _ in shapes]
    group = list(range(len(polys)))

    def root(i):
        while group[i] != i:
            i = group[i]
        return i

    if polys:
        a_idx, b_idx = STRtree(polys).query(polys, predicate="intersects")
        for a, b in zip(a_idx, b_idx):
            if a < b and shapely.intersection(polys[a], polys[b]).area > eps * eps:
                group[root(a)] = root(b)
    members: dict[int, list[int]] = {}
    for i in range(len(polys)):
        members.setdefault(root(i), []).append(i)
    out = []
    for idx in members.values():
        labels = tuple(label for i in idx for label in shapes[i][1])
        handles = ",".join(_bare_handle(label) for label in labels)
        if len(idx) == 1:
            out.append(Region(polys[idx[0]], layer, handles))
            continue
        united = shapely.union_all([polys[i] for i in idx])
        r.warnings.append(
            f"{r.where(layer, labels)}: these {what}s overlap; they are taken as one {what}, their union."
        )
        for part in getattr(united, "geoms", [united]):
            out.append(Region(part, layer, handles))
    out.sort(key=lambda reg: (round(reg.shape.centroid.x, 3), round(reg.shape.centroid.y, 3)))
    return tuple(out)


def loop_polygon(loop: Piece, layer: str, r: Reading) -> Polygon:
    """A closed loop as a polygon in the local frame; refused when it has no area or crosses itself."""
    ring = flatten(loop.points, loop.bulges, True, r.chord_tol)
    poly = Polygon(r.to_local(ring))
    labels = _handle_labels(loop)
    if len(ring) < 3 or poly.area <= 0:
        raise LacunaError(
            f"the closed shape drawn by {'; '.join(labels)} has no area.",
            where=r.where(layer, labels),
            hint="Delete it or redraw it as a shape with an inside.",
        )
    if not poly.is_valid:
        reason = shapely.is_valid_reason(poly)
        raise LacunaError(
            f"the closed shape drawn by {'; '.join(labels)} crosses itself ({reason}, local mm).",
            where=r.where(layer, labels),
            hint="Redraw it as a simple closed shape whose sides do not cross.",
        )
    return poly


def _handle_labels(loop: Piece) -> tuple[str, ...]:
    return tuple(f"{k} {h}" for k, h in zip(loop.kinds, loop.handles))


def _bare_handle(label: str) -> str:
    return label.split(" ", 1)[1]
