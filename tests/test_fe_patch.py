"""Patch tests: a constant stress state must be reproduced exactly (completeness of the element and mesh)."""

import numpy as np
import shapely
from test_fe_models import solve_on_grid

from toolkit.fe.assembly import Assembler
from toolkit.fe.element import plane_stress_D, q4_stiffness
from toolkit.fe.fractions import solid_fractions
from toolkit.fe.grid import Grid
from toolkit.fe.stress import element_stresses

E, NU, T = 11500.0, 0.3, 90.0


def test_linear_field_on_boundary_is_reproduced_inside():
    # Patch test (Irons; any FE text, e.g. Zienkiewicz & Taylor vol. 1 ch. 9): prescribe a linear displacement
    # field on the boundary nodes; the interior must follow it and the stress must be D * strain everywhere.
    g = Grid(6, 5, 40.0, 25.0)
    a, b, c, d = 2e-4, -1e-4, 3e-4, -5e-4
    xy = g.node_xy
    exact = np.zeros(g.n_dofs)
    exact[0::2] = a * xy[:, 0] + b * xy[:, 1] + 0.1
    exact[1::2] = c * xy[:, 0] + d * xy[:, 1] - 0.2
    on_edge = (np.isclose(xy[:, 0], 0) | np.isclose(xy[:, 0], g.width_mm)
               | np.isclose(xy[:, 1], 0) | np.isclose(xy[:, 1], g.height_mm))
    fixed = np.repeat(on_edge, 2)
    U, _ = solve_on_grid(g, E, NU, T, fixed, -(_stiffness(g) @ np.where(fixed, exact, 0.0)))
    U[fixed] = exact[fixed]
    np.testing.assert_allclose(U, exact, rtol=0, atol=1e-10 * np.abs(exact).max())
    expected = plane_stress_D(E, NU) @ [a, d, b + c]
    np.testing.assert_allclose(element_stresses(g, U, E, NU), np.tile(expected, (g.n_elements, 1)),
                               rtol=0, atol=1e-10 * np.abs(expected).max())


def _stiffness(g, scale=None):
    return Assembler(g).matrix(q4_stiffness(g.dx, g.dy, E, NU, T), scale)


def test_uniaxial_stress_with_a_cut_row_of_elements():
    # The solid's top edge runs through a row of elements (fraction 0.37 each). Under uniaxial stress along x the
    # top edge is traction free, so the exact field is u = eps x, v = -nu eps y (Hooke's law, plane stress):
    # pulling the right end by eps L must reproduce sx = E eps, sy = txy = 0 in every element, cut ones too.
    g = Grid(8, 4, 30.0, 20.0)
    top = 3 * g.dy + 0.37 * g.dy
    solid = shapely.box(0, 0, g.width_mm, top)
    fractions = solid_fractions(g, solid)
    assert np.allclose(fractions[3 * g.nx:], 0.37) and np.allclose(fractions[:3 * g.nx], 1.0)
    eps = 1e-4
    xy = g.node_xy
    fixed = np.zeros(g.n_dofs, bool)
    left, right = np.isclose(xy[:, 0], 0), np.isclose(xy[:, 0], g.width_mm)
    fixed[0::2] = left | right
    fixed[1] = True  # node 0 in y
    prescribed = np.zeros(g.n_dofs)
    prescribed[0::2][right] = eps * g.width_mm
    U, _ = solve_on_grid(g, E, NU, T, fixed, -(_stiffness(g, fractions) @ prescribed), scale=fractions)
    U[fixed] = prescribed[fixed]
    s = element_stresses(g, U, E, NU)
    np.testing.assert_allclose(s[:, 0], E * eps, rtol=1e-10)
    np.testing.assert_allclose(s[:, 1:], 0.0, atol=1e-10 * E * eps)
    np.testing.assert_allclose(U[1::2], -NU * eps * xy[:, 1], atol=1e-12)
