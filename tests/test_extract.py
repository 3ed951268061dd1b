"""Void outlines contoured from element densities."""

import math

import numpy as np
import pytest
import shapely
from shapely.geometry import Point

from toolkit.errors import LacunaError
from toolkit.fe.grid import Grid
from toolkit.voids.extract import freeform_voids, nodal_densities

VOID = 1e-3  # the soft-kill void value BESO leaves (Huang & Xie 2009)


def disc_densities(grid, cx, cy, r_out, r_in=0.0):
    c = grid.element_centres
    d = np.hypot(c[:, 0] - cx, c[:, 1] - cy)
    return np.where((d < r_out) & (d >= r_in), VOID, 1.0)


def test_nodal_mean_by_hand():
    # 2 x 1 elements of densities 0 and 1: corner nodes take their one element, the middle nodes the mean 0.5.
    n = nodal_densities(Grid(2, 1, 1.0, 1.0), np.array([0.0, 1.0]))
    assert n.tolist() == [[0.0, 0.5, 1.0], [0.0, 0.5, 1.0]]


def test_one_cell_cut_worked_by_hand():
    # 2 x 2 unit elements, only the lower left one void (0): nodal values are 0 at the corner node, 0.5 at
    # the two nodes next to it, 0.75 at the centre node, 1 elsewhere. Only the lower left cell has a node below
    # 0.5, and its edges reach the level exactly at the two half-way nodes: the triangle (0,0)-(1,0)-(0,1),
    # area 0.5. Worked by hand.
    voids = freeform_voids(Grid(2, 2, 1.0, 1.0), np.array([0.0, 1.0, 1.0, 1.0]))
    assert len(voids) == 1
    assert voids[0].area == pytest.approx(0.5, abs=1e-12)
    assert voids[0].equals(shapely.Polygon([(0, 0), (1, 0), (0, 1)]))


@pytest.mark.parametrize("dx", [1.0, 2.0])
def test_disc_area_and_roundness(dx):
    # A void disc of radius 20 mm, elements void where their centre lies inside: the contour encloses
    # pi r^2 within 1 % (geometry; the element count itself is 0.6 % off) and every vertex lies within one
    # element of the circle (it is a smooth contour, not the element staircase). Measured: 0.1 % and 0.5 %.
    n = int(100 / dx)
    g = Grid(n, n, dx, dx)
    voids = freeform_voids(g, disc_densities(g, 50.0, 50.0, 20.0))
    assert len(voids) == 1 and voids[0].is_valid and not voids[0].interiors
    assert voids[0].area == pytest.approx(math.pi * 20.0**2, rel=0.01)
    radii = np.hypot(*(np.asarray(voids[0].exterior.coords) - 50.0).T)
    assert np.all(np.abs(radii - 20.0) <= dx)


def test_ring_keeps_its_solid_island_as_a_hole():
    g = Grid(50, 50, 2.0, 2.0)
    voids = freeform_voids(g, disc_densities(g, 50.0, 50.0, 30.0, 12.0))
    assert len(voids) == 1 and len(voids[0].interiors) == 1
    # Area of the annulus pi (30^2 - 12^2) within 2 % (geometry).
    assert voids[0].area == pytest.approx(math.pi * (30.0**2 - 12.0**2), rel=0.02)
    # The island is dropped as a hole when smaller than min_area_mm2 (pi 12^2 = 452 mm2): then it is filled.
    filled = freeform_voids(g, disc_densities(g, 50.0, 50.0, 30.0, 12.0), min_area_mm2=600.0)
    assert len(filled) == 1 and not filled[0].interiors


def test_voids_at_the_edge_stay_inside_the_envelope_and_small_ones_go():
    g = Grid(40, 20, 5.0, 5.0)
    d = disc_densities(g, 0.0, 0.0, 40.0)  # a quarter disc at the corner
    d = np.minimum(d, disc_densities(g, 150.0, 50.0, 6.0))  # a small void, 113 mm2
    envelope = shapely.box(0, 0, 200, 100)
    voids = freeform_voids(g, d)
    assert len(voids) == 2
    assert all(envelope.covers(v) and v.is_valid for v in voids)
    big = freeform_voids(g, d, min_area_mm2=200.0)
    assert len(big) == 1 and big[0].bounds[0] == 0.0 and big[0].bounds[1] == 0.0


def test_saddle_cells_give_valid_outlines():
    # A checkerboard is the worst case for marching squares (every inner cell is a saddle); whatever the
    # choice, the result must be valid polygons inside the envelope.
    g = Grid(8, 6, 1.0, 1.0)
    ix, iy = np.meshgrid(np.arange(8), np.arange(6))
    d = np.where((ix + iy) % 2 == 0, VOID, 1.0).ravel()
    for level in (0.3, 0.5, 0.7):
        voids = freeform_voids(g, d, level=level)
        assert voids and all(v.is_valid for v in voids)
        assert shapely.box(0, 0, 8, 6).covers(shapely.union_all(voids))


def test_exclude_removes_an_existing_opening():
    g = Grid(60, 30, 2.0, 2.0)
    hole = Point(40.0, 30.0).buffer(10.0, 32)
    d = np.minimum(disc_densities(g, 40.0, 30.0, 10.0), disc_densities(g, 90.0, 30.0, 12.0))
    voids = freeform_voids(g, d, exclude=hole)
    assert len(voids) == 1 and voids[0].centroid.distance(Point(90.0, 30.0)) < 0.5


def test_same_densities_same_list_and_bad_level():
    g = Grid(30, 20, 2.0, 2.0)
    d = np.minimum(disc_densities(g, 15.0, 15.0, 8.0), disc_densities(g, 45.0, 25.0, 8.0))
    a, b = freeform_voids(g, d), freeform_voids(g, d)
    assert len(a) == 2 and all(x.equals_exact(y, 0.0) for x, y in zip(a, b))
    assert a[0].bounds[1] < a[1].bounds[1]  # bottom first
    with pytest.raises(LacunaError) as e:
        freeform_voids(g, d, level=1.0)
    assert e.value.hint


def test_a_void_far_along_a_grid_of_uneven_steps_has_no_false_island():
    # On a half-inch grid (12.7 mm) x0 + dx is not always (I + 1) dx in floating point: a wholly void cell's box
    # a hair off its neighbours' edges left the coverage union with zero-width spikes and a false island in a void
    # region near the far end, and not in its mirror image near the origin. The two ends' voids are mirror
    # images, with no holes.
    g = Grid(240, 60, 12.7, 12.7)
    d = np.ones((60, 240))
    d[24:46, 4:20] = 1e-3
    d[24:46, 220:236] = 1e-3
    voids = freeform_voids(g, d.ravel())
    assert len(voids) == 2
    assert all(len(v.interiors) == 0 and v.is_valid for v in voids)
    left, right = sorted(voids, key=lambda v: v.bounds[0])
    mirrored = shapely.transform(right, lambda xy: np.column_stack([g.width_mm - xy[:, 0], xy[:, 1]]))
    # a millionth of the area: house tolerance, no source (mirrored coordinates differ in their last bits)
    assert shapely.area(shapely.symmetric_difference(left, mirrored)) < 1e-6 * left.area
