"""Plane-stress beams against Timoshenko beam theory, with equilibrium of every model."""

import numpy as np
import pytest
from test_fe_models import parabolic_shear_loads, solve_on_grid

from toolkit.fe.grid import Grid
from toolkit.fe.loads import load_matrix
from toolkit.model import LineLoad, Material, Panel

E, NU, T = 11500.0, 0.3, 90.0
G = E / (2 * (1 + NU))
K_SHEAR = 5 / 6  # Timoshenko's shear coefficient for a rectangle (docs/references.md)


def check_equilibrium(K, U, F, fixed):
    """Reactions (K U - F at held dofs) balance the applied loads in x and y to 1e-9 relative."""
    R = K @ U - F
    assert np.abs(R[~fixed]).max() <= 1e-9 * np.abs(F).max()
    for d in (0, 1):
        assert abs(R[d::2][fixed[d::2]].sum() + F[d::2].sum()) <= 1e-9 * np.abs(F).sum()


@pytest.mark.parametrize("ratio", [5, 10])
def test_cantilever_tip_deflection(ratio):
    # Timoshenko beam: tip deflection P L^3 / (3 E I) + P L / (k G A), k = 5/6 (docs/references.md; Timoshenko &
    # Goodier art. 21 for the plane-stress solution). End condition reproduced here: the whole root section is
    # held in x and y (fully built in); the end load is a parabolic shear over the tip section, as in art. 21.
    # Tolerance 1.5 %: the fully built-in root is a little stiffer than the beam-theory clamp (seen here: 0.4 %
    # under at L/h = 10, 0.6 % under at L/h = 5, 16 elements through the depth).
    h, P = 400.0, -10000.0
    L = ratio * h
    g = Grid(16 * ratio, 16, L / (16 * ratio), h / 16)
    root = np.arange(g.ny + 1) * (g.nx + 1)
    fixed = np.zeros(g.n_dofs, bool)
    fixed[2 * root] = fixed[2 * root + 1] = True
    F = parabolic_shear_loads(g, P)
    assert F.sum() == pytest.approx(P, rel=1e-13)
    U, K = solve_on_grid(g, E, NU, T, fixed, F)
    I, A = T * h**3 / 12, T * h
    expected = P * L**3 / (3 * E * I) + P * L / (K_SHEAR * G * A)
    tip = U[2 * ((g.ny // 2) * (g.nx + 1) + g.nx) + 1]
    assert tip == pytest.approx(expected, rel=0.015)
    check_equilibrium(K, U, F, fixed)


def test_simply_supported_deep_beam_under_uniform_load():
    # Timoshenko beam, uniform load w on span L: mid-span deflection 5 w L^4 / (384 E I) + w L^2 / (8 k G A)
    # (Roark's Formulas for Stress and Strain, table 8.1, plus the Timoshenko shear term; docs/references.md).
    # Deep beam, L/h = 4. Supports as beam theory has them: each end section held in y over its depth (the
    # shear reaction spread over the section), x held at mid-span on the neutral axis (symmetry). Deflection
    # read on the neutral axis, away from the load's local squeeze of the top edge. Seen here: 1.5 % under.
    h, w = 500.0, -5.0
    L = 4 * h
    g = Grid(64, 16, L / 64, h / 16)
    panel = Panel(L, h, T, Material(E, NU), loads=(LineLoad((0.0, h), (L, h), (0.0, w)),))
    F = load_matrix(g, panel)[:, 0]
    assert F[1::2].sum() == pytest.approx(w * L, rel=1e-13)
    ends = np.arange(g.ny + 1) * (g.nx + 1)
    centre = (g.ny // 2) * (g.nx + 1) + g.nx // 2
    fixed = np.zeros(g.n_dofs, bool)
    fixed[2 * ends + 1] = fixed[2 * (ends + g.nx) + 1] = True
    fixed[2 * centre] = True
    U, K = solve_on_grid(g, E, NU, T, fixed, F)
    I, A = T * h**3 / 12, T * h
    expected = 5 * w * L**4 / (384 * E * I) + w * L**2 / (8 * K_SHEAR * G * A)
    assert U[2 * centre + 1] == pytest.approx(expected, rel=0.03)
    check_equilibrium(K, U, F, fixed)


def test_cantilever_compliance_rises_on_refinement():
    # Displacement-based elements are too stiff on coarse grids and approach the exact value from below in
    # magnitude as the grid is refined (a property of the minimum potential energy principle, any FE text).
    h, L, P = 400.0, 2000.0, -10000.0
    tips = []
    for n in (2, 4, 8):
        g = Grid(5 * n, n, L / (5 * n), h / n)
        root = np.arange(g.ny + 1) * (g.nx + 1)
        fixed = np.zeros(g.n_dofs, bool)
        fixed[2 * root] = fixed[2 * root + 1] = True
        F = parabolic_shear_loads(g, P)
        U, _ = solve_on_grid(g, E, NU, T, fixed, F)
        tips.append(abs(U @ F))  # compliance of nested grids
    assert tips[0] < tips[1] < tips[2]
