"""The mesh-independency filter of BESO, built once as one sparse matrix."""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

from ..errors import LacunaError
from ..fe.grid import Grid


def sensitivity_filter(grid: Grid, radius_mm: float) -> sp.csr_matrix:
    """(ne, ne) operator H: filtered sensitivities are ``H @ alpha``.

    The scheme of Huang & Xie 2007 (Finite Elem Anal Des 43:1039-1049): each node takes the plain mean of
    the sensitivities of the elements around it, then each element takes the mean of the nodes within
    ``radius_mm`` of its centre weighted by ``radius - distance``. Both steps are linear, so their product
    is formed once here and the loop applies one sparse product. Rows sum to 1, so a uniform field passes
    unchanged; the weights depend on distance only, so the operator commutes with the grid's mirror maps.
    """
    if not (math.isfinite(radius_mm) and radius_mm > 0):
        raise LacunaError(f"the filter radius must be a positive length, got {radius_mm} mm.",
                          where="[optimize] filter_radius")
    nx, ny, dx, dy = grid.nx, grid.ny, grid.dx, grid.dy
    ne, nn = grid.n_elements, grid.n_nodes

    # Node <- element: a node's value is the plain mean of the 1, 2 or 4 elements it belongs to.
    en = grid.enodes
    rows = en.ravel()
    cols = np.repeat(np.arange(ne), 4)
    count = np.bincount(rows, minlength=nn).astype(float)
    A = sp.csr_matrix((1.0 / count[rows], (rows, cols)), shape=(nn, ne))

    # Element <- node: the same integer offsets (node index minus element index) serve every element of a
    # structured grid, so the pairs are enumerated once per offset and masked at the envelope.
    ix, iy = np.meshgrid(np.arange(nx), np.arange(ny))
    ix, iy = ix.ravel(), iy.ravel()
    kx, ky = int(math.ceil(radius_mm / dx)), int(math.ceil(radius_mm / dy))
    e_list, n_list, w_list = [], [], []
    for oy in range(-ky, ky + 2):
        for ox in range(-kx, kx + 2):
            dist = math.hypot((ox - 0.5) * dx, (oy - 0.5) * dy)
            w = radius_mm - dist
            if w <= 0:
                continue
            i, j = ix + ox, iy + oy
            ok = (i >= 0) & (i <= nx) & (j >= 0) & (j <= ny)
            e_list.append(np.flatnonzero(ok))
            n_list.append(j[ok] * (nx + 1) + i[ok])
            w_list.append(np.full(int(ok.sum()), w))
    e_idx = np.concatenate(e_list)
    n_idx = np.concatenate(n_list)
    w = np.concatenate(w_list)
    W = sp.csr_matrix((w, (e_idx, n_idx)), shape=(ne, nn))
    W = sp.diags(1.0 / np.asarray(W.sum(axis=1)).ravel()) @ W
    H = (W @ A).tocsr()
    H.sum_duplicates()
    H.sort_indices()
    return H
