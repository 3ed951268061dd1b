"""Freeform void measures: area, centroid, principal axes, width; cleaning of slivers, small voids, islands."""

import math

import numpy as np

import pytest
from shapely import affinity
from shapely.geometry import Point, Polygon, box

from toolkit.errors import LacunaError
from toolkit.voids.measure import clean, inscribed_width, measure, principal_axes, second_moments


def test_rectangle_second_moments():
    # Rectangle b x h about its centroid: I = b h^3 / 12 (standard section property, e.g. Roark's Formulas
    # for Stress and Strain, table of section properties). Here integral of y^2 dA = 100 * 20^3 / 12.
    area, centroid, tensor = second_moments(box(10, 5, 110, 25))
    assert area == pytest.approx(2000.0)
    assert centroid == pytest.approx((60.0, 15.0))
    assert tensor[1, 1] == pytest.approx(100 * 20**3 / 12)
    assert tensor[0, 0] == pytest.approx(20 * 100**3 / 12)
    assert tensor[0, 1] == pytest.approx(0.0, abs=1e-6)


def test_hollow_square_counts_its_hole():
    # Hollow square B outside, b inside: I = (B^4 - b^4) / 12 (standard section property, same source).
    shape = Polygon(box(0, 0, 100, 100).exterior.coords, [box(30, 30, 70, 70).exterior.coords])
    area, centroid, tensor = second_moments(shape)
    assert area == pytest.approx(100**2 - 40**2)
    assert tensor[0, 0] == pytest.approx((100**4 - 40**4) / 12)


def test_principal_axis_of_turned_rectangle():
    # A 100 x 20 rectangle turned 30 degrees: its major axis turns with it; radius of gyration h / sqrt(12)
    # (from I = b h^3 / 12 and A = b h).
    angle, (r1, r2) = principal_axes(affinity.rotate(box(0, 0, 100, 20), 30, origin="centroid"))
    assert angle == pytest.approx(30.0, abs=1e-9)
    assert r1 == pytest.approx(100 / math.sqrt(12))
    assert r2 == pytest.approx(20 / math.sqrt(12))


def test_width_is_the_inscribed_circle():
    # The largest circle inside a 100 x 40 rectangle has diameter 40 (geometry, common practice, no source).
    assert measure(box(0, 0, 100, 40)).width_mm == pytest.approx(40.0, abs=0.05)


def test_clean_drops_slivers_and_small_voids_and_fills_islands():
    sliver = box(0, 0, 300, 5)                       # long, 5 mm wide
    small = Point(500, 500).buffer(8)                # 16 mm across
    ring = Polygon(box(0, 100, 200, 300).exterior.coords, [box(80, 180, 120, 220).exterior.coords])
    kept, notes = clean([sliver, small, ring], min_void_mm=20)
    assert [v.index for v in kept] == [2]
    assert kept[0].islands == 1 and kept[0].area_mm2 == pytest.approx(200 * 200)  # outer ring fitted
    assert sum("dropped" in n for n in notes) == 2
    assert any("island" in n for n in notes)


def test_clean_rejects_what_is_not_an_area():
    with pytest.raises(LacunaError) as err:
        clean([Point(0, 0)], 20)
    assert err.value.where and err.value.hint
    with pytest.raises(LacunaError) as err:
        clean([box(0, 0, 10, 10)], -1)
    assert err.value.where == "[rules] min_void"


def test_a_convex_shapes_inscribed_diameter_lies_between_2a_over_p_and_4a_over_p():
    # What Site.big_enough leans on: r P / 2 <= A (the triangles from the circle's centre to the sides, each of
    # height >= r) and A <= r P (the inner parallel body at depth r has no area, and the rim of width r has at
    # most r P). Geometry, no outside source; checked on random convex polygons, triangles to thin slivers.
    rng = np.random.default_rng(7)
    for _ in range(300):
        pts = rng.normal(size=(int(rng.integers(3, 12)), 2)) * rng.uniform(0.01, 5.0, size=2)
        hull = Polygon(pts).convex_hull
        if hull.area <= 1e-9:
            continue
        low, high = 2.0 * hull.area / hull.length, 4.0 * hull.area / hull.length
        width = inscribed_width(hull, 1e-6)
        assert low * (1 - 1e-4) <= width <= high * (1 + 1e-4)
