"""Supports on the grid, and the check that they hold every part of the panel before anything is solved."""

from __future__ import annotations

import numpy as np
import shapely
import scipy.sparse as sp
from scipy.sparse.csgraph import connected_components
from shapely.geometry import LineString, Point

from ..errors import LacunaError
from ..model import Frame, Support
from .grid import Grid


def where_text(xy, frame: Frame | None = None) -> str:
    """A local point (mm) as a drafter reads it: in drawing coordinates and unit when a frame is given."""
    xy = np.asarray(xy, dtype=float)
    unit = "mm"
    if frame is not None:
        xy, unit = frame.to_drawing(xy), frame.unit
    # Round away round-off (1e-14 read as 0) before the 6 significant digits a drafter reads.
    x, y = np.round(xy, 6) + 0.0
    return f"({x:.6g}, {y:.6g}) {unit}"


def _support_name(support: Support, frame: Frame | None) -> str:
    if support.source:
        return support.source
    if support.is_point:
        return f"support at {where_text(support.points[0], frame)}"
    return f"support from {where_text(support.points[0], frame)} to {where_text(support.points[1], frame)}"


def fixed_dofs(
    grid: Grid,
    supports,
    solid=None,
    active_nodes: np.ndarray | None = None,
    frame: Frame | None = None,
) -> np.ndarray:
    """(n_dofs,) True where a support holds the dof.

    A point support holds the nearest node carrying material; a segment support holds every such node within
    half an element of the segment, which must lie on the outline of ``solid`` (an opening's edge counts).
    """
    solid = solid if solid is not None else shapely.box(0.0, 0.0, grid.width_mm, grid.height_mm)
    outline = shapely.boundary(solid)
    shapely.prepare(solid)
    tol = 0.5 * max(grid.dx, grid.dy)
    band = 0.5 * min(grid.dx, grid.dy) * (1.0 + 1e-9)
    usable = np.flatnonzero(active_nodes) if active_nodes is not None else np.arange(grid.n_nodes)
    if usable.size == 0:
        raise LacunaError("the panel has no material on the grid to support.")
    xy = grid.node_xy[usable]
    fixed = np.zeros(grid.n_dofs, dtype=bool)
    for support in supports:
        name = _support_name(support, frame)
        if support.is_point:
            p = Point(support.points[0])
            if shapely.distance(solid, p) > tol:
                raise LacunaError(
                    f"the support point {where_text(support.points[0], frame)} is off the panel "
                    "(outside its outline or inside an opening).",
                    where=name,
                    hint="Move the point onto the panel's material, on its outline where it bears.",
                )
            nodes = usable[[_nearest(xy, p)]]
        else:
            segment = LineString(support.points)
            if segment.length == 0:
                raise LacunaError("the support segment has zero length.", where=name,
                                  hint="Give two different end points, or a single point with `at`.")
            if not shapely.buffer(outline, tol).covers(segment):
                raise LacunaError(
                    f"the support from {where_text(support.points[0], frame)} to "
                    f"{where_text(support.points[1], frame)} does not lie on the panel's outline "
                    f"(allowed gap: half an element, {tol:.3g} mm).",
                    where=name,
                    hint="Draw the support along an edge of the panel or of an opening, or use a point support.",
                )
            near = _within(xy, segment, band)
            if near.size:
                nodes = usable[near]
            else:
                nodes = usable[[_nearest(xy, segment.interpolate(0.5, True))]]
        if "x" in support.fix:
            fixed[2 * nodes] = True
        if "y" in support.fix:
            fixed[2 * nodes + 1] = True
    return fixed


# Node searches measure with GEOS (shapely) as before, but only on the nodes a numpy bound leaves in: every node of
# a 300 x 100 grid made into a point and measured cost 30-80 ms a support. The bound keeps a margin far above the
# round-off of either distance, so the nodes found are the same.
_MARGIN = 1e-9


def _within(xy: np.ndarray, segment: LineString, band: float) -> np.ndarray:
    """Indices (ascending) of the points ``xy`` within ``band`` of ``segment``."""
    (x0, y0), (x1, y1) = segment.coords[0], segment.coords[-1]
    pad = band * (1.0 + _MARGIN) + _MARGIN
    box = ((xy[:, 0] >= min(x0, x1) - pad) & (xy[:, 0] <= max(x0, x1) + pad)
           & (xy[:, 1] >= min(y0, y1) - pad) & (xy[:, 1] <= max(y0, y1) + pad))
    near = np.flatnonzero(box)
    return near[shapely.distance(shapely.points(xy[near]), segment) <= band]


def _nearest(xy: np.ndarray, p: Point) -> int:
    """Index of the point of ``xy`` nearest ``p`` (the first of equals), as GEOS measures."""
    d2 = np.sum((xy - np.array(p.coords[0])) ** 2, axis=1)
    least = float(np.sqrt(d2.min()))
    near = np.flatnonzero(np.sqrt(d2) <= least * (1.0 + _MARGIN) + _MARGIN)
    return int(near[np.argmin(shapely.distance(shapely.points(xy[near]), p))])


def element_parts(grid: Grid, active_elements: np.ndarray) -> tuple[np.ndarray, int]:
    """(label of each element, number of parts): the active elements joined through shared edges (not corners)
    numbered 1, 2, ... in the order of each part's first element (row by row from the bottom), 0 elsewhere."""
    active = np.asarray(active_elements, dtype=bool).reshape(grid.ny, grid.nx)
    number = np.arange(grid.n_elements).reshape(grid.ny, grid.nx)
    across, up = active[:, :-1] & active[:, 1:], active[:-1, :] & active[1:, :]
    rows = np.concatenate([number[:, :-1][across], number[:-1, :][up]])
    cols = np.concatenate([number[:, 1:][across], number[1:, :][up]])
    graph = sp.coo_matrix((np.ones(len(rows), dtype=np.int8), (rows, cols)), shape=(grid.n_elements,) * 2)
    # each component is numbered by its lowest element, so the active ones keep that order once renumbered
    n, component = connected_components(graph, directed=False)
    flat = active.ravel()
    used = np.zeros(n, dtype=bool)
    used[component[flat]] = True
    number_of = np.cumsum(used)  # 1, 2, ... for the components of active elements, in their order
    labels = np.zeros(grid.n_elements, dtype=np.int64)
    labels[flat] = number_of[component[flat]]
    return labels, int(used.sum())


def check_mechanism(
    grid: Grid, fixed: np.ndarray, active_elements: np.ndarray | None = None, frame: Frame | None = None
) -> None:
    """Raise a LacunaError, in words, if supports leave any part of the panel free to move as a rigid body.

    Each part (elements joined through shared edges; parts touching only at a corner count as separate) must
    be held against sliding in x, sliding in y and rotating. Checked on the supports alone, before solving.
    """
    if active_elements is None:
        active_elements = np.ones(grid.n_elements, dtype=bool)
    labels, n_parts = element_parts(grid, active_elements)
    if n_parts == 0:
        raise LacunaError("the panel has no material left to analyse.")
    problems: list[str] = []
    hints: list[str] = []
    for part in range(1, n_parts + 1):
        elements = np.flatnonzero(labels == part)
        nodes = np.unique(grid.enodes[elements])
        centres = grid.element_centres[elements]
        name = "the panel"
        if n_parts > 1:
            middle = centres[np.argmin(np.sum((centres - centres.mean(axis=0)) ** 2, axis=1))]
            name = f"the part of the panel around {where_text(middle, frame)}"
        motions = _free_motions(grid, nodes, fixed)
        if not motions:
            continue
        if motions == ["unsupported"]:
            problems.append(
                f"{name} has no support at all" + (" (openings cut it off from the others)" if n_parts > 1 else "")
            )
            hints.append("Hold it with at least one support fixed in x and y and a second one away from it.")
            continue
        words = []
        for kind, value in motions:
            if kind == "slide":
                words.append(f"slide in {value}")
                hints.append(f'Add a support that holds {value} (fix = "xy" or "{value}").')
            else:
                words.append(f"rotate about {where_text(value, frame)}")
                hints.append(
                    f"Add a support away from {where_text(value, frame)}, or hold an existing one in both x and y."
                )
        problems.append(f"{name} can " + " and ".join(words))
    if problems:
        raise LacunaError(
            "the supports do not hold the panel still: " + "; ".join(problems) + ".",
            where="[[support]]",
            hint=" ".join(dict.fromkeys(hints)),
        )


def _free_motions(grid: Grid, nodes: np.ndarray, fixed: np.ndarray):
    """Rigid motions of the nodes left free by the held dofs: [("slide", "x"|"y"), ("rotate", (x, y))]."""
    xy = grid.node_xy[nodes]
    held_x = fixed[2 * nodes]
    held_y = fixed[2 * nodes + 1]
    if not held_x.any() and not held_y.any():
        return ["unsupported"]
    centre = xy.mean(axis=0)
    size = max(float(np.ptp(xy[:, 0])), float(np.ptp(xy[:, 1])), grid.dx, grid.dy)
    rel = (xy - centre) / size
    # Each held dof is one row: the velocity of that dof in the motions (slide x, slide y, rotate).
    rows = np.vstack([
        np.column_stack([np.ones(held_x.sum()), np.zeros(held_x.sum()), -rel[held_x, 1]]),
        np.column_stack([np.zeros(held_y.sum()), np.ones(held_y.sum()), rel[held_y, 0]]),
    ])
    _, s, vt = np.linalg.svd(rows)
    s = np.concatenate([s, np.zeros(3 - s.size)])
    null = vt[s < 1e-9 * max(1.0, s.max())]
    if null.shape[0] == 0:
        return []
    motions = []
    if not held_x.any():
        motions.append(("slide", "x"))
    if not held_y.any():
        motions.append(("slide", "y"))
    if null.shape[0] > len(motions):
        v = null[np.argmax(np.abs(null[:, 2]))]
        a, b, _ = v / v[2]
        # Velocity a - c y', b + c x' (primed: relative, scaled) vanishes at the centre of rotation.
        point = centre + size * np.array([-b, a])
        held = held_x | held_y
        if not held_y.any():
            point[0] = xy[held, 0].mean()
        if not held_x.any():
            point[1] = xy[held, 1].mean()
        motions.append(("rotate", tuple(point)))
    return motions
