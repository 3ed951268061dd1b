"""Non-design zones: the elements BESO may not touch, found with shapely on the element boxes."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import LineString, Point

from ..fe.grid import Grid
from ..model import LineLoad, Panel, PointLoad
from .settings import ZoneSettings

# Round ends of buffers: 16 segments a quarter circle keeps the polygon within 0.2 % of the true radius.
_QUAD_SEGS = 16


@dataclass(frozen=True, eq=False)
class Zones:
    """(ne,) boolean masks of the non-design zones; an element may lie in several.

    ``opening`` elements keep their drawn solid fraction (void inside an opening, part-solid where its edge
    cuts them); every other zone is solid whatever happens. ``design`` is what is left: the region the
    volume fraction applies to.
    """

    edge: np.ndarray
    bearing: np.ndarray
    web: np.ndarray
    keep: np.ndarray
    opening: np.ndarray
    rules: np.ndarray | None = None

    @property
    def passive(self) -> np.ndarray:
        out = self.edge | self.bearing | self.web | self.keep | self.opening
        return out if self.rules is None else out | self.rules

    @property
    def design(self) -> np.ndarray:
        return ~self.passive


# An element shares area with a zone when more than this share of it lies in the zone: a sliver of round-off (a
# rotated drawing's KEEP edge on a grid line, 1e-13 mm across it in the panel's frame) is none. With the exact
# test, the elements along one side of such a zone fell in it and along the other side not, so the design region,
# and with it a layout asked to be symmetric, was not (found on a 120 x 30 in header drawn at 30 degrees).
SLIVER = 1e-9


def element_boxes(grid: Grid) -> np.ndarray:
    """(ne,) shapely boxes of the elements, in element order."""
    x0 = np.tile(np.arange(grid.nx) * grid.dx, grid.ny)
    y0 = np.repeat(np.arange(grid.ny) * grid.dy, grid.nx)
    return shapely.box(x0, y0, x0 + grid.dx, y0 + grid.dy)


class _Boxes:
    """The element boxes with a spatial index, asked two questions."""

    def __init__(self, grid: Grid):
        self.element_area = grid.dx * grid.dy
        self.boxes = element_boxes(grid)
        self.tree = shapely.STRtree(self.boxes)
        self.n = self.boxes.size

    def overlapping(self, geom) -> np.ndarray:
        """Elements sharing some area with ``geom`` (intersects and does not merely touch), a sliver of no more
        than ``SLIVER`` of an element not counting."""
        mask = np.zeros(self.n, dtype=bool)
        if geom is None or shapely.is_empty(geom):
            return mask
        idx = self.tree.query(geom, predicate="intersects")
        idx = idx[~shapely.touches(self.boxes[idx], geom)]
        if idx.size:
            shapely.prepare(geom)
            edge = idx[~shapely.contains_properly(geom, self.boxes[idx])]
            if edge.size:
                shared = shapely.area(shapely.intersection(self.boxes[edge], geom))
                idx = np.setdiff1d(idx, edge[shared <= SLIVER * self.element_area], assume_unique=True)
        mask[idx] = True
        return mask

    def touching(self, geom) -> np.ndarray:
        """Elements meeting ``geom`` at all, their edges included (for points and lines)."""
        mask = np.zeros(self.n, dtype=bool)
        mask[self.tree.query(geom, predicate="intersects")] = True
        return mask


def non_design_zones(grid: Grid, panel: Panel, settings: ZoneSettings) -> Zones:
    """The non-design zones of ``panel`` on ``grid``.

    Which shapely test each zone uses:

    - ``edge``: elements sharing area with the band of width ``edge_cover_mm`` inside the envelope
      (envelope less its inward buffer). The band runs along the whole outline, so the straight edges stay.
    - ``bearing``: elements sharing area with a disc of radius ``bearing_clearance_mm`` around every point
      support and point load, and with the round-ended band of that half-width around every segment support.
      With a clearance of 0, the elements touching the point or segment (edges included). Elements a line
      load's segment passes through or runs along are added too, so no load ever acts on void.
    - ``web``: elements sharing area with each opening grown by ``min_web_mm``, less the opening elements.
    - ``keep``: elements sharing area with a KEEP region (the whole region stays solid).
    - ``rules``: with ``settings.void_region``, elements sharing area with the envelope outside it (the profile's
      depth band and every other rule that keeps voids away), opening elements excepted.
    - ``opening``: elements sharing area with an opening (intersects and not merely touches, so an element
      whose corner or edge only meets the opening is not one). They are passive with their drawn fraction.
    """
    boxes = _Boxes(grid)
    envelope = shapely.box(0.0, 0.0, grid.width_mm, grid.height_mm)

    edge = np.zeros(boxes.n, dtype=bool)
    if settings.edge_cover_mm > 0:
        inner = shapely.buffer(envelope, -settings.edge_cover_mm, join_style="mitre")
        edge = boxes.overlapping(shapely.difference(envelope, inner))

    bearing = np.zeros(boxes.n, dtype=bool)
    r = settings.bearing_clearance_mm
    anchors = [Point(s.points[0]) if s.is_point else LineString(s.points) for s in panel.supports]
    anchors += [Point(load.at) for load in panel.loads if isinstance(load, PointLoad)]
    for geom in anchors:
        bearing |= boxes.overlapping(shapely.buffer(geom, r, quad_segs=_QUAD_SEGS)) if r > 0 else boxes.touching(geom)
    for load in panel.loads:
        if isinstance(load, LineLoad):
            bearing |= boxes.touching(LineString([load.start, load.end]))

    opening = np.zeros(boxes.n, dtype=bool)
    web = np.zeros(boxes.n, dtype=bool)
    for region in panel.openings:
        opening |= boxes.overlapping(region.shape)
        if settings.min_web_mm > 0:
            web |= boxes.overlapping(shapely.buffer(region.shape, settings.min_web_mm, quad_segs=_QUAD_SEGS))
    web &= ~opening

    keep = np.zeros(boxes.n, dtype=bool)
    for region in panel.keep:
        keep |= boxes.overlapping(region.shape)

    rules = None
    if settings.void_region is not None:
        # Any shared area, as the other zones: a freeform void reaching past the region would count material in
        # the freeform saving that no made void may take (on a coarse grid the region loses up to an element at
        # each side: the optimiser is held to what the voids can use).
        rules = boxes.overlapping(shapely.difference(envelope, settings.void_region)) & ~opening

    return Zones(edge=edge, bearing=bearing, web=web, keep=keep, opening=opening, rules=rules)
