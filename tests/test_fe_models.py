"""Small plane-stress models shared by the FE tests, built from the FE pieces directly."""

from __future__ import annotations

import numpy as np

from toolkit.fe.assembly import Assembler
from toolkit.fe.element import q4_shape, q4_stiffness
from toolkit.fe.grid import Grid
from toolkit.fe.solve import LinearSolver


def parabolic_shear_loads(grid: Grid, total_N: float, column: int | None = None) -> np.ndarray:
    """Consistent nodal y-forces of a parabolic shear distribution over the right end (x = width) of the grid.

    tau(y) = 6 P / h^3 * y (h - y) integrates to P over the depth; each element edge is integrated with a
    3-point Gauss rule, exact for the parabola times the linear shape functions.
    """
    h = grid.height_mm
    F = np.zeros(grid.n_dofs)
    gp, gw = np.polynomial.legendre.leggauss(3)
    for iy in range(grid.ny):
        e = iy * grid.nx + grid.nx - 1
        y = (iy + 0.5) * grid.dy + 0.5 * grid.dy * gp
        tau = 6.0 * total_N / h**3 * y * (h - y)
        n = q4_shape(np.ones_like(gp), gp)  # right edge: xi = +1
        f = (n * (tau * gw * 0.5 * grid.dy)[:, None]).sum(axis=0)
        nodes = grid.enodes[e]
        np.add.at(F, 2 * nodes + 1, f)
    return F


def solve_on_grid(grid: Grid, E: float, nu: float, t: float, fixed: np.ndarray, F: np.ndarray, scale=None):
    """Displacements and stiffness matrix for held dofs ``fixed`` and forces ``F`` (free = not held)."""
    K = Assembler(grid).matrix(q4_stiffness(grid.dx, grid.dy, E, nu, t), scale)
    free = ~fixed
    if scale is not None:
        free &= grid.active_dofs(np.asarray(scale) > 0)
    U = LinearSolver(K, free, grid=grid).solve(F)
    return U, K
