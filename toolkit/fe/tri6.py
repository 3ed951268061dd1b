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


# The reference element's data, the same in every element of every model: the shape functions and their
# derivatives at the three Gauss points, and the derivatives at the six nodes (where stresses are recovered).
N_GAUSS = shape(GAUSS_3)              # (3, 6)
DN_GAUSS = shape_grad(GAUSS_3)        # (3, 6, 2)
DN_NODES = shape_grad(NODE_NAT)       # (6, 6, 2)


def gradients(xe: np.ndarray, dn: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Shape-function derivatives by (x, y) (ne, p, 6, 2) and Jacobian determinants (ne, p) of the elements
    ``xe`` (ne, 6, 2) at p natural points, given the derivatives by (xi, eta) there: ``dn`` (p, 6, 2), the same
    points in every element, or (ne, p, 6, 2)."""
    x, y = xe[..., 0], xe[..., 1]                                  # (ne, 6)
    dxi, deta = dn[..., 0], dn[..., 1]                             # (p, 6) or (ne, p, 6)
    if dn.ndim == 3:   # J = d(x, y) / d(xi, eta) at each point: one product per entry for all elements
        x_xi, y_xi, x_eta, y_eta = x @ dxi.T, y @ dxi.T, x @ deta.T, y @ deta.T      # (ne, p)
    else:
        x_xi, y_xi = np.einsum("epa,ea->ep", dxi, x), np.einsum("epa,ea->ep", dxi, y)
        x_eta, y_eta = np.einsum("epa,ea->ep", deta, x), np.einsum("epa,ea->ep", deta, y)
    det = x_xi * y_eta - y_xi * x_eta
    d_x = (y_eta[..., None] * dxi - y_xi[..., None] * deta) / det[..., None]
    d_y = (x_xi[..., None] * deta - x_eta[..., None] * dxi) / det[..., None]
    return np.stack([d_x, d_y], axis=-1), det


def _B(xe: np.ndarray, nat: np.ndarray):
    """Strain-displacement matrices (ne, 3, 12) and Jacobian determinants (ne,) at one natural point per element.

    ``nat`` is (2,) for the same point in every element or (ne, 2)."""
    dn = shape_grad(np.broadcast_to(nat, (len(xe), 2)))[:, None]  # (ne, 1, 6, 2)
    dxy, det = gradients(xe, dn)
    dxy, det = dxy[:, 0], det[:, 0]
    B = np.zeros((len(xe), 3, 12))
    B[:, 0, 0::2] = dxy[:, :, 0]
    B[:, 1, 1::2] = dxy[:, :, 1]
    B[:, 2, 0::2] = dxy[:, :, 1]
    B[:, 2, 1::2] = dxy[:, :, 0]
    return B, det


def element_dofs(tri: np.ndarray) -> np.ndarray:
    """(ne, 12) dofs: x and y of the six nodes."""
    return np.stack([2 * tri, 2 * tri + 1], axis=2).reshape(len(tri), 12)


def element_stiffness(points: np.ndarray, tri: np.ndarray, E: float, nu: float, thickness: float) -> np.ndarray:
    """(ne, 12, 12) element stiffnesses (N/mm), dofs as ``element_dofs``. Raises ValueError on an element turned
    inside out.

    B^T D B summed over the Gauss points, written out for the plane-stress D: with a = dN/dx and b = dN/dy at the
    points, each scaled by the root of the point's weight x thickness x det J, one product G = [a b]^T [a b] per
    element gives the sums a a^T, a b^T, b b^T the blocks are made of."""
    dxy, det = gradients(points[tri], DN_GAUSS)                    # (ne, 3, 6, 2), (ne, 3)
    if np.any(det <= 0.0):
        raise ValueError("an element is turned inside out")
    ne = len(tri)
    ab = (dxy * np.sqrt(GAUSS_3_W * thickness * det)[:, :, None, None]).transpose(0, 1, 3, 2).reshape(ne, 3, 12)
    G = ab.transpose(0, 2, 1) @ ab                                 # (ne, 12, 12): [[a a^T, a b^T], [b a^T, b b^T]]
    aa, a_b, b_a, bb = G[:, :6, :6], G[:, :6, 6:], G[:, 6:, :6], G[:, 6:, 6:]
    D = plane_stress_D(E, nu)
    ke = np.empty((ne, 6, 2, 6, 2))
    ke[:, :, 0, :, 0] = D[0, 0] * aa + D[2, 2] * bb
    ke[:, :, 0, :, 1] = D[0, 1] * a_b + D[2, 2] * b_a
    ke[:, :, 1, :, 0] = D[0, 1] * b_a + D[2, 2] * a_b
    ke[:, :, 1, :, 1] = D[1, 1] * bb + D[2, 2] * aa
    return ke.reshape(ne, 12, 12)


def stiffness(points: np.ndarray, tri: np.ndarray, E: float, nu: float, thickness: float) -> sp.csr_matrix:
    """The assembled stiffness (2n x 2n, N/mm). Raises ValueError on an element turned inside out."""
    ke = element_stiffness(points, tri, E, nu, thickness)
    dofs = element_dofs(tri)
    rows = np.repeat(dofs, 12, axis=1).ravel()
    cols = np.tile(dofs, (1, 12)).ravel()
    n = 2 * len(points)
    return sp.csr_matrix((ke.ravel(), (rows, cols)), shape=(n, n))


def body_load(points: np.ndarray, tri: np.ndarray, force_per_volume: np.ndarray, thickness: float) -> np.ndarray:
    """(2n,) consistent nodal forces of a uniform body force (N/mm3, two components)."""
    _, det = gradients(points[tri], DN_GAUSS)                      # (ne, 3)
    share = (det * GAUSS_3_W * thickness) @ N_GAUSS                # (ne, 6): each node's share of the volume
    f = np.zeros(2 * len(points))
    for c in range(2):
        f[c::2] = np.bincount(tri.ravel(), weights=(share * force_per_volume[c]).ravel(), minlength=len(points))
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
    dxy, _ = gradients(points[tri], DN_NODES)                      # (ne, 6 points, 6 nodes, 2)
    ue = U[element_dofs(tri)]                                      # (ne, 12[, nc])
    ue = ue.reshape((len(tri), 6, 2) + ue.shape[2:])
    u, v = ue[:, :, 0], ue[:, :, 1]                                # (ne, 6[, nc])
    sub = "epa,ea...->ep..."
    strain = [np.einsum(sub, dxy[..., 0], u), np.einsum(sub, dxy[..., 1], v),
              np.einsum(sub, dxy[..., 1], u) + np.einsum(sub, dxy[..., 0], v)]
    D = plane_stress_D(E, nu)
    return np.stack([D[k, 0] * strain[0] + D[k, 1] * strain[1] + D[k, 2] * strain[2] for k in range(3)], axis=2)


def stresses_at(points: np.ndarray, tri: np.ndarray, element: np.ndarray, nat: np.ndarray, U: np.ndarray,
                E: float, nu: float) -> np.ndarray:
    """(k, 3[, ncases]) stresses at natural points ``nat`` (k, 2) of elements ``element`` (k,)."""
    xe = points[tri[element]]
    B, _ = _B(xe, nat)
    DB = np.einsum("kl,elj->ekj", plane_stress_D(E, nu), B)
    return np.einsum("ekj,ej...->ek...", DB, U[element_dofs(tri[element])])
