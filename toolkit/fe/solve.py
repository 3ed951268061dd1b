"""Sparse direct solution of K U = F on the free dofs, for several load cases at once."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from ..errors import LacunaError
from .grid import Grid


def nested_dissection(grid: Grid, leaf: int = 2) -> np.ndarray:
    """A fill-reducing order of the grid's nodes: halves first, the line of nodes that splits them last.

    On a structured grid the separators are known without any graph search; with them SuperLU's factors stay
    about half the size they have under its own orderings (benchmarks/bench_fe.py has the figures).
    """
    nxp = grid.nx + 1
    parts: list[np.ndarray] = []
    stack = [(0, grid.nx + 1, 0, grid.ny + 1, False)]
    # An explicit stack instead of recursion; a "separator" entry is emitted after both halves it splits.
    while stack:
        i0, i1, j0, j1, separator = stack.pop()
        if separator:
            parts.append((np.arange(j0, j1)[:, None] * nxp + np.arange(i0, i1)[None, :]).ravel())
            continue
        w, h = i1 - i0, j1 - j0
        if w <= 0 or h <= 0:
            continue
        if max(w, h) <= leaf:
            parts.append((np.arange(j0, j1)[:, None] * nxp + np.arange(i0, i1)[None, :]).ravel())
            continue
        if w >= h:
            m = (i0 + i1) // 2
            halves = [(i0, m, j0, j1, False), (m + 1, i1, j0, j1, False)]
            cut = (m, m + 1, j0, j1, True)
        else:
            m = (j0 + j1) // 2
            halves = [(i0, i1, j0, m, False), (i0, i1, m + 1, j1, False)]
            cut = (i0, i1, m, m + 1, True)
        # Popped last-in first-out: first half, second half, then the separator.
        stack.append(cut)
        stack.extend(reversed(halves))
    return np.concatenate(parts)


# Smallest pivot, relative to the largest, of a matrix taken as non-singular. Genuine contrasts stay far above
# it (void elements at 1e-3 or 1e-6 of solid); a free rigid motion leaves a pivot at round-off level, ~1e-16.
SINGULAR_PIVOT = 1e-12


def _singular() -> LacunaError:
    return LacunaError(
        "the stiffness matrix is singular: part of the panel can move without resistance.",
        hint="Check that every part of the panel is held by supports in x and y and against rotation.",
    )


def pardiso_available() -> bool:
    """True where the optional MKL PARDISO binding (package pypardiso, x86_64 only) loads."""
    try:
        import pypardiso  # noqa: F401
    except (ImportError, OSError):
        return False
    return True


def _new_pardiso():
    import pypardiso

    # Matrix type 2: real symmetric positive definite (Cholesky, no pivoting).
    return pypardiso.PyPardisoSolver(mtype=2)


class LinearSolver:
    """Factorises K restricted to the free dofs; ``refactor`` takes a new K of the same pattern.

    The restriction (with the fill-reducing order folded in) is an index map into ``K.data`` built once, so a
    new matrix from the same :class:`~toolkit.fe.assembly.Assembler` costs one gather plus the factorisation.
    With ``grid`` given, the grid's nested-dissection order is used; without, SuperLU's minimum degree on
    K + K^T. The stiffness is symmetric positive definite on the free dofs, so no pivoting is needed.

    ``backend``: "superlu" (scipy, always there), "pardiso" (MKL's sparse Cholesky through the optional
    pypardiso package, two to three times faster at 600 x 200 elements: benchmarks/bench_fe.py) or "auto",
    the default: pardiso where the package is installed, else superlu.
    """

    def __init__(self, K: sp.spmatrix, free: np.ndarray, grid: Grid | None = None, backend: str = "auto"):
        if backend == "auto":
            backend = "pardiso" if pardiso_available() else "superlu"
        if backend not in ("superlu", "pardiso"):
            raise ValueError(f"unknown solver backend {backend!r}")
        self.backend = backend
        K = sp.csc_matrix(K)
        n = K.shape[0]
        free = np.asarray(free)
        free_idx = np.flatnonzero(free) if free.dtype == bool else np.asarray(free, dtype=np.int64)
        if free_idx.size == 0:
            raise LacunaError("every degree of freedom is held by a support: there is nothing to solve.")
        if grid is not None:
            if grid.n_dofs != n:
                raise ValueError(f"grid has {grid.n_dofs} dofs, the matrix {n}")
            nodes = nested_dissection(grid)
            order = np.stack([2 * nodes, 2 * nodes + 1], axis=1).ravel()
            is_free = np.zeros(n, dtype=bool)
            is_free[free_idx] = True
            order = order[is_free[order]]
            self._permc = "NATURAL"
        else:
            order = free_idx
            self._permc = "MMD_AT_PLUS_A"
        self.n = n
        self.order = order
        # Carry entry numbers through the slicing to learn which entries of K.data land where in K_ff.
        probe = sp.csc_matrix((np.arange(1, K.nnz + 1, dtype=float), K.indices, K.indptr), shape=K.shape)
        sub = probe[order][:, order].tocsc()
        if backend == "pardiso":
            # PARDISO's symmetric positive definite mode reads the upper triangle row by row: that is the CSC
            # lower triangle read as CSR (K is symmetric), so no transpose is needed.
            sub = sp.tril(sub, format="csc")
            self._pardiso = _new_pardiso()
        sub.sort_indices()
        self._take = sub.data.astype(np.int64) - 1
        self._indices = sub.indices
        self._indptr = sub.indptr
        self._lu = None
        self.refactor(K)

    def refactor(self, K: sp.spmatrix) -> None:
        """Factorise a new matrix of the same sparsity pattern as the one given at construction."""
        data = K.data if sp.issparse(K) else np.asarray(K)
        m = self.order.size
        Kff = sp.csc_matrix((data[self._take], self._indices, self._indptr), shape=(m, m))
        if self.backend == "pardiso":
            self._factor_pardiso(Kff)
            return
        try:
            self._lu = spla.splu(
                Kff, permc_spec=self._permc, diag_pivot_thresh=0.0, options={"SymmetricMode": True}
            )
        except RuntimeError as exc:
            # SuperLU reports an exactly zero pivot this way: a mechanism the rigid-body check missed.
            raise _singular() from exc
        # Without pivoting, a free rigid motion shows as a pivot at round-off level rather than exactly zero.
        pivots = np.abs(self._lu.U.diagonal())
        if not pivots.min() > SINGULAR_PIVOT * pivots.max():
            raise _singular()

    def _factor_pardiso(self, Kff: sp.csc_matrix) -> None:
        from pypardiso.pardiso_wrapper import PyPardisoError

        self._upper = sp.csr_matrix((Kff.data, Kff.indices, Kff.indptr), shape=Kff.shape)
        try:
            self._pardiso.factorize(self._upper)
        except PyPardisoError as exc:
            raise _singular() from exc

    def solve(self, F: np.ndarray) -> np.ndarray:
        """Full displacement vector(s) for load vector(s) F (ndof,) or (ndof, ncases); zero at held dofs."""
        F = np.asarray(F, dtype=float)
        rhs = np.ascontiguousarray(F[self.order])
        if self.backend == "pardiso":
            u = self._pardiso.solve(self._upper, rhs)
        else:
            u = self._lu.solve(rhs)
        U = np.zeros(F.shape)
        U[self.order] = u
        if not np.all(np.isfinite(u)):
            raise LacunaError(
                "the solution is not finite: the panel is not held against every rigid motion.",
                hint="Add supports so that it can neither slide nor rotate.",
            )
        return U
