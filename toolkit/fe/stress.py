"""Stresses at element centres, von Mises and principal stresses (vectorised)."""

from __future__ import annotations

import numpy as np

from .element import plane_stress_D, q4_B
from .grid import Grid


def element_stresses(grid: Grid, U: np.ndarray, E: float, nu: float) -> np.ndarray:
    """Stresses (sx, sy, txy) in MPa at element centres of the material (not scaled by solid fraction).

    U (n_dofs,) gives (ne, 3); U (n_dofs, ncases) gives (ncases, ne, 3).
    """
    U = np.asarray(U, dtype=float)
    DB = plane_stress_D(E, nu) @ q4_B(grid.dx, grid.dy, 0.0, 0.0)
    if U.ndim == 1:
        return U[grid.edof] @ DB.T
    return np.einsum("ekc,sk->ces", U[grid.edof], DB)


def von_mises(stress: np.ndarray) -> np.ndarray:
    """Plane-stress von Mises stress from (..., 3) stresses (sx, sy, txy)."""
    sx, sy, txy = stress[..., 0], stress[..., 1], stress[..., 2]
    return np.sqrt(np.maximum(sx * sx - sx * sy + sy * sy + 3.0 * txy * txy, 0.0))


def principal_stresses(stress: np.ndarray):
    """(s1, s2, angle_rad) with s1 >= s2; angle of s1 from the x axis, counter-clockwise, in (-pi/2, pi/2]."""
    sx, sy, txy = stress[..., 0], stress[..., 1], stress[..., 2]
    mean = 0.5 * (sx + sy)
    radius = np.hypot(0.5 * (sx - sy), txy)
    angle = 0.5 * np.arctan2(2.0 * txy, sx - sy)
    return mean + radius, mean - radius, angle
