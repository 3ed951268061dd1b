"""Graded triangle meshes that follow a region's edges, for the local models at voids (pure numerics).

The region is a shapely polygon (holes allowed) whose edges are fine polylines: a true arc flattened to a
hundredth of a millimetre stays that close to its arc, so points placed along the polyline lie on the real edge.
The mesh is built in four steps:

1. every edge loop is split at its corners (a turn above ``CORNER_DEG``) and at the break points the caller
   names (ends of line loads, where an edge changes from cut to free); each run between two such points gets
   nodes spaced by the size field ``h(x)``, evenly in the measure ds / h;
2. the inside is filled with the centres of a quadtree whose cells are split until they are no larger than
   ``h`` at their centre; centres nearer an edge than ``EDGE_GAP`` h are dropped;
3. ``scipy.spatial.Delaunay`` triangulates all points; the triangulation is cut into pieces along the region's
   edges, and a piece is kept when most of its triangles' centroids lie in the region (holes go whole);
4. boundary recovery: every edge segment between two consecutive edge nodes must be a side of a triangle, and
   every triangle side used once must be such a segment. A missing segment is split at its middle (the point
   on the polyline, so it stays on the true edge) and the points crowding it are dropped; then 2-4 again.
   A mesh that still misses its edges after ``RECOVERY_ROUNDS`` raises :class:`MeshError`.

The quadratic elements need a middle node on each side; on an edge segment it is the polyline point halfway
along it (so a curved edge gets curved elements), elsewhere the straight middle.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Callable

import numpy as np
import shapely
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from scipy.spatial import Delaunay, cKDTree

# A polyline vertex turning by more than this is a corner of the region, kept as a node. An arc flattened to
# 0.01 mm turns by under 20 degrees per chord for any radius above about 0.5 mm.
CORNER_DEG = 20.0
# Inside points stay at least this many local sizes from an edge, so the edge's own nodes make its triangles.
EDGE_GAP = 0.6
RECOVERY_ROUNDS = 6
SMOOTHING_ROUNDS = 3


class MeshError(RuntimeError):
    """The region could not be meshed with its edges kept (an internal failure, reported per void)."""


@dataclass(frozen=True, eq=False)
class TriMesh:
    """A six-node triangle mesh (local mm).

    ``points`` (n, 2); ``tri`` (ne, 6): corners counter-clockwise, then the middles of sides 0-1, 1-2, 2-0;
    ``edges`` (nb, 3): the boundary sides as (corner a, corner b, middle) node numbers; ``edge_tag`` (nb,) the
    caller's tag of each boundary side; ``corner`` (n,) True for nodes at corners of the region.
    """

    points: np.ndarray
    tri: np.ndarray
    edges: np.ndarray
    edge_tag: np.ndarray
    corner: np.ndarray

    @property
    def n_nodes(self) -> int:
        return len(self.points)

    def min_angle_deg(self) -> float:
        """The smallest angle of any element (of its straight corner triangle), degrees."""
        p = self.points[self.tri[:, :3]]
        angles = []
        for i in range(3):
            a, b, c = p[:, i], p[:, (i + 1) % 3], p[:, (i + 2) % 3]
            u, v = b - a, c - a
            cos = np.sum(u * v, axis=1) / (np.linalg.norm(u, axis=1) * np.linalg.norm(v, axis=1))
            angles.append(np.degrees(np.arccos(np.clip(cos, -1.0, 1.0))))
        return float(np.min(angles))

    @cached_property
    def _centroids(self) -> cKDTree:
        """A k-d tree of the elements' centroids, built at the first ``locate`` (several sections per model)."""
        return cKDTree(self.points[self.tri[:, :3]].mean(axis=1))

    def locate(self, xy) -> tuple[np.ndarray, np.ndarray]:
        """(element, (xi, eta)) of each point, element -1 where the point is outside the mesh."""
        xy = np.atleast_2d(np.asarray(xy, dtype=float))
        corners = self.points[self.tri[:, :3]]
        near = self._centroids.query(xy, k=min(12, len(corners)))[1].reshape(len(xy), -1)
        c = corners[near]                                              # (k, m, 3, 2)
        d1, d2 = c[..., 1, :] - c[..., 0, :], c[..., 2, :] - c[..., 0, :]
        rhs = xy[:, None, :] - c[..., 0, :]
        det = d1[..., 0] * d2[..., 1] - d1[..., 1] * d2[..., 0]
        xi = (rhs[..., 0] * d2[..., 1] - rhs[..., 1] * d2[..., 0]) / det
        eta = (d1[..., 0] * rhs[..., 1] - d1[..., 1] * rhs[..., 0]) / det
        inside = (xi >= -1e-9) & (eta >= -1e-9) & (xi + eta <= 1.0 + 1e-9)
        first = np.argmax(inside, axis=1)
        rows = np.arange(len(xy))
        element = np.where(inside[rows, first], near[rows, first], -1)
        return element, np.column_stack([xi[rows, first], eta[rows, first]])


def _loops(region) -> list[np.ndarray]:
    polys = list(region.geoms) if hasattr(region, "geoms") else [region]
    loops = []
    for poly in polys:
        for ring in [poly.exterior, *poly.interiors]:
            xy = np.asarray(ring.coords, dtype=float)[:-1]
            keep = np.r_[True, np.linalg.norm(np.diff(xy, axis=0), axis=1) > 1e-9]
            loops.append(xy[keep])
    return loops


def _break_indices(loop: np.ndarray, breaks: np.ndarray, tol: float) -> tuple[np.ndarray, np.ndarray]:
    """The loop with the break points inserted as vertices, and the indices of its corners and breaks."""
    if len(breaks):
        pts = list(loop)
        for b in breaks:
            closed = np.vstack([pts, pts[:1]])
            a, c = closed[:-1], closed[1:]
            d = c - a
            t = np.clip(np.sum((b - a) * d, axis=1) / np.maximum(np.sum(d * d, axis=1), 1e-30), 0.0, 1.0)
            dist = np.linalg.norm(a + t[:, None] * d - b, axis=1)
            i = int(np.argmin(dist))
            if dist[i] > tol:
                continue
            if np.linalg.norm(closed[i] - b) <= tol or np.linalg.norm(closed[i + 1] - b) <= tol:
                continue
            pts.insert(i + 1, a[i] + t[i] * d[i])
        loop = np.asarray(pts)
    prev, nxt = np.roll(loop, 1, axis=0), np.roll(loop, -1, axis=0)
    u, v = loop - prev, nxt - loop
    cos = np.sum(u * v, axis=1) / (np.linalg.norm(u, axis=1) * np.linalg.norm(v, axis=1))
    turn = np.degrees(np.arccos(np.clip(cos, -1.0, 1.0)))
    is_break = turn > CORNER_DEG
    corners = is_break.copy()
    if len(breaks):
        dist = np.min(np.linalg.norm(loop[:, None, :] - breaks[None, :, :], axis=2), axis=1)
        is_break |= dist <= tol
    return loop, np.flatnonzero(is_break), corners


def _along(run: np.ndarray, s: np.ndarray, cum: np.ndarray) -> np.ndarray:
    """Points at arc lengths ``s`` along the polyline ``run`` (cumulative lengths ``cum``)."""
    i = np.clip(np.searchsorted(cum, s, side="right") - 1, 0, len(run) - 2)
    seg = np.maximum(cum[i + 1] - cum[i], 1e-30)
    t = np.clip((s - cum[i]) / seg, 0.0, 1.0)
    return run[i] + t[:, None] * (run[i + 1] - run[i])


def _split(values: np.ndarray, lengths) -> list[np.ndarray]:
    """``values`` cut into consecutive pieces of the given lengths."""
    return np.split(values, np.cumsum(lengths)[:-1])


def _run_samples(run: np.ndarray, h_floor: float):
    """Arc lengths along one run (cumulative ``cum`` at its vertices, samples ``s``) fine enough to integrate
    ds / h on, and the sample points."""
    seg = np.linalg.norm(np.diff(run, axis=0), axis=1)
    cum = np.r_[0.0, np.cumsum(seg)]
    total = cum[-1]
    n_sample = int(min(4000, max(8, np.ceil(total / max(h_floor, 1e-9) * 2))))
    s = np.linspace(0.0, total, n_sample + 1)
    return cum, s, _along(run, s, cum)


def _run_nodes(s: np.ndarray, h: np.ndarray) -> np.ndarray:
    """Arc lengths of a run's nodes (ends included), evenly in ds / h given h at the samples ``s``."""
    w = np.r_[0.0, np.cumsum(0.5 * (1.0 / h[1:] + 1.0 / h[:-1]) * np.diff(s))]
    n = max(1, int(np.ceil(w[-1] - 0.25)))
    return np.interp(np.linspace(0.0, w[-1], n + 1), w, s)


def graded_mesh(region, size: Callable[[np.ndarray], np.ndarray], *, tag: Callable[[np.ndarray], np.ndarray],
                breaks=(), seeds=(), tol: float = 1e-6,
                snap: Callable[[np.ndarray], np.ndarray] | None = None) -> TriMesh:
    """Six-node triangles over ``region`` (shapely polygon) sized by ``size(points) -> (n,) lengths``.

    ``tag(midpoints) -> (n,) ints`` labels the boundary sides; ``breaks`` are points on the edges that must be
    nodes (within ``tol``); ``seeds`` points inside that must be nodes (a point load, a point support).
    ``snap(points) -> points`` moves edge nodes from the polyline onto the true curve where the caller knows it
    (an arc flattened to chords has corners of its own, which a mesh finer than the chords would feel).
    """
    breaks = np.asarray(breaks, dtype=float).reshape(-1, 2)
    # prepared once: every point-in-region test below (fill, smoothing, piece votes) is then a fast lookup
    shapely.prepare(region)
    # one run per stretch of edge between two corners or breaks: its polyline, arc lengths and node positions.
    # Each loop's runs are sampled as finely as the smallest size on it or on a loop before it; the size field
    # is asked once for all loops' vertices and once for all runs' samples.
    loops = [_break_indices(loop, breaks, tol) for loop in _loops(region)]
    h_loops = _split(size(np.vstack([loop for loop, _, _ in loops])), [len(loop) for loop, _, _ in loops])
    floors = np.minimum.accumulate([float(np.min(h)) for h in h_loops])
    runs: list[dict] = []
    corner_pts = []
    for (loop, cut, corners), h_floor in zip(loops, floors):
        corner_pts.append(loop[corners])
        closed = np.vstack([loop, loop[:1]])
        if len(cut) == 0:
            cut = np.array([0])
        first = len(runs)
        for k, start in enumerate(cut):
            end = cut[(k + 1) % len(cut)]
            run = closed[start:end + 1] if end > start else np.vstack([closed[start:], closed[1:end + 1]])
            cum, samples, xy = _run_samples(run, h_floor)
            runs.append({"run": run, "cum": cum, "samples": samples, "xy": xy, "next": len(runs) + 1})
        runs[-1]["next"] = first
    h_runs = _split(size(np.vstack([r.pop("xy") for r in runs])), [len(r["samples"]) for r in runs])
    for r, h in zip(runs, h_runs):
        r["s"] = list(_run_nodes(r.pop("samples"), h))
    corner_pts = np.vstack(corner_pts) if corner_pts else np.zeros((0, 2))
    boundary = _boundary(runs)
    bpts = boundary[0]

    inside = _fill(region, size, bpts)
    seeds = np.asarray(seeds, dtype=float).reshape(-1, 2)
    if len(seeds):
        seeds = seeds[shapely.contains_xy(region, seeds[:, 0], seeds[:, 1])]
        # a seed on (or next to) an edge is left to the edge's nodes, and each seed counts once
        seeds = seeds[cKDTree(bpts).query(seeds)[0] > EDGE_GAP * size(seeds)] if len(seeds) else seeds
        seeds = np.unique(np.round(seeds, 9), axis=0)
    if len(seeds):
        if len(inside):
            near = cKDTree(seeds).query(inside)[0] < EDGE_GAP * size(inside)
            inside = inside[~near]
        inside = np.vstack([inside, seeds])

    inside = _smooth(region, bpts, inside, size, len(seeds))
    for _ in range(RECOVERY_ROUNDS):
        bpts, segs, mids = boundary
        if snap is not None:
            bpts, mids = snap(bpts), snap(mids)
        pts = np.vstack([bpts, inside])
        dl = Delaunay(pts)
        simp = dl.simplices
        missing = _missing(simp, segs, len(pts))
        if not missing.any():
            keep = _inside(dl, pts, segs, region)
            tri = simp[keep]
            extra = _stray_sides(tri, segs, len(pts))
            if not extra:
                break
            raise MeshError(f"{extra} triangle sides lie on the mesh's edge but on no edge of the region.")
        # split each missing side at its middle on the polyline; drop inside points crowding it
        gone = np.zeros(len(inside), dtype=bool)
        for k in np.flatnonzero(missing):
            piece, j = _piece_of(runs, k)
            s = runs[piece]["s"]
            runs[piece]["s"] = s[:j + 1] + [0.5 * (s[j] + s[j + 1])] + s[j + 1:]
            if len(inside):
                a, b = bpts[segs[k, 0]], bpts[segs[k, 1]]
                r = np.linalg.norm(inside - 0.5 * (a + b), axis=1)
                gone |= r < 0.75 * np.linalg.norm(b - a)
        inside = inside[~gone]
        boundary = _boundary(runs)
    else:
        raise MeshError("the region's edges could not be recovered in the triangulation.")

    # orient counter-clockwise
    p = pts[tri]
    area = (p[:, 1, 0] - p[:, 0, 0]) * (p[:, 2, 1] - p[:, 0, 1]) - (p[:, 2, 0] - p[:, 0, 0]) * (p[:, 1, 1] - p[:, 0, 1])
    if np.any(np.abs(area) < 1e-12 * np.max(np.abs(area))):
        raise MeshError("the triangulation holds a flat triangle.")
    tri = np.where((area < 0)[:, None], tri[:, [0, 2, 1]], tri)

    # middle nodes: one per side; a boundary side takes its polyline middle
    n0 = len(pts)
    # sides by integer key (smaller node * n0 + larger): sorted as the (smaller, larger) pairs would be
    uniq, inv = np.unique(_side_keys(tri, n0), return_inverse=True)
    inv = inv.ravel()
    ends = np.column_stack([uniq // n0, uniq % n0])
    mid_xy = 0.5 * (pts[ends[:, 0]] + pts[ends[:, 1]])
    side_of_seg = _find_keys(_keys(segs, n0), uniq)
    on_edge = side_of_seg >= 0
    mid_xy[on_edge] = mids[side_of_seg[on_edge]]
    ne = len(tri)
    mid_numbers = n0 + inv.reshape(3, ne).T
    tri6 = np.hstack([tri, mid_numbers])
    points = np.vstack([pts, mid_xy])
    seg_mid = np.empty(len(segs), dtype=np.int64)
    seg_mid[side_of_seg[on_edge]] = n0 + np.flatnonzero(on_edge)
    edges = np.column_stack([segs, seg_mid])
    if len(np.unique(tri6.ravel())) != len(points):
        raise MeshError("a point of the mesh belongs to no triangle.")
    corner = np.zeros(len(points), dtype=bool)
    if len(corner_pts):
        d, i = cKDTree(pts[: len(bpts)]).query(corner_pts)
        corner[i[d <= max(tol, 1e-9)]] = True
    return TriMesh(points=points, tri=tri6, edges=edges, edge_tag=np.asarray(tag(mids)), corner=corner)


def _boundary(runs):
    """Edge nodes, edge sides (pairs of node numbers) and side middles from the runs' arc-length lists."""
    nodes, segs, mids = [], [], []
    count = 0
    starts = []
    for r in runs:
        s = np.asarray(r["s"])
        starts.append(count)
        nodes.append(_along(r["run"], s[:-1], r["cum"]))
        mids.append(_along(r["run"], 0.5 * (s[1:] + s[:-1]), r["cum"]))
        count += len(s) - 1
    # a run's last side ends at the first node of the next run of its loop
    for i, r in enumerate(runs):
        n = len(r["s"]) - 1
        a = starts[i] + np.arange(n)
        b = a + 1
        b[-1] = starts[r["next"]]
        segs.append(np.column_stack([a, b]))
    return np.vstack(nodes), np.vstack(segs), np.vstack(mids)


def _piece_of(runs, k):
    for i, r in enumerate(runs):
        n = len(r["s"]) - 1
        if k < n:
            return i, k
        k -= n
    raise IndexError(k)


def _keys(pairs: np.ndarray, n: int) -> np.ndarray:
    """One integer per undirected side (a, b) of a mesh of ``n`` points."""
    pairs = np.asarray(pairs, dtype=np.int64)
    return np.minimum(pairs[:, 0], pairs[:, 1]) * n + np.maximum(pairs[:, 0], pairs[:, 1])


def _find_keys(table: np.ndarray, keys: np.ndarray) -> np.ndarray:
    """Index in ``table`` of each of ``keys``, -1 where it is not there."""
    if len(table) == 0:
        return np.full(len(keys), -1, dtype=np.int64)
    order = np.argsort(table)
    found = order[np.minimum(np.searchsorted(table, keys, sorter=order), len(table) - 1)]
    return np.where(table[found] == keys, found, -1)


def _side_keys(tri: np.ndarray, n: int) -> np.ndarray:
    return _keys(np.vstack([tri[:, [0, 1]], tri[:, [1, 2]], tri[:, [2, 0]]]), n)


def _missing(tri: np.ndarray, segs: np.ndarray, n: int) -> np.ndarray:
    return ~np.isin(_keys(segs, n), _side_keys(tri, n))


def _inside(dl: Delaunay, pts: np.ndarray, segs: np.ndarray, region) -> np.ndarray:
    """Which simplices lie in the region: the triangulation is cut into pieces along the edge sides (all of
    them sides of it), and a piece is inside when most of its triangles' centroids are (a centroid alone can
    fall on the wrong side of a flattened arc in a thin triangle along the edge)."""
    simp, nbr = dl.simplices, dl.neighbors
    n = len(pts)
    walls = np.sort(segs, axis=1)
    wall_keys = walls[:, 0] * n + walls[:, 1]
    i = np.repeat(np.arange(len(simp)), 3)
    k = np.tile(np.arange(3), len(simp))
    j = nbr.ravel()
    a, b = simp[i, (k + 1) % 3], simp[i, (k + 2) % 3]
    keys = np.minimum(a, b) * n + np.maximum(a, b)
    link = (j >= 0) & ~np.isin(keys, wall_keys)
    graph = sp.coo_matrix((np.ones(int(link.sum())), (i[link], j[link])), shape=(len(simp), len(simp)))
    _, label = connected_components(graph, directed=False)
    cen = pts[simp].mean(axis=1)
    p = pts[simp]
    area = 0.5 * np.abs((p[:, 1, 0] - p[:, 0, 0]) * (p[:, 2, 1] - p[:, 0, 1])
                        - (p[:, 2, 0] - p[:, 0, 0]) * (p[:, 1, 1] - p[:, 0, 1]))
    # votes weighted by area: the flat slivers Qhull leaves along a straight stretch of the hull have centroids
    # on the edge, in or out by round-off, and must not carry their piece
    inside = np.bincount(label, weights=area * shapely.contains_xy(region, cen[:, 0], cen[:, 1]))
    total = np.bincount(label, weights=area)
    keep = (inside > 0.5 * total) & (total > 1e-9 * float(region.area))
    return keep[label]


def _stray_sides(tri: np.ndarray, segs: np.ndarray, n: int) -> int:
    """Triangle sides used by one triangle only that are not edge sides (a hole in the mesh)."""
    uniq, counts = np.unique(_side_keys(tri, n), return_counts=True)
    once = uniq[counts == 1]
    edge = np.unique(_keys(segs, n))
    return len(np.setdiff1d(once, edge, assume_unique=True)) + len(np.setdiff1d(edge, once, assume_unique=True))


def _fill(region, size: Callable, bpts: np.ndarray) -> np.ndarray:
    """Quadtree cell centres inside the region, cells no larger than h, kept EDGE_GAP h from the edges."""
    x0, y0, x1, y1 = region.bounds
    cell = max(x1 - x0, y1 - y0)
    nx, ny = int(np.ceil((x1 - x0) / cell)), int(np.ceil((y1 - y0) / cell))
    gx, gy = np.meshgrid(x0 + (np.arange(nx) + 0.5) * cell, y0 + (np.arange(ny) + 0.5) * cell)
    centres = np.column_stack([gx.ravel(), gy.ravel()])
    out = []
    h_min = float(np.min(size(bpts)))
    while len(centres):
        h = size(centres)
        split = (h < cell / np.sqrt(2.0)) & (cell > 0.5 * h_min)
        done = centres[~split]
        out.append(done)
        q = cell / 4.0
        kids = centres[split]
        # a cell clear of the region (inside a hole, say) has no centre in it at any depth: not split further
        half = 0.5 * cell
        kids = kids[shapely.intersects(shapely.box(kids[:, 0] - half, kids[:, 1] - half, kids[:, 0] + half,
                                                   kids[:, 1] + half), region)]
        centres = np.vstack([kids + [-q, -q], kids + [q, -q], kids + [-q, q], kids + [q, q]])
        cell /= 2.0
    pts = np.vstack(out)
    pts = pts[shapely.contains_xy(region, pts[:, 0], pts[:, 1])]
    if len(pts) == 0:
        return pts
    d = cKDTree(bpts).query(pts)[0]
    return pts[d > EDGE_GAP * size(pts)]


def _smooth(region, bpts: np.ndarray, inside: np.ndarray, size: Callable, n_fixed: int,
            rounds: int = SMOOTHING_ROUNDS) -> np.ndarray:
    """Laplacian smoothing of the inside points (the last ``n_fixed`` stay): each moves to the mean of its
    Delaunay neighbours, unless that takes it out of the region or too near an edge."""
    if len(inside) == 0:
        return inside
    nb = len(bpts)
    movable = np.arange(len(inside)) < len(inside) - n_fixed
    tree = cKDTree(bpts)
    for _ in range(rounds):
        pts = np.vstack([bpts, inside])
        simp = Delaunay(pts).simplices
        cen = pts[simp].mean(axis=1)
        simp = simp[shapely.contains_xy(region, cen[:, 0], cen[:, 1])]
        i = np.concatenate([simp[:, 0], simp[:, 1], simp[:, 2], simp[:, 1], simp[:, 2], simp[:, 0]])
        j = np.concatenate([simp[:, 1], simp[:, 2], simp[:, 0], simp[:, 0], simp[:, 1], simp[:, 2]])
        total = np.column_stack([np.bincount(i, weights=pts[j, 0], minlength=len(pts)),
                                 np.bincount(i, weights=pts[j, 1], minlength=len(pts))])
        count = np.bincount(i, minlength=len(pts)).astype(float)
        new = total[nb:] / np.maximum(count[nb:], 1.0)[:, None]
        ok = movable & (count[nb:] > 0) & shapely.contains_xy(region, new[:, 0], new[:, 1])
        ok &= tree.query(new)[0] > EDGE_GAP * size(new)
        inside = np.where(ok[:, None], new, inside)
    return inside
