"""Peak stress at the edge of every void to make, from a local model of each void's neighbourhood.

The panel's grid cuts a void by area fraction, so its stresses next to a void are not edge stresses. For each
void a square window round it is meshed on its own with six-node triangles that follow every edge in the window
(the void, its neighbours, drawn openings, the panel's outline), graded from small elements at the void's edge
to about the grid's size at the window's sides (``fe.trimesh``, ``fe.tri6``). The window's sides inside the
panel are moved as the panel's grid analysis moved them (the grid displacements, interpolated); the panel's
own edges in the window are free, or loaded and held as the job loads and holds them. docs/edge-stress.md says
what each figure means and how it was verified.

Figures per void, for the load case with the largest edge stress:

- ``peak_MPa``: the largest stress along the void's edge, as a magnitude (``sense`` says tension or
  compression). The edge is free, so the stress there acts along the edge and is the principal stress; it is
  taken as the component along the edge (at a sharp corner, the larger principal stress).
- ``nominal_MPa``: the solid panel's stress at the void: the stress tensor of the panel without voids averaged
  over the void's area (for a stress varying linearly, the stress at the void's centroid), as the magnitude of
  its larger principal stress.
- ``kt = peak / nominal``.
- ``webs``: the narrowest section between the void and each neighbouring void or opening in the window, with
  the average stress across it and the largest principal stress along it.

Pure numerics on model values: no files, no printing.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import shapely
import shapely.errors
from scipy.spatial import cKDTree
from shapely.geometry import LineString, Point, box

from .fe import tri6
from .errors import LacunaError
from .fe.grid import Grid
from .fe.loads import G_MM_S2
from .fe.solve import solve_spd
from .fe.stress import principal_stresses
from .fe.trimesh import MeshError, TriMesh, graded_mesh
from .model import LineLoad, Panel, PointLoad, Void
from .overlap import own

WEB_TOO_THIN = "web below one element of the local model"
# Element counts that set the local model's size field at ``refine = 1`` (docs/edge-stress.md, verification):
EDGE_ELEMENTS = 64          # elements round a void's perimeter (before the curvature rule)
ARC_STEP_RAD = math.pi / 16  # at most this much of an arc's turn per element
CORNER_SHRINK = 8.0         # a sharp corner's elements are this much smaller than the edge's
WEB_ELEMENTS = 3.0          # at least this many elements across a web
GROWTH = 0.25               # the element size grows by this much per unit distance from an edge
FEW_SOURCES = 8             # a size group of no more sources than this is searched without a k-d tree
# The window reaches this many void radii (smallest enclosing circle) beyond the void, and at least
# ``WINDOW_CELLS`` grid elements (the grid's field near the smeared void is rough within a few elements).
WINDOW_RADII = 1.5
# The local elements along the window's sides, in grid elements: a quadratic side's three nodes sample the grid's
# field about one grid element apart.
GRID_CELLS = 2.0
WINDOW_CELLS = 4.0

TAG_FREE, TAG_CUT, TAG_VOID = 0, 1, 2
# Below this share of the peak the nominal stress gives no Kt (a Kt over 100 says only that nothing was there).
KT_FLOOR = 0.01
# Edge nodes this close to a void's true outline are moved onto it: the flattened shapes are within 0.01 mm of
# the arcs for the voids lacuna makes and 0.1 mm for polygons read from a drawing; a web this thin is far below
# one element of the local model, so no other edge comes this near.
SNAP_REACH_MM = 0.25
# The outlines a local model is meshed from are put on a grid of this pitch first. The mesh is not a continuous
# function of its input (a side holds floor(length / size) sources, the triangulation breaks ties): a void whose
# coordinates differ in their last bits (another processor's BLAS upstream) was meshed otherwise and its peak
# moved by half a per cent. A thousandth of a millimetre is far below any drawing's accuracy.
STEADY_MM = 1e-3


@dataclass(frozen=True)
class Web:
    """The narrowest section between a void and a neighbour (local mm, MPa)."""

    to: str                      # the neighbour's id, or "opening <handle>"
    width_mm: float
    where: tuple[float, float]   # middle of the section
    mean_stress_MPa: float | None = None   # the stress across the section, averaged over it (signed)
    max_stress_MPa: float | None = None    # the largest principal stress along the section (magnitude)
    note: str = ""


@dataclass(frozen=True)
class EdgeStress:
    """The local model's figures for one void (local mm, MPa); ``None`` where ``note`` says why not."""

    void_id: str
    peak_MPa: float | None
    sense: str                     # "tension" or "compression"
    peak_at: tuple[float, float] | None
    case: str
    nominal_MPa: float | None
    kt: float | None
    webs: tuple[Web, ...] = ()
    element_mm: float = 0.0        # element size along the void's edge
    elements: int = 0
    note: str = ""

    @property
    def least_web(self) -> Web | None:
        return min(self.webs, key=lambda w: w.width_mm) if self.webs else None


# --- the pieces, usable on their own (the verification tests build plates with them) --------------------------


def size_field(src_xy: np.ndarray, src_h: np.ndarray, h_max: float, growth: float = GROWTH):
    """h(x) = min(h_max, min over sources of h_s + growth * |x - s|), sources binned by size (within 12 %)."""
    src_xy = np.asarray(src_xy, dtype=float).reshape(-1, 2)
    src_h = np.asarray(src_h, dtype=float).ravel()
    groups = []
    if len(src_h):
        edges = np.exp(np.arange(np.log(src_h.min()), np.log(src_h.max()) + 0.12, 0.12))
        which = np.clip(np.searchsorted(edges, src_h, side="right") - 1, 0, len(edges) - 1)
        for b in np.unique(which):   # finest first
            sel = which == b
            # a k-d tree pays for many sources; a handful (the webs' middles) are measured directly
            near = cKDTree(src_xy[sel]) if sel.sum() > FEW_SOURCES else src_xy[sel]
            groups.append((near, float(src_h[sel].min())))

    def h(x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float).reshape(-1, 2)
        out = np.full(len(x), float(h_max))
        for near, hs in groups:
            # a group can lower h only where h is above its size, and only through sources nearer than
            # (h - h_s) / growth: the search is bounded by that (the same minimum, fewer tree visits)
            open_ = np.flatnonzero(out > hs)
            if len(open_) == 0:
                continue
            if isinstance(near, np.ndarray):
                diff = x[open_, None, :] - near[None, :, :]
                d = np.sqrt(np.min(diff[..., 0] ** 2 + diff[..., 1] ** 2, axis=1))
            else:
                reach = (out[open_] - hs) / growth if growth > 0 else np.full(len(open_), np.inf)
                d = near.query(x[open_], distance_upper_bound=float(reach.max()) * (1 + 1e-12))[0]
            out[open_] = np.minimum(out[open_], hs + growth * d)
        return out

    return h


def solve(mesh: TriMesh, E: float, nu: float, thickness: float, held: np.ndarray, values: np.ndarray,
          F: np.ndarray) -> np.ndarray:
    """Displacements (2n, ncases) with ``held`` dofs at ``values`` (2n, ncases) under forces ``F`` (2n, ncases).

    Only the free dofs' block of the stiffness is assembled; the held dofs' pull on the free ones is summed
    element by element (k_e v_e). Raises RuntimeError when the held dofs leave a rigid motion free."""
    ke = tri6.element_stiffness(mesh.points, mesh.tri, E, nu, thickness)
    dofs = tri6.element_dofs(mesh.tri)
    free = ~held
    m = int(free.sum())
    number = np.full(len(held), -1, dtype=np.int64)
    number[free] = np.arange(m)
    fe = number[dofs]                                              # (ne, 12): free numbers, -1 where held
    rhs = F[free].copy()
    touch = np.flatnonzero(np.any(fe < 0, axis=1))                 # the elements with a held dof
    if len(touch):
        ve = np.where(held[dofs[touch]][..., None], values[dofs[touch]], 0.0)    # (k, 12, nc)
        pull = (ke[touch] @ ve).reshape(-1, values.shape[1])
        rows = fe[touch].ravel()
        on = rows >= 0
        for c in range(values.shape[1]):
            rhs[:, c] -= np.bincount(rows[on], weights=pull[on, c], minlength=m)
    # the free-free entries: all of an element with no held dof (most), the free part of the others
    inner = np.ones(len(fe), dtype=bool)
    inner[touch] = False
    outer = fe[touch]
    keep = (outer >= 0)[:, :, None] & (outer >= 0)[:, None, :]
    data = np.concatenate([ke[inner].ravel(), ke[touch][keep]])
    r = np.concatenate([np.repeat(fe[inner], 12, axis=1).ravel(), np.broadcast_to(outer[:, :, None], keep.shape)[keep]])
    c = np.concatenate([np.tile(fe[inner], (1, 12)).ravel(), np.broadcast_to(outer[:, None, :], keep.shape)[keep]])
    Kff = sp.csc_matrix((data, (r, c)), shape=(m, m))
    # The mesh is one piece: K is positive definite on the free dofs when the held ones stop every rigid motion
    # (the motions' values at the held dofs have rank 3, measured against their largest singular value).
    node, axis = np.divmod(np.flatnonzero(held), 2)
    xy = mesh.points[node] - mesh.points.mean(axis=0)
    rigid = np.column_stack([axis == 0, axis == 1, np.where(axis == 0, -xy[:, 1], xy[:, 0])]).astype(float)
    sv = np.linalg.svd(rigid, compute_uv=False) if len(rigid) >= 3 else np.zeros(1)
    if not sv[-1] > 1e-9 * sv[0]:
        raise RuntimeError("the local model is not held against every rigid motion")
    # K is symmetric positive definite there: one factorisation on a minimum-degree order (fe.solve.solve_spd)
    U = np.where(held[:, None], values, 0.0)
    try:
        U[free] = solve_spd(Kff, rhs)
    except LacunaError as error:
        raise RuntimeError(error.message) from error
    return U


def nodal_average(mesh: TriMesh, U: np.ndarray, E: float, nu: float) -> np.ndarray:
    """(n, 3, ncases) stresses at the nodes, averaged over the elements meeting there."""
    per = tri6.nodal_stresses(mesh.points, mesh.tri, U, E, nu)    # (ne, 6, 3, nc)
    at = mesh.tri.ravel()
    flat = per.reshape(len(at), -1)
    total = np.stack([np.bincount(at, weights=flat[:, k], minlength=mesh.n_nodes) for k in range(flat.shape[1])],
                     axis=1).reshape((mesh.n_nodes,) + per.shape[2:])
    count = np.bincount(at, minlength=mesh.n_nodes).astype(float)
    return total / count[:, None, None]


def edge_peak(mesh: TriMesh, stress: np.ndarray, sides: np.ndarray):
    """The stress along the edge at the nodes of the boundary sides ``sides`` (indices into ``mesh.edges``).

    Returns (nodes, values (k, ncases)): the component along the edge (at a corner node, the principal stress of
    larger magnitude), signed."""
    e = mesh.edges[sides]
    chord = mesh.points[e[:, 1]] - mesh.points[e[:, 0]]
    chord /= np.linalg.norm(chord, axis=1)[:, None]
    tangent = np.zeros((mesh.n_nodes, 2))
    for k in range(3):
        t = chord.copy()
        if k < 2:   # a corner node of a side: add both sides' directions (sign kept along the loop)
            np.add.at(tangent, e[:, k], t)
        else:
            tangent[e[:, 2]] = t
    nodes = np.unique(e.ravel())
    t = tangent[nodes] / np.linalg.norm(tangent[nodes], axis=1)[:, None]
    s = stress[nodes]                                              # (k, 3, nc)
    along = (s[:, 0] * t[:, 0:1] ** 2 + s[:, 1] * t[:, 1:2] ** 2 + 2 * s[:, 2] * t[:, 0:1] * t[:, 1:2])
    s1, s2, _ = principal_stresses(np.moveaxis(s, 1, -1))
    principal = np.where(np.abs(s1) >= np.abs(s2), s1, s2)
    corner = mesh.corner[nodes]
    along[corner] = principal[corner]
    return nodes, along


# --- per void ------------------------------------------------------------------------------------------------


def edge_stresses(panel: Panel, voids, final, solid, *, refine: float = 1.0, work=None
                  ) -> tuple[EdgeStress, ...]:
    """The local model's figures for each of ``voids`` (model.Void): ``final`` is the grid analysis of the
    panel with the voids cut, ``solid`` the one without them (for the nominal stress). With ``work`` (an open
    ``overlap.Overlap``) the models are shared among its threads; the figures are the same."""
    tasks = edge_stress_tasks(panel, voids, final, solid, refine=refine,
                              threaded=work is not None and work.threads > 1)
    if work is None:
        return tuple(task() for task in tasks)
    return tuple(work.map(lambda task: task(), tasks))


def edge_stress_tasks(panel: Panel, voids, final, solid, *, refine: float = 1.0, threaded: bool = False) -> list:
    """One callable per void, giving its ``EdgeStress``, for a caller that runs them as it likes (the pipeline,
    beside its other checks). ``threaded``: each works on its own copy of the geometry (``overlap.own``), made
    here, before any of them runs."""
    voids = tuple(voids)

    def task(i: int):
        p, vs = own((panel, voids)) if threaded else (panel, voids)
        # neighbours by position, not by id: a layout's ids are not trusted to be unique here
        return lambda: _edge_stress_of(p, vs, i, final, solid, refine)

    return [task(i) for i in range(len(voids))]


@dataclass(frozen=True, eq=False)
class GridFigures:
    """What a local model reads of a grid analysis (``analysis.Analysis``): the grid's size, the cases, the
    displacements, the elements with material and their stresses. A few megabytes to pickle at 300 x 100
    elements, where the analysis with its grid's cached index arrays is some tens."""

    grid: Grid
    cases: tuple[str, ...]
    U: np.ndarray
    active: np.ndarray
    stresses: np.ndarray

    @classmethod
    def of(cls, analysis) -> GridFigures:
        g = analysis.grid
        return cls(Grid(g.nx, g.ny, g.dx, g.dy), tuple(analysis.cases), analysis.U, analysis.active,
                   analysis.stresses)


def _edge_stress_of(panel: Panel, voids: tuple, i: int, final, solid, refine: float) -> EdgeStress:
    """``voids[i]``'s figures, its neighbours the other voids (by position): a module-level function of
    picklable arguments, for the helper process."""
    return void_edge_stress(panel, voids[i], voids[:i] + voids[i + 1:], final, solid, refine=refine)


def edge_stresses_shared(panel: Panel, voids, final, solid, helper, *, refine: float = 1.0
                         ) -> tuple[EdgeStress, ...]:
    """``edge_stresses`` with the voids shared between this thread and the helper process (``helper.share_out``:
    each takes the next void when it is free, this one from the first, the helper from the last). The figures
    are the same: each local model is a pure function of the same coordinates and arrays."""
    from .helper import share_out

    voids = tuple(voids)
    weight = _model_weights(voids, final.grid)
    final, solid = GridFigures.of(final), (GridFigures.of(solid) if solid is not None else None)
    tasks = {i: (panel, voids, i, final, solid, refine) for i in range(len(voids))}
    done = share_out(helper, _edge_stress_of, tasks, cost=lambda i: weight[i])
    return tuple(done[i] for i in range(len(voids)))


def _window_margin(radius, grid):
    """How far a void's local model reaches beyond the circle round it (mm; ``radius`` a number or an array)."""
    return np.maximum(WINDOW_RADII * radius, WINDOW_CELLS * math.hypot(grid.dx, grid.dy))


def _model_weights(voids: tuple, grid) -> list[float]:
    """A rough measure of each void's local model's work, for sharing them out (the largest first, so that the
    last to finish are small): the voids in its window, each an edge to mesh, plus three for its own edge and the
    window's (measured on two panels of the benchmarks: 0.02-0.23 s a model, rising with them)."""
    if not voids:
        return []
    shapes = np.array([v.shape for v in voids], dtype=object)
    radius = shapely.minimum_bounding_radius(shapes)
    centre = shapely.get_coordinates(shapely.centroid(shapely.minimum_bounding_circle(shapes)))
    reach = radius + _window_margin(radius, grid)
    windows = shapely.box(centre[:, 0] - reach, centre[:, 1] - reach, centre[:, 0] + reach, centre[:, 1] + reach)
    hits = shapely.STRtree(shapes).query(windows, predicate="intersects")[0]
    return (np.bincount(hits, minlength=len(voids)) + 2.0).tolist()


def edge_snapper(void: Void, reach: float):
    """``snap(points)``: points within ``reach`` of the void's true edge moved onto it (straight sides and arcs
    from its (x, y, bulge) outline; a bore's circle); other points unchanged."""
    if not void.outline and void.family != "bore":
        return lambda points: np.asarray(points, dtype=float)   # only the flattened shape is known
    if void.family == "bore" and not void.outline:
        c = np.asarray(void.centre, dtype=float)
        r = 0.5 * void.size_mm
        lines, arcs = np.zeros((0, 2, 2)), np.array([[c[0], c[1], r, 0.0, 2.0 * math.pi]])
    else:
        v = np.asarray(void.outline, dtype=float)
        p0, p1, bulge = v[:, :2], np.roll(v[:, :2], -1, axis=0), v[:, 2]
        straight = np.abs(bulge) < 1e-12
        lines = np.stack([p0[straight], p1[straight]], axis=1)
        arcs = []
        for a, b, bu in zip(p0[~straight], p1[~straight], bulge[~straight]):
            theta = 4.0 * math.atan(bu)
            chord = b - a
            length = float(np.linalg.norm(chord))
            left = np.array([-chord[1], chord[0]]) / length
            centre = 0.5 * (a + b) + left * (0.5 * length / math.tan(0.5 * theta))
            r = 0.5 * length / abs(math.sin(0.5 * theta))
            start = math.atan2(*(a - centre)[::-1])
            # sweep counter-clockwise from start; a clockwise arc is the same arc swept from its other end
            if theta < 0:
                start, theta = math.atan2(*(b - centre)[::-1]), -theta
            arcs.append([centre[0], centre[1], r, start, theta])
        arcs = np.asarray(arcs, dtype=float).reshape(-1, 5)

    # a box holding every side and every arc's whole circle: only points near it can be within reach
    ends = np.vstack([lines.reshape(-1, 2), arcs[:, :2] - arcs[:, 2:3], arcs[:, :2] + arcs[:, 2:3]])
    lo, hi = ends.min(axis=0) - reach, ends.max(axis=0) + reach

    def snap(points: np.ndarray) -> np.ndarray:
        points = np.asarray(points, dtype=float)
        near = np.flatnonzero(np.all((points >= lo) & (points <= hi), axis=1))
        p = points[near]
        best = np.full(len(p), np.inf)
        out = p.copy()
        for a, b in lines:
            d = b - a
            t = np.clip((p - a) @ d / (d @ d), 0.0, 1.0)
            q = a + t[:, None] * d
            dist = np.linalg.norm(p - q, axis=1)
            take = dist < best
            best[take], out[take] = dist[take], q[take]
        for cx, cy, r, start, sweep in arcs:
            rel = p - [cx, cy]
            ang = np.mod(np.arctan2(rel[:, 1], rel[:, 0]) - start, 2.0 * math.pi)
            inside = ang <= sweep + 1e-12
            q = np.array([cx, cy]) + r * rel / np.maximum(np.linalg.norm(rel, axis=1), 1e-300)[:, None]
            dist = np.where(inside, np.abs(np.linalg.norm(rel, axis=1) - r), np.inf)
            take = dist < best
            best[take], out[take] = dist[take], q[take]
        moved = points.copy()
        moved[near] = np.where((best <= reach)[:, None], out, p)
        return moved

    return snap


def _interp_grid(analysis, xy: np.ndarray) -> np.ndarray:
    """The grid's displacements (k, 2, ncases) at points, by the bilinear shape functions of their element."""
    g = analysis.grid
    ix = np.clip(np.floor(xy[:, 0] / g.dx).astype(int), 0, g.nx - 1)
    iy = np.clip(np.floor(xy[:, 1] / g.dy).astype(int), 0, g.ny - 1)
    e = iy * g.nx + ix
    xi = 2.0 * (xy[:, 0] - (ix + 0.5) * g.dx) / g.dx
    eta = 2.0 * (xy[:, 1] - (iy + 0.5) * g.dy) / g.dy
    from .fe.element import q4_shape

    n = q4_shape(xi, eta)                                          # (k, 4)
    dofs = g.edof[e]                                               # (k, 8)
    u = analysis.U[dofs]                                           # (k, 8, nc)
    return np.stack([np.einsum("ka,kac->kc", n, u[:, 0::2]), np.einsum("ka,kac->kc", n, u[:, 1::2])], axis=1)


def _steady(shape):
    """``shape`` with its coordinates on the ``STEADY_MM`` grid (the same mesh for the same drawn void)."""
    return shapely.set_precision(shape, STEADY_MM)


def _outline_sources(shape, n_edge: float, arc_step: float, refine: float, corner_shrink: float = CORNER_SHRINK):
    """Sources of the size field along one void's or opening's edge: points and their sizes, and the size at
    its straight parts. A sharp corner's size is the edge's over ``corner_shrink``."""
    ring = np.asarray(shape.exterior.coords, dtype=float)[:-1]
    perimeter = float(shape.exterior.length)
    h_edge = perimeter / n_edge / refine
    prev, nxt = np.roll(ring, 1, axis=0), np.roll(ring, -1, axis=0)
    a, b = np.linalg.norm(ring - prev, axis=1), np.linalg.norm(nxt - ring, axis=1)
    cross = (ring - prev)[:, 0] * (nxt - ring)[:, 1] - (ring - prev)[:, 1] * (nxt - ring)[:, 0]
    cos = np.sum((ring - prev) * (nxt - ring), axis=1) / (a * b)
    turn = np.arccos(np.clip(cos, -1.0, 1.0))
    c = np.linalg.norm(nxt - prev, axis=1)
    # radius of the circle through three neighbouring vertices: where the edge is an arc, the arc's radius
    radius = a * b * c / np.maximum(2.0 * np.abs(cross), 1e-300)
    h = np.full(len(ring), h_edge)
    arc = np.degrees(turn) <= 20.0
    h[arc] = np.minimum(h_edge, radius[arc] * arc_step / refine)
    h[~arc] = h_edge / corner_shrink
    # sample long straight sides too, so their size holds all along them
    pts, hs = [ring], [h]
    for i in range(len(ring)):
        j = (i + 1) % len(ring)
        n = int(b[i] // h_edge)
        if n > 1:
            t = np.arange(1, n)[:, None] / n
            pts.append(ring[i] + t * (ring[j] - ring[i]))
            hs.append(np.full(n - 1, h_edge))
    return np.vstack(pts), np.concatenate(hs), h_edge, bool(np.any(~arc))


def void_edge_stress(panel: Panel, void: Void, others, final, solid, *, refine: float = 1.0) -> EdgeStress:
    """The local model of one void among the ``others`` (see the module's text). A model that cannot be made
    or solved gives no figure and says why in ``note``; it never stops the job."""
    failed = dict(void_id=void.id, peak_MPa=None, sense="", peak_at=None, case="", nominal_MPa=None, kt=None)
    if void.shape.geom_type != "Polygon" or void.shape.is_empty:
        return EdgeStress(**failed, note="the void's outline is not one closed shape, so no local model was made; "
                                         "no edge stress is given.")
    try:
        return _local_model(panel, void, others, final, solid, refine)
    except (MeshError, ValueError, RuntimeError, np.linalg.LinAlgError, shapely.errors.GEOSException) as error:
        return EdgeStress(**failed, note=f"the local model failed ({error}); no edge stress is given.")


def _local_model(panel: Panel, void: Void, others, final, solid, refine: float) -> EdgeStress:
    shape = _steady(void.shape)
    circle = shapely.minimum_bounding_circle(shape)
    centre = np.asarray(circle.centroid.coords[0])
    radius = float(shapely.minimum_bounding_radius(shape))
    g = final.grid
    margin = _window_margin(radius, g)
    window = box(*(centre - radius - margin), *(centre + radius + margin))
    src_xy, src_h, h_edge, sharp = _outline_sources(shape, EDGE_ELEMENTS, ARC_STEP_RAD, refine)
    cases = final.cases

    # neighbours in the window: other voids and drawn openings
    neighbours = [(v.id, _steady(v.shape)) for v in others if shapely.intersects(v.shape, window)]
    neighbours += [(f"opening {o.handle or o.layer}", o.shape) for o in panel.openings
                   if shapely.intersects(o.shape, window)]
    webs_thin = []
    outline = shapely.boundary(panel.envelope)
    for name, other in neighbours + [("the panel's edge", outline)]:
        width = float(shapely.distance(shape, other))
        if width < h_edge:
            webs_thin.append((name, width, other))
    if webs_thin:
        webs = tuple(Web(to=name, width_mm=w, where=_middle(shape, other), note=WEB_TOO_THIN)
                     for name, w, other in webs_thin)
        names = ", ".join(f"{w.to} ({w.width_mm:.3g} mm)" for w in webs)
        return EdgeStress(void_id=void.id, peak_MPa=None, sense="", peak_at=None, case="", nominal_MPa=None,
                          kt=None, webs=webs, element_mm=h_edge,
                          note=f"{WEB_TOO_THIN} ({h_edge:.3g} mm): the web to {names} is too thin for the edge "
                               "stress to be found; no figure is given.")

    # the region: window inside the panel's material, less every void (and opening) in it
    holes = [shape] + [o for _, o in neighbours]
    region = shapely.difference(shapely.intersection(window, panel.solid), shapely.union_all(holes))
    if region.geom_type != "Polygon":
        parts = [p for p in getattr(region, "geoms", []) if p.geom_type == "Polygon"]
        region = max(parts, key=lambda p: shapely.distance(p, shape) == 0 and p.area) if parts else region
    if region.is_empty or region.geom_type != "Polygon" or not shapely.within(shape, panel.solid):
        return EdgeStress(void_id=void.id, peak_MPa=None, sense="", peak_at=None, case="", nominal_MPa=None,
                          kt=None, element_mm=h_edge, note="the void is not wholly inside the panel's material, so "
                                                           "no local model was made; no edge stress is given.")
    # sources: this void, its neighbours (coarser), the webs to them and to the panel's edge
    sources_xy, sources_h = [src_xy], [src_h]
    cover = float(shapely.distance(shape, outline))
    if cover < radius:
        sources_xy.append(np.asarray(_middle(shape, outline)).reshape(1, 2))
        sources_h.append(np.array([cover / WEB_ELEMENTS]))
    for name, other in neighbours:
        if other.geom_type != "Polygon":
            continue
        # a neighbour's sharp corners are not refined: the figures are taken on this void's edge, and the
        # neighbour's own local model refines them (refining them here too doubled the elements of chamfered
        # voids' models and moved their peaks by no more than other changes of the mesh do, docs/edge-stress.md)
        oxy, oh, _, _ = _outline_sources(other, EDGE_ELEMENTS / 2.0, 2.0 * ARC_STEP_RAD, refine, corner_shrink=1.0)
        sources_xy.append(oxy)
        sources_h.append(oh)
        width = float(shapely.distance(shape, other))
        sources_xy.append(np.asarray(_middle(shape, other)).reshape(1, 2))
        sources_h.append(np.array([width / WEB_ELEMENTS]))
    # The window's sides sample the grid's field: their elements at most GRID_CELLS grid elements (a side's three
    # nodes then fall about a grid element apart); inside, the size grows from the edges up to a third of the reach.
    h_side = max(h_edge, GRID_CELLS * max(g.dx, g.dy) / refine)
    sides = shapely.intersection(shapely.boundary(window), shapely.buffer(panel.solid, 1e-9))
    step = 0.5 * h_side
    for line in getattr(sides, "geoms", [sides]):
        if line.is_empty or line.length <= 0:
            continue
        t = np.arange(0.0, line.length + step, step)
        sources_xy.append(shapely.get_coordinates(shapely.line_interpolate_point(line, t)))
        sources_h.append(np.full(len(t), h_side))
    h_max = max(h_side, margin / 3.0 / refine)
    size = size_field(np.vstack(sources_xy), np.concatenate(sources_h), h_max)

    tol = 1e-6 * max(panel.width_mm, panel.height_mm)
    frame_edges = shapely.boundary(window)
    fixed_lines = shapely.union_all([shapely.boundary(panel.solid)] + [shapely.boundary(h) for h in holes])

    void_edge = shapely.boundary(shape)

    def tag(mids: np.ndarray) -> np.ndarray:
        on_window = shapely.distance(frame_edges, shapely.points(mids)) < tol
        on_material_edge = shapely.distance(fixed_lines, shapely.points(mids)) < tol
        on_void = shapely.distance(void_edge, shapely.points(mids)) < SNAP_REACH_MM
        return np.where(on_void, TAG_VOID, np.where(on_window & ~on_material_edge, TAG_CUT, TAG_FREE))

    breaks, seeds = [], []
    reach = shapely.buffer(window, 1.0)
    for load in panel.loads:
        if isinstance(load, PointLoad):
            seeds.append(load.at)
            breaks.append(load.at)
        else:
            breaks += [load.start, load.end]
    for s in panel.supports:
        breaks += list(s.points)
        if s.is_point:
            seeds.append(s.points[0])
    near = lambda pts: [p for p in pts if shapely.contains_xy(reach, *p)]  # noqa: E731
    try:
        mesh = graded_mesh(region, size, tag=tag, breaks=near(breaks), seeds=near(seeds), tol=1e-6 * radius,
                           snap=edge_snapper(void, SNAP_REACH_MM))
    except MeshError as error:
        return EdgeStress(void_id=void.id, peak_MPa=None, sense="", peak_at=None, case="", nominal_MPa=None,
                          kt=None, element_mm=h_edge, note=f"the local model could not be meshed ({error}); "
                                                           "no edge stress is given.")

    mat, t = panel.material, panel.thickness_mm
    n = mesh.n_nodes
    held = np.zeros(2 * n, dtype=bool)
    values = np.zeros((2 * n, len(cases)))
    cut = mesh.edges[mesh.edge_tag == TAG_CUT]
    cut_nodes = np.unique(cut.ravel())
    if len(cut_nodes):
        u = _interp_grid(final, mesh.points[cut_nodes])
        held[2 * cut_nodes] = held[2 * cut_nodes + 1] = True
        values[2 * cut_nodes] = u[:, 0]
        values[2 * cut_nodes + 1] = u[:, 1]
    F = _local_loads(panel, mesh, region, cases, size)
    _hold_supports(panel, mesh, held, values, tol)
    try:
        U = solve(mesh, mat.E_MPa, mat.nu, t, held, values, F)
    except RuntimeError as error:   # SuperLU: a part of the window that nothing holds
        return EdgeStress(void_id=void.id, peak_MPa=None, sense="", peak_at=None, case="", nominal_MPa=None,
                          kt=None, element_mm=h_edge, elements=len(mesh.tri),
                          note=f"the local model could not be solved ({error}); no edge stress is given.")
    stress = nodal_average(mesh, U, mat.E_MPa, mat.nu)

    nodes, along = edge_peak(mesh, stress, np.flatnonzero(mesh.edge_tag == TAG_VOID))
    k, c = np.unravel_index(int(np.argmax(np.abs(along))), along.shape)
    peak = float(along[k, c])
    nominal = _nominal(solid, shape)[:, c] if solid is not None else None
    nominal_c = float(nominal[0]) if nominal is not None else None
    scale = float(np.max(np.abs(along))) if along.size else 0.0
    kt = abs(peak) / nominal_c if nominal_c is not None and nominal_c >= KT_FLOOR * scale else None
    webs = tuple(_web(mesh, U, mat, name, shape, other, c) for name, other in neighbours)
    note = ""
    if sharp:
        note = (f"sharp corners (a chamfer leaves two where it cuts one): in elasticity the stress at a sharp corner "
                f"has no finite peak; the figure is the local model's with elements of {h_edge / CORNER_SHRINK:.2g} mm "
                'at the corner and grows as they shrink (a radius gives a finite one: [voids] corner = "radius").')
    if nominal_c is not None and kt is None:
        note = (note + " " if note else "") + (f"the solid panel is hardly stressed at this void (nominal stress "
                                               f"under {KT_FLOOR:.0%} of the peak): no Kt.")
    return EdgeStress(void_id=void.id, peak_MPa=abs(peak), sense="tension" if peak >= 0 else "compression",
                      peak_at=tuple(float(v) for v in mesh.points[nodes[k]]), case=cases[c],
                      nominal_MPa=nominal_c, kt=kt, webs=webs, element_mm=h_edge, elements=len(mesh.tri),
                      note=note)


def _middle(a, b) -> tuple[float, float]:
    line = shapely.shortest_line(a, b)
    p = np.asarray(line.coords, dtype=float)
    return tuple(float(v) for v in p.mean(axis=0))


def _nominal(solid, shape) -> np.ndarray:
    """(1, ncases) the solid panel's stress at the void: the larger principal stress, as a magnitude, of the
    stress tensor averaged over the void's area."""
    g = solid.grid
    x0, y0, x1, y1 = shape.bounds
    ix = np.arange(max(0, int(x0 // g.dx)), min(g.nx, int(x1 // g.dx) + 1))
    iy = np.arange(max(0, int(y0 // g.dy)), min(g.ny, int(y1 // g.dy) + 1))
    ex, ey = np.meshgrid(ix, iy)
    elements = (ey * g.nx + ex).ravel()
    cells = shapely.box(ex.ravel() * g.dx, ey.ravel() * g.dy, (ex.ravel() + 1) * g.dx, (ey.ravel() + 1) * g.dy)
    # cells wholly inside the void count whole; only those its edge crosses are cut
    shapely.prepare(shape)
    w = np.where(shapely.contains(shape, cells), g.dx * g.dy, 0.0)
    cut = np.flatnonzero((w == 0.0) & shapely.intersects(shape, cells))
    w[cut] = shapely.area(shapely.intersection(cells[cut], shape))
    w = w * solid.active[elements]
    if w.sum() <= 0:
        elements = np.array([g.element_at(*shape.centroid.coords[0])])
        w = np.ones(1)
    mean = np.einsum("e,ceS->cS", w / w.sum(), solid.stresses[:, elements])
    s1, s2, _ = principal_stresses(mean)
    return np.maximum(np.abs(s1), np.abs(s2))[None, :]


def _web(mesh, U, mat, name, shape, other, case) -> Web:
    line = np.asarray(shapely.shortest_line(shape, other).coords, dtype=float)
    p, q = line[0], line[1]
    width = float(np.linalg.norm(q - p))
    where = tuple(float(v) for v in 0.5 * (p + q))
    t = np.linspace(0.02, 0.98, 25)
    pts = p + t[:, None] * (q - p)
    element, nat = mesh.locate(pts)
    ok = element >= 0
    if ok.sum() < 3:
        return Web(to=name, width_mm=width, where=where, note="the section leaves the local model's window.")
    s = tri6.stresses_at(mesh.points, mesh.tri, element[ok], nat[ok], U[:, case:case + 1], mat.E_MPa, mat.nu)[..., 0]
    d = (q - p) / width
    nrm = np.array([-d[1], d[0]])
    across = s[:, 0] * nrm[0] ** 2 + s[:, 1] * nrm[1] ** 2 + 2 * s[:, 2] * nrm[0] * nrm[1]
    s1, s2, _ = principal_stresses(s)
    return Web(to=name, width_mm=width, where=where, mean_stress_MPa=float(np.trapezoid(across, t[ok]) /
                                                                          (t[ok][-1] - t[ok][0])),
               max_stress_MPa=float(np.max(np.maximum(np.abs(s1), np.abs(s2)))))


def _local_loads(panel: Panel, mesh: TriMesh, region, cases, size) -> np.ndarray:
    """(2n, ncases) the job's loads that fall in the window (to the nearest nodes; resultants kept) and
    self-weight (consistent)."""
    F = np.zeros((2 * mesh.n_nodes, len(cases)))
    tree = cKDTree(mesh.points)
    near = shapely.buffer(region, 1e-6 * max(panel.width_mm, panel.height_mm))
    for load in panel.loads:
        c = cases.index(load.case)
        if isinstance(load, PointLoad):
            if shapely.intersects(near, Point(load.at)):
                node = tree.query(load.at)[1]
                F[2 * node: 2 * node + 2, c] += load.force_N
        elif isinstance(load, LineLoad):
            piece = shapely.intersection(LineString([load.start, load.end]), near)
            for seg in getattr(piece, "geoms", [piece]):
                if seg.is_empty or seg.geom_type != "LineString" or seg.length <= 0:
                    continue
                xy = np.asarray(seg.coords, dtype=float)
                h = float(np.min(size(xy)))
                k = max(2, int(np.ceil(seg.length / (0.25 * h))))
                s = (np.arange(k) + 0.5) / k
                pts = xy[0] + s[:, None] * (xy[-1] - xy[0])
                nodes = tree.query(pts)[1]
                q = np.asarray(load.intensity_N_per_mm, dtype=float) * seg.length / k
                np.add.at(F[:, c], 2 * nodes, q[0])
                np.add.at(F[:, c], 2 * nodes + 1, q[1])
    if panel.self_weight and panel.material.density_kg_m3:
        weight = panel.material.density_kg_m3 * 1e-9 * G_MM_S2 / 1000.0
        F += tri6.body_load(mesh.points, mesh.tri, np.array([0.0, -weight]), panel.thickness_mm)[:, None]
    return F


def _hold_supports(panel: Panel, mesh: TriMesh, held: np.ndarray, values: np.ndarray, tol: float) -> None:
    """Supports in the window hold their nodes where the panel's grid holds them (at zero)."""
    for s in panel.supports:
        if s.is_point:
            d, node = cKDTree(mesh.points).query(s.points[0])
            nodes = np.array([node]) if d < tol * 1e3 else np.array([], dtype=int)
        else:
            line = LineString(s.points)
            x0, y0, x1, y1 = line.bounds
            p = mesh.points
            near = np.flatnonzero((p[:, 0] >= x0 - tol * 10) & (p[:, 0] <= x1 + tol * 10)
                                  & (p[:, 1] >= y0 - tol * 10) & (p[:, 1] <= y1 + tol * 10))
            d = shapely.distance(line, shapely.points(p[near]))
            nodes = near[d < tol * 10]
        for axis, letter in enumerate("xy"):
            if letter in s.fix and len(nodes):
                held[2 * nodes + axis] = True
                values[2 * nodes + axis] = 0.0


def edge_violations(results, voids, limit_MPa: float):
    """The voids whose edge stress is above ``limit_MPa`` (``rules.check.Violation``, rule "max_edge_stress",
    measured and required in MPa), and a warning for each void the local model gave no figure for."""
    from .rules.check import Violation

    handles = {v.id: v.handle for v in voids}
    broken, unchecked = [], []
    for r in results:
        if r.peak_MPa is None:
            unchecked.append(f"{r.void_id}: no edge stress ({r.note.split(':')[0]}), so [rules] max_edge_stress_MPa "
                             "is not checked there.")
        elif r.peak_MPa > limit_MPa:
            kt = f", Kt {r.kt:.2f}" if r.kt is not None else ""
            broken.append(Violation(
                rule="max_edge_stress", where=r.peak_at, measured=r.peak_MPa, required=limit_MPa,
                handles=tuple(h for h in [handles.get(r.void_id)] if h), void_ids=(r.void_id,),
                message=f"{r.void_id}: {r.peak_MPa:.3g} MPa ({r.sense}, load case {r.case}{kt}) at its edge, above "
                        f"the {limit_MPa:g} MPa allowed (local model of the void).",
            ))
    return tuple(broken), tuple(unchecked)


def edge_json(panel: Panel, e) -> dict:
    """A void's edge-stress figures (CONTRACT.md: peak_stress_MPa, nominal_stress_MPa, kt), positions and
    lengths in the drawing's frame and unit; None where the local model gave no figure (``edge_note`` says why)."""
    f = panel.frame
    xy = lambda p: [float(c) for c in f.to_drawing(np.asarray(p, dtype=float))]  # noqa: E731
    if e is None:
        return {"peak_stress_MPa": None, "nominal_stress_MPa": None, "kt": None,
                "edge_note": "no local model was run for this void."}
    return {
        "peak_stress_MPa": e.peak_MPa,
        "nominal_stress_MPa": e.nominal_MPa,
        "kt": e.kt,
        "peak_stress_sense": e.sense,
        "peak_stress_at": xy(e.peak_at) if e.peak_at is not None else None,
        "peak_stress_case": e.case,
        "edge_element": f.length_to_drawing(e.element_mm),
        "webs": [{"to": w.to, "width": f.length_to_drawing(w.width_mm), "where": xy(w.where),
                  "mean_stress_MPa": w.mean_stress_MPa, "max_stress_MPa": w.max_stress_MPa, "note": w.note}
                 for w in sorted(e.webs, key=lambda w: w.width_mm)],
        "edge_note": e.note,
    }
