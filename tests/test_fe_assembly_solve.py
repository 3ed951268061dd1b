"""Assembly pattern and the direct solver."""

import numpy as np
import pytest
import scipy.sparse as sp

from toolkit.errors import LacunaError
from toolkit.fe.assembly import Assembler
from toolkit.fe.element import q4_stiffness
from toolkit.fe.grid import Grid, make_grid
from toolkit.fe.solve import LinearSolver, nested_dissection, pardiso_available


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


BACKENDS = ["superlu", pytest.param("pardiso", marks=pytest.mark.skipif(
    not pardiso_available(), reason="optional package pypardiso not installed"))]


@pytest.mark.parametrize("backend", BACKENDS)
def test_solver_matches_dense_solution_for_several_cases_and_refactor(backend):
    g = Grid(8, 5, 10.0, 7.0)
    a = Assembler(g)
    ke = q4_stiffness(g.dx, g.dy, 1000.0, 0.3, 5.0)
    fixed = np.zeros(g.n_dofs, bool)
    left = np.arange(g.ny + 1) * (g.nx + 1)
    fixed[2 * left] = fixed[2 * left + 1] = True
    free = ~fixed
    rng = np.random.default_rng(3)
    F = rng.standard_normal((g.n_dofs, 3))
    F[fixed] = 0
    for use_grid in (g, None):
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
