"""The mesh-independency filter of BESO, built once before the loop."""

from __future__ import annotations

import math

import numpy as np
import scipy.sparse as sp

from ..errors import LacunaError
from .. import limits
from ..fe.grid import Grid

# Above this many elements the filter keeps its two factors apart rather than their product (see _sparse).
_PRODUCT_LIMIT = 250_000


class SensitivityFilter:
    """The filter of Huang & Xie 2007 (Finite Elem Anal Des 43:1039-1049) on a structured grid.

    Each node takes the plain mean of the sensitivities of the elements around it; each element then takes
    the mean of the nodes within ``radius_mm`` of its centre, weighted by ``radius - distance``. Both steps are
    linear, built once; ``filt(alpha)`` applies them. Small radii use one sparse matrix (``matrix``), large ones
    two FFT convolutions (same result to rounding). Rows sum to 1, so a uniform field passes unchanged; the
    weights depend on distance only, so the filter commutes with the grid's mirror maps.
    """

    def __init__(self, grid: Grid, radius_mm: float):
        if not (math.isfinite(radius_mm) and radius_mm > 0):
            raise LacunaError(f"the filter radius must be a positive length, got {radius_mm} mm.",
                              where="[optimize] filter_radius")
        self.grid = grid
        self.radius_mm = float(radius_mm)
        nx, ny, dx, dy = grid.nx, grid.ny, grid.dx, grid.dy
        ne, nn = grid.n_elements, grid.n_nodes
        en = grid.enodes
        count = np.bincount(en.ravel(), minlength=nn).astype(float)
        self._node_mean = sp.csr_matrix(
            (1.0 / count[en.ravel()], (en.ravel(), np.repeat(np.arange(ne), 4))), shape=(nn, ne)
        )
        # Weight of the node at integer offset (ox, oy) from an element's lower-left node; the same for all.
        self._kx, self._ky = kx, ky = int(math.ceil(radius_mm / dx)), int(math.ceil(radius_mm / dy))
        ox = np.arange(-kx, kx + 2)
        oy = np.arange(-ky, ky + 2)
        dist = np.hypot((ox[None, :] - 0.5) * dx, (oy[:, None] - 0.5) * dy)
        self._kernel = np.maximum(radius_mm - dist, 0.0)  # [oy + ky, ox + kx]
        self.matrix: sp.csr_matrix | None = None
        self._W: sp.csr_matrix | None = None
        if np.count_nonzero(self._kernel) <= limits.FILTER_SPARSE_LIMIT:
            self.matrix = self._sparse(grid)
        else:
            self._norm = self._correlate(np.ones((ny + 1, nx + 1)))

    def _sparse(self, grid: Grid) -> sp.csr_matrix:
        """The element-from-element matrix H = W N (N: nodes from elements, W: elements from nodes). W is built
        straight in CSR: an element's nodes, taken in the kernel's row-major order, come in rising node number,
        so no sorting is needed (a coordinate-list build took 13 s at a million elements). Above
        ``_PRODUCT_LIMIT`` elements H is not formed: the filter applies W and N in turn (``self._W``), which
        holds fewer entries and gives the same result to rounding."""
        nx, ny = grid.nx, grid.ny
        ne = grid.n_elements
        a, b = np.nonzero(self._kernel)  # row-major: (oy, ox) rising
        weights = self._kernel[a, b]
        ix = np.tile(np.arange(nx), ny)
        iy = np.repeat(np.arange(ny), nx)
        i = ix[:, None] + (b - self._kx)[None, :]
        j = iy[:, None] + (a - self._ky)[None, :]
        ok = (i >= 0) & (i <= nx) & (j >= 0) & (j <= ny)
        cols = (j * (nx + 1) + i)[ok]
        vals = np.broadcast_to(weights, ok.shape)[ok]
        counts = ok.sum(axis=1)
        indptr = np.concatenate([[0], np.cumsum(counts)])
        sums = np.add.reduceat(vals, indptr[:-1]) if vals.size else np.zeros(ne)
        vals = vals / np.repeat(sums, counts)
        W = sp.csr_matrix((vals, cols.astype(np.int32 if grid.n_nodes < 2**31 else np.int64), indptr),
                          shape=(ne, grid.n_nodes))
        if ne > _PRODUCT_LIMIT:
            self._W = W
            return None
        H = (W @ self._node_mean).tocsr()
        H.sum_duplicates()
        H.sort_indices()
        return H

    def _correlate(self, nodal: np.ndarray) -> np.ndarray:
        """sum over offsets of kernel * nodal value, for every element, as an (ny, nx) image."""
        import scipy.signal  # only large radii come here; importing it costs more than half a second, so it waits

        full = scipy.signal.fftconvolve(nodal, self._kernel[::-1, ::-1], mode="full")
        ny, nx = self.grid.ny, self.grid.nx
        return full[self._ky + 1 : self._ky + 1 + ny, self._kx + 1 : self._kx + 1 + nx]

    def __call__(self, alpha: np.ndarray) -> np.ndarray:
        """Filtered sensitivities (ne,) from raw ones (ne,)."""
        if self.matrix is not None:
            return self.matrix @ alpha
        if self._W is not None:
            return self._W @ (self._node_mean @ alpha)
        g = self.grid
        nodal = (self._node_mean @ alpha).reshape(g.ny + 1, g.nx + 1)
        return (self._correlate(nodal) / self._norm).ravel()
