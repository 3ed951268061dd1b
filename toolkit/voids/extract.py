"""Void outlines contoured from element densities: the optimiser's raw (freeform) result as shapely polygons.

Method: element densities are averaged to the nodes (the mean of the 1, 2 or 4 elements around a node), then
marching squares cuts each grid cell along the level line, linear along the cell's edges. Each cell gives the
piece of itself below the level (a whole box, or a polygon of 3 to 6 vertices); neighbouring cells compute a
shared edge's crossing point from the same two nodal values, so the pieces meet vertex to vertex and one
coverage union joins them into outlines with their holes. The ambiguous saddle cell (two opposite corners
below the level) is settled by the mean of its four corners. Written here, vectorised over cells by case:
a few dozen lines, and nothing to install.
"""

from __future__ import annotations

import math

import numpy as np
import shapely
from shapely.geometry import Polygon

from ..errors import LacunaError
from ..fe.grid import Grid

# Slots of a cell walked counter-clockwise: corners 0..3 (lower left first) and the edge after each corner.
_C = ("c0", "c1", "c2", "c3")
_E = ("e0", "e1", "e2", "e3")


def _walk(below: tuple[bool, bool, bool, bool]) -> list[str]:
    """Slots of the below-level part of a cell, counter-clockwise (one polygon; saddles joined)."""
    out = []
    for i in range(4):
        if below[i]:
            out.append(_C[i])
        if below[i] != below[(i + 1) % 4]:
            out.append(_E[i])
    return out


def _case_polygons() -> dict[tuple[int, bool], list[list[str]]]:
    """For each corner case (bit i = corner i below) and saddle choice, the polygons as slot lists."""
    table: dict[tuple[int, bool], list[list[str]]] = {}
    for case in range(1, 15):
        below = tuple(bool(case >> i & 1) for i in range(4))
        joined = [_walk(below)]
        table[(case, True)] = joined
        if case == 0b0101:  # corners 0 and 2 below: apart, two triangles
            table[(case, False)] = [["c0", "e0", "e3"], ["e1", "c2", "e2"]]
        elif case == 0b1010:  # corners 1 and 3 below
            table[(case, False)] = [["e0", "c1", "e1"], ["e2", "c3", "e3"]]
        else:
            table[(case, False)] = joined
    return table


_CASES = _case_polygons()


def nodal_densities(grid: Grid, densities: np.ndarray) -> np.ndarray:
    """(ny + 1, nx + 1) mean density of the elements around each node."""
    d = np.asarray(densities, dtype=float)
    if d.shape != (grid.n_elements,):
        raise ValueError(f"densities must be ({grid.n_elements},), got {d.shape}")
    en = grid.enodes.ravel()
    total = np.bincount(en, weights=np.repeat(d, 4), minlength=grid.n_nodes)
    count = np.bincount(en, minlength=grid.n_nodes)
    return (total / count).reshape(grid.ny + 1, grid.nx + 1)


def _pieces(grid: Grid, nodal: np.ndarray, level: float) -> np.ndarray:
    """Array of shapely polygons: each cell's part below ``level``."""
    ny, nx, dx, dy = grid.ny, grid.nx, grid.dx, grid.dy
    v0, v1 = nodal[:-1, :-1], nodal[:-1, 1:]
    v2, v3 = nodal[1:, 1:], nodal[1:, :-1]
    case = ((v0 < level) * 1 + (v1 < level) * 2 + (v2 < level) * 4 + (v3 < level) * 8).ravel()
    centre_below = ((v0 + v1 + v2 + v3) / 4.0 < level).ravel()

    # Crossing points on every grid edge, each computed once so the two cells sharing it agree exactly.
    with np.errstate(divide="ignore", invalid="ignore"):
        th = np.clip((level - nodal[:, :-1]) / (nodal[:, 1:] - nodal[:, :-1]), 0.0, 1.0)  # (ny+1, nx)
        tv = np.clip((level - nodal[:-1, :]) / (nodal[1:, :] - nodal[:-1, :]), 0.0, 1.0)  # (ny, nx+1)
    th = np.nan_to_num(th, nan=0.5)
    tv = np.nan_to_num(tv, nan=0.5)
    I, J = np.meshgrid(np.arange(nx, dtype=float), np.arange(ny, dtype=float))
    slot_xy = {
        "c0": (I * dx, J * dy),
        "c1": ((I + 1) * dx, J * dy),
        "c2": ((I + 1) * dx, (J + 1) * dy),
        "c3": (I * dx, (J + 1) * dy),
        "e0": ((I + th[:-1, :]) * dx, J * dy),
        "e1": ((I + 1) * dx, (J + tv[:, 1:]) * dy),
        "e2": ((I + th[1:, :]) * dx, (J + 1) * dy),
        "e3": (I * dx, (J + tv[:, :-1]) * dy),
    }
    slot_xy = {k: (x.ravel(), y.ravel()) for k, (x, y) in slot_xy.items()}

    parts = []
    full = np.flatnonzero(case == 15)
    if full.size:
        # corners from the same slots as the partial cells': x0 + dx is not always (I + 1) dx in floating point
        # (234 x 12.7 + 12.7 against 235 x 12.7 on a half-inch grid), and a box a bit off its neighbour's edge
        # left the coverage union below with zero-width spikes and a false island in a wholly void region
        x0, y0 = slot_xy["c0"][0][full], slot_xy["c0"][1][full]
        x1, y1 = slot_xy["c2"][0][full], slot_xy["c2"][1][full]
        parts.append(shapely.box(x0, y0, x1, y1))
    for (c, joined), polys in _CASES.items():
        cells = np.flatnonzero((case == c) & (centre_below == joined))
        if cells.size == 0:
            continue
        for slots in polys:
            xy = np.stack([np.stack([slot_xy[s][0][cells], slot_xy[s][1][cells]], axis=-1) for s in slots], axis=1)
            parts.append(shapely.polygons(xy))
    if not parts:
        return np.empty(0, dtype=object)
    pieces = np.concatenate(parts)
    return pieces[shapely.area(pieces) > 0.0]


def freeform_voids(
    grid: Grid,
    densities: np.ndarray,
    *,
    level: float = 0.5,
    min_area_mm2: float = 0.0,
    exclude=None,
) -> list[Polygon]:
    """Void outlines (local mm) where the smoothed density falls below ``level``.

    Returns valid polygons ordered bottom to top, then left to right (by the lower-left corner of their
    bounds), so the same densities always give the same list. Pieces smaller than
    ``min_area_mm2`` (and numerical slivers under a millionth of an element) are dropped, as are holes in a
    void under that size; larger solid islands inside a void stay as the polygon's interiors. Every outline lies
    inside the envelope. ``exclude`` (a shapely geometry, e.g. the existing openings) is cut away, grown by one
    element diagonal first because its contoured outline strays up to that far from the drawn one.
    """
    if not (math.isfinite(level) and 0.0 < level < 1.0):
        raise LacunaError(
            f"the contour level must lie strictly between 0 and 1, got {level!r}.",
            where="[voids] level",
            hint="0.5 is the usual value.",
        )
    if not (math.isfinite(min_area_mm2) and min_area_mm2 >= 0.0):
        raise LacunaError(
            f"the smallest void area must be zero or more, got {min_area_mm2!r} mm2.",
            where="[rules] min_void",
            hint="Give a length of zero or more.",
        )
    nodal = nodal_densities(grid, densities)
    pieces = _pieces(grid, nodal, level)
    if pieces.size == 0:
        return []
    try:
        merged = shapely.coverage_union_all(pieces)
    except shapely.errors.GEOSException:
        merged = shapely.union_all(pieces)
    if not shapely.is_valid(merged):
        merged = shapely.union_all(shapely.make_valid(pieces))
    envelope = shapely.box(0.0, 0.0, grid.width_mm, grid.height_mm)
    merged = shapely.intersection(merged, envelope)
    if exclude is not None and not shapely.is_empty(exclude):
        grown = shapely.buffer(exclude, math.hypot(grid.dx, grid.dy), quad_segs=8)
        merged = shapely.difference(merged, grown)
    # Collinear vertices along grid lines carry nothing; a zero-tolerance simplification drops only them.
    merged = shapely.simplify(merged, 1e-9 * min(grid.dx, grid.dy), preserve_topology=True)

    smallest = max(min_area_mm2, 1e-6 * grid.element_area)
    out: list[Polygon] = []
    for part in shapely.get_parts(merged):
        if not isinstance(part, Polygon) or part.area < smallest:
            continue
        holes = [ring for ring in part.interiors if Polygon(ring).area >= smallest]
        poly = Polygon(part.exterior, holes)
        if not poly.is_valid:
            poly = max(shapely.get_parts(shapely.make_valid(poly)), key=lambda g: g.area)
        out.append(shapely.normalize(poly))
    out.sort(key=lambda p: (p.bounds[1], p.bounds[0], -p.area))
    return out
