"""Compliance gradients with respect to the vertices of made voids, and the solver that reuses a factorisation."""

import dataclasses

import numpy as np
import pytest
import shapely
from shapely.geometry import Polygon

from toolkit.analysis import MIN_FRACTION, analyze
from toolkit.errors import LacunaError
from toolkit.fe.assembly import Assembler
from toolkit.fe.element import q4_stiffness
from toolkit.fe.fractions import solid_fractions
from toolkit.fe.grid import Grid, make_grid
from toolkit.fe.solve import LinearSolver
from toolkit.model import Material, Panel, PointLoad, Region, Support
from toolkit.voids.sensitivity import (
    ReusedSolver,
    compliance_gradient,
    element_energy,
    vertex_area_gradient,
)

E_MPA, NU, THICKNESS = 11500.0, 0.3, 90.0
# A cantilever 600 x 200 mm on 20 mm elements, clamped on the left, 1 kN down at the middle of the free end.
PANEL = Panel(600.0, 200.0, THICKNESS, Material(E_MPA, NU), supports=(Support(((0.0, 0.0), (0.0, 200.0))),),
              loads=(PointLoad((600.0, 100.0), (0.0, -1000.0)),), element_size_mm=20.0)
GRID = make_grid(600.0, 200.0, 20.0)
KE = q4_stiffness(GRID.dx, GRID.dy, E_MPA, NU, THICKNESS)
# An irregular convex hexagon whose vertices keep at least 1.4 mm off every grid line and whose edges keep at
# least 1.5 mm off every grid node: the area fractions are smooth within the finite-difference steps below.
HEXAGON = np.array([[281.4, 141.6], [222.5, 148.3], [195.9, 96.8], [217.2, 43.7], [275.5, 43.1], [310.3, 90.2]])


def _with_voids(panel, outlines):
    extra = tuple(Region(Polygon(v), layer="TEST-VOID") for v in outlines)
    return dataclasses.replace(panel, openings=panel.openings + extra)


def _compliance(panel, outlines):
    return analyze(_with_voids(panel, outlines), GRID).compliance_Nmm


def _gradient(panel, outlines):
    result = analyze(_with_voids(panel, outlines), GRID)
    energy = element_energy(GRID, result.U, KE, result.case_weights)
    return compliance_gradient(GRID, energy, list(outlines))


def _central_differences(panel, outlines, which, step):
    """dC/d(vertex) of outline ``which`` by central differences of the analysed compliance."""
    out = np.zeros_like(outlines[which])
    for k in range(out.shape[0]):
        for j in range(2):
            sides = []
            for s in (step, -step):
                moved = [v.copy() for v in outlines]
                moved[which][k, j] += s
                sides.append(_compliance(panel, moved))
            out[k, j] = (sides[0] - sides[1]) / (2.0 * step)
    return out


def _clear_of_the_grid(vertices, margin):
    v = np.asarray(vertices)
    off_lines = np.abs(v / [GRID.dx, GRID.dy] - np.round(v / [GRID.dx, GRID.dy])) * [GRID.dx, GRID.dy]
    nodes_off = shapely.distance(Polygon(v).exterior, shapely.points(GRID.node_xy)).min()
    return off_lines.min() > margin and nodes_off > margin


def _shoelace_gradient(v):
    """d area / d(x_k, y_k) of a polygon from the shoelace formula, signed so that the area is positive."""
    prev, nxt = np.roll(v, 1, axis=0), np.roll(v, -1, axis=0)
    twice = np.sum(v[:, 0] * nxt[:, 1] - nxt[:, 0] * v[:, 1])
    return np.sign(twice) * 0.5 * np.column_stack([nxt[:, 1] - prev[:, 1], prev[:, 0] - nxt[:, 0]])


# Polygons on a small grid of unequal element sides: non-convex, clockwise, partly outside, edges on lines.
SMALL = Grid(8, 5, 10.0, 7.0)
NONCONVEX = np.array([[12.3, 8.1], [61.7, 5.2], [47.4, 19.6], [70.2, 30.3], [18.8, 27.9], [31.1, 17.2]])
CLOCKWISE = np.array([[14.2, 3.3], [9.1, 31.7], [52.6, 25.2], [77.7, 11.9], [40.4, 2.8]])
PARTLY_OUTSIDE = np.array([[-9.3, 12.1], [33.3, -6.2], [52.9, 16.6], [88.4, 41.7], [25.5, 30.8]])
ON_A_LINE = np.array([[20.0, 9.3], [43.1, 11.2], [41.7, 25.4], [20.0, 23.6]])        # left edge on x = 20
ON_THE_BORDER = np.array([[0.0, 9.3], [43.1, 11.2], [41.7, 25.4], [0.0, 23.6]])      # left edge on x = 0


def _clipped_areas(vertices):
    lower = SMALL.element_centres - [SMALL.dx / 2, SMALL.dy / 2]
    boxes = shapely.box(lower[:, 0], lower[:, 1], lower[:, 0] + SMALL.dx, lower[:, 1] + SMALL.dy)
    return shapely.area(shapely.intersection(Polygon(vertices), boxes))


@pytest.mark.parametrize("vertices", [NONCONVEX, CLOCKWISE, ON_A_LINE], ids=["nonconvex", "clockwise", "on-line"])
def test_area_gradient_sums_to_the_derivative_of_the_whole_area(vertices):
    # An exact identity (mathematics, no source needed): the cells partition the plane inside the grid, so the
    # derivatives of the clipped areas add up to the derivative of the polygon's area (shoelace formula).
    total = np.asarray(vertex_area_gradient(SMALL, vertices).sum(axis=0)).reshape(-1, 2)
    expected = _shoelace_gradient(vertices)
    np.testing.assert_allclose(total, expected, rtol=0, atol=1e-9 * np.abs(expected).max())


@pytest.mark.parametrize("vertices", [NONCONVEX, CLOCKWISE, PARTLY_OUTSIDE, ON_A_LINE, ON_THE_BORDER],
                         ids=["nonconvex", "clockwise", "partly-outside", "on-line", "on-border"])
def test_area_gradient_matches_central_differences_of_the_clipped_areas(vertices):
    # Reference: shapely's exact clipped areas, central differences with a 1e-4 mm step. Off the lines the
    # error is the O(h^2) truncation (measured 4e-8 mm at most); on a grid line the area is kinked and central
    # differences give the mean of the one-sided slopes, the even split we make, to O(h) (measured 2e-6 mm).
    # Tolerance 1e-6 of the largest value (common practice, no source).
    step = 1e-4
    analytic = vertex_area_gradient(SMALL, vertices).toarray()
    numeric = np.zeros_like(analytic)
    for c in range(analytic.shape[1]):
        plus, minus = vertices.copy(), vertices.copy()
        plus.flat[c] += step
        minus.flat[c] -= step
        numeric[:, c] = (_clipped_areas(plus) - _clipped_areas(minus)) / (2 * step)
    np.testing.assert_allclose(analytic, numeric, rtol=0, atol=1e-6 * np.abs(numeric).max())


def test_area_gradient_is_the_same_for_either_orientation_and_a_closed_ring():
    forward = vertex_area_gradient(SMALL, NONCONVEX).toarray()
    backward = vertex_area_gradient(SMALL, NONCONVEX[::-1]).toarray()
    # Reversing the vertices reverses the column pairs and nothing else (mathematics, no source).
    flipped = backward.reshape(SMALL.n_elements, -1, 2)[:, ::-1].reshape(SMALL.n_elements, -1)
    np.testing.assert_allclose(forward, flipped, rtol=0, atol=1e-12)
    closed = vertex_area_gradient(SMALL, np.vstack([NONCONVEX, NONCONVEX[:1]])).toarray()
    np.testing.assert_array_equal(closed, forward)


def test_an_edge_on_a_grid_line_is_shared_evenly_between_its_two_cells():
    # Our convention (docs/sensitivity.md): half the derivative to the cell on each side of the line.
    g = vertex_area_gradient(SMALL, ON_A_LINE).toarray()
    left, right = 2 * SMALL.nx + 1, 2 * SMALL.nx + 2       # either side of x = 20 at y in [14, 21): no other edge
    assert g[left, 0] != 0.0
    assert g[left, 0] == pytest.approx(g[right, 0], rel=1e-12)


def test_a_degenerate_outline_is_refused():
    with pytest.raises(LacunaError, match="three"):
        vertex_area_gradient(SMALL, [[1.0, 1.0], [5.0, 1.0], [9.0, 1.0]])


def test_compliance_gradient_matches_central_differences_of_the_analysis():
    # The area fractions are exact and piecewise smooth, and the hexagon keeps clear of every kink (grid line
    # or node) within the steps, so the analytic gradient holds to the central-difference truncation error,
    # O(h^2). Measured: relative error of the gradient vector 1.8e-6 at h = 0.02 mm (1e-3 element) and 1.8e-4
    # at h = 0.2 mm (1e-2 element); the worst component of more than 1 % of the largest 2.3e-6 and 2.3e-4.
    # Held (common practice, no source): vector 1e-5 and 1e-3, components 2e-5 and 2e-3, and the error falling
    # as h^2 (ratio 100 for a tenfold step; held within 30 to 300).
    assert _clear_of_the_grid(HEXAGON, 1.0)
    (analytic,) = _gradient(PANEL, [HEXAGON])
    big = np.abs(analytic) > 0.01 * np.abs(analytic).max()
    errors = []
    for step, vector_tol, component_tol in ((0.02, 1e-5, 2e-5), (0.2, 1e-3, 2e-3)):
        numeric = _central_differences(PANEL, [HEXAGON], 0, step)
        error = np.linalg.norm(numeric - analytic) / np.linalg.norm(analytic)
        assert error < vector_tol, (step, error)
        assert np.all(np.abs(numeric - analytic)[big] < component_tol * np.abs(analytic)[big]), step
        errors.append(error)
    assert 30 < errors[1] / errors[0] < 300
    # Growing the void about its centre removes material, which must raise the compliance.
    assert np.sum(analytic * (HEXAGON - HEXAGON.mean(axis=0))) > 0


def test_rigid_move_of_the_void():
    # The gradient summed over the vertices, along a direction, against central differences of the compliance
    # for the whole hexagon moved by +-0.02 mm. Measured 2.4e-6 of the gradient's norm at most; held 1e-5
    # (common practice, no source).
    (analytic,) = _gradient(PANEL, [HEXAGON])
    for direction in ([1.0, 0.0], [0.0, 1.0], [0.6, -0.8]):
        d = np.array(direction)
        step = 0.02
        numeric = (_compliance(PANEL, [HEXAGON + step * d]) - _compliance(PANEL, [HEXAGON - step * d])) / (2 * step)
        assert abs(analytic.sum(axis=0) @ d - numeric) < 1e-5 * np.linalg.norm(analytic)


def test_two_weighted_load_cases():
    # C = 1.0 C_down + 2.5 C_pull: the weights reach the gradient through the element energies. Checked
    # against central differences (h = 0.02 mm) to 1e-5 of the gradient's norm (common practice, no source).
    panel = dataclasses.replace(
        PANEL,
        loads=(PointLoad((600.0, 100.0), (0.0, -1000.0), case="down"),
               PointLoad((600.0, 160.0), (1500.0, 0.0), case="pull")),
        case_weights=(("down", 1.0), ("pull", 2.5)),
    )
    (analytic,) = _gradient(panel, [HEXAGON])
    numeric = _central_differences(panel, [HEXAGON], 0, 0.02)
    assert np.linalg.norm(numeric - analytic) < 1e-5 * np.linalg.norm(analytic)
    # The weighted energy is the weighted sum of the one-case energies (mathematics, no source); to 1e-9 of the
    # largest, as u^T ke u of a cantilever's large rigid-like motions cancels to about 1e-12 of its terms.
    result = analyze(_with_voids(panel, [HEXAGON]), GRID)
    assert result.case_weights.tolist() == [1.0, 2.5]
    cases = [element_energy(GRID, result.U[:, c], KE) for c in range(2)]
    np.testing.assert_allclose(element_energy(GRID, result.U, KE, [1.0, 2.5]), cases[0] + 2.5 * cases[1],
                               rtol=0, atol=1e-9 * cases[0].max())


def test_a_list_of_voids_gives_a_list_of_gradients():
    second = np.array([[433.8, 76.8], [490.4, 62.3], [473.3, 135.6]])
    assert _clear_of_the_grid(second, 1.0)
    outlines = [HEXAGON, second]
    gradients = _gradient(PANEL, outlines)
    assert [g.shape for g in gradients] == [(6, 2), (3, 2)]
    result = analyze(_with_voids(PANEL, outlines), GRID)
    energy = element_energy(GRID, result.U, KE, result.case_weights)
    np.testing.assert_allclose(compliance_gradient(GRID, energy, second), gradients[1], rtol=1e-12, atol=0)
    # Against central differences for the triangle (h = 0.02 mm, 1e-5 of the norm; common practice, no source).
    numeric = _central_differences(PANEL, outlines, 1, 0.02)
    assert np.linalg.norm(numeric - gradients[1]) < 1e-5 * np.linalg.norm(gradients[1])


def _design(outline, panel=PANEL):
    """K and the analysis of the panel with one void, K assembled the way the analysis assembles it."""
    panel = _with_voids(panel, [outline])
    fractions = solid_fractions(GRID, panel.solid)
    K = Assembler(GRID).matrix(KE, np.where(fractions > MIN_FRACTION, fractions, 0.0))
    return K, analyze(panel, GRID)


def _fresh(K, result):
    free = ~result.fixed & np.repeat(GRID.active_nodes(result.active), 2)
    return LinearSolver(K, free, grid=GRID).solve(result.F)


def _relative(a, b):
    return np.linalg.norm(a - b) / np.linalg.norm(b)


def test_reused_solver_agrees_with_a_fresh_factorisation_after_a_half_element_move():
    # CG to a relative residual of 1e-10 on a well-preconditioned system: 1e-8 of the displacement norm
    # (common practice, no source). The iteration cap is raised so that the CG path is the one checked.
    K0, first = _design(HEXAGON)
    solver = ReusedSolver(K0, ~first.fixed, GRID, max_iterations=200)
    K, moved = _design(HEXAGON + [GRID.dx / 2, 0.0])
    U = solver.solve(K, moved.F)
    assert solver.factorisations == 1 and solver.last_iterations[0] > 0
    assert _relative(U, _fresh(K, moved)) < 1e-8
    assert _relative(U, moved.U) < 1e-8
    # CG starts from the last solution: the same design again is solved before the first iteration.
    solver.solve(K, moved.F)
    assert solver.last_iterations == (0,) and solver.solves == 2


def test_reused_solver_over_a_run_of_small_changes_factorises_less_often_than_it_solves():
    # Five designs, the hexagon moved 1 mm further each time, two load cases. Agreement as above.
    panel = dataclasses.replace(PANEL, loads=(PointLoad((600.0, 100.0), (0.0, -1000.0), case="down"),
                                              PointLoad((600.0, 160.0), (1500.0, 0.0), case="pull")))
    K0, first = _design(HEXAGON, panel)
    solver = ReusedSolver(K0, ~first.fixed, GRID)
    for k in range(1, 6):
        K, moved = _design(HEXAGON + [1.0 * k, -0.35 * k], panel)
        U = solver.solve(K, moved.F)
        assert len(solver.last_iterations) == 2
        assert _relative(U, _fresh(K, moved)) < 1e-8
    # Measured 10 to 19 iterations a case, climbing as the design drifts from the factorised one: the cap of
    # 30 is not reached, so the one factorisation serves all five solves.
    assert solver.solves == 5
    assert solver.factorisations == 1
    assert solver.iterations > 0


def test_reused_solver_refactorises_when_cg_runs_long_and_takes_nodes_that_regain_material():
    # The hexagon moved three elements: nodes inside it at first (empty rows, softened) carry material now.
    K0, first = _design(HEXAGON)
    solver = ReusedSolver(K0, ~first.fixed, GRID, max_iterations=5)
    K, moved = _design(HEXAGON + [3 * GRID.dx, 0.0])
    regained = np.repeat(GRID.active_nodes(moved.active) & ~GRID.active_nodes(first.active), 2)
    assert regained.any()
    U = solver.solve(K, moved.F)
    assert solver.factorisations == 2 and solver.last_iterations == (5,)
    assert np.all(U[regained] != 0.0)
    assert _relative(U, moved.U) < 1e-8       # agreement as above (common practice, no source)
    # The new factorisation now preconditions exactly: the reversed load (started from the last solution, a
    # residual of twice the load) takes a step or two.
    U_again = solver.solve(K, -moved.F)
    assert solver.factorisations == 2 and solver.last_iterations[0] <= 2
    assert _relative(U_again, -moved.U) < 1e-8
