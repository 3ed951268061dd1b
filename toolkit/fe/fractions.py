"""How much of each element lies inside the panel's solid material, cut exactly on the polygon."""

from __future__ import annotations

import numpy as np
import shapely

from .grid import Grid


def solid_fractions(grid: Grid, solid_polygon) -> np.ndarray:
    """(ne,) area fraction of each element inside ``solid_polygon`` (local mm).

    Only the elements the polygon's boundary passes through are intersected; the rest are wholly in or out,
    told apart by their centres.
    """
    fractions = np.zeros(grid.n_elements)
    cells, values = covered_fractions(grid, solid_polygon)
    fractions[cells] = values
    return fractions


def covered_fractions(grid: Grid, geom) -> tuple[np.ndarray, np.ndarray]:
    """The elements under ``geom``'s bounding boxes (one per part) and the area fraction of each inside it:
    (element numbers, fractions). Elements elsewhere are wholly outside. Cheap for small shapes on a big grid:
    only the cells under the parts' boxes are looked at, and only those the boundary crosses are intersected."""
    parts = shapely.get_parts(geom)
    if len(parts) == 0:
        return np.zeros(0, dtype=np.int64), np.zeros(0)
    x0, y0, x1, y1 = shapely.bounds(parts).T
    cells = _box_cells(grid, np.clip(np.floor(x0 / grid.dx).astype(np.int64), 0, grid.nx - 1),
                       np.clip(np.floor(y0 / grid.dy).astype(np.int64), 0, grid.ny - 1),
                       np.clip(np.floor(x1 / grid.dx).astype(np.int64), 0, grid.nx - 1),
                       np.clip(np.floor(y1 / grid.dy).astype(np.int64), 0, grid.ny - 1))
    centres = grid.element_centres[cells]
    shapely.prepare(geom)
    fractions = shapely.contains_xy(geom, centres[:, 0], centres[:, 1]).astype(float)
    boundary = shapely.boundary(geom)
    if shapely.is_empty(boundary):
        return cells, fractions
    # Elements whose box meets the boundary: from the boundary's segments, each looked up by its own box.
    ix0, iy0, ix1, iy1 = _segment_boxes(grid, boundary)
    candidates = _box_cells(grid, ix0, iy0, ix1, iy1)
    lower = grid.element_centres[candidates] - [0.5 * grid.dx, 0.5 * grid.dy]
    boxes = shapely.box(lower[:, 0], lower[:, 1], lower[:, 0] + grid.dx, lower[:, 1] + grid.dy)
    cut = shapely.intersects(boundary, boxes)
    candidates, boxes = candidates[cut], boxes[cut]
    areas = shapely.area(shapely.intersection(geom, boxes))
    where = np.searchsorted(cells, candidates)
    inside = (where < len(cells)) & (cells[np.minimum(where, len(cells) - 1)] == candidates)
    fractions[where[inside]] = np.clip(areas[inside] / grid.element_area, 0.0, 1.0)
    return cells, fractions


def _segment_boxes(grid: Grid, boundary):
    """Index ranges of the cells under each piece of the boundary, cut to pieces no longer than an element."""
    pieces = shapely.segmentize(boundary, max_segment_length=min(grid.dx, grid.dy))
    xy, line = shapely.get_coordinates(shapely.get_parts(pieces), return_index=True)
    same = line[1:] == line[:-1]
    starts, ends = xy[:-1][same], xy[1:][same]
    lo = np.minimum(starts, ends)
    hi = np.maximum(starts, ends)
    # One cell of margin either way: a piece lying on a grid line touches the cells on both sides.
    ix0 = np.clip(np.floor(lo[:, 0] / grid.dx).astype(np.int64) - 1, 0, grid.nx - 1)
    iy0 = np.clip(np.floor(lo[:, 1] / grid.dy).astype(np.int64) - 1, 0, grid.ny - 1)
    ix1 = np.clip(np.floor(hi[:, 0] / grid.dx).astype(np.int64) + 1, 0, grid.nx - 1)
    iy1 = np.clip(np.floor(hi[:, 1] / grid.dy).astype(np.int64) + 1, 0, grid.ny - 1)
    return ix0, iy0, ix1, iy1


def _box_cells(grid: Grid, ix0, iy0, ix1, iy1) -> np.ndarray:
    """Unique element numbers of all cells in the given index boxes."""
    mask = np.zeros((grid.ny, grid.nx), dtype=bool)
    for a, b, c, d in zip(ix0, iy0, ix1, iy1):
        mask[b:d + 1, a:c + 1] = True
    return np.flatnonzero(mask.ravel())
