"""The quadratic six-node triangle in plane stress, curved sides allowed (isoparametric); vectorised over elements.

Node order: corners 0, 1, 2 counter-clockwise, then the middles of sides 0-1, 1-2, 2-0 (``trimesh.TriMesh``).
Natural coordinates (xi, eta) with corners at (0, 0), (1, 0), (0, 1). Stiffness by the three-point rule of
degree 2, exact for straight-sided elements; stresses are the element's own at its nodes.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .element import plane_stress_D

NODE_NAT = np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [0.5, 0.0], [0.5, 0.5], [0.0, 0.5]])
GAUSS_3 = np.array([[1 / 6, 1 / 6], [2 / 3, 1 / 6], [1 / 6, 2 / 3]])
GAUSS_3_W = np.full(3, 1 / 6)


def shape(nat: np.ndarray) -> np.ndarray:
    """(..., 6) shape functions at natural coordinates (..., 2)."""
    xi, eta = nat[..., 0], nat[..., 1]
    l1, l2, l3 = 1.0 - xi - eta, xi, eta
    return np.stack([l1 * (2 * l1 - 1), l2 * (2 * l2 - 1), l3 * (2 * l3 - 1), 4 * l1 * l2, 4 * l2 * l3,
                     4 * l3 * l1], axis=-1)


def shape_grad(nat: np.ndarray) -> np.ndarray:
    """(..., 6, 2) derivatives of the shape functions by (xi, eta)."""
    xi, eta = nat[..., 0], nat[..., 1]
    l1, l2, l3 = 1.0 - xi - eta, xi, eta
    z = np.zeros_like(xi)
    dxi = np.stack([-(4 * l1 - 1), 4 * l2 - 1, z, 4 * (l1 - l2), 4 * l3, -4 * l3], axis=-1)
    deta = np.stack([-(4 * l1 - 1), z, 4 * l3 - 1, -4 * l2, 4 * l2, 4 * (l1 - l3)], axis=-1)
    return np.stack([dxi, deta], axis=-1)


def _B(xe: np.ndarray, nat: np.ndarray):
    """Strain-displacement matrices (ne, 3, 12) and Jacobian determinants (ne,) at one natural point per element.

    ``nat`` is (2,) for the same point in every element or (ne, 2)."""
    dn = shape_grad(np.broadcast_to(nat, (len(xe), 2)))          # (ne, 6, 2)
    J = np.einsum("eai,eaj->eij", dn, xe)                          # J[i, j] = d x_j / d nat_i
    det = J[:, 0, 0] * J[:, 1, 1] - J[:, 0, 1] * J[:, 1, 0]
    inv = np.stack([np.stack([J[:, 1, 1], -J[:, 0, 1]], -1), np.stack([-J[:, 1, 0], J[:, 0, 0]], -1)], 1)
    inv /= det[:, None, None]
    dxy = np.einsum("eai,eji->eaj", dn, inv)                       # d N_a / d x_j
    B = np.zeros((len(xe), 3, 12))
    B[:, 0, 0::2] = dxy[:, :, 0]
    B[:, 1, 1::2] = dxy[:, :, 1]
    B[:, 2, 0::2] = dxy[:, :, 1]
    B[:, 2, 1::2] = dxy[:, :, 0]
    return B, det


def element_dofs(tri: np.ndarray) -> np.ndarray:
    """(ne, 12) dofs: x and y of the six nodes."""
    return np.stack([2 * tri, 2 * tri + 1], axis=2).reshape(len(tri), 12)


def stiffness(points: np.ndarray, tri: np.ndarray, E: float, nu: float, thickness: float) -> sp.csr_matrix:
    """The assembled stiffness (2n x 2n, N/mm). Raises ValueError on an element turned inside out."""
    xe = points[tri]
    D = plane_stress_D(E, nu)
    ke = np.zeros((len(tri), 12, 12))
    for nat, w in zip(GAUSS_3, GAUSS_3_W):
        B, det = _B(xe, nat)
        if np.any(det <= 0.0):
            raise ValueError("an element is turned inside out")
        ke += np.matmul(B.transpose(0, 2, 1), D @ B) * (w * thickness * det)[:, None, None]
    dofs = element_dofs(tri)
    rows = np.repeat(dofs, 12, axis=1).ravel()
    cols = np.tile(dofs, (1, 12)).ravel()
    n = 2 * len(points)
    return sp.csr_matrix((ke.ravel(), (rows, cols)), shape=(n, n))


def body_load(points: np.ndarray, tri: np.ndarray, force_per_volume: np.ndarray, thickness: float) -> np.ndarray:
    """(2n,) consistent nodal forces of a uniform body force (N/mm3, two components)."""
    xe = points[tri]
    f = np.zeros(2 * len(points))
    for nat, w in zip(GAUSS_3, GAUSS_3_W):
        _, det = _B(xe, nat)
        n = shape(nat)
        for c in range(2):
            np.add.at(f, 2 * tri + c, np.outer(det * w * thickness * force_per_volume[c], n))
    return f


def edge_load(points: np.ndarray, edges: np.ndarray, traction: np.ndarray, thickness: float) -> np.ndarray:
    """(2n,) consistent nodal forces of uniform tractions (N/mm2 of edge face, (nb, 2)) on quadratic edges
    (a, b, middle); the edge's length is measured along its curve by three-point Gauss."""
    f = np.zeros(2 * len(points))
    g = np.array([-np.sqrt(0.6), 0.0, np.sqrt(0.6)])
    wg = np.array([5 / 9, 8 / 9, 5 / 9])
    pa, pb, pm = points[edges[:, 0]], points[edges[:, 1]], points[edges[:, 2]]
    for s, w in zip(g, wg):
        n = np.array([0.5 * s * (s - 1), 0.5 * s * (s + 1), 1 - s * s])
        dn = np.array([s - 0.5, s + 0.5, -2 * s])
        tangent = dn[0] * pa + dn[1] * pb + dn[2] * pm
        jac = np.linalg.norm(tangent, axis=1) * w * thickness
        for k in range(3):
            for c in range(2):
                np.add.at(f, 2 * edges[:, k] + c, n[k] * jac * traction[:, c])
    return f


def nodal_stresses(points: np.ndarray, tri: np.ndarray, U: np.ndarray, E: float, nu: float) -> np.ndarray:
    """(ne, 6, 3[, ncases]) stresses sx, sy, txy at each element's own nodes (not averaged), MPa."""
    xe = points[tri]
    D = plane_stress_D(E, nu)
    ue = U[element_dofs(tri)]                                      # (ne, 12[, nc])
    out = []
    for nat in NODE_NAT:
        B, _ = _B(xe, nat)
        DB = np.einsum("kl,elj->ekj", D, B)
        out.append(np.einsum("ekj,ej...->ek...", DB, ue))
    return np.stack(out, axis=1)


def stresses_at(points: np.ndarray, tri: np.ndarray, element: np.ndarray, nat: np.ndarray, U: np.ndarray,
                E: float, nu: float) -> np.ndarray:
    """(k, 3[, ncases]) stresses at natural points ``nat`` (k, 2) of elements ``element`` (k,)."""
    xe = points[tri[element]]
    B, _ = _B(xe, nat)
    DB = np.einsum("kl,elj->ekj", plane_stress_D(E, nu), B)
    return np.einsum("ekj,ej...->ek...", DB, U[element_dofs(tri[element])])
