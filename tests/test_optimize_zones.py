"""Non-design zones on the element grid, and the problem built from a panel."""

import numpy as np
import pytest
import shapely
from shapely.geometry import Point, box

from toolkit.errors import LacunaError
from toolkit.fe.grid import Grid
from toolkit.model import LineLoad, Material, Panel, PointLoad, Region, Support
from toolkit.optimize.problem import build_problem, check_problem, design_fraction_for_panel
from toolkit.optimize.settings import ZoneSettings
from toolkit.optimize.zones import element_boxes, non_design_zones

TIMBER = Material(E_MPa=11500.0, nu=0.3)


def panel(**kw):
    base = dict(
        width_mm=400.0, height_mm=200.0, thickness_mm=40.0, material=TIMBER,
        supports=(Support(points=((0.0, 0.0),), fix="xy"), Support(points=((400.0, 0.0),), fix="y")),
        loads=(PointLoad(at=(200.0, 200.0), force_N=(0.0, -1000.0)),),
    )
    base.update(kw)
    return Panel(**base)


def rows_cols(mask, grid):
    return mask.reshape(grid.ny, grid.nx)


def test_edge_band_width_in_elements():
    # 10 mm elements, edge cover 25 mm: the band reaches into the third row/column (20..30 mm shares area
    # with 0..25 mm) and no further; counted by hand.
    g = Grid(40, 20, 10.0, 10.0)
    z = non_design_zones(g, panel(supports=(), loads=()), ZoneSettings(edge_cover_mm=25.0))
    m = rows_cols(z.edge, g)
    assert m[:3, :].all() and m[-3:, :].all() and m[:, :3].all() and m[:, -3:].all()
    assert not m[3:-3, 3:-3].any()
    # Exactly 30 mm: the fourth row only touches the band along a line, so it stays out.
    z30 = non_design_zones(g, panel(supports=(), loads=()), ZoneSettings(edge_cover_mm=30.0))
    assert rows_cols(z30.edge, g)[3:-3, 3:-3].sum() == 0 and rows_cols(z30.edge, g)[2, 5]


def test_bearing_discs_and_zero_clearance():
    g = Grid(40, 20, 10.0, 10.0)
    p = panel()
    z = non_design_zones(g, p, ZoneSettings(bearing_clearance_mm=30.0))
    boxes = element_boxes(g)
    # Every element whose box shares area with a 30 mm disc about a support or the load, and no other
    # (the definition in zones.py, checked here against shapely directly).
    discs = shapely.union_all([Point(0, 0).buffer(30, 64), Point(400, 0).buffer(30, 64), Point(200, 200).buffer(30, 64)])
    expect = shapely.area(shapely.intersection(boxes, discs)) > 1e-6
    assert np.array_equal(z.bearing, expect)
    # Clearance 0: only the elements touching the points (one at each corner, two under the mid-top load).
    z0 = non_design_zones(g, p, ZoneSettings())
    assert z0.bearing.sum() == 4


def test_openings_webs_and_keep():
    g = Grid(40, 20, 10.0, 10.0)
    hole = Point(200.0, 100.0).buffer(35.0, 64)
    keep = box(300.0, 60.0, 340.0, 140.0)
    p = panel(openings=(Region(shape=hole, layer="OPENING"),), keep=(Region(shape=keep, layer="KEEP"),))
    z = non_design_zones(g, p, ZoneSettings(min_web_mm=20.0))
    boxes = element_boxes(g)
    cut = shapely.area(shapely.intersection(boxes, hole)) > 0
    assert np.array_equal(z.opening, cut)
    ring = shapely.area(shapely.intersection(boxes, hole.buffer(20.0, 64))) > 1e-6
    assert np.array_equal(z.web, ring & ~cut)
    assert z.keep.sum() == 4 * 8  # 40 x 80 mm on the grid lines: 4 x 8 elements
    assert not (z.design & (z.opening | z.web | z.keep)).any()


def test_line_load_elements_are_solid():
    # A line load across the middle of the panel: every element its segment passes through or touches is kept
    # (x = 100..300 mm ends on element edges, so the elements beyond each end, 9 and 30, touch it too).
    g = Grid(40, 20, 10.0, 10.0)
    p = panel(loads=(LineLoad(start=(100.0, 105.0), end=(300.0, 105.0), intensity_N_per_mm=(0.0, -1.0)),))
    z = non_design_zones(g, p, ZoneSettings())
    assert rows_cols(z.bearing, g)[10, 9:31].all() and rows_cols(z.bearing, g)[10].sum() == 22


def test_build_problem_and_bad_inputs():
    prob = build_problem(panel(element_size_mm=20.0), ZoneSettings(edge_cover_mm=20.0, bearing_clearance_mm=40.0))
    g = prob.grid
    assert (g.nx, g.ny) == (20, 10)
    # Load sum equals the applied 1000 N (equilibrium of consistent nodal forces; statics, no source needed).
    assert prob.loads[1::2].sum() == pytest.approx(-1000.0)
    assert 0 < prob.n_design < g.n_elements
    check_problem(prob)

    # Zero load: none at all, and all zero.
    for loads in ((), (PointLoad(at=(200.0, 200.0), force_N=(0.0, 0.0)),)):
        bad = build_problem(panel(loads=loads, element_size_mm=20.0), ZoneSettings())
        with pytest.raises(LacunaError) as e:
            check_problem(bad)
        assert e.value.where == "[[load]]" and "no load" in e.value.message and e.value.hint

    # No design region left: an edge band half the panel's height covers everything.
    bad = build_problem(panel(element_size_mm=20.0), ZoneSettings(edge_cover_mm=100.0))
    with pytest.raises(LacunaError) as e:
        check_problem(bad)
    assert e.value.where == "[rules]" and "no design region" in e.value.message


def test_whole_panel_fraction_below_the_zones():
    prob = build_problem(panel(element_size_mm=20.0), ZoneSettings(edge_cover_mm=20.0))
    held = prob.fractions[prob.passive].sum() / prob.fractions.sum()  # 56 of 200 elements: 28 %
    assert held == pytest.approx(56 / 200)
    # Keeping 64 % of the panel: 128 elements, of which the zones hold 56, so 72 of the 144 design ones (0.5).
    assert design_fraction_for_panel(prob, 0.64) == pytest.approx(0.5)
    with pytest.raises(LacunaError) as e:
        design_fraction_for_panel(prob, 0.2)
    assert "20.0%" in e.value.message and "28.0%" in e.value.message and e.value.where == "[optimize] volume_fraction"


def test_a_zone_edge_a_hair_across_a_grid_line_takes_no_element_beyond_it():
    # A KEEP block of a drawing rotated into the panel's frame has its edges on grid lines to round-off: 1e-13 mm
    # across one takes a sliver of the next element, which is no shared area (zones.SLIVER); a real overlap of a
    # millionth of an element still is.
    g = Grid(40, 20, 10.0, 10.0)
    hair = box(300.0 - 1e-13, 60.0 - 1e-13, 340.0 + 1e-13, 140.0 + 1e-13)
    z = non_design_zones(g, panel(keep=(Region(shape=hair, layer="KEEP"),)), ZoneSettings())
    assert z.keep.sum() == 4 * 8
    real = box(300.0 - 1e-5, 60.0, 340.0, 140.0)  # 1e-4 mm2 of each element left of it: 1e-6 of an element
    z = non_design_zones(g, panel(keep=(Region(shape=real, layer="KEEP"),)), ZoneSettings())
    assert z.keep.sum() == 5 * 8
