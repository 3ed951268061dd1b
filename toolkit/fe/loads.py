"""Consistent nodal forces for point loads, line loads and self-weight, one column per load case."""

from __future__ import annotations

import itertools
import math

import numpy as np
import shapely
from shapely.geometry import LineString, Point

from ..errors import LacunaError
from ..model import LineLoad, Panel, PointLoad
from .boundary import where_text
from .element import q4_shape
from .fractions import solid_fractions
from .grid import Grid

G_MM_S2 = 9810.0  # gravity 9.81 m/s2 in mm/s2: standard gravity (9.80665) rounded, as loading codes take it
GAUSS_2 = np.array([-1.0, 1.0]) / math.sqrt(3.0)


def locate(grid: Grid, x: float, y: float, fractions: np.ndarray | None = None):
    """(element, xi, eta) of a point; on a line between elements the one with more material is taken."""
    tol = 1e-9 * max(grid.dx, grid.dy)
    fx, fy = x / grid.dx, y / grid.dy
    ixs = {min(max(math.floor(fx), 0), grid.nx - 1)}
    iys = {min(max(math.floor(fy), 0), grid.ny - 1)}
    # A point on a grid line (within rounding) belongs to the elements on both sides.
    if abs(fx - round(fx)) * grid.dx < tol:
        ixs |= {min(max(round(fx) - k, 0), grid.nx - 1) for k in (0, 1)}
    if abs(fy - round(fy)) * grid.dy < tol:
        iys |= {min(max(round(fy) - k, 0), grid.ny - 1) for k in (0, 1)}
    choices = [iy * grid.nx + ix for iy in sorted(iys) for ix in sorted(ixs)]
    e = choices[0] if fractions is None else max(choices, key=lambda k: fractions[k])
    ix, iy = e % grid.nx, e // grid.nx
    xi = 2.0 * (x - (ix + 0.5) * grid.dx) / grid.dx
    eta = 2.0 * (y - (iy + 0.5) * grid.dy) / grid.dy
    return e, float(np.clip(xi, -1.0, 1.0)), float(np.clip(eta, -1.0, 1.0))


def _add_point_force(F, grid, column, x, y, force, fractions):
    e, xi, eta = locate(grid, x, y, fractions)
    n = q4_shape(xi, eta)
    nodes = grid.enodes[e]
    np.add.at(F[:, column], 2 * nodes, n * force[0])
    np.add.at(F[:, column], 2 * nodes + 1, n * force[1])


def _line_pieces(grid: Grid, start, end) -> np.ndarray:
    """Parameters 0 = t0 < t1 < ... = 1 where the segment crosses grid lines."""
    (x0, y0), (x1, y1) = start, end
    ts = [0.0, 1.0]
    for a, b, h, n in ((x0, x1, grid.dx, grid.nx), (y0, y1, grid.dy, grid.ny)):
        if b != a:
            k = np.arange(n + 1) * h
            t = (k - a) / (b - a)
            ts.extend(t[(t > 0) & (t < 1)])
    ts = np.unique(ts)
    return ts[np.concatenate([[True], np.diff(ts) > 1e-12])]


def load_matrix(
    grid: Grid,
    panel: Panel,
    fractions: np.ndarray | None = None,
    solid=None,
) -> np.ndarray:
    """(n_dofs, n_cases) nodal forces in N, columns in ``panel.cases`` order.

    Point loads go to the nodes of the element holding them by its shape functions; line loads are split at
    element edges and integrated with two Gauss points per piece (exact for the bilinear element); self-weight,
    when asked for, acts toward local -y on every element in proportion to its solid fraction, in every case.
    """
    solid = panel.solid if solid is None else solid
    if fractions is None:
        fractions = solid_fractions(grid, solid)
    shapely.prepare(solid)
    frame = panel.frame
    tol = 1e-6 * max(grid.width_mm, grid.height_mm)
    cases = panel.cases
    F = np.zeros((grid.n_dofs, len(cases)))
    for load in panel.loads:
        column = cases.index(load.case)
        if isinstance(load, PointLoad):
            if shapely.distance(solid, Point(load.at)) > tol:
                raise LacunaError(
                    f"the point load at {where_text(load.at, frame)} is off the panel "
                    "(outside its outline or inside an opening).",
                    where=load.source or f"load at {where_text(load.at, frame)}",
                    hint="Move the load's point of application onto the panel's material.",
                )
            _add_point_force(F, grid, column, load.at[0], load.at[1], np.asarray(load.force_N, float), fractions)
        elif isinstance(load, LineLoad):
            _add_line_load(F, grid, column, load, solid, fractions, tol, frame)
        else:
            raise LacunaError(f"unknown kind of load: {load!r}.")
    weight = element_weights(grid, panel, fractions)
    if weight is not None:
        # A uniform body force on a rectangle goes a quarter to each corner node (consistent loads).
        nodal = np.zeros(grid.n_nodes)
        np.add.at(nodal, grid.enodes.ravel(), np.repeat(weight / 4.0, 4))
        F[1::2, :] -= nodal[:, None]
    return F


def weight_per_area(panel: Panel) -> float:
    """The panel's own weight per mm2 of its face, N/mm2 (density g thickness)."""
    # kg/m3 -> kg/mm3 is 1e-9; N = kg mm/s2 / 1000.
    return panel.material.density_kg_m3 * 1e-9 * G_MM_S2 / 1000.0 * panel.thickness_mm


def element_weights(grid: Grid, panel: Panel, fractions: np.ndarray) -> np.ndarray | None:
    """Each element's own weight in N (ne,), toward local -y, in proportion to its solid fraction; None when
    the panel carries no self-weight. LacunaError when self-weight is asked for without a density."""
    if not panel.self_weight:
        return None
    if not panel.material.density_kg_m3:
        raise LacunaError(
            "self-weight was asked for but the material has no density.",
            where="[material] density_kg_m3",
            hint="Give the density in kg/m3, or leave self-weight off.",
        )
    return weight_per_area(panel) * grid.element_area * np.asarray(fractions)


def weight_lifted(F: np.ndarray, grid: Grid, lift: np.ndarray) -> np.ndarray:
    """The loads ``F`` with ``lift`` (N per element, ne) of the elements' weight taken off again, a quarter at each
    of an element's nodes (a new array; ``F`` itself where nothing is lifted)."""
    if not lift.any():
        return F
    nodal = np.bincount(grid.enodes.ravel(), weights=np.repeat(0.25 * lift, 4), minlength=grid.n_nodes)
    out = F.copy()
    out[1::2, :] += nodal[:, None]
    return out


def weight_work(weight: np.ndarray, Ue: np.ndarray, case_weights: np.ndarray) -> np.ndarray:
    """Per element, -u_e . g_e summed over the cases with ``case_weights``: ``weight`` (ne,) the elements' weight in
    N, a quarter down at each node, ``Ue`` (ne, 8, ncases) their displacements (x, y per node)."""
    return (0.25 * weight) * (Ue[:, 1::2, :].sum(axis=1) @ case_weights)


def _add_line_load(F, grid, column, load: LineLoad, solid, fractions, tol, frame):
    name = load.source or f"line load from {where_text(load.start, frame)} to {where_text(load.end, frame)}"
    if load.length_mm <= 0:
        raise LacunaError("the line load has zero length.", where=name,
                          hint="Give two different end points, or use a point load.")
    segment = LineString([load.start, load.end])
    outside = shapely.difference(segment, shapely.buffer(solid, tol))
    if shapely.length(outside) > tol:
        bad = shapely.get_coordinates(outside)[0]
        raise LacunaError(
            f"the line load from {where_text(load.start, frame)} to {where_text(load.end, frame)} runs off the "
            f"panel (outside its outline or across an opening), for example at {where_text(bad, frame)}.",
            where=name,
            hint="Keep line loads on the panel's material, for example along its top edge.",
        )
    start = np.asarray(load.start, float)
    direction = np.asarray(load.end, float) - start
    q = np.asarray(load.intensity_N_per_mm, float)
    ts = _line_pieces(grid, load.start, load.end)
    for t0, t1 in itertools.pairwise(ts):
        mid = start + 0.5 * (t0 + t1) * direction
        e, _, _ = locate(grid, mid[0], mid[1], fractions)
        ix, iy = e % grid.nx, e // grid.nx
        half = 0.5 * (t1 - t0) * load.length_mm  # Gauss weights 1 on [-1, 1] times the Jacobian
        for g in GAUSS_2:
            p = start + (0.5 * (t0 + t1) + 0.5 * (t1 - t0) * g) * direction
            xi = 2.0 * (p[0] - (ix + 0.5) * grid.dx) / grid.dx
            eta = 2.0 * (p[1] - (iy + 0.5) * grid.dy) / grid.dy
            n = q4_shape(xi, eta) * half
            nodes = grid.enodes[e]
            np.add.at(F[:, column], 2 * nodes, n * q[0])
            np.add.at(F[:, column], 2 * nodes + 1, n * q[1])
