"""How much of each element lies inside the panel's solid material, cut exactly on the polygon."""

from __future__ import annotations

import numpy as np
import shapely

from .grid import Grid

# Shares of an element this close to 0 or 1 are taken as exactly 0 or 1 (round-off of the area sums).
SNAP = 1e-9


def solid_fractions(grid: Grid, solid_polygon) -> np.ndarray:
    """(ne,) area fraction of each element inside ``solid_polygon`` (local mm).

    Exact (Green's theorem, :func:`covered_fractions`); elements outside the polygon's bounding box are 0.
    """
    fractions = np.zeros(grid.n_elements)
    cells, values = covered_fractions(grid, solid_polygon)
    fractions[cells] = values
    return fractions


def covered_fractions(grid: Grid, geom) -> tuple[np.ndarray, np.ndarray]:
    """The elements under ``geom``'s parts' bounding boxes and the area fraction of each inside it: (element
    numbers, fractions). Elements elsewhere are wholly outside.

    Exact, by Green's theorem on each part's rings, with no polygon clipping: every side is cut where it crosses a
    grid line, so each piece lies in one cell (i, j); with area = -(contour integral of y dx) taken over each row
    band, a piece from x_a to x_b at mean height y adds -(x_b - x_a)(y - y_j) to its own cell and
    -(x_b - x_a) dy to every cell below it in its column (a running sum down the column). The rings' orientation
    (exterior counter-clockwise, holes clockwise) gives holes their sign. A part reaching beyond the grid is cut
    to it first.
    """
    parts = [p for p in shapely.get_parts(geom) if not p.is_empty and p.area > 0.0]
    if not parts:
        return np.zeros(0, dtype=np.int64), np.zeros(0)
    dx, dy = grid.dx, grid.dy
    width, height = grid.nx * dx, grid.ny * dy
    ids, areas = [], []
    for part in parts:
        x0, y0, x1, y1 = part.bounds
        if x0 < 0.0 or y0 < 0.0 or x1 > width or y1 > height:
            part = shapely.clip_by_rect(part, 0.0, 0.0, width, height)
            if part.is_empty or part.area <= 0.0:
                continue
            x0, y0, x1, y1 = part.bounds
        part = shapely.orient_polygons(part)  # exterior counter-clockwise, holes clockwise
        c0, c1 = (int(np.clip(np.floor(v / dx), 0, grid.nx - 1)) for v in (x0, x1))
        r0, r1 = (int(np.clip(np.floor(v / dy), 0, grid.ny - 1)) for v in (y0, y1))
        nc, nr = c1 - c0 + 1, r1 - r0 + 1
        rings = [shapely.get_coordinates(ring) for poly in shapely.get_parts(part)
                 for ring in shapely.get_rings(poly)]
        pa, pb = _pieces(np.concatenate([r[:-1] for r in rings]), np.concatenate([r[1:] for r in rings]), dx, dy)
        mid = 0.5 * (pa + pb)
        col = np.clip(np.floor(mid[:, 0] / dx).astype(np.int64), c0, c1)
        row = np.clip(np.floor(mid[:, 1] / dy).astype(np.int64), r0, r1)
        run = pb[:, 0] - pa[:, 0]
        local = (row - r0) * nc + (col - c0)
        here = np.bincount(local, weights=-run * (mid[:, 1] - row * dy), minlength=nr * nc).reshape(nr, nc)
        below = np.bincount(local, weights=-run * dy, minlength=nr * nc).reshape(nr, nc)
        area = here + np.cumsum(below[::-1], axis=0)[::-1] - below
        rows, cols = np.mgrid[r0:r1 + 1, c0:c1 + 1]
        ids.append((rows * grid.nx + cols).ravel())
        areas.append(area.ravel())
    if not ids:
        return np.zeros(0, dtype=np.int64), np.zeros(0)
    cells, inverse = np.unique(np.concatenate(ids), return_inverse=True)
    share = np.bincount(inverse, weights=np.concatenate(areas), minlength=len(cells)) / grid.element_area
    # A whole element is exactly 1 and an empty one exactly 0 (the optimiser's design region is the elements at
    # 1.0), not a sum of pieces a few units of round-off away.
    share[np.abs(share - 1.0) <= SNAP] = 1.0
    share[np.abs(share) <= SNAP] = 0.0
    return cells, np.clip(share, 0.0, 1.0)


def _pieces(a: np.ndarray, b: np.ndarray, dx: float, dy: float) -> tuple[np.ndarray, np.ndarray]:
    """The segments a -> b ((m, 2) each) cut at every grid line they cross: the pieces' start and end points."""
    m = len(a)
    segments, params = [np.arange(m), np.arange(m)], [np.zeros(m), np.ones(m)]
    for axis, h in ((0, dx), (1, dy)):
        i0, i1 = np.floor(a[:, axis] / h), np.floor(b[:, axis] / h)
        crossed = np.abs(i1 - i0).astype(np.int64)
        seg = np.repeat(np.arange(m), crossed)
        line = np.minimum(i0, i1)[seg] + 1 + _ragged_arange(crossed)
        segments.append(seg)
        params.append((line * h - a[seg, axis]) / (b[seg, axis] - a[seg, axis]))
    seg, t = np.concatenate(segments), np.clip(np.concatenate(params), 0.0, 1.0)
    order = np.lexsort((t, seg))
    seg, t = seg[order], t[order]
    keep = (seg[1:] == seg[:-1]) & (t[1:] > t[:-1])
    s, ta, tb = seg[:-1][keep], t[:-1][keep], t[1:][keep]
    d = (b - a)[s]
    return a[s] + ta[:, None] * d, a[s] + tb[:, None] * d


def _ragged_arange(counts: np.ndarray) -> np.ndarray:
    """0, 1, ..., c - 1 for each count c, one after the other."""
    total = int(counts.sum())
    if total == 0:
        return np.zeros(0, dtype=np.int64)
    return np.arange(total) - np.repeat(np.cumsum(counts) - counts, counts)
