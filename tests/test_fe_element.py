"""The bilinear plane-stress element against its closed form and basic mechanics."""

import numpy as np
import pytest

from toolkit.fe.element import plane_stress_D, q4_B, q4_shape, q4_stiffness


def andreassen_ke(E, nu):
    """Unit-square element stiffness, Andreassen et al. 2011 (Struct Multidisc Optim 43:1-16), top88 listing.

    Node order there: lower left, lower right, upper right, upper left (the same as ours); thickness 1.
    """
    k = [1 / 2 - nu / 6, 1 / 8 + nu / 8, -1 / 4 - nu / 12, -1 / 8 + 3 * nu / 8,
         -1 / 4 + nu / 12, -1 / 8 - nu / 8, nu / 6, 1 / 8 - 3 * nu / 8]
    idx = [[0, 1, 2, 3, 4, 5, 6, 7], [1, 0, 7, 6, 5, 4, 3, 2], [2, 7, 0, 5, 6, 3, 4, 1], [3, 6, 5, 0, 7, 2, 1, 4],
           [4, 5, 6, 7, 0, 1, 2, 3], [5, 4, 3, 2, 1, 0, 7, 6], [6, 3, 4, 1, 2, 7, 0, 5], [7, 2, 1, 4, 3, 6, 5, 0]]
    return E / (1 - nu**2) * np.array(k)[np.array(idx)]


@pytest.mark.parametrize("nu", [0.0, 0.3, 0.45])
def test_unit_square_matches_published_closed_form(nu):
    # Check values: closed-form element matrix of Andreassen et al. 2011, appendix (top88).
    np.testing.assert_allclose(q4_stiffness(1.0, 1.0, 2.5, nu, 1.0), andreassen_ke(2.5, nu), rtol=1e-13, atol=1e-13)


def test_rectangle_stiffness_has_exactly_three_rigid_modes():
    ke = q4_stiffness(30.0, 12.0, 11500.0, 0.3, 90.0)
    np.testing.assert_allclose(ke, ke.T, rtol=1e-14)
    x = np.array([0, 30, 30, 0.0])
    y = np.array([0, 0, 12, 12.0])
    modes = np.zeros((8, 3))
    modes[0::2, 0] = 1
    modes[1::2, 1] = 1
    modes[0::2, 2], modes[1::2, 2] = -y, x
    assert np.abs(ke @ modes).max() < 1e-9 * np.abs(ke).max()
    eig = np.linalg.eigvalsh(ke)
    # A 4-node element has 8 dofs less 3 rigid modes: 5 strain modes, all with positive energy.
    assert np.sum(eig > 1e-9 * eig.max()) == 5


def test_constant_strain_gives_constant_stress_at_every_point():
    # A linear displacement field is reproduced exactly by bilinear shape functions (completeness).
    dx, dy = 7.0, 3.0
    x = np.array([0, dx, dx, 0.0])
    y = np.array([0, 0, dy, dy])
    a, b, c, d = 1e-3, -2e-4, 3e-4, 5e-4
    u = np.zeros(8)
    u[0::2] = a * x + b * y
    u[1::2] = c * x + d * y
    for xi, eta in [(-1, -1), (0.3, -0.7), (0, 0), (1, 1)]:
        np.testing.assert_allclose(q4_B(dx, dy, xi, eta) @ u, [a, d, b + c], rtol=1e-13)


def test_shape_functions_partition_unity_and_interpolate_nodes():
    n = q4_shape(np.array([-1, 1, 1, -1.0]), np.array([-1, -1, 1, 1.0]))
    np.testing.assert_allclose(n, np.eye(4))
    assert q4_shape(0.37, -0.81).sum() == pytest.approx(1.0, abs=1e-15)


def test_plane_stress_matrix():
    # Hooke's law in plane stress (any strength-of-materials text): sx = E/(1-nu^2) (ex + nu ey).
    D = plane_stress_D(200.0, 0.25)
    assert D[0, 0] == pytest.approx(200 / (1 - 0.0625))
    assert D[2, 2] == pytest.approx(200 / (2 * 1.25))
