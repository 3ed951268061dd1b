"""Sparse direct solution of K U = F on the free dofs, for several load cases at once."""

from __future__ import annotations

import ctypes
import os
from contextlib import contextmanager
from functools import lru_cache

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from threadpoolctl import ThreadpoolController  # holds BLAS to one thread where that pays (BlasOneThread)

from ..errors import LacunaError
from .grid import Grid


class BlasOneThread:
    """Runs BLAS/LAPACK on one thread inside ``with`` (threadpoolctl).

    The fronts are many small dense matrices and a few of a few hundred rows: OpenBLAS's threads gain little
    on them even on an idle machine, and on a machine whose cores are busy with other work a threaded
    Cholesky of a 400 x 400 front was measured at 0.4 s instead of 2 ms (docs/fe.md). The libraries are
    looked up once, here, not at every call.
    """

    def __init__(self):
        self._controller = ThreadpoolController()

    def __call__(self):
        return self._controller.limit(limits=1, user_api="blas")


def _dissection_tree(nxp: int, nyp: int, leaf: int) -> tuple[list[tuple[int, int, int, int]], list[list[int]]]:
    """Boxes of nodes [i0, i1) x [j0, j1) of the nested dissection, parents before children, and each box's
    children (first half, second half). A box with children is split by its separator line: the middle column
    when it is at least as wide as tall, else the middle row; a box no larger than ``leaf`` nodes a side is a
    leaf."""
    boxes: list[tuple[int, int, int, int]] = []
    children: list[list[int]] = []
    stack = [(0, nxp, 0, nyp, -1)]
    while stack:
        i0, i1, j0, j1, parent = stack.pop()
        boxes.append((i0, i1, j0, j1))
        children.append([])
        if parent >= 0:
            children[parent].append(len(boxes) - 1)
        w, h = i1 - i0, j1 - j0
        if max(w, h) <= leaf:
            continue
        if w >= h:
            m = (i0 + i1) // 2
            halves = [(i0, m, j0, j1), (m + 1, i1, j0, j1)]
        else:
            m = (j0 + j1) // 2
            halves = [(i0, i1, j0, m), (i0, i1, m + 1, j1)]
        for i0h, i1h, j0h, j1h in reversed(halves):
            if i1h > i0h and j1h > j0h:
                stack.append((i0h, i1h, j0h, j1h, len(boxes) - 1))
    return boxes, children


def _own_nodes(box: tuple[int, int, int, int], is_leaf: bool) -> tuple[np.ndarray, np.ndarray]:
    """(di, dj) offsets from the box's lower-left node of the nodes the box eliminates itself: all of a leaf's,
    the separator line of any other box."""
    i0, i1, j0, j1 = box
    w, h = i1 - i0, j1 - j0
    if is_leaf:
        di, dj = np.meshgrid(np.arange(w), np.arange(h))
        return di.ravel(), dj.ravel()
    if w >= h:
        return np.full(h, (i0 + i1) // 2 - i0), np.arange(h)
    return np.arange(w), np.full(w, (j0 + j1) // 2 - j0)


def nested_dissection(grid: Grid, leaf: int = 2) -> np.ndarray:
    """A fill-reducing order of the grid's nodes: halves first, the line of nodes that splits them last.

    On a structured grid the separators are known without any graph search; with them SuperLU's factors stay
    about half the size they have under its own orderings (benchmarks/bench_fe.py has the figures). The order
    depends on the grid's node counts alone, and a whole job solves one grid five times or more (the panel, the
    optimiser, the made and freeform layouts, the shape optimisation): it is worked out once per size (0.025 s at
    300 x 100 elements) and handed out read-only.
    """
    return _dissection_order(grid.nx + 1, grid.ny + 1, leaf)


@lru_cache(maxsize=4)
def _dissection_order(nxp: int, nyp: int, leaf: int) -> np.ndarray:
    """The boxes of ``_dissection_tree`` in postorder (first half's subtree, second half's, then the box's own
    nodes), each box's own nodes as ``_own_nodes`` lists them; worked out for all nodes at once, level by level.
    Each node carries the path to the box that owns it as a base-3 key, one digit a level (0: into the first
    half, 1: into the second, 2: owned here, then 0s): sorted, the keys give the postorder, since a box's own
    nodes (2) come after both halves below it (0, 1). Then by place within its box. Twenty-odd levels at a
    million elements; an int64 holds 39. 0.3 -> 0.025 s at 300 x 100 elements, 1.2 -> 0.13 s at 600 x 200
    against a loop over the boxes (the same order: tests/test_fe_assembly_solve.py)."""
    n = nxp * nyp
    ni, nj = np.arange(n) % nxp, np.arange(n) // nxp
    i0, i1 = np.zeros(n, np.int64), np.full(n, nxp, np.int64)  # each node's box, until a box owns it
    j0, j1 = np.zeros(n, np.int64), np.full(n, nyp, np.int64)
    key, place = np.zeros(n, np.int64), np.zeros(n, np.int64)
    todo = np.arange(n)
    while todo.size:
        key *= 3  # every node: a node owned higher up is padded with 0s
        a0, a1, b0, b1 = i0[todo], i1[todo], j0[todo], j1[todo]
        w, h = a1 - a0, b1 - b0
        di, dj = ni[todo] - a0, nj[todo] - b0
        is_leaf = np.maximum(w, h) <= leaf
        wide = w >= h  # split by the middle column, else the middle row
        mid = np.where(wide, (a0 + a1) // 2, (b0 + b1) // 2)
        across = np.where(wide, ni[todo], nj[todo])
        on_line = ~is_leaf & (across == mid)
        second = ~is_leaf & (across > mid)
        first = ~is_leaf & (across < mid)
        key[todo[is_leaf | on_line]] += 2
        key[todo[second]] += 1
        place[todo[is_leaf]] = (dj * w + di)[is_leaf]
        place[todo[on_line]] = np.where(wide, dj, di)[on_line]
        i1[todo[first & wide]] = mid[first & wide]
        i0[todo[second & wide]] = mid[second & wide] + 1
        j1[todo[first & ~wide]] = mid[first & ~wide]
        j0[todo[second & ~wide]] = mid[second & ~wide] + 1
        todo = todo[first | second]
    order = np.lexsort((place, key))
    order.flags.writeable = False
    return order


def _dissection_order_by_boxes(nxp: int, nyp: int, leaf: int) -> np.ndarray:
    """The same order by a loop over the boxes of ``_dissection_tree``: the reference of the tests."""
    boxes, children = _dissection_tree(nxp, nyp, leaf)
    parts: list[np.ndarray] = []
    # Children before their parent: the preorder with each box's children reversed, read backwards.
    stack, post = [0], []
    while stack:
        b = stack.pop()
        post.append(b)
        stack.extend(children[b])
    for b in reversed(post):
        di, dj = _own_nodes(boxes[b], not children[b])
        parts.append((boxes[b][2] + dj) * nxp + boxes[b][0] + di)
    return np.concatenate(parts)


# Smallest pivot, relative to the largest, of a matrix taken as non-singular. Genuine contrasts stay far above
# it (void elements at 1e-3 or 1e-6 of solid); a free rigid motion leaves a pivot at round-off level, ~1e-16.
SINGULAR_PIVOT = 1e-12


# Below this many dofs "auto" takes SuperLU: measured at 60 x 20 elements it factorises in a third of the time
# (the multifrontal backend pays some Python per group of boxes), at 120 x 40 (10,000 dofs) the two are even,
# at 200 x 60 the multifrontal one is 1.5 times faster and at 600 x 200 two to three times.
MULTIFRONTAL_MIN_DOFS = 20_000


def _singular() -> LacunaError:
    return LacunaError(
        "the stiffness matrix is singular: part of the panel can move without resistance.",
        hint="Check that every part of the panel is held by supports in x and y and against rotation.",
    )


class _Group:
    """Boxes of one shape and one set of outer sides, so of one front structure: factorised as a batch."""

    def __init__(self, own: np.ndarray, ring: np.ndarray, own_free: np.ndarray, dest: np.ndarray,
                 src: np.ndarray):
        self.own, self.ring, self.own_free = own, ring, own_free  # (B, k), (B, r) dofs; (B, k) bool
        self.k, self.m = own.shape[1], own.shape[1] + ring.shape[1]
        self.dest, self.src = dest, src  # front entry (flat) <- K.data entry, for the entries of K itself
        # (child group, first member, runs (child start, child stop, front start)) of each child slot.
        self.kids: list[tuple[int, int, list[tuple[int, int, int]]]] = []
        self.last_use = -1  # the last group that reads this one's update matrices
        self.Linv: np.ndarray | None = None  # (B, k, k) inverse of the Cholesky factor of the pivot block
        self.W: np.ndarray | None = None  # (B, k, r) Linv times the coupling of own to ring dofs


class _Multifrontal:
    """Sparse Cholesky of K on a structured grid: the multifrontal method over the nested-dissection tree.

    Each box of the dissection owns the nodes it eliminates (a leaf: all its nodes; any other box: its
    separator line) and couples only to the ring of nodes just outside it, which belong to the separators of
    its ancestors. Its front is the dense matrix on own + ring dofs: the rows of K on its own dofs plus the
    update matrices of its children (extend-add); eliminating the own dofs leaves the ring's update for the
    parent (Duff & Reid 1983, ACM TOMS 9:302; George 1973, SIAM J Numer Anal 10:345, for the order). On a
    grid, boxes of one shape and one set of outer sides have identical fronts, so they are factorised in
    batches by dense LAPACK/BLAS calls over stacked arrays: a few hundred calls for the whole grid.

    Dofs outside ``free`` get an identity row and column, which keeps every front of a batch alike.
    """

    def __init__(self, K: sp.csc_matrix, free: np.ndarray, grid: Grid, leaf: int = 4):
        n = K.shape[0]
        nxp, nyp = grid.nx + 1, grid.ny + 1
        self.n = n
        self.free = free
        # Slot of K[a, b] in K.data, looked up by column b and the code of a's node offset from b's node
        # (3 x 3 neighbours) and a's parity: a node couples only to its eight neighbours.
        col = np.repeat(np.arange(n), np.diff(K.indptr))
        row = K.indices.astype(np.int64)
        di = (row // 2) % nxp - (col // 2) % nxp
        dj = (row // 2) // nxp - (col // 2) // nxp
        near = (np.abs(di) <= 1) & (np.abs(dj) <= 1)
        entry = np.arange(K.nnz)
        if not near.all():
            if np.any(~near & free[row] & free[col] & (K.data != 0)):
                raise ValueError("the matrix couples nodes that are not grid neighbours")
            col, row, di, dj, entry = col[near], row[near], di[near], dj[near], entry[near]
        slots = np.full(18 * n, K.nnz, dtype=np.int64)
        slots[18 * col + ((dj + 1) * 3 + di + 1) * 2 + row % 2] = entry
        slots = slots.reshape(n, 18)

        boxes, children = _dissection_tree(nxp, nyp, leaf)
        box = np.array(boxes)
        sig = np.stack([box[:, 1] - box[:, 0], box[:, 3] - box[:, 2], box[:, 0] > 0, box[:, 1] < nxp,
                        box[:, 2] > 0, box[:, 3] < nyp], axis=1).astype(np.int64)
        keys, gid = np.unique(sig, axis=0, return_inverse=True)
        # Smaller boxes first: every child is then factorised before its parent.
        by_area = np.argsort(keys[:, 0] * keys[:, 1], kind="stable")
        rank = np.empty_like(by_area)
        rank[by_area] = np.arange(by_area.size)
        gid = rank[gid.ravel()]
        # Members in an order that makes the children in each slot of each group one run of their group.
        members: list[list[int]] = [[] for _ in range(keys.shape[0])]
        members[gid[0]].append(0)
        first_child: dict[tuple[int, int], int] = {}
        for g in range(len(members) - 1, -1, -1):
            for slot in range(len(children[members[g][0]]) if members[g] else 0):
                kids = [children[b][slot] for b in members[g]]
                first_child[g, slot] = len(members[gid[kids[0]]])
                members[gid[kids[0]]].extend(kids)

        self.groups: list[_Group] = []
        ring_rel: list[np.ndarray] = []
        for g, mem in enumerate(members):
            b0 = mem[0]
            i0, i1, j0, j1 = boxes[b0]
            w, h = i1 - i0, j1 - j0
            odi, odj = _own_nodes(boxes[b0], not children[b0])
            own_rel = odj * nxp + odi
            # The ring by sides (bottom and top rows with the corners, then left and right columns), each side in
            # order: a child's ring is then a few runs of its parent's front.
            span, up = np.arange(-1, w + 1), np.arange(h)
            rdi = np.concatenate([span, span, np.full(h, -1), np.full(h, w)])
            rdj = np.concatenate([np.full(w + 2, -1), np.full(w + 2, h), up, up])
            inside = (rdi + i0 >= 0) & (rdi + i0 < nxp) & (rdj + j0 >= 0) & (rdj + j0 < nyp)
            ring_rel.append(rdj[inside] * nxp + rdi[inside])
            front_rel = np.concatenate([own_rel, ring_rel[g]])
            base = np.array([boxes[b][2] * nxp + boxes[b][0] for b in mem])
            nodes = base[:, None] + front_rel[None, :]
            dofs = np.stack([2 * nodes, 2 * nodes + 1], axis=2).reshape(len(mem), -1)
            k, m = 2 * own_rel.size, dofs.shape[1]
            # K's entries in the own rows of the front (all columns), mirrored into the ring rows. Which front
            # entries couple grid neighbours is the same for every box of the group: found once on offsets.
            fdi, fdj = np.concatenate([odi, rdi[inside]]), np.concatenate([odj, rdj[inside]])
            ddi = np.repeat(fdi[:own_rel.size, None] - fdi[None, :], 2, axis=0).repeat(2, axis=1)
            ddj = np.repeat(fdj[:own_rel.size, None] - fdj[None, :], 2, axis=0).repeat(2, axis=1)
            ri, ci = np.nonzero((np.abs(ddi) <= 1) & (np.abs(ddj) <= 1))
            code = ((ddj[ri, ci] + 1) * 3 + ddi[ri, ci] + 1) * 2 + ri % 2
            a, b = dofs[:, ri], dofs[:, ci]
            src = np.where(free[a] & free[b], slots[b, code], K.nnz)
            src = np.where((a == b) & ~free[a], K.nnz + 1, src)  # identity on held dofs
            bi, ti = np.nonzero(src != K.nnz)
            src, ri, ci = src[bi, ti], ri[ti], ci[ti]
            dest = (bi * m + ri) * m + ci
            off = ci >= k
            dest = np.concatenate([dest, (bi[off] * m + ci[off]) * m + ri[off]])
            src = np.concatenate([src, src[off]])
            group = _Group(dofs[:, :k], dofs[:, k:], free[dofs[:, :k]], dest, src)
            for slot, kid in enumerate(children[b0]):
                cg = gid[kid]
                kid_rel = boxes[kid][2] * nxp + boxes[kid][0] - (j0 * nxp + i0) + ring_rel[cg]
                sorter = np.argsort(front_rel)
                p = sorter[np.searchsorted(front_rel, kid_rel, sorter=sorter)]
                assert np.array_equal(front_rel[p], kid_rel), "a child's ring must lie in its parent's front"
                pos = np.stack([2 * p, 2 * p + 1], axis=1).ravel()
                cut = np.flatnonzero(np.diff(pos) != 1) + 1
                starts, stops = np.r_[0, cut], np.r_[cut, pos.size]
                group.kids.append((int(cg), first_child[g, slot],
                                   [(int(s0), int(s1), int(pos[s0])) for s0, s1 in zip(starts, stops)]))
                self.groups[cg].last_use = g
            self.groups.append(group)

    def factor(self, data: np.ndarray) -> None:
        """Factorise the matrix with entries ``data`` (K.data of the pattern given at construction)."""
        values = np.concatenate([data, [0.0, 1.0]])
        updates: list[np.ndarray | None] = [None] * len(self.groups)
        smallest, largest = np.inf, 0.0
        for g, G in enumerate(self.groups):
            B, k, m = G.own.shape[0], G.k, G.m
            F = np.zeros((B, m, m))
            F.ravel()[G.dest] = values[G.src]
            for cg, first, runs in G.kids:
                U = updates[cg][first:first + B]
                for a0, a1, pa in runs:
                    for b0, b1, pb in runs:
                        F[:, pa:pa + a1 - a0, pb:pb + b1 - b0] += U[:, a0:a1, b0:b1]
            for cg, _, _ in G.kids:
                if self.groups[cg].last_use == g:
                    updates[cg] = None
            try:
                L = np.linalg.cholesky(F[:, :k, :k])
            except np.linalg.LinAlgError as exc:
                raise _singular() from exc
            pivots = np.diagonal(L, axis1=1, axis2=2)[G.own_free] ** 2
            if pivots.size:
                smallest, largest = min(smallest, pivots.min()), max(largest, pivots.max())
            G.Linv = np.linalg.inv(L)
            if m > k:
                G.W = G.Linv @ F[:, :k, k:]
                F[:, k:, k:] -= np.matmul(G.W.transpose(0, 2, 1), G.W)
                updates[g] = F[:, k:, k:]
        if not smallest > SINGULAR_PIVOT * largest:
            raise _singular()

    def solve(self, b: np.ndarray) -> np.ndarray:
        """x with K x = b (n, ncases); rows of held dofs in b are ignored and come back zero."""
        b = b.copy()
        b[~self.free] = 0.0
        n, nc = b.shape
        ys = []
        for G in self.groups:  # forward: L y = b, children first
            y = G.Linv @ b[G.own]
            ys.append(y)
            if G.W is not None:
                d = np.matmul(G.W.transpose(0, 2, 1), y)
                for c in range(nc):
                    b[:, c] -= np.bincount(G.ring.ravel(), weights=d[:, :, c].ravel(), minlength=n)
        x = np.zeros_like(b)
        for G, y in zip(reversed(self.groups), reversed(ys)):  # back: L^T x = y, parents first
            if G.W is not None:
                y = y - G.W @ x[G.ring]
            x[G.own] = np.matmul(G.Linv.transpose(0, 2, 1), y)
        return x


def sorted_csc(K: sp.spmatrix) -> sp.csc_matrix:
    """K as CSC with sorted row indices (the form the factorisers and the pattern checks expect)."""
    if K.format != "csc":  # (made again as CSC, its sortedness is checked below; a CSC matrix keeps what it knows)
        K = sp.csc_matrix(K)
    return K if K.has_sorted_indices else K.sorted_indices()


def _values(K) -> np.ndarray:
    """The values of K (sparse: in sorted CSC order) or K itself as an array of them."""
    return sorted_csc(K).data if sp.issparse(K) else np.asarray(K)


def pardiso_available() -> bool:
    """True where the optional MKL PARDISO binding (package pypardiso, x86_64 only) loads."""
    try:
        with _mkl_named():
            import pypardiso  # noqa: F401
    except (ImportError, OSError):
        return False
    return True


@lru_cache(maxsize=1)
def _mkl_library() -> str | None:
    """Path of MKL's runtime library as the installed mkl package lists it (None: let pypardiso search)."""
    try:
        from importlib.metadata import PackageNotFoundError, files
    except ImportError:
        return None
    try:
        listed = files("mkl") or []
    except PackageNotFoundError:
        return None
    found = sorted((f for f in listed if "mkl_rt" in f.name), key=lambda f: len(str(f)))
    for f in found:
        path = str(f.locate())
        if os.path.isfile(path):
            return path
    return None


@contextmanager
def _mkl_named():
    """Inside ``with``, PYPARDISO_MKL_RT names MKL's library where the mkl package put it (unless the user named
    one). Without it pypardiso looks for the library by a recursive search of the environment whenever a solver
    is made, its own module-level one at import included: 0.25-0.6 s of every job's start."""
    path = _mkl_library()
    added = path is not None and "PYPARDISO_MKL_RT" not in os.environ
    if added:
        os.environ["PYPARDISO_MKL_RT"] = path
    try:
        yield
    finally:
        if added:
            os.environ.pop("PYPARDISO_MKL_RT", None)


# A solve is refined (a substitution on the residual) while some load case's residual is above REFINE_ABOVE of its
# loads, up to REFINE_STEPS times. MKL's own refinement, which this replaces, took both of its steps on every
# solve: as long again as the substitution. On the optimiser's designs one substitution leaves a residual of about
# 1e-11 and the compliance within 2e-10 of a solve refined ten times (measured 2026-12-02 at 300 x 100 elements: a
# BESO design at volume 0.6; a checkerboard of 10-element void blocks: 7e-11 and 1e-9). Where the loaded half of
# the panel is void (1e-9 contrast) no solve gets the residual under 1e-5: both steps are taken, and the compliance
# is within 3e-8 of the ten-times refined one (MKL's refinement: 1.5e-7).
REFINE_ABOVE = 1e-10
REFINE_STEPS = 2


class _Pardiso:
    """MKL PARDISO (package pypardiso) in its symmetric positive definite mode, driven phase by phase: the
    symbolic analysis (fill-reducing order) once, every refactor numeric only (phase 22), solves by
    substitution (phase 33). pypardiso's own ``factorize`` redoes the analysis and keeps a copy of the matrix to
    compare at every solve; the numeric phase alone is about four times cheaper than our multifrontal code at
    300 x 100 and 600 x 200 elements (docs/dependencies.md). Run on one thread, as the multifrontal code, unless
    made for another fixed count (``threads``, for the solver's whole life: PARDISO's analysis plans the
    factorisation for the threads it ran on; a solver analysed on two threads and factorised on one crashed the
    process, one analysed on one is no faster on two). A fixed count, not the machine's cores, so a design comes
    out the same on any machine: on two threads the same solution to the bit run after run (measured)."""

    def __init__(self, ordered: bool = False, order: str = "metis", threads: int = 1):
        """``ordered``: the matrix comes already in a fill-reducing order (the grid's nested dissection), used as
        it is; otherwise PARDISO finds one: ``order`` "metis" (nested dissection) or "minimum degree".
        ``threads``: MKL threads for every phase of this solver."""
        self.threads = max(1, int(threads))
        import pypardiso
        from pypardiso.pardiso_wrapper import PyPardisoError

        self._error = PyPardisoError
        # Matrix type 2: real symmetric positive definite (Cholesky, no pivoting); MKL's library named (_mkl_named).
        with _mkl_named():
            self._solver = pypardiso.PyPardisoSolver(mtype=2)
        # Our own settings rather than MKL's defaults (iparm[0] = 1; unset entries 0): METIS order, one-based
        # indices as pypardiso passes them, and the factor's diagonal kept for ``pardiso_getdiag``: in its
        # positive definite mode PARDISO stops only on a pivot that is not positive, and a free rigid motion
        # shows as pivots at round-off level of either sign, so the pivots are checked here as SuperLU's and the
        # multifrontal code's are (below SINGULAR_PIVOT of the largest: a mechanism).
        iparm = self._solver.iparm
        iparm[:] = 0
        iparm[0] = 1     # settings given here
        # fill-reducing order where none is given: METIS (the serial one: the same on any machine) or minimum degree
        iparm[1] = 2 if order == "metis" else 0
        iparm[7] = 0     # no iterative refinement of its own: solve() refines where the residual asks for it
        iparm[17] = -1   # report the factor's nonzeros
        iparm[34] = 0    # one-based indices
        iparm[55] = 1    # keep the diagonal for pardiso_getdiag
        self._ordered = ordered
        if ordered:
            iparm[4] = 1  # a permutation of our own: the identity, set once the size is known
        self._getdiag = self._solver.libmkl.pardiso_getdiag
        self._getdiag.restype = None
        self._controller = ThreadpoolController()
        self._indices = (None, None, None, None)  # (size, nonzeros, one-based int32 indptr and indices)
        self._diagonal_at = None  # ((size, nonzeros), positions or None) of the analysed pattern's diagonal entries
        self._analysed = False
        self._holds = False  # MKL may hold memory for this solver (a factorisation was attempted)
        self._A: sp.csr_matrix | None = None

    def _one_thread(self):
        """MKL on this solver's threads (one, unless it was made for more)."""
        return self._controller.limit(limits=self.threads, user_api="blas")

    def _release(self) -> None:
        """Free MKL's memory for this solver (factor and analysis); the next ``factor`` analyses again."""
        solver = getattr(self, "_solver", None)
        if solver is not None and getattr(self, "_holds", False):
            solver.free_memory(everything=True)
        self._analysed = self._holds = False

    def __del__(self):
        # MKL keeps PARDISO's factor and analysis in memory of its own until phase -1 releases them; pypardiso
        # does not when its solver object goes, so each solver made and dropped would keep its factor for the
        # rest of the process (0.3 GB a solver at 600 x 200 elements, gigabytes at a million).
        try:
            self._release()
        except Exception:  # noqa: BLE001 - at interpreter exit the library may already be gone
            pass

    def factor(self, A: sp.csr_matrix) -> None:
        """Factorise ``A`` (the upper triangle, CSR); after the first call, of the same pattern."""
        if self._ordered and len(self._solver.perm) != A.shape[0]:
            self._solver.perm = np.arange(1, A.shape[0] + 1, dtype=np.int32)
        analysed = self._analysed
        self._solver.set_phase(22 if analysed else 12)
        self._holds = True
        try:
            with self._one_thread():
                self._call(A, np.zeros((A.shape[0], 1)))
        except self._error as exc:
            self._release()
            raise _singular() from exc
        self._analysed = True
        self._A = A
        n = A.shape[0]
        pivots, original, error = np.zeros(n), np.zeros(n), ctypes.c_int32(0)
        self._getdiag(self._solver.pt.ctypes.data_as(ctypes.POINTER(ctypes.c_int64)),
                      pivots.ctypes.data_as(ctypes.c_void_p), original.ctypes.data_as(ctypes.c_void_p),
                      ctypes.byref(ctypes.c_int32(1)), ctypes.byref(error))
        self._diagonal = self._diagonal_of(A, analysed)  # for A x in solve (getdiag's lists follow PARDISO's order)
        pivots = np.abs(pivots)
        if error.value == 0 and n and not pivots.min() > SINGULAR_PIVOT * pivots.max():
            raise _singular()

    def _diagonal_of(self, A: sp.csr_matrix, analysed: bool) -> np.ndarray:
        """A's diagonal, from the positions of its diagonal entries found at the symbolic analysis: after it every
        refactor passes a matrix of the same pattern (A.diagonal() searches each row at every call, 0.7 ms at
        300 x 100 elements). ``analysed``: the analysis was made before this factorisation."""
        held = self._diagonal_at
        n = A.shape[0]
        if not analysed or held is None or held[0] != (n, A.nnz):
            # the upper triangle, sorted: each row's first entry is its diagonal (found with no array as long as the
            # nonzeros: at a million elements one would be 0.15 GB at the first factorisation); else scipy's search
            first = A.indptr[:-1]
            at_first = (A.has_canonical_format and np.all(first < A.indptr[1:])
                        and np.array_equal(A.indices[first], np.arange(n)))
            held = self._diagonal_at = ((n, A.nnz), first.copy() if at_first else None)
        return A.data[held[1]] if held[1] is not None else A.diagonal()

    def solve(self, rhs: np.ndarray) -> np.ndarray:
        """x with A x = rhs (n, k): by substitution, then refined (x += A^-1 r on the residual r) while some
        column's residual is above ``REFINE_ABOVE`` of its right-hand side, at most ``REFINE_STEPS`` times."""
        self._solver.set_phase(33)
        b = np.asfortranarray(np.asarray(rhs, dtype=float).reshape(len(rhs), -1))
        scale = REFINE_ABOVE * np.linalg.norm(b, axis=0)
        with self._one_thread():
            x = self._call(self._A, b).reshape(b.shape)
            for _ in range(REFINE_STEPS):
                r = b - self._times(x)
                if np.all(np.linalg.norm(r, axis=0) <= scale):
                    break
                x = x + self._call(self._A, np.asfortranarray(r)).reshape(b.shape)
        return x.reshape(np.shape(rhs))

    def _call(self, A: sp.csr_matrix, b: np.ndarray) -> np.ndarray:
        """pypardiso's ``_call_pardiso`` (the phase set on the solver), with the one-based int32 index arrays it
        would make at every call made once, at the symbolic analysis: after it PARDISO takes matrices of that
        pattern only (two conversions of the factor's index arrays a call, about 1.5 ms at 300 x 100 elements)."""
        held = self._indices
        if self._solver.phase in (11, 12, 13) or held[0] is None or held[0] != A.shape[0] or held[1] != A.nnz:
            held = self._indices = (A.shape[0], A.nnz, A.indptr.astype(np.int32) + 1, A.indices.astype(np.int32) + 1)
        solver = self._solver
        x = np.zeros_like(b)
        error = ctypes.c_int32(0)
        int_p, double_p = ctypes.POINTER(ctypes.c_int32), ctypes.POINTER(ctypes.c_double)
        solver._mkl_pardiso(solver.pt.ctypes.data_as(ctypes.POINTER(solver._pt_type[0])),
                            ctypes.byref(ctypes.c_int32(1)), ctypes.byref(ctypes.c_int32(1)),
                            ctypes.byref(ctypes.c_int32(solver.mtype)), ctypes.byref(ctypes.c_int32(solver.phase)),
                            ctypes.byref(ctypes.c_int32(A.shape[0])), A.data.ctypes.data_as(double_p),
                            held[2].ctypes.data_as(int_p), held[3].ctypes.data_as(int_p),
                            solver.perm.ctypes.data_as(int_p),
                            ctypes.byref(ctypes.c_int32(1 if b.ndim == 1 else b.shape[1])),
                            solver.iparm.ctypes.data_as(int_p), ctypes.byref(ctypes.c_int32(solver.msglvl)),
                            b.ctypes.data_as(double_p), x.ctypes.data_as(double_p), ctypes.byref(error))
        if error.value != 0:
            raise self._error(error.value)
        return np.ascontiguousarray(x)

    def _times(self, x: np.ndarray) -> np.ndarray:
        """A x from the upper triangle held: U x + U^T x less the diagonal's share counted twice."""
        U = self._A
        return U @ x + U.T @ x - self._diagonal[:, None] * x


def solve_spd(K: sp.spmatrix, rhs: np.ndarray) -> np.ndarray:
    """``K x = rhs`` for one symmetric positive definite ``K`` with no grid behind it (a local model at a void),
    factorised once; ``rhs`` (n,) or (n, k). PARDISO with a minimum-degree order where it loads (at a few thousand
    to some tens of thousands of unknowns METIS's analysis costs about what SuperLU's whole factorisation does),
    else SuperLU with diagonal pivots on a minimum-degree order. LacunaError when ``K`` is singular."""
    K = sp.csc_matrix(K)
    rhs = np.asarray(rhs, dtype=float)
    if pardiso_available():
        solver = _Pardiso(order="minimum degree")
        upper = sp.tril(K, format="csc")  # the CSC lower triangle read as CSR is the upper one (K symmetric)
        upper.sort_indices()
        solver.factor(sp.csr_matrix((upper.data, upper.indices, upper.indptr), shape=K.shape))
        x = solver.solve(rhs.reshape(len(rhs), -1))
        return x.reshape(rhs.shape)
    try:
        lu = spla.splu(K, permc_spec="MMD_AT_PLUS_A", diag_pivot_thresh=0.0, options={"SymmetricMode": True})
    except RuntimeError as exc:
        raise _singular() from exc
    pivots = np.abs(lu.U.diagonal())
    if not pivots.min() > SINGULAR_PIVOT * pivots.max():
        raise _singular()
    return lu.solve(np.ascontiguousarray(rhs))


class LinearSolver:
    """Factorises K restricted to the free dofs; ``refactor`` takes a new K of the same pattern.

    ``backend``:

    - "multifrontal" (needs ``grid``): our sparse Cholesky over the grid's nested-dissection tree, in dense
      batches (:class:`_Multifrontal`); two to three times faster than SuperLU at 600 x 200 elements
      (benchmarks/bench_fe.py). Held dofs are kept in the system with an identity row.
    - "superlu" (scipy): K restricted to the free dofs through an index map into ``K.data`` built once, with
      the grid's nested-dissection order folded in where ``grid`` is given, else SuperLU's minimum degree on
      K + K^T. The stiffness is symmetric positive definite on the free dofs, so no pivoting is needed.
    - "pardiso": MKL's sparse Cholesky through the pypardiso package (installed with lacuna on x86-64 Linux and
      Windows), on the same restriction (:class:`_Pardiso`).
    - "auto", the default: "pardiso" where it loads (the fastest by measurement, docs/dependencies.md), else
      "multifrontal" with a grid of at least ``MULTIFRONTAL_MIN_DOFS`` dofs, else "superlu".
    """

    def __init__(self, K: sp.spmatrix, free: np.ndarray, grid: Grid | None = None, backend: str = "auto",
                 threads: int = 1):
        if backend not in ("auto", "multifrontal", "superlu", "pardiso"):
            raise ValueError(f"unknown solver backend {backend!r}")
        if backend == "multifrontal" and grid is None:
            raise ValueError("the multifrontal backend needs the grid")
        K = sorted_csc(K)
        n = K.shape[0]
        if grid is not None and grid.n_dofs != n:
            raise ValueError(f"grid has {grid.n_dofs} dofs, the matrix {n}")
        free = np.asarray(free)
        free_idx = np.flatnonzero(free) if free.dtype == bool else np.asarray(free, dtype=np.int64)
        if free_idx.size == 0:
            raise LacunaError("every degree of freedom is held by a support: there is nothing to solve.")
        self.n = n
        # MKL threads of a PARDISO solver, fixed for its life (``_Pardiso``); the other backends run on one
        self.threads = 1
        # what a refactor must keep: the pattern and the free dofs (SharedSolver compares them)
        self.free_idx = np.sort(free_idx)
        self.pattern = (K.indptr, K.indices)
        if backend == "auto" and pardiso_available():
            backend = "pardiso"
        if backend == "multifrontal" or (backend == "auto" and grid is not None and n >= MULTIFRONTAL_MIN_DOFS):
            is_free = np.zeros(n, dtype=bool)
            is_free[free_idx] = True
            try:
                self._frontal = _Multifrontal(K, is_free, grid)
            except ValueError:  # K couples more than grid neighbours: not the matrix of this grid
                if backend == "multifrontal":
                    raise
            else:
                self._one_thread = BlasOneThread()
                self.backend = "multifrontal"
                self._made(K)
                return
        if backend in ("auto", "multifrontal"):
            backend = "pardiso" if pardiso_available() else "superlu"
        self.backend = backend
        if grid is not None and backend in ("superlu", "pardiso"):
            # The grid's own nested dissection: SuperLU keeps it (NATURAL); PARDISO takes it as given (an
            # identity user permutation on the reordered matrix) instead of running METIS, whose ordering cost
            # more to find and gave a larger factor (docs/dependencies.md).
            nodes = nested_dissection(grid)
            order = np.stack([2 * nodes, 2 * nodes + 1], axis=1).ravel()
            is_free = np.zeros(n, dtype=bool)
            is_free[free_idx] = True
            order = order[is_free[order]]
            self._permc = "NATURAL"
        else:
            order = free_idx
            self._permc = "MMD_AT_PLUS_A"
        self.order = order
        # Carry entry numbers through the slicing to learn which entries of K.data land where in K_ff.
        probe = sp.csc_matrix((np.arange(1, K.nnz + 1, dtype=float), K.indices, K.indptr), shape=K.shape)
        sub = probe[order][:, order].tocsc()
        if backend == "pardiso":
            # PARDISO's symmetric positive definite mode reads the upper triangle row by row: that is the CSC
            # lower triangle read as CSR (K is symmetric), so no transpose is needed.
            sub = sp.tril(sub, format="csc")
            self.threads = max(1, int(threads))
            self._pardiso = _Pardiso(ordered=grid is not None, threads=self.threads)
        sub.sort_indices()
        self._take = sub.data.astype(np.int64) - 1
        self._indices = sub.indices
        self._indptr = sub.indptr
        self._lu = None
        self._made(K)

    def refactor(self, K: sp.spmatrix, free: np.ndarray | None = None) -> None:
        """Factorise a new matrix of the same sparsity pattern as the one given at construction. The first refactor
        given the values the solver was made with (another array, equal to the bit) keeps that factor: the
        optimiser's first design is the panel as drawn, which the job's solid analysis has just factorised (one
        factorisation saved a job, 0.07 s at 300 x 100 elements, 7 s at a million). Those values are held until
        the first refactor only: at a million elements they are 0.29 GB, held through the optimiser's set-up,
        where the job's peak falls (6.21 -> 6.49 GB measured; the 10 minutes there are the tighter target).

        ``free`` (sorted dof numbers, a subset of the construction's; PARDISO only): solve on those dofs alone.
        The others stay in the factorised system, their rows and columns zeroed and a pivot on the diagonal, so
        they are decoupled and hold zero, and the symbolic analysis is kept (``within``)."""
        data = _values(K)
        self._made_with, first = None, self._made_with
        if free is not None and free.size != self.free_idx.size:
            self._factor_data(data, held=~np.isin(self.order, free, assume_unique=True))
            return
        # The same array (or a view of it) may have been changed in place since: only another array is compared.
        if first is not None and not np.may_share_memory(first, data) and np.array_equal(first, data):
            return
        self._factor_data(data)

    def within(self, K: sp.spmatrix, free_idx: np.ndarray) -> bool:
        """Whether ``refactor(K, free_idx)`` can serve the system of ``K`` on the dofs ``free_idx`` (sorted): the
        same pattern, and those dofs among the construction's (a layout with voids on the grid of the optimiser's or
        the shape optimisation's solver, whose nodes only void elements touch are left out). A refactor instead of a
        new solver, 0.09 against 0.19-0.22 s at 300 x 100 elements (the symbolic analysis and the index maps).
        The answer is not the new solver's to the bit (its factor's blocks follow another pattern), only to
        round-off."""
        return (self.backend == "pardiso" and self.n == K.shape[0] and free_idx.size < self.free_idx.size
                and np.array_equal(self.pattern[0], K.indptr) and np.array_equal(self.pattern[1], K.indices)
                and bool(np.isin(free_idx, self.free_idx, assume_unique=True).all()))

    def _made(self, K: sp.spmatrix) -> None:
        """The factorisation at construction; its values are held for the first ``refactor``."""
        data = _values(K)
        self._factor_data(data)
        self._made_with = data

    def _factor_data(self, data: np.ndarray, held: np.ndarray | None = None) -> None:
        """Factorise the values ``data`` of K; ``held``: positions of ``order`` left out of the system (see
        ``refactor``), none by default."""
        self._held = held if held is not None and held.any() else None
        if self.backend == "multifrontal":
            with self._one_thread():
                self._frontal.factor(data)
            return
        m = self.order.size
        values = data[self._take]
        if self._held is not None:
            # Entries in a held row or column go to zero, and a held dof's diagonal takes the mean pivot of the
            # others (any positive value decouples it; this one keeps the pivots' spread as it was).
            columns = np.repeat(np.arange(m), np.diff(self._indptr))
            rows = self._indices
            values[self._held[rows] | self._held[columns]] = 0.0
            diagonal = rows == columns
            values[diagonal & self._held[rows]] = float(np.mean(values[diagonal & ~self._held[rows]]))
        Kff = sp.csc_matrix((values, self._indices, self._indptr), shape=(m, m))
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
        self._upper = sp.csr_matrix((Kff.data, Kff.indices, Kff.indptr), shape=Kff.shape)
        self._pardiso.factor(self._upper)

    def solve(self, F: np.ndarray) -> np.ndarray:
        """Full displacement vector(s) for load vector(s) F (ndof,) or (ndof, ncases); zero at held dofs."""
        F = np.asarray(F, dtype=float)
        if self.backend == "multifrontal":
            with self._one_thread():
                U = self._frontal.solve(F.reshape(self.n, -1)).reshape(F.shape)
            u = U
        else:
            rhs = np.ascontiguousarray(F[self.order])
            if self._held is not None:
                rhs[self._held] = 0.0
            if self.backend == "pardiso":
                u = self._pardiso.solve(rhs)
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


class SharedSolver:
    """One factorisation handed from stage to stage of a job on one grid: the solid analysis, the optimiser and
    the shape optimisation of the voids each ask ``factor(K, free, grid)``; where the last solver was made for
    the same pattern and the same free dofs it is refactored (PARDISO: the numeric phase only, the analysis kept),
    else a new one replaces it, so at most one is held. Building a solver costs the slicing maps and the symbolic
    analysis: 0.29 s against a 0.04 s refactor at 300 x 100 elements, 0.55 s against 0.23 s at 600 x 200
    (benchmarks, 2026-12-02). The factor is the same as a new solver's (the analysis reads the pattern only), so
    the figures do not change. Not for threads working at once: each holds its own solver."""

    def __init__(self, backend: str = "auto"):
        self.backend = backend
        self.solver: LinearSolver | None = None
        self.built = self.refactored = 0
        self._assembler = None

    def assembler(self, grid: Grid):
        """The grid's assembly pattern (``fe.assembly.Assembler``), built once for the job: it depends on the
        element counts alone, and building it costs as much as a refactor (0.6 s at 1000 x 300 elements)."""
        from .assembly import Assembler

        held = self._assembler
        if held is None or (held.grid.nx, held.grid.ny) != (grid.nx, grid.ny):
            held = self._assembler = Assembler(grid)
        return held

    def factor(self, K: sp.spmatrix, free: np.ndarray, grid: Grid | None = None, threads: int = 1) -> LinearSolver:
        """A solver holding the factorisation of ``K`` on the ``free`` dofs (bool mask or dof numbers), on
        ``threads`` MKL threads (PARDISO; the held solver is refactored only when made for as many)."""
        K = sorted_csc(K)
        free = np.asarray(free)
        free_idx = np.flatnonzero(free) if free.dtype == bool else np.sort(np.asarray(free, dtype=np.int64))
        old = self.solver
        wanted = max(1, int(threads))
        if (old is not None and grid is not None and old.n == K.shape[0] and np.array_equal(old.free_idx, free_idx)
                and np.array_equal(old.pattern[0], K.indptr) and np.array_equal(old.pattern[1], K.indices)
                and old.threads == (wanted if old.backend == "pardiso" else 1)):
            old.refactor(K)
            self.refactored += 1
            return old
        if old is not None and grid is not None and old.threads == wanted and old.within(K, free_idx):
            old.refactor(K, free_idx)
            self.refactored += 1
            return old
        self.solver = None  # the old factor goes before the new one is made
        old = None
        self.solver = LinearSolver(K, free_idx, grid=grid, backend=self.backend, threads=wanted)
        self.built += 1
        return self.solver

    def release(self) -> None:
        """Drop the held solver (and its factor's memory); the assembly pattern is kept."""
        self.solver = None
