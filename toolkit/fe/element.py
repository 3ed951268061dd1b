"""The bilinear four-node rectangle in plane stress."""

from __future__ import annotations

import numpy as np

# Natural coordinates of the four nodes, counter-clockwise from the lower left (matches Grid.enodes).
NODE_XI = np.array([-1.0, 1.0, 1.0, -1.0])
NODE_ETA = np.array([-1.0, -1.0, 1.0, 1.0])
GAUSS_2 = 1.0 / np.sqrt(3.0)


def plane_stress_D(E: float, nu: float) -> np.ndarray:
    """(3, 3) plane-stress elasticity matrix for (sx, sy, txy) from (ex, ey, gxy)."""
    c = E / (1.0 - nu * nu)
    return c * np.array([[1.0, nu, 0.0], [nu, 1.0, 0.0], [0.0, 0.0, (1.0 - nu) / 2.0]])


def q4_shape(xi, eta) -> np.ndarray:
    """(..., 4) shape-function values at natural coordinates (arrays broadcast)."""
    xi = np.asarray(xi, dtype=float)[..., None]
    eta = np.asarray(eta, dtype=float)[..., None]
    return 0.25 * (1.0 + NODE_XI * xi) * (1.0 + NODE_ETA * eta)


def q4_B(dx: float, dy: float, xi: float, eta: float) -> np.ndarray:
    """(3, 8) strain-displacement matrix of a dx x dy rectangle at natural coordinates (xi, eta)."""
    dn_dx = 0.25 * NODE_XI * (1.0 + NODE_ETA * eta) * (2.0 / dx)
    dn_dy = 0.25 * NODE_ETA * (1.0 + NODE_XI * xi) * (2.0 / dy)
    B = np.zeros((3, 8))
    B[0, 0::2] = dn_dx
    B[1, 1::2] = dn_dy
    B[2, 0::2] = dn_dy
    B[2, 1::2] = dn_dx
    return B


def q4_stiffness(dx: float, dy: float, E: float, nu: float, thickness: float) -> np.ndarray:
    """(8, 8) stiffness of a dx x dy rectangle, N/mm; 2 x 2 Gauss points integrate it exactly."""
    D = plane_stress_D(E, nu)
    ke = np.zeros((8, 8))
    for xi in (-GAUSS_2, GAUSS_2):
        for eta in (-GAUSS_2, GAUSS_2):
            B = q4_B(dx, dy, xi, eta)
            ke += B.T @ D @ B
    # Each Gauss point has weight 1; the Jacobian of the map to a rectangle is dx dy / 4.
    return ke * (thickness * dx * dy / 4.0)
