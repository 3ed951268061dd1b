"""The same plane-stress panel solved by scikit-fem, an independent finite-element library (test-only)."""

import numpy as np
import skfem
from shapely.geometry import box
from skfem.models.elasticity import linear_elasticity

from toolkit.analysis import analyze
from toolkit.fe.grid import Grid
from toolkit.model import Material, Panel, PointLoad, Region, Support


E, NU, T = 11500.0, 0.3, 90.0


def skfem_solve(grid: Grid, elements: np.ndarray, fixed_nodes_xy, point_forces):
    """Plane stress on our grid's quads (kept elements only) with scikit-fem; returns nodal (ux, uy) by our node."""
    used = np.unique(grid.enodes[elements])
    renumber = -np.ones(grid.n_nodes, dtype=int)
    renumber[used] = np.arange(used.size)
    mesh = skfem.MeshQuad(grid.node_xy[used].T.copy(), renumber[grid.enodes[elements]].T.copy())
    basis = skfem.Basis(mesh, skfem.ElementVector(skfem.ElementQuad1()))
    # Plane-stress Lame parameters: lambda* = E nu / (1 - nu^2), mu = E / (2 (1 + nu)); thickness scales K.
    K = T * skfem.asm(linear_elasticity(E * NU / (1 - NU**2), E / (2 * (1 + NU))), basis)
    f = np.zeros(basis.N)
    nd = basis.nodal_dofs
    for node, (fx, fy) in point_forces:
        f[nd[0, renumber[node]]] += fx
        f[nd[1, renumber[node]]] += fy
    held = np.concatenate([nd[d, renumber[n]] for n, d in fixed_nodes_xy]).ravel()
    u = skfem.solve(*skfem.condense(K, f, D=held))
    out = np.zeros((grid.n_nodes, 2))
    out[used, 0] = u[nd[0]]
    out[used, 1] = u[nd[1]]
    return out


def test_panel_with_grid_aligned_opening_matches_scikit_fem():
    # A 600 x 200 mm panel, 30 x 10 grid, a 120 x 80 mm opening on grid lines (its elements empty, the nodes
    # inside it left out), clamped at the left edge, two point loads on nodes. Both codes use the same bilinear
    # quads on the same mesh, so the displacements agree to solver precision.
    opening = box(240.0, 60.0, 360.0, 140.0)
    panel = Panel(
        600.0, 200.0, T, Material(E, NU),
        openings=(Region(opening, "OPENING"),),
        supports=(Support(((0.0, 0.0), (0.0, 200.0)), "xy"),),
        loads=(PointLoad((600.0, 200.0), (0.0, -3000.0)), PointLoad((420.0, 100.0), (1500.0, -800.0))),
        element_size_mm=20.0,
    )
    result = analyze(panel)
    g = result.grid
    assert np.isin(result.fractions, [0.0, 1.0]).all() and (result.fractions == 0).sum() == 6 * 4
    left = np.flatnonzero(np.isclose(g.node_xy[:, 0], 0.0))
    node = lambda x, y: int(np.argmin(np.hypot(*(g.node_xy - [x, y]).T)))
    reference = skfem_solve(
        g, np.flatnonzero(result.active), [(left, 0), (left, 1)],
        [(node(600, 200), (0.0, -3000.0)), (node(420, 100), (1500.0, -800.0))],
    )
    ours = result.U[:, 0].reshape(-1, 2)
    assert np.abs(ours).max() > 0.01  # a real deflection, not a trivial zero field
    np.testing.assert_allclose(ours, reference, rtol=0, atol=1e-9 * np.abs(reference).max())
