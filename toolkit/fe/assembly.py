"""Global stiffness assembly with a sparsity pattern built once and reused every call."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp

from .grid import Grid


class Assembler:
    """Assembles K = sum_e scale_e * ke over a grid; the CSC pattern and the scatter map are built once.

    Every matrix returned shares ``indices`` and ``indptr`` (same pattern, same order), so a solver can keep
    its symbolic analysis from one call to the next.
    """

    def __init__(self, grid: Grid):
        self.grid = grid
        nn = grid.n_nodes
        # The pattern is found on node pairs (16 per element, a quarter of the dof pairs) and then expanded:
        # the node pair (p, q) owns the 2 x 2 dof block rows 2p+a, columns 2q+b.
        en = grid.enodes
        rows = np.repeat(en, 4, axis=1).ravel()
        cols = np.tile(en, (1, 4)).ravel()
        # Column-major key: sorted unique keys come out in CSC order (by column node, then row node).
        unique, pair = np.unique(cols.astype(np.int64) * nn + rows, return_inverse=True)
        pair = pair.ravel()
        row_node = unique % nn
        col_node = unique // nn
        start = np.searchsorted(col_node, np.arange(nn + 1))
        count = np.diff(start)
        # Dof column 2q starts at 4 start[q] and holds 2 count[q] rows; column 2q+1 follows it.
        indptr = np.empty(2 * nn + 1, dtype=np.int64)
        indptr[0:-1:2] = 4 * start[:-1]
        indptr[1::2] = 4 * start[:-1] + 2 * count
        indptr[-1] = 4 * start[-1]
        rank = np.arange(unique.size) - start[col_node]
        indices = np.empty(4 * unique.size, dtype=np.int64)
        for b in (0, 1):
            for a in (0, 1):
                indices[4 * start[col_node] + b * 2 * count[col_node] + 2 * rank + a] = 2 * row_node + a
        # Slot in the data array of entry (2lp+a, 2lq+b) of each element: ke.ravel() order is (lp, a, lq, b).
        k = pair.reshape(-1, 4, 1, 4, 1)
        q = col_node[k]
        a = np.arange(2).reshape(1, 1, 2, 1, 1)
        b = np.arange(2).reshape(1, 1, 1, 1, 2)
        slot = 4 * start[q] + b * 2 * count[q] + 2 * (k - start[q]) + a
        self.indices = indices.astype(np.int32)
        self.indptr = indptr.astype(np.int32)
        self.nnz = indices.size
        # The scatter as a sparse matrix S (nnz x ne): K.data = S @ scale, S[slot, e] the entry of ke that element e
        # adds there. Each row lists its elements in rising order, so every entry of K is summed in the order the
        # earlier bincount over (element, entry) pairs summed it: the same bits, 2.5 times faster (9 against 23
        # ms at 600 x 200 elements), and no (ne x 64) array of products made per call. Its structure is kept with
        # the entry of ke behind each of its values (``_local``), so another ke only refills the values: into a new
        # matrix swapped in whole (``_held``), never into one another thread may be multiplying with.
        ne = grid.n_elements
        local = np.tile(np.arange(64, dtype=np.float32), ne)  # small whole numbers: exact in float32
        rows, cols = slot.reshape(-1).astype(np.int32), np.repeat(np.arange(ne, dtype=np.int32), 64)
        del slot, k, q
        scatter = sp.csr_matrix((local, (rows, cols)), shape=(self.nnz, ne))
        del local, rows, cols
        scatter.sort_indices()
        self._local = scatter.data.astype(np.int8)
        self._held: tuple[bytes, sp.csr_matrix] = (b"", scatter)  # (the ke its values are of, the scatter)

    def matrix(self, ke: np.ndarray, scale: np.ndarray | None = None) -> sp.csc_matrix:
        """Global stiffness (CSC) for element matrix ``ke`` (8, 8) times per-element factors ``scale`` (ne,)."""
        ke = np.ascontiguousarray(ke, dtype=float)
        key, scatter = self._held
        if key != ke.tobytes():
            scatter = sp.csr_matrix((ke.ravel()[self._local], scatter.indices, scatter.indptr), shape=scatter.shape)
            self._held = (ke.tobytes(), scatter)
        factors = np.ones(self.grid.n_elements) if scale is None else np.asarray(scale, dtype=float)
        data = scatter @ factors
        n = self.grid.n_dofs
        K = sp.csc_matrix((data, self.indices, self.indptr), shape=(n, n))
        # Each column's rows are in rising order by construction (the keys above): said so, rather than checked
        # again by every solver that takes K (0.75 ms a matrix at 300 x 100 elements, twice an iteration).
        K.has_sorted_indices = True
        return K
