"""Fitting one freeform void: a shape that already is a stock n-gon, stadium or circle comes back as itself."""

import math

import numpy as np
import pytest
import shapely
from shapely.geometry import LineString, Point, Polygon

from toolkit.errors import LacunaError
from toolkit.voids.cover import greedy_bores, packed_bores
from toolkit.voids.fit import fit_error, fit_polygon, fit_slot
from toolkit.voids.outline import eased_outline

STOCK = (20.0, 25.0, 32.0, 40.0, 50.0, 65.0, 80.0)


def regular(n, radius, centre=(0.0, 0.0), turn_deg=0.0):
    a = np.radians(turn_deg) + 2 * np.pi * np.arange(n) / n
    return np.column_stack([centre[0] + radius * np.cos(a), centre[1] + radius * np.sin(a)])


def test_regular_hexagon_comes_back_as_itself():
    corners = regular(6, 60.0, (400.0, 250.0), 17.0)
    draft = fit_polygon(Polygon(corners), 6)
    assert draft.centre == pytest.approx((400.0, 250.0), abs=0.5)
    assert draft.size == pytest.approx(120.0, abs=0.5)
    # every fitted corner is within 0.5 mm of a corner of the hexagon
    got = draft.sharp
    assert np.max(np.min(np.linalg.norm(got[:, None] - corners[None], axis=2), axis=1)) < 0.5
    assert fit_error(draft.shape(), Polygon(corners)) < 1e-3


@pytest.mark.parametrize("sides", range(3, 13))
def test_polygon_has_exactly_sides_corners_and_is_convex(sides):
    blob = shapely.union(Point(0, 0).buffer(50), Point(60, 20).buffer(30))
    draft = fit_polygon(blob, sides)
    void = draft.void("V1")
    assert void.sides == sides and len(void.outline) == sides
    shape = void.shape
    assert shape.is_valid
    assert shape.convex_hull.area == pytest.approx(shape.area, rel=1e-9)
    # each corner turns by at least a little: no corner in name only
    p = np.asarray([v[:2] for v in void.outline])
    a, b = np.roll(p, 1, axis=0) - p, np.roll(p, -1, axis=0) - p
    assert np.all(a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0] < 0)  # strictly convex, counter-clockwise


def test_polygon_fit_beats_the_plain_regular_start():
    # A D-shaped void: the fitted 6-gon is closer than the best-sized regular hexagon on the centroid.
    target = shapely.union(Point(0, 0).buffer(50, quad_segs=16), shapely.box(-50, -50, 0, 50))
    draft = fit_polygon(target, 6)
    start = Polygon(regular(6, math.sqrt(target.area / (1.5 * math.sqrt(3))), target.centroid.coords[0]))
    assert fit_error(draft.shape(), target) < 0.5 * fit_error(start, target)


def test_stadium_of_a_stock_width_comes_back_as_itself():
    target = LineString([(300 - 59 * math.cos(math.radians(35)), 200 - 59 * math.sin(math.radians(35))),
                         (300 + 59 * math.cos(math.radians(35)), 200 + 59 * math.sin(math.radians(35)))]
                        ).buffer(16, quad_segs=32)
    draft = fit_slot(target, STOCK)
    assert draft.size == 32.0
    assert draft.length == pytest.approx(150.0, abs=0.5)
    assert draft.angle_deg == pytest.approx(35.0, abs=0.5)
    assert draft.centre == pytest.approx((300.0, 200.0), abs=0.5)
    outline = draft.void("V1").outline
    assert [b for _, _, b in outline] == [0.0, 1.0, 0.0, 1.0]  # two half-circle arcs: bulge tan(180/4) = 1


def test_circle_of_a_stock_size_comes_back_as_one_bore():
    # A circle a hair larger than a stock size (the contour is no more exact than its grid) holds that bore.
    target = Point(250, 180).buffer(25.05, quad_segs=32)
    bores = packed_bores(target, STOCK, lambda a, b: 30.0)
    assert len(bores) == 1
    x, y, d = bores[0]
    assert d == 50.0 and (x, y) == pytest.approx((250, 180), abs=0.06)


def test_bores_use_only_stock_sizes_and_keep_their_webs():
    target = shapely.box(0, 0, 400, 70)
    for bores in (packed_bores(target, STOCK, lambda a, b: 30.0), greedy_bores(target, STOCK, lambda a, b: 30.0)):
        assert len(bores) >= 3
        assert {d for _, _, d in bores} <= set(STOCK)
        for i, a in enumerate(bores):
            for b in bores[:i]:
                assert math.dist(a[:2], b[:2]) - (a[2] + b[2]) / 2 >= 30 - 1e-6
            assert target.buffer(1e-6).covers(Point(a[:2]).buffer(a[2] / 2))


def test_radius_corners_are_true_arcs():
    # Bulge = tan(theta / 4), theta the arc's included angle (DXF reference, LWPOLYLINE). A regular hexagon
    # turns 60 degrees at each corner, so a corner radius is a 60-degree arc: bulge tan(15 deg).
    out = eased_outline(regular(6, 60.0), "radius", 10.0)
    assert len(out) == 12
    assert [b for _, _, b in out[0::2]] == pytest.approx([math.tan(math.radians(15))] * 6)
    assert [b for _, _, b in out[1::2]] == [0.0] * 6
    # the tangent points sit r * tan(30 deg) back from the sharp corner along each side (fillet geometry,
    # common practice, no source)
    corner = regular(6, 60.0)[0]
    assert math.dist(out[0][:2], corner) == pytest.approx(10.0 * math.tan(math.radians(30)))


def test_chamfer_doubles_the_vertices_but_not_the_sides():
    draft = fit_polygon(Polygon(regular(6, 60.0)), 6)
    from dataclasses import replace
    void = replace(draft, corner="chamfer", corner_mm=8.0).void("V1")
    assert void.sides == 6 and len(void.outline) == 12
    # the cut across a 120-degree corner with 8 mm legs is 2 * 8 * sin(60 deg) (law of cosines, common practice)
    assert math.dist(void.outline[0][:2], void.outline[1][:2]) == pytest.approx(8.0 * math.sqrt(3), rel=1e-6)


def test_bad_sides_names_the_key():
    with pytest.raises(LacunaError) as err:
        fit_polygon(Point(0, 0).buffer(10), 13)
    assert err.value.where == "[voids] sides" and err.value.hint


def test_a_slot_without_travel_is_scheduled_as_a_round_hole():
    # A slot as long as it is wide is a round hole: the schedule's tool text says so instead of "50 mm, 50 mm long".
    from toolkit.voids.outline import Draft

    tools = ("cut", "cut slot", "cut hole")
    plunged = Draft(family="slot", centre=(100.0, 80.0), size=50.0, length=50.0, angle_deg=117.8, source=0,
                    tools=tools)
    routed = Draft(family="slot", centre=(100.0, 80.0), size=50.0, length=75.0, angle_deg=117.8, source=1,
                   tools=tools)
    assert plunged.void("V1").tool == "cut slot 50 mm, as long as it is wide (a round hole)"
    assert routed.void("V2").tool == "cut slot 50 mm, 75 mm long"
    assert plunged.void("V1").shape.area == pytest.approx(math.pi * 25.0**2, rel=2e-3)
