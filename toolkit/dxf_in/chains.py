"""Joining open pieces (lines, arcs, open polylines) into closed loops, within a stated tolerance.

Ends closer than the join tolerance are one vertex (placed at their mean); a closed gap wider than
``exact`` is reported. Lines that lie on top of each other are merged first, so a side drawn twice does not
look like a branch. Three or more ends at one vertex is a branch the reader cannot resolve.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import shapely
from scipy.spatial import cKDTree
from shapely.strtree import STRtree

from ..errors import LacunaError
from .pieces import Piece


@dataclass
class Joined:
    loops: list[Piece] = field(default_factory=list)
    open_chains: list[Piece] = field(default_factory=list)
    gaps_closed: list[tuple[float, np.ndarray]] = field(default_factory=list)  # (gap, position)
    merged: list[str] = field(default_factory=list)  # labels of pieces merged as duplicates


def join(pieces: list[Piece], tol: float, exact: float, where, fmt) -> Joined:
    """Closed pieces pass through; open ones are chained end to end into loops and leftover open chains.

    ``where(labels)`` builds the error location and ``fmt(point)`` prints a relative point in drawing units.
    """
    out = Joined()
    open_pieces = []
    for piece in pieces:
        if piece.closed:
            out.loops.append(piece)
        elif len(piece.points) >= 2:
            open_pieces.append(piece)
    open_pieces = _merge_duplicates(open_pieces, tol, out.merged)
    if not open_pieces:
        return out

    ends = np.array([p.points[[0, -1]] for p in open_pieces]).reshape(-1, 2)  # end k of piece i at 2i + k
    node = _cluster(ends, tol)
    count = np.bincount(node)
    for n in np.flatnonzero(count > 2):
        members = np.flatnonzero(node == n)
        labels = sorted({open_pieces[m // 2].label for m in members})
        raise LacunaError(
            f"{count[n]} pieces meet at {fmt(ends[members].mean(axis=0))}, so it is not clear which ones "
            "make the closed shape.",
            where=where(labels),
            hint="Trim the lines so that exactly two ends meet at every corner, or delete the extra ones.",
        )
    position = np.array([ends[node == n].mean(axis=0) for n in range(len(count))])
    for n in np.flatnonzero(count == 2):
        a, b = ends[node == n]
        gap = float(np.hypot(*(a - b)))
        if gap > exact:
            out.gaps_closed.append((gap, position[n]))

    at_node: dict[int, list[int]] = {}
    for m, n in enumerate(node):
        at_node.setdefault(int(n), []).append(m)
    used = np.zeros(len(open_pieces), dtype=bool)

    def follow(first_end: int) -> tuple[list[int], bool]:
        """Walk from end ``first_end`` through its piece and on; returns the ends entered by, and closure."""
        path, m = [], first_end
        while True:
            i = m // 2
            used[i] = True
            path.append(m)
            leave = m ^ 1
            others = [k for k in at_node[int(node[leave])] if k != leave]
            if not others:
                return path, False
            nxt = others[0]
            if nxt == first_end:
                return path, True
            if used[nxt // 2]:
                return path, False
            m = nxt

    for n, members in at_node.items():
        if len(members) == 1 and not used[members[0] // 2]:
            path, _ = follow(members[0])
            out.open_chains.append(_assemble(open_pieces, path, node, position, closed=False))
    for i in range(len(open_pieces)):
        if not used[i]:
            path, closed = follow(2 * i)
            out.loops.append(_assemble(open_pieces, path, node, position, closed=closed))
    return out


def _assemble(pieces: list[Piece], path: list[int], node, position, closed: bool) -> Piece:
    pts, bulges, kinds, handles = [], [], [], []
    for m in path:
        p = pieces[m // 2]
        q, b = p.points, p.bulges
        if m % 2:  # entered at its far end: run it backwards, arcs turning the other way
            q, b = q[::-1], -b[::-1]
        q = q.copy()
        q[0] = position[node[m]]
        q[-1] = position[node[m ^ 1]]
        pts.append(q[:-1])
        bulges.append(b)
        kinds += p.kinds
        handles += p.handles
    if not closed:
        pts.append(position[node[path[-1] ^ 1]][None, :])
    curved = any(pieces[m // 2].curved for m in path)
    return Piece(np.concatenate(pts), np.concatenate(bulges), closed, tuple(kinds), tuple(handles), curved)


def _cluster(points: np.ndarray, tol: float) -> np.ndarray:
    """Label points so that any two closer than ``tol`` (directly or through others) share a label."""
    parent = np.arange(len(points))

    def root(i):
        while parent[i] != i:
            parent[i] = parent[parent[i]]
            i = parent[i]
        return i

    for i, j in cKDTree(points).query_pairs(tol):
        parent[root(i)] = root(j)
    roots = np.array([root(i) for i in range(len(points))])
    _, labels = np.unique(roots, return_inverse=True)
    return labels


def _merge_duplicates(pieces: list[Piece], tol: float, merged: list[str]) -> list[Piece]:
    """Merge straight single-segment pieces lying on one line and overlapping; drop repeated arcs."""
    pieces = list(pieces)
    while True:
        pair = _first_mergeable(pieces, tol)
        if pair is None:
            return pieces
        i, j, both = pair
        merged.extend([pieces[i].label, pieces[j].label])
        pieces[i] = both
        del pieces[j]


def _first_mergeable(pieces: list[Piece], tol: float):
    # Only pieces whose chords come within the tolerance of each other can be duplicates: an R-tree of
    # the chords keeps this linear in the number of pieces instead of testing every pair.
    single = [k for k, p in enumerate(pieces) if len(p.points) == 2 and not p.curved]
    if len(single) < 2:
        return None
    chords = shapely.linestrings(np.array([pieces[k].points for k in single]))
    a_idx, b_idx = STRtree(chords).query(chords, predicate="dwithin", distance=tol)
    for a, b in sorted(zip(a_idx.tolist(), b_idx.tolist())):
        if a < b:
            both = _merge_pair(pieces[single[a]], pieces[single[b]], tol)
            if both is not None:
                return single[a], single[b], both
    return None


def _merge_pair(a: Piece, b: Piece, tol: float) -> Piece | None:
    if len(a.points) != 2 or len(b.points) != 2 or a.curved or b.curved:
        return None
    ba, bb = float(a.bulges[0]), float(b.bulges[0])
    if ba != 0.0 or bb != 0.0:
        same = np.allclose(a.points, b.points, atol=tol) and abs(ba - bb) < 1e-6
        flipped = np.allclose(a.points, b.points[::-1], atol=tol) and abs(ba + bb) < 1e-6
        if same or flipped:
            return Piece(a.points, a.bulges, False, a.kinds + b.kinds, a.handles + b.handles)
        return None
    p0, p1 = a.points
    d = p1 - p0
    length = float(np.hypot(*d))
    if length == 0.0:
        return None
    u = d / length
    rel = b.points - p0
    off = np.abs(rel[:, 0] * u[1] - rel[:, 1] * u[0])
    if np.any(off > tol):
        return None
    s = rel @ u
    overlap = min(length, s.max()) - max(0.0, s.min())
    if overlap <= tol:
        return None  # lines that only meet end to end are chained, not merged
    lo, hi = min(0.0, s.min()), max(length, s.max())
    pts = np.array([p0 + lo * u, p0 + hi * u])
    return Piece(pts, np.zeros(1), False, a.kinds + b.kinds, a.handles + b.handles)
