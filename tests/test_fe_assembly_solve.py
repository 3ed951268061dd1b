"""Assembly pattern and the direct solver."""

import platform
import sys

import numpy as np
import pytest
import scipy.sparse as sp

from toolkit.errors import LacunaError
from toolkit.fe.assembly import Assembler
from toolkit.fe.element import q4_stiffness
from toolkit.fe.grid import Grid, make_grid
from toolkit.fe.solve import (LinearSolver, SharedSolver, _dissection_order, _dissection_order_by_boxes,
                              nested_dissection, pardiso_available)


@pytest.mark.parametrize("shape", [(1, 1), (5, 1), (1, 4), (7, 5)])
def test_assembly_equals_plain_triplet_sum(shape):
    g = Grid(*shape, 2.0, 1.5)
    rng = np.random.default_rng(1)
    ke = rng.random((8, 8))
    scale = rng.random(g.n_elements)
    K = Assembler(g).matrix(ke, scale)
    reference = sp.coo_matrix(((scale[:, None] * ke.ravel()).ravel(), (g.iK, g.jK)), shape=K.shape).tocsc()
    assert abs(K - reference).max() < 1e-13
    assert K.has_sorted_indices


def test_pattern_is_the_same_every_call():
    g = Grid(6, 4, 1.0, 1.0)
    a = Assembler(g)
    ke = q4_stiffness(1, 1, 1, 0.3, 1)
    K1, K2 = a.matrix(ke), a.matrix(ke, np.full(g.n_elements, 1e-3))
    assert np.array_equal(K1.indices, K2.indices) and np.array_equal(K1.indptr, K2.indptr)
    np.testing.assert_allclose(K2.data, 1e-3 * K1.data, rtol=1e-13, atol=1e-16 * np.abs(K1.data).max())


def test_one_assembler_serves_each_element_matrix_it_is_given():
    # The scatter keeps the entries of the last ke it was given; another ke (another material or thickness) must
    # refill them, and the first again after it: each matrix as the plain triplet sum, to the bit where the
    # summation order is the same (an element's entries in rising element order).
    g = Grid(5, 3, 2.0, 1.5)
    rng = np.random.default_rng(2)
    a = Assembler(g)
    scale = rng.random(g.n_elements)
    kes = [q4_stiffness(2.0, 1.5, 1000.0, 0.3, 5.0), q4_stiffness(2.0, 1.5, 30000.0, 0.2, 1.0)]
    for ke in kes + kes[::-1]:
        K = a.matrix(ke, scale)
        values = (scale[:, None] * ke.ravel()).ravel()
        reference = sp.csc_matrix((values, (g.iK, g.jK)), shape=K.shape)
        reference.sum_duplicates()
        assert abs(K - reference).max() <= 1e-12 * abs(reference).max()
    np.testing.assert_array_equal(a.matrix(kes[0]).data, a.matrix(kes[0], np.ones(g.n_elements)).data)


def test_grid_numbering_and_exact_cover():
    g = make_grid(3000.0, 600.0, 35.0)
    assert g.nx * g.dx == pytest.approx(3000.0, rel=1e-15) and g.ny * g.dy == pytest.approx(600.0, rel=1e-15)
    assert g.edof.shape == (g.n_elements, 8)
    # Element 0's lower-left node is node 0; its upper-left node sits one row up.
    assert g.enodes[0].tolist() == [0, 1, g.nx + 2, g.nx + 1]
    np.testing.assert_allclose(g.node_xy[g.enodes[g.nx + 1]].mean(axis=0), g.element_centres[g.nx + 1])
    default = make_grid(3000.0, 600.0)
    assert 15000 < default.n_elements < 25000


def test_nested_dissection_is_a_permutation():
    g = Grid(13, 7, 1.0, 1.0)
    assert np.array_equal(np.sort(nested_dissection(g)), np.arange(g.n_nodes))


@pytest.mark.parametrize("nxp,nyp", [(1, 1), (2, 2), (5, 2), (2, 50), (14, 8), (31, 11), (11, 31), (301, 101)])
@pytest.mark.parametrize("leaf", [1, 2, 4])
def test_nested_dissection_level_by_level_is_the_order_of_the_boxes(nxp, nyp, leaf):
    # The order worked out for all nodes at once is the one a loop over the dissection's boxes gives.
    fast = _dissection_order(nxp, nyp, leaf)
    assert np.array_equal(fast, _dissection_order_by_boxes(nxp, nyp, leaf))
    assert not fast.flags.writeable


# pypardiso is a dependency where its wheels exist (pyproject.toml: x86-64 Linux and Windows): there a package that
# fails to load fails this test instead of skipping it; elsewhere the backend is not expected.
PARDISO_PLATFORM = sys.platform in ("linux", "win32") and platform.machine() in ("x86_64", "AMD64")
BACKENDS = ["superlu", "multifrontal", pytest.param("pardiso", marks=pytest.mark.skipif(
    not PARDISO_PLATFORM, reason="pypardiso is a dependency on x86-64 Linux and Windows only"))]


@pytest.mark.skipif(not PARDISO_PLATFORM, reason="pypardiso is a dependency on x86-64 Linux and Windows only")
def test_pardiso_loads_where_it_is_a_dependency():
    assert pardiso_available()


def _held_at_left(nx: int, ny: int, seed: int, cases: int):
    """A grid of nx x ny elements held along its left edge: (grid, assembler, ke, held dofs, rng, loads F)."""
    g = Grid(nx, ny, 10.0, 7.0)
    fixed = np.zeros(g.n_dofs, bool)
    left = np.arange(g.ny + 1) * (g.nx + 1)
    fixed[2 * left] = fixed[2 * left + 1] = True
    rng = np.random.default_rng(seed)
    F = rng.standard_normal((g.n_dofs, cases))
    return g, Assembler(g), q4_stiffness(g.dx, g.dy, 1000.0, 0.3, 5.0), fixed, rng, F


@pytest.mark.parametrize("backend", BACKENDS)
def test_solver_matches_dense_solution_for_several_cases_and_refactor(backend):
    g, a, ke, fixed, rng, F = _held_at_left(8, 5, seed=3, cases=3)
    free = ~fixed
    F[fixed] = 0
    for use_grid in (g, None) if backend != "multifrontal" else (g,):
        scale = rng.uniform(1e-3, 1.0, g.n_elements)
        K = a.matrix(ke, scale)
        solver = LinearSolver(K, free, grid=use_grid, backend=backend)
        U = solver.solve(F)
        Kd = K.toarray()[np.ix_(free, free)]
        np.testing.assert_allclose(U[free], np.linalg.solve(Kd, F[free]), rtol=1e-9, atol=1e-12)
        assert np.all(U[fixed] == 0)
        K2 = a.matrix(ke, scale[::-1].copy())
        solver.refactor(K2)
        U2 = solver.solve(F[:, 0])
        np.testing.assert_allclose(U2[free], np.linalg.solve(K2.toarray()[np.ix_(free, free)], F[free, 0]),
                                   rtol=1e-9, atol=1e-12)


@pytest.mark.parametrize("backend", BACKENDS)
def test_singular_system_is_reported_in_words(backend):
    g = Grid(3, 2, 1.0, 1.0)
    K = Assembler(g).matrix(q4_stiffness(1, 1, 1, 0.3, 1))
    with pytest.raises(LacunaError, match="singular"):
        LinearSolver(K, np.ones(g.n_dofs, bool), grid=g, backend=backend).solve(np.ones(g.n_dofs))


def test_multifrontal_matches_dense_solution_with_held_dofs_anywhere():
    # Reference: numpy's dense solve of K restricted to the free dofs. Grids whose sides give every kind of
    # box in the dissection (thin strips, odd and even sides, a single element); dofs held on the left edge
    # and at random inside; about half the elements a thousand times softer. (Loads on every dof of a 1e-9
    # contrast make the system too ill-conditioned for any solver to be checked to a tight tolerance: the
    # optimiser's contrast is checked against SuperLU below, with the load on the solid.)
    rng = np.random.default_rng(7)
    for nx, ny in [(1, 1), (9, 1), (1, 6), (13, 7), (24, 24), (37, 11)]:
        g = Grid(nx, ny, 10.0, 7.0)
        scale = np.where(rng.random(g.n_elements) < 0.5, 1.0, 1e-3)
        K = Assembler(g).matrix(q4_stiffness(g.dx, g.dy, 1000.0, 0.3, 5.0), scale)
        free = np.ones(g.n_dofs, bool)
        left = np.arange(ny + 1) * (nx + 1)
        free[2 * left] = free[2 * left + 1] = False
        free[rng.integers(0, g.n_dofs, 3)] = False
        F = rng.standard_normal((g.n_dofs, 2))
        solver = LinearSolver(K, free, grid=g, backend="multifrontal")
        assert solver.backend == "multifrontal"
        U = solver.solve(F)
        reference = np.linalg.solve(K.toarray()[np.ix_(free, free)], F[free])
        np.testing.assert_allclose(U[free], reference, rtol=0, atol=1e-9 * np.abs(reference).max())
        assert np.all(U[~free] == 0)


def test_multifrontal_gives_the_superlu_displacements_on_an_optimiser_like_design():
    # Two independent factorisations of one matrix: SuperLU (scipy) and ours, 1e-9 void contrast as in BESO.
    g = Grid(60, 20, 1.0, 1.0)
    ix, iy = np.meshgrid(np.arange(60), np.arange(20))
    solid = ((ix // 6 + iy // 5) % 2 == 0) | (iy < 3) | (iy > 16)
    K = Assembler(g).matrix(q4_stiffness(1, 1, 1, 0.3, 1), np.where(solid.ravel(), 1.0, 1e-9))
    free = np.ones(g.n_dofs, bool)
    free[2 * np.arange(21) * 61] = False
    free[2 * 60 + 1] = False
    F = np.zeros(g.n_dofs)
    F[2 * (20 * 61) + 1] = -1.0
    U_mf = LinearSolver(K, free, grid=g, backend="multifrontal").solve(F)
    U_lu = LinearSolver(K, free, grid=g, backend="superlu").solve(F)
    assert F @ U_mf == pytest.approx(F @ U_lu, rel=1e-9)
    np.testing.assert_allclose(U_mf, U_lu, rtol=0, atol=1e-8 * np.abs(U_lu).max())


@pytest.mark.skipif(not PARDISO_PLATFORM, reason="pypardiso is a dependency on x86-64 Linux and Windows only")
def test_the_assembled_matrix_says_its_rows_are_sorted_and_they_are():
    # The assembler marks its CSC matrix sorted without the check (the solvers would repeat it every call): the
    # same arrays given to scipy afresh are found sorted, and sorting them changes nothing.
    g = Grid(7, 5, 1.0, 1.0)
    K = Assembler(g).matrix(q4_stiffness(1, 1, 1, 0.3, 1), np.linspace(0.1, 1.0, g.n_elements))
    fresh = sp.csc_matrix((K.data.copy(), K.indices.copy(), K.indptr.copy()), shape=K.shape)
    assert K.has_sorted_indices and fresh.has_sorted_indices
    fresh.has_sorted_indices = False
    fresh.sort_indices()
    assert np.array_equal(fresh.indices, K.indices) and np.array_equal(fresh.data, K.data)


@pytest.mark.skipif(not pardiso_available(), reason="PARDISO is not installed here")
def test_pardiso_keeps_the_diagonal_of_each_matrix_it_refactors():
    # The diagonal for the refinement's residual comes from positions found at the symbolic analysis (each row's
    # first entry of the sorted upper triangle, with no array as long as the nonzeros): after refactors with other
    # values it is each new matrix's own, to the bit.
    g, a, ke, fixed, rng, F = _held_at_left(9, 6, seed=7, cases=1)
    solver = LinearSolver(a.matrix(ke), ~fixed, grid=g, backend="pardiso")
    for _ in range(3):
        solver.refactor(a.matrix(ke, rng.uniform(1e-3, 1.0, g.n_elements)))
        held = solver._pardiso
        assert held._diagonal_at[1] is not None  # the rows' first entries
        assert np.array_equal(held._diagonal, held._A.diagonal())


def test_pardiso_refinement_takes_the_residual_of_the_matrix_solved(monkeypatch):
    # solve() refines on the residual b - A x, A x formed from the upper triangle PARDISO holds (fe/solve.py,
    # REFINE_ABOVE). Made to refine every time, the answer must stay numpy's dense solution: with PARDISO in the
    # grid's order, in its own (METIS) and in solve_spd's (minimum degree).
    import toolkit.fe.solve as fe_solve

    monkeypatch.setattr(fe_solve, "REFINE_ABOVE", 0.0)
    g, a, ke, fixed, rng, F = _held_at_left(9, 6, seed=5, cases=2)
    free = ~fixed
    K = a.matrix(ke, rng.uniform(1e-3, 1.0, g.n_elements))
    Kff = K.toarray()[np.ix_(free, free)]
    reference = np.linalg.solve(Kff, F[free])
    answers = [LinearSolver(K, free, grid=grid, backend="pardiso").solve(F)[free] for grid in (g, None)]
    answers.append(fe_solve.solve_spd(sp.csc_matrix(Kff), F[free]))
    for u in answers:
        np.testing.assert_allclose(u, reference, rtol=1e-9, atol=1e-12 * np.abs(reference).max())


def test_matrix_off_the_grid_pattern_goes_to_superlu_or_is_refused(monkeypatch):
    # Without PARDISO, "auto" takes the multifrontal backend from a size on; here for any size, to see it step
    # aside.
    monkeypatch.setattr("toolkit.fe.solve.MULTIFRONTAL_MIN_DOFS", 0)
    monkeypatch.setattr("toolkit.fe.solve.pardiso_available", lambda: False)
    g = Grid(4, 3, 1.0, 1.0)
    free = np.ones(g.n_dofs, bool)
    free[[0, 1, 9]] = False  # node 0 pinned, node 4 (the other bottom corner) on a roller
    assert LinearSolver(Assembler(g).matrix(q4_stiffness(1, 1, 1, 0.3, 1)), free, grid=g).backend == "multifrontal"
    K = Assembler(g).matrix(q4_stiffness(1, 1, 1, 0.3, 1)).tolil()
    far = 2 * g.n_nodes - 1  # the y dof of the last node, coupled below to the x dof of node 1
    K[2, far] = K[far, 2] = -1e-3
    K = K.tocsc()
    assert LinearSolver(K, free, grid=g).backend == "superlu"
    with pytest.raises(ValueError, match="neighbours"):
        LinearSolver(K, free, grid=g, backend="multifrontal")
    with pytest.raises(ValueError, match="needs the grid"):
        LinearSolver(K, free, backend="multifrontal")


@pytest.mark.skipif(not pardiso_available() or not sys.platform.startswith("linux"),
                    reason="PARDISO is a dependency on x86-64 only; resident memory is read from /proc (Linux)")
def test_a_dropped_pardiso_solver_gives_its_memory_back():
    # MKL keeps a factor until told to free it; pypardiso does not tell it when its object goes, and each solver
    # made and dropped kept its factor for the rest of the process (a whole job makes several: 10 GB at a
    # million elements). Six solvers of a 400 x 150 grid one after the other must not hold six factors.
    import gc
    import os

    def resident() -> float:
        with open("/proc/self/statm") as f:
            return int(f.read().split()[1]) * os.sysconf("SC_PAGE_SIZE")

    g = Grid(400, 150, 1.0, 1.0)
    K = Assembler(g).matrix(q4_stiffness(1.0, 1.0, 1.0, 0.3, 1.0), np.ones(g.n_elements))
    free = np.ones(g.n_dofs, dtype=bool)
    free[: 2 * (g.ny + 1)] = False
    rhs = np.ones((g.n_dofs, 1))
    grown = []
    for _ in range(6):
        before = resident()
        s = LinearSolver(K, free, grid=g, backend="pardiso")
        s.solve(rhs)
        held = resident() - before  # what one solver holds while it lives
        del s
        gc.collect()
        grown.append((resident() - before, held))
    after_first = sum(kept for kept, _ in grown[1:])
    one_factor = max(held for _, held in grown)
    assert one_factor > 20e6  # the probe sees a factor at all
    assert after_first < 0.5 * one_factor, grown


@pytest.mark.parametrize("backend", BACKENDS)
def test_a_shared_solver_refactors_only_for_the_same_system_and_solves_as_a_new_one(backend):
    # The solid analysis, the optimiser and the voids' analyses share one factorisation (pipeline.py): a refactor
    # must give what a new solver gives, to the last bit, and anything but the same pattern and free dofs a new one.
    g, a, ke, fixed, rng, F = _held_at_left(12, 6, seed=7, cases=2)
    F[fixed] = 0
    shared = SharedSolver(backend)
    first = shared.factor(a.matrix(ke, rng.uniform(1e-3, 1.0, g.n_elements)), ~fixed, g)
    K = a.matrix(ke, np.where(rng.random(g.n_elements) < 0.5, 1.0, 1e-9))
    again = shared.factor(K, np.flatnonzero(~fixed), g)  # the same free dofs given as numbers
    assert again is first and (shared.built, shared.refactored) == (1, 1)
    assert np.array_equal(again.solve(F), LinearSolver(K, ~fixed, grid=g, backend=backend).solve(F))
    # one more dof held: another system; PARDISO refactors within the solver's dofs (test below), the others
    # make a new solver
    held = fixed.copy()
    held[-1] = True
    other = shared.factor(K, ~held, g)
    if backend == "pardiso":
        assert other is first and (shared.built, shared.refactored) == (1, 2)
        other = shared.factor(K, ~held, g, threads=2)  # another thread count: a new solver
    assert other is not first and shared.built == 2 and shared.solver is other
    # another pattern, the same dof count and free dofs (a grid of the other proportions): a new solver as well
    base = shared.factor(K, ~fixed, g)
    assert base is not other and shared.built == 3
    g2 = Grid(6, 12, 10.0, 7.0)
    assert g2.n_dofs == g.n_dofs
    K2 = Assembler(g2).matrix(ke, np.ones(g2.n_elements))
    assert shared.factor(K2, ~fixed, g2) is not base and shared.built == 4
    shared.release()
    assert shared.solver is None
    # the assembly pattern: one per grid size for the job, kept when the factor goes
    pattern = shared.assembler(g)
    assert shared.assembler(Grid(12, 6, 3.0, 5.0)) is pattern  # other element sizes, the same pattern
    assert np.array_equal(pattern.matrix(ke).toarray(), Assembler(g).matrix(ke).toarray())
    assert shared.assembler(g2) is not pattern


@pytest.mark.skipif(not pardiso_available(), reason="PARDISO does not load here")
def test_a_system_on_fewer_dofs_refactors_the_solver_within_its_dofs():
    # A layout with voids on the optimiser's grid: nodes only void elements touch are left out of its system (zero
    # rows in K), and a support may hold a node the solver had free (rows that are not zero). The solver refactors
    # with those dofs decoupled: the answer is a new solver's on the fewer dofs to round-off, zero at the dofs left
    # out; given its own dofs again it is its own to the bit.
    g, a, ke, fixed, rng, F = _held_at_left(14, 7, seed=5, cases=2)
    F[fixed] = 0
    shared = SharedSolver("pardiso")
    full = a.matrix(ke, rng.uniform(0.2, 1.0, g.n_elements))
    solver = shared.factor(full, ~fixed, g)
    U_full = solver.solve(F)
    scale = rng.uniform(0.2, 1.0, g.n_elements)
    void = (np.arange(2, 5)[:, None] * g.nx + np.arange(4, 9)[None, :]).ravel()  # rows 2-4, columns 4-8
    scale[void] = 0.0  # a void: the nodes inside it touch no material
    K = a.matrix(ke, scale)
    active = g.active_nodes(scale > 0)
    assert (~active).sum() == 8  # the 4 x 2 nodes inside it
    held = fixed.copy()
    held[2 * (g.nx + 1) * g.ny + 2 * g.nx + 1] = True  # a corner held in y as well: its row is not zero
    free = ~held & np.repeat(active, 2)
    F2 = np.where(free[:, None], F, 0.0)
    assert shared.factor(K, free, g) is solver and (shared.built, shared.refactored) == (1, 1)
    U = solver.solve(F2)
    want = LinearSolver(K, free, grid=g, backend="pardiso").solve(F2)
    assert np.all(U[~free] == 0.0)
    np.testing.assert_allclose(U, want, rtol=0, atol=1e-12 * np.abs(want).max())
    # loads on dofs left out are not the system's: those dofs stay at zero, the others as before
    loaded = solver.solve(np.where(free[:, None], F, 1.0))
    assert np.all(loaded[~free] == 0.0) and np.array_equal(loaded, U)
    # back on its own dofs: the same bits as before
    assert shared.factor(full, ~fixed, g) is solver
    assert np.array_equal(solver.solve(F), U_full)
    # dofs it never had free (a support released): not within, a new solver
    more = ~fixed.copy()
    more[0] = True
    assert shared.factor(full, more, g) is not solver and shared.built == 2


@pytest.mark.parametrize("backend", BACKENDS)
def test_a_refactor_with_the_values_just_factorised_keeps_the_factor(backend, monkeypatch):
    # The optimiser's first design is the panel as drawn, which the solid analysis has just factorised: the first
    # refactor given the same values in another array keeps the factor; other values, the same array changed in
    # place, and any later refactor are factorised (the values are held until the first refactor only).
    g, a, ke, fixed, rng, F = _held_at_left(9, 5, seed=11, cases=1)
    F[fixed] = 0
    scale = rng.uniform(1e-3, 1.0, g.n_elements)
    made = []
    real = LinearSolver._factor_data
    monkeypatch.setattr(LinearSolver, "_factor_data", lambda self, *a: made.append(1) or real(self, *a))
    solver = LinearSolver(a.matrix(ke, scale), ~fixed, grid=g, backend=backend)
    U = solver.solve(F)
    assert made == [1]
    solver.refactor(a.matrix(ke, scale.copy()))  # another array, the same values
    assert made == [1] and np.array_equal(solver.solve(F), U)
    K = a.matrix(ke, scale[::-1].copy())
    solver.refactor(K)
    assert made == [1, 1]
    want = np.linalg.solve(K.toarray()[np.ix_(~fixed, ~fixed)], F[~fixed])
    np.testing.assert_allclose(solver.solve(F)[~fixed], want, rtol=1e-9, atol=1e-12)
    solver.refactor(a.matrix(ke, scale))  # the values it was made with, after another refactor: factorised
    assert made == [1, 1, 1] and np.array_equal(solver.solve(F), U)
    # the array the solver was made with, changed in place: factorised again
    K = a.matrix(ke, scale)
    other = LinearSolver(K, ~fixed, grid=g, backend=backend)
    K.data *= 2.0
    other.refactor(K)
    assert made == [1, 1, 1, 1, 1]
    np.testing.assert_allclose(other.solve(F), 0.5 * U, rtol=1e-9, atol=1e-12)


@pytest.mark.skipif(not PARDISO_PLATFORM, reason="pypardiso is a dependency on x86-64 Linux and Windows only")
def test_a_two_thread_pardiso_solver_is_its_own_and_repeats_to_the_bit():
    # The optimiser factorises large grids on a PARDISO solver made for two MKL threads (optimize/beso.py). PARDISO
    # plans its factorisation for the threads its analysis ran on (a two-thread analysis factorised on one thread
    # crashed), so the shared solver is never refactored across thread counts; the two-thread solution is the same
    # bits every time (a design repeats exactly) and, on a system of solid and part-solid elements, one thread's
    # to round-off (numpy's dense solve is the reference for both).
    g, a, ke, fixed, rng, F = _held_at_left(60, 30, seed=5, cases=2)
    F[fixed] = 0
    K = a.matrix(ke, rng.uniform(0.05, 1.0, g.n_elements))
    shared = SharedSolver("pardiso")
    one = shared.factor(K, ~fixed, g)
    two = shared.factor(K, ~fixed, g, threads=2)
    assert two is not one and (one.threads, two.threads) == (1, 2) and shared.built == 2
    U2 = two.solve(F)
    assert np.array_equal(U2, LinearSolver(K, ~fixed, grid=g, backend="pardiso", threads=2).solve(F))
    want = np.linalg.solve(K.toarray()[np.ix_(~fixed, ~fixed)], F[~fixed])
    np.testing.assert_allclose(U2[~fixed], want, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(U2, one.solve(F), rtol=1e-12, atol=1e-12 * np.abs(U2).max())
    K2 = a.matrix(ke, rng.uniform(0.05, 1.0, g.n_elements))
    assert shared.factor(K2, ~fixed, g, threads=2) is two and shared.refactored == 1
    back = shared.factor(K2, ~fixed, g)  # the next stage, on one thread: a solver of its own again
    assert back is not two and back.threads == 1 and shared.built == 3
    np.testing.assert_allclose(back.solve(F), two.solve(F), rtol=1e-12, atol=1e-12 * np.abs(U2).max())


@pytest.mark.skipif(not PARDISO_PLATFORM, reason="pypardiso is a dependency on x86-64 Linux and Windows only")
def test_the_optimiser_runs_on_two_threads_from_its_size_on(monkeypatch):
    # From TWO_THREADS_FROM elements the optimiser makes its own two-thread solver and hands the job's solver back
    # to the next stage on one; a half-MBB beam of 60 x 20 elements, lowered below the size, comes out as on one.
    from toolkit.optimize import beso
    from toolkit.optimize.problem import Problem
    from toolkit.optimize.settings import OptimizeSettings

    g = Grid(60, 20, 1.0, 1.0)
    left = np.arange(g.ny + 1) * (g.nx + 1)
    F = np.zeros((g.n_dofs, 1))
    F[2 * (g.ny * (g.nx + 1)) + 1, 0] = -1.0
    problem = Problem(grid=g, ke=q4_stiffness(1.0, 1.0, 1.0, 0.3, 1.0), fractions=np.ones(g.n_elements),
                      fixed=np.concatenate([2 * left, [2 * g.nx + 1]]), loads=F, weights=np.ones(1),
                      design=np.ones(g.n_elements, bool))
    settings = OptimizeSettings(volume_fraction=0.5, max_iterations=200)
    runs = {}
    monkeypatch.setattr(beso, "side_threads", lambda: 2)  # two threads allowed, whatever this machine has
    for frm in (10**9, g.n_elements):
        monkeypatch.setattr(beso, "TWO_THREADS_FROM", frm)
        shared = SharedSolver()  # "auto", as the optimiser's: PARDISO where it loads
        runs[frm] = beso.run_beso(problem, settings, shared=shared)
        assert shared.solver.threads == (2 if frm == g.n_elements else 1)
    one, two = runs[10**9], runs[g.n_elements]
    assert np.array_equal(one.densities, two.densities)
    np.testing.assert_allclose(two.compliance_Nmm, one.compliance_Nmm, rtol=1e-9)
    # One thread allowed (one core, or LACUNA_THREADS=1): one thread at any size.
    monkeypatch.setattr(beso, "side_threads", lambda: 1)
    shared = SharedSolver()
    beso.run_beso(problem, settings, shared=shared)
    assert shared.solver.threads == 1


def test_the_optimiser_takes_one_thread_where_lacuna_threads_says_one(monkeypatch):
    # A host that keeps lacuna on its calling thread, and every Dask worker of `lacuna batch`, set LACUNA_THREADS=1:
    # the optimiser's solver then keeps to one MKL thread at every size.
    from toolkit.optimize import beso
    from toolkit.overlap import side_threads

    monkeypatch.setenv("LACUNA_THREADS", "1")
    assert beso.optimiser_threads(10**7) == 1 and beso.optimiser_threads(100) == 1
    monkeypatch.setenv("LACUNA_THREADS", "2")
    assert beso.optimiser_threads(100) == 1
    assert beso.optimiser_threads(10**7) == (2 if side_threads() >= 2 else 1)


@pytest.mark.skipif(not PARDISO_PLATFORM, reason="pypardiso is a dependency on x86-64 Linux and Windows only")
def test_the_solid_analysis_is_made_on_the_optimisers_threads_and_its_solver_refactored(monkeypatch):
    # On grids where the optimiser takes two MKL threads the job's solid analysis is made on two as well, so that the
    # optimiser refactors its solver (its first design is the panel as drawn) instead of analysing the matrix again.
    from panels import half_mbb_plate
    from toolkit import pipeline
    from toolkit.optimize import beso

    monkeypatch.setattr(beso, "side_threads", lambda: 2)
    monkeypatch.setattr(beso, "TWO_THREADS_FROM", 1)  # every grid "large"
    calls = []
    factor = SharedSolver.factor

    def recording(self, K, free, grid=None, threads=1):
        solver = factor(self, K, free, grid, threads=threads)
        calls.append((threads, self.built))
        return solver

    monkeypatch.setattr(SharedSolver, "factor", recording)
    panel, job = half_mbb_plate(element_mm=50.0)
    run = pipeline.optimize_panel(panel, job)
    assert calls[0] == (2, 1)  # the solid analysis, on two threads
    assert calls[1] == (2, 1)  # the optimiser: the same solver, refactored
    assert run.voids
