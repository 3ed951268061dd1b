"""Consistent nodal loads: resultants and first moments exact, loads off the panel refused."""

import math

import numpy as np
import pytest
import shapely
from shapely.geometry import Point, box

from toolkit.errors import LacunaError
from toolkit.fe.fractions import solid_fractions
from toolkit.fe.grid import Grid
from toolkit.fe.loads import load_matrix
from toolkit.model import LineLoad, Material, Panel, PointLoad, Region

G = Grid(12, 5, 50.0, 40.0)  # a 600 x 200 mm panel
MAT = Material(11500.0, 0.3, density_kg_m3=420.0)


def panel(loads, openings=(), self_weight=False):
    return Panel(600.0, 200.0, 90.0, MAT, openings=openings, loads=tuple(loads), self_weight=self_weight)


def resultant_and_moment(F, column=0):
    xy = G.node_xy
    fx, fy = F[0::2, column], F[1::2, column]
    return fx.sum(), fy.sum(), float(np.sum(xy[:, 0] * fy - xy[:, 1] * fx))


def test_point_load_keeps_its_resultant_and_moment():
    # Bilinear shape functions reproduce linear fields (sum N_i x_i = x), so the consistent nodal forces of a
    # point load have the load's own moment about any point (statics; any FE text).
    F = load_matrix(G, panel([PointLoad((133.0, 71.0), (250.0, -1200.0))]))
    fx, fy, m = resultant_and_moment(F)
    assert (fx, fy) == pytest.approx((250.0, -1200.0), rel=1e-14)
    assert m == pytest.approx(133.0 * -1200.0 - 71.0 * 250.0, rel=1e-13)


def test_slanted_line_load_keeps_its_resultant_and_moment():
    # A uniform load q along a segment: resultant q * length at the segment's mid-point (statics).
    start, end, q = (20.0, 10.0), (570.0, 185.0), (3.0, -7.0)
    F = load_matrix(G, panel([LineLoad(start, end, q)]))
    length = math.dist(start, end)
    mid = np.add(start, end) / 2
    fx, fy, m = resultant_and_moment(F)
    assert (fx, fy) == pytest.approx((q[0] * length, q[1] * length), rel=1e-13)
    assert m == pytest.approx(length * (mid[0] * q[1] - mid[1] * q[0]), rel=1e-12)


def test_edge_line_load_on_grid_nodes_gives_the_textbook_split():
    # Uniform load on a straight element edge: half of each edge's share to each of its nodes (any FE text).
    F = load_matrix(G, panel([LineLoad((0.0, 200.0), (600.0, 200.0), (0.0, -2.0))]))
    top = np.flatnonzero(np.isclose(G.node_xy[:, 1], 200.0))
    np.testing.assert_allclose(F[2 * top + 1, 0], [-50.0] + [-100.0] * 11 + [-50.0], rtol=1e-13)


def test_cases_are_separate_columns_in_panel_order():
    loads = [PointLoad((100.0, 100.0), (0.0, -1.0), case="wind"), PointLoad((200.0, 100.0), (5.0, 0.0), case="main")]
    F = load_matrix(G, panel(loads))
    assert F.shape == (G.n_dofs, 2)
    assert resultant_and_moment(F, 0)[:2] == pytest.approx((0.0, -1.0))
    assert resultant_and_moment(F, 1)[:2] == pytest.approx((5.0, 0.0))


def test_self_weight_equals_density_times_solid_volume():
    # W = rho g V, g = 9.81 m/s2 (standard gravity 9.80665 rounded as usual in design; docs/references.md);
    # the opening's area is left out exactly.
    hole = Point(300.0, 100.0).buffer(60.0)
    p = panel([PointLoad((10.0, 10.0), (0.0, 0.0))], openings=(Region(hole, "OPENING"),), self_weight=True)
    F = load_matrix(G, p)
    volume_m3 = (600.0 * 200.0 - hole.area) * 90.0 * 1e-9
    assert -F[1::2].sum() == pytest.approx(420.0 * 9.81 * volume_m3, rel=1e-12)
    assert F[0::2].sum() == 0.0


def test_point_load_off_the_panel_names_itself():
    with pytest.raises(LacunaError, match=r"point load at \(700, 50\) mm is off the panel") as info:
        load_matrix(G, panel([PointLoad((700.0, 50.0), (0.0, -1.0), source="[[load]] #3")]))
    assert info.value.where == "[[load]] #3" and info.value.hint


def test_point_load_inside_an_opening_is_refused():
    p = panel([PointLoad((300.0, 100.0), (0.0, -1.0))], openings=(Region(box(250, 50, 350, 150), "OPENING"),))
    with pytest.raises(LacunaError, match="inside an opening"):
        load_matrix(G, p)


def test_line_load_across_an_opening_is_refused():
    p = panel([LineLoad((0.0, 100.0), (600.0, 100.0), (0.0, -1.0))],
              openings=(Region(box(250, 50, 350, 150), "OPENING"),))
    with pytest.raises(LacunaError, match="runs off the panel"):
        load_matrix(G, p)


def test_point_load_on_an_opening_edge_goes_to_the_solid_side():
    # The opening fills elements on grid lines; a load on its edge must reach nodes that carry material.
    opening = box(250, 40, 350, 160)
    p = panel([PointLoad((300.0, 160.0), (0.0, -10.0))], openings=(Region(opening, "OPENING"),))
    fractions = solid_fractions(G, p.solid)
    F = load_matrix(G, p, fractions=fractions)
    loaded = np.flatnonzero(F[1::2, 0])
    assert G.active_nodes(fractions > 0)[loaded].all()
    assert not shapely.contains_xy(opening, *G.node_xy[loaded].T).any()
