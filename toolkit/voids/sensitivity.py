"""How the panel's compliance changes when the vertices of the voids cut from it move.

A made void is an explicit polygon (arcs flattened) whose vertices are the design parameters. The grid's
stiffness is K = sum_e f_e ke, f_e the solid area fraction of element e, and a void P lowers f_e by
area(P n box_e) / A_e. Compliance is self-adjoint, so for loads that do not depend on the design

    dC/dp = - sum_c w_c u_c^T (dK/dp) u_c = sum_e (d area(P n box_e)/dp) / A_e * sum_c w_c u_ec^T ke u_ec.

The area derivative is the boundary integral of the normal velocity (Reynolds transport): moving vertex v_k
moves the points of its two edges with the linear hat weight (1 at v_k, 0 at the edge's other end), so
d area(P n box_e)/d v_k is the integral of that weight times the outward unit normal over the parts of the two
edges inside box_e. Edges are split where they cross grid lines and the weights are integrated exactly on each
piece. See docs/sensitivity.md.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ..errors import LacunaError
from ..fe.grid import Grid
from ..fe.solve import LinearSolver, BlasOneThread, sorted_csc

# A piece of an outline whose midpoint lies within this many element sizes of a grid line lies on that line
# (pieces are cut at every crossing, so any other piece keeps clear of the lines by its own half-length).
ON_LINE = 1e-9

# Put on the diagonal of free dofs whose row is empty, relative to the largest diagonal: far above the
# factorisation's singular-pivot test (1e-12), far below the stiffness any element with material gives.
SOFT_DIAGONAL = 1e-9


def element_energy(grid: Grid, U: np.ndarray, ke: np.ndarray, weights=None) -> np.ndarray:
    """(ne,) sum over load cases of weight * u_e^T ke u_e, N mm, for the full-solid element matrix ``ke``.

    ``U`` is (n_dofs,) or (n_dofs, ncases); ``weights`` (ncases,) defaults to one per case.
    """
    U = np.asarray(U, dtype=float)
    U = U[:, None] if U.ndim == 1 else U
    w = np.ones(U.shape[1]) if weights is None else np.asarray(weights, dtype=float)
    if w.shape != (U.shape[1],):
        raise ValueError(f"{U.shape[1]} load cases but {w.size} weights")
    ue = U[grid.edof]                                   # (ne, 8, ncases)
    return np.einsum("eic,eic->e", ue, np.matmul(np.asarray(ke, dtype=float), ue) * w)


def _outline(vertices) -> tuple[np.ndarray, float]:
    """(n, 2) distinct vertices of a void outline and its orientation (+1 counter-clockwise, -1 clockwise)."""
    v = np.asarray(vertices, dtype=float)
    if v.ndim != 2 or v.shape[1] != 2:
        raise LacunaError(f"a void outline is a list of (x, y) vertices, got an array of shape {v.shape}.")
    if len(v) > 1 and np.array_equal(v[0], v[-1]):
        v = v[:-1]
    nxt = np.roll(v, -1, axis=0)
    twice_area = float(np.sum(v[:, 0] * nxt[:, 1] - nxt[:, 0] * v[:, 1]))
    if len(v) < 3 or not np.all(np.isfinite(v)) or twice_area == 0.0:
        raise LacunaError("a void outline needs at least three finite vertices enclosing an area.")
    return v, float(np.sign(twice_area))


def _area_gradient(grid: Grid, outlines: list[tuple[np.ndarray, float]]) -> sp.csr_matrix:
    """(ne, sum of 2 n_i) d area(P_i n box_e) / d(x_k, y_k) for all outlines at once, columns polygon by polygon."""
    sizes = np.array([len(v) for v, _ in outlines])
    offset = np.concatenate([[0], np.cumsum(sizes)[:-1]])
    p0 = np.concatenate([v for v, _ in outlines])
    p1 = np.concatenate([np.roll(v, -1, axis=0) for v, _ in outlines])
    second = np.concatenate([o + (np.arange(n) + 1) % n for o, n in zip(offset, sizes)])
    sign = np.repeat([s for _, s in outlines], sizes)
    d = p1 - p0
    m = len(p0)
    first = np.arange(m)

    # Edge parameters t in (0, 1) where each edge crosses a grid line of the grid (lines beyond it are not
    # needed: the grid's own border lines already separate the pieces inside from those outside).
    edge_parts, t_parts = [np.arange(m), np.arange(m)], [np.zeros(m), np.ones(m)]
    for axis, h, n in ((0, grid.dx, grid.nx), (1, grid.dy, grid.ny)):
        lo = np.minimum(p0[:, axis], p1[:, axis]) / h
        hi = np.maximum(p0[:, axis], p1[:, axis]) / h
        k0 = np.maximum(np.floor(lo) + 1, 0)
        k1 = np.minimum(np.ceil(hi) - 1, n)
        count = np.maximum(k1 - k0 + 1, 0).astype(np.int64)
        edge = np.repeat(np.arange(m), count)
        k = k0[edge] + np.arange(count.sum()) - np.repeat(np.cumsum(count) - count, count)
        edge_parts.append(edge)
        t_parts.append(np.clip((k * h - p0[edge, axis]) / d[edge, axis], 0.0, 1.0))
    edge, t = np.concatenate(edge_parts), np.concatenate(t_parts)
    order = np.lexsort((t, edge))
    edge, t = edge[order], t[order]
    piece = (edge[1:] == edge[:-1]) & (t[1:] > t[:-1])
    e, t0, t1 = edge[:-1][piece], t[:-1][piece], t[1:][piece]

    # Integral over the piece of the hat weight times the normal times ds: ds = |d| dt cancels the unit
    # normal's 1/|d|, leaving the rotated edge vector times the integral of (1 - t) or t over [t0, t1].
    length, mean = t1 - t0, 0.5 * (t0 + t1)
    normal = sign[e, None] * np.column_stack([d[e, 1], -d[e, 0]])
    values = np.concatenate([normal * (length * (1.0 - mean))[:, None], normal * (length * mean)[:, None]], axis=1)
    columns = np.column_stack([2 * first[e], 2 * first[e] + 1, 2 * second[e], 2 * second[e] + 1])

    # The cell under each piece; a piece lying on a grid line gives half to the cell on each side, the mean of
    # the two one-sided derivatives (the area of a cell is not differentiable there).
    mid = p0[e] + mean[:, None] * d[e]
    cells, shares = [], []
    for axis, h, n in ((0, grid.dx, grid.nx), (1, grid.dy, grid.ny)):
        f = mid[:, axis] / h
        r = np.round(f)
        on = np.abs(f - r) <= ON_LINE
        below = np.where(on, r - 1, np.floor(f)).astype(np.int64)
        cells.append(np.stack([below, below + 1]))
        shares.append(np.stack([np.where(on, 0.5, 1.0), np.where(on, 0.5, 0.0)]))
    ix = np.broadcast_to(cells[0][:, None, :], (2, 2, e.size))
    iy = np.broadcast_to(cells[1][None, :, :], (2, 2, e.size))
    share = shares[0][:, None, :] * shares[1][None, :, :]
    keep = (share > 0) & (ix >= 0) & (ix < grid.nx) & (iy >= 0) & (iy < grid.ny)
    which = np.broadcast_to(np.arange(e.size), (2, 2, e.size))[keep]
    element = (iy * grid.nx + ix)[keep]
    rows = np.repeat(element, 4)
    data = (values[which] * share[keep][:, None]).ravel()
    gradient = sp.coo_matrix((data, (rows, columns[which].ravel())), shape=(grid.n_elements, 2 * m))
    return gradient.tocsr()


def vertex_area_gradient(grid: Grid, vertices) -> sp.csr_matrix:
    """(ne, 2n) sparse d area(P n box_e) / d(x_k, y_k), mm, of a simple polygon P with vertices (n, 2), mm.

    Column 2k is the derivative by x_k, column 2k + 1 by y_k. Either orientation; a last vertex repeating the
    first is dropped (n counts distinct vertices). Parts of P outside the grid count for nothing. Where an edge
    lies on a grid line the derivative is split evenly between the cells on either side.
    """
    return _area_gradient(grid, [_outline(vertices)])


def compliance_gradient(grid: Grid, energy: np.ndarray, vertices):
    """dC/d(vertex), N mm / mm, (n, 2) for one void outline, or a list of such arrays for a list of outlines.

    ``energy`` is :func:`element_energy` of the design analysed, or with self-weight the energies
    ``shape.Evaluator`` returns (each element's u^T k0 u plus half its weight times the sum of its nodal u_y, which
    brings in the term 2 U . dF/dp of the weight a void takes away). Each void is a hole cut from the panel:
    moving its boundary outward removes material and raises the compliance. The voids must not overlap each
    other or the panel's other openings (an overlap would be counted twice).
    """
    energy = np.asarray(energy, dtype=float)
    if energy.shape != (grid.n_elements,):
        raise ValueError(f"energy must have one value per element ({grid.n_elements}), got shape {energy.shape}")
    if isinstance(vertices, (list, tuple)) and len(vertices) == 0:
        return []
    many = isinstance(vertices, (list, tuple)) and np.ndim(vertices[0]) == 2
    outlines = [_outline(v) for v in (vertices if many else [vertices])]
    flat = _area_gradient(grid, outlines).T @ energy / grid.element_area
    sizes = [len(v) for v, _ in outlines]
    gradients = [g.reshape(-1, 2) for g in np.split(flat, 2 * np.cumsum(sizes)[:-1])]
    return gradients if many else gradients[0]


class ReusedSolver:
    """K U = F on the free dofs for a run of nearby designs, one factorisation serving many of them.

    The factorisation of the first matrix (or of the last one refactorised) preconditions conjugate gradients
    on each new K (same sparsity pattern, e.g. from the same :class:`~toolkit.fe.assembly.Assembler`), to a
    relative residual of ``rtol``. When CG has not converged after ``max_iterations`` the new K is factorised
    and solved directly, and becomes the preconditioner from then on.

    The free set stays the one given at construction. A free dof whose row of K is empty (its node touches
    only empty elements) gets ``SOFT_DIAGONAL`` times the largest diagonal in the factorisation, is left out
    of the CG and comes back with zero displacement; such a node is coupled to nothing, so the rest of the
    solution is that of the analysis, which drops these nodes. Pass every dof not held by a support as
    ``free`` so that a node a later design brings back into material is already in the system.

    Two additions to the plain preconditioner, each measured (docs/sensitivity.md): the old factor is
    rescaled by the change of the diagonal, and CG starts from the last solution.

    Counters for benchmarks: ``solves`` (calls of :meth:`solve`), ``factorisations`` (including the first),
    ``iterations`` (CG iterations over all calls) and ``last_iterations`` (per load case, last call; the cases
    after a refactorisation are solved directly and not listed).
    """

    def __init__(self, K0: sp.spmatrix, free: np.ndarray, grid: Grid, max_iterations: int = 30,
                 rtol: float = 1e-10, backend: str = "auto"):
        K0 = sorted_csc(K0)
        n = K0.shape[0]
        free = np.asarray(free)
        mask = np.zeros(n, dtype=bool)
        mask[np.flatnonzero(free) if free.dtype == bool else free.astype(np.int64)] = True
        self.n = n
        self.free = mask
        self._idx = np.flatnonzero(mask)
        column = np.repeat(np.arange(n), np.diff(K0.indptr))
        on_diagonal = K0.indices == column
        slot = np.full(n, -1, dtype=np.int64)
        slot[column[on_diagonal]] = np.flatnonzero(on_diagonal)
        if np.any(slot[self._idx] < 0):
            raise ValueError("every free dof needs a diagonal entry in the matrix pattern")
        self._diagonal = slot[self._idx]
        self._indices, self._indptr = K0.indices, K0.indptr
        self.max_iterations = max_iterations
        self.rtol = rtol
        self.solves = 0
        self.iterations = 0
        self.last_iterations: tuple[int, ...] = ()
        self._last = None
        self._one_thread = BlasOneThread()
        K0, _ = self._softened(K0)
        self._factor = LinearSolver(K0, mask, grid=grid, backend=backend)
        self._factored_diagonal = K0.data[self._diagonal]
        self.factorisations = 1

    def _softened(self, K: sp.spmatrix) -> tuple[sp.csc_matrix, np.ndarray]:
        """K with the soft diagonal on its empty free rows, and which free dofs (of ``_idx``) are not empty."""
        K = sorted_csc(K)
        if not (np.array_equal(K.indptr, self._indptr) and np.array_equal(K.indices, self._indices)):
            raise ValueError("the matrix must have the sparsity pattern of the first one")
        data = K.data.copy()
        diagonal = data[self._diagonal]
        alive = diagonal > 0.0
        data[self._diagonal[~alive]] = SOFT_DIAGONAL * diagonal.max()
        return sp.csc_matrix((data, self._indices, self._indptr), shape=K.shape), alive

    def solve(self, K: sp.spmatrix, F: np.ndarray) -> np.ndarray:
        """Displacements (shape of F: (n_dofs,) or (n_dofs, ncases)) for stiffness K.

        Zero at dofs not free and at dofs whose row of K is empty (loads given there are ignored).
        """
        K, alive = self._softened(K)
        F = np.asarray(F, dtype=float)
        columns = F.reshape(self.n, -1).copy()
        columns[self._idx[~alive]] = 0.0      # no load can bear on a node without material
        # CG runs on the dofs with stiffness only: an empty row's soft diagonal would be an eigenvalue some
        # 1e-9 times the rest, which costs iterations for a displacement that is zero anyway.
        idx = self._idx[alive]
        m = idx.size

        def spread(x):
            full = np.zeros(self.n)
            full[idx] = np.ravel(x)
            return full

        # The old factor is used as S K_old S, S scaling each dof by the square root of how much its diagonal
        # changed: a node beside a cut element whose fraction went from 0.01 to 0.5 otherwise leaves an
        # eigenvalue some 50 times the rest, about one CG iteration for each such node.
        scale = np.sqrt(K.data[self._diagonal] / self._factored_diagonal)[alive]
        A = spla.LinearOperator((m, m), matvec=lambda x: (K @ spread(x))[idx], dtype=float)
        M = spla.LinearOperator((m, m), matvec=lambda r: self._factor.solve(spread(r / scale))[idx] / scale,
                                dtype=float)
        # The last design's displacements start the iteration: nearby designs have nearby solutions.
        start = self._last if self._last is not None and self._last.shape == columns.shape else None
        U = np.zeros(columns.shape)
        counts = []
        for c in range(columns.shape[1]):
            steps = [0]

            def count(_, steps=steps):
                steps[0] += 1

            # CG's dot products are on vectors of a few 10^4 entries, where threaded BLAS only loses time: on a
            # busy two-core machine 7 ms a dot product was measured, and a 9-iteration solve of a 300 x 100
            # grid fell from 0.52 s to 0.17 s on one thread.
            with self._one_thread():
                x, info = spla.cg(A, columns[idx, c], x0=None if start is None else start[idx, c],
                                  rtol=self.rtol, atol=0.0, maxiter=self.max_iterations, M=M, callback=count)
            counts.append(steps[0])
            if info != 0 or not np.all(np.isfinite(x)):
                self._factor.refactor(K)
                self._factored_diagonal = K.data[self._diagonal]
                self.factorisations += 1
                U[:, c:] = self._factor.solve(columns[:, c:])
                break
            U[idx, c] = x
        self.solves += 1
        self.iterations += sum(counts)
        self.last_iterations = tuple(counts)
        self._last = U
        return U.reshape(F.shape)

