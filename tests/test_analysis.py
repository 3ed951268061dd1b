"""Whole static analyses of panels as drawn."""

import numpy as np
import pytest
from shapely.geometry import Point, box

from toolkit.analysis import analyze
from toolkit.errors import LacunaError
from toolkit.model import LineLoad, Material, Panel, PointLoad, Region, Support

MAT = Material(11500.0, 0.3, density_kg_m3=420.0)


def beam(**kw):
    defaults = dict(
        width_mm=3000.0, height_mm=600.0, thickness_mm=90.0, material=MAT,
        supports=(Support(((0.0, 0.0), (150.0, 0.0)), "xy"), Support(((2850.0, 0.0), (3000.0, 0.0)), "y")),
        loads=(PointLoad((1500.0, 600.0), (0.0, -40000.0)),),
        element_size_mm=25.0,
    )
    defaults.update(kw)
    return Panel(**defaults)


def test_solid_beam_figures_and_equilibrium():
    # Timoshenko beam, central point load, span 2850 mm between a pin and a roller (Roark table 8.1 plus the
    # shear term, docs/references.md): PL^3/(48EI) + PL/(4kGA), read at mid-span on the neutral axis. 5 %: a
    # deep beam (L/h = 4.75) on point supports deforms locally at them (seen here: 2.4 % over). The largest
    # deflection is under the load, which also indents the top edge locally.
    result = analyze(beam(supports=(Support(((75.0, 0.0),), "xy"), Support(((2925.0, 0.0),), "y"))))
    P, L, h, t = 40000.0, 2850.0, 600.0, 90.0
    I, A, G = t * h**3 / 12, t * h, MAT.E_MPa / 2.6
    expected = P * L**3 / (48 * MAT.E_MPa * I) + P * L / (4 * 5 / 6 * G * A)
    g = result.grid
    centre = int(np.argmin(np.hypot(*(g.node_xy - [1500.0, 300.0]).T)))
    assert -result.U[2 * centre + 1, 0] == pytest.approx(expected, rel=0.05)
    assert result.max_deflection_mm > -result.U[2 * centre + 1, 0]
    assert result.max_deflection_at == pytest.approx((1500.0, 600.0))
    np.testing.assert_allclose(result.reaction_sum_N, -result.load_sum_N, rtol=0, atol=1e-9 * P)
    np.testing.assert_allclose(result.load_sum_N, [[0.0, -P]])
    # Compliance is the work of the loads: F . U (definition).
    assert result.compliance_Nmm == pytest.approx(float(result.F[:, 0] @ result.U[:, 0]))
    assert result.compliance_Nmm > 0
    assert result.elements == 120 * 24 and result.warnings == ()
    # Bending stress at mid-span: M y / I with M = P L / 4 (beam theory), read at the centre of the bottom
    # element beside mid-span, half an element above the fibre. 7 %: under a point load a deep beam departs from
    # the linear distribution (seen here: 4.5 % under). The peak von Mises is under the point load.
    e = g.element_at(1500.0 - 1.0, 1.0)
    y = h / 2 - g.element_centres[e, 1]
    assert result.stresses[0, e, 0] == pytest.approx(P * L / 4 * y / I, rel=0.07)
    assert result.max_von_mises_MPa > result.stresses[0, e, 0]
    assert result.max_von_mises_at[1] > h - g.dy


def test_weighted_compliance_over_cases():
    loads = (PointLoad((1500.0, 600.0), (0.0, -40000.0), case="main"),
             LineLoad((0.0, 600.0), (3000.0, 600.0), (0.0, -5.0), case="snow"))
    result = analyze(beam(loads=loads, case_weights=(("main", 1.0), ("snow", 0.5))))
    assert result.cases == ("main", "snow")
    c = np.einsum("ic,ic->c", result.F, result.U)
    assert result.compliance_Nmm == pytest.approx(c[0] + 0.5 * c[1], rel=1e-12)
    np.testing.assert_allclose(result.reaction_sum_N, -result.load_sum_N, rtol=0, atol=1e-9 * 40000)


def test_opening_softens_the_beam_and_stays_in_equilibrium():
    hole = Region(Point(1500.0, 300.0).buffer(150.0), "OPENING")
    solid, holed = analyze(beam()), analyze(beam(openings=(hole,)))
    assert holed.compliance_Nmm > solid.compliance_Nmm
    assert holed.fractions.sum() < solid.fractions.sum()
    np.testing.assert_allclose(holed.reaction_sum_N, -holed.load_sum_N, rtol=0, atol=1e-9 * 40000)
    # Nodes inside the opening carry no material and stay at zero.
    inside = np.hypot(*(holed.grid.node_xy - [1500.0, 300.0]).T) < 120.0
    assert np.all(holed.U[np.repeat(inside, 2)] == 0.0)


def test_mechanism_is_caught_before_solving():
    with pytest.raises(LacunaError, match="slide in x"):
        analyze(beam(supports=(Support(((0.0, 0.0),), "y"), Support(((3000.0, 0.0),), "y"))))


def test_part_cut_off_by_a_slot_is_reported():
    slot = Region(box(1400.0, -10.0, 1460.0, 610.0), "OPENING")
    with pytest.raises(LacunaError, match="has no support at all"):
        analyze(beam(openings=(slot,), supports=(Support(((0.0, 0.0), (150.0, 0.0)), "xy"),),
                     loads=(PointLoad((500.0, 600.0), (0.0, -1000.0)),)))
