"""Solid fractions of elements cut exactly by the drawing's geometry."""

import numpy as np
import pytest
import shapely
from shapely.geometry import Point, box

from toolkit.fe.fractions import solid_fractions
from toolkit.fe.grid import Grid


def test_circle_cut_fractions_sum_to_the_exact_area():
    # The polygon's own area (shapely) is the exact value; fractions must add up to it to 1e-9.
    g = Grid(60, 20, 10.0, 10.0)
    hole = Point(303.7, 98.2).buffer(71.3, quad_segs=64)
    solid = box(0, 0, 600, 200).difference(hole)
    f = solid_fractions(g, solid)
    assert f.sum() * g.element_area == pytest.approx(solid.area, rel=1e-9)
    assert ((f > 0) & (f < 1)).sum() > 20  # really cut, not a centre test
    assert f.min() == 0.0 and f.max() == 1.0


def test_slanted_outline_and_an_element_cut_in_half():
    g = Grid(4, 4, 1.0, 1.0)
    # The diagonal y = x halves the elements on it (area 1/2 each, by symmetry).
    f = solid_fractions(g, shapely.Polygon([(0, 0), (4, 0), (4, 4)])).reshape(4, 4)
    np.testing.assert_allclose(np.diag(f), 0.5)
    np.testing.assert_allclose(f[np.tril_indices(4, -1)], 0.0)
    np.testing.assert_allclose(f[np.triu_indices(4, 1)], 1.0)


def test_opening_on_grid_lines_gives_whole_elements():
    g = Grid(10, 5, 20.0, 20.0)
    f = solid_fractions(g, box(0, 0, 200, 100).difference(box(40, 20, 100, 80)))
    assert set(np.unique(f)) == {0.0, 1.0} and (f == 0).sum() == 3 * 3


def _by_clipping(g: Grid, geom) -> np.ndarray:
    """Reference: each element's box intersected with the geometry by shapely, one by one."""
    ix, iy = np.meshgrid(np.arange(g.nx), np.arange(g.ny))
    boxes = shapely.box(ix.ravel() * g.dx, iy.ravel() * g.dy, (ix.ravel() + 1) * g.dx, (iy.ravel() + 1) * g.dy)
    return shapely.area(shapely.intersection(geom, boxes)) / g.element_area


def test_fractions_agree_with_shapely_clipping_cell_by_cell():
    # Green's theorem per cell against polygon clipping (shapely/GEOS, an independent computation), to 1e-12:
    # holes, several parts, sides along grid lines and through grid nodes, slivers, a part reaching off the grid,
    # non-square cells and random convex and star-shaped polygons.
    g = Grid(37, 23, 7.5, 5.0)
    w, h = 37 * 7.5, 23 * 5.0
    rng = np.random.default_rng(11)
    shapes = [
        box(0, 0, w, h).difference(Point(140.0, 57.5).buffer(31.0, quad_segs=32)),
        box(15.0, 10.0, 45.0, 35.0),                                      # sides on grid lines
        shapely.Polygon([(0, 0), (75, 50), (150, 0), (75, 100)]),          # through grid nodes
        shapely.union_all([Point(50, 50).buffer(20), Point(200, 60).buffer(30).difference(Point(200, 60).buffer(9))]),
        box(100.0, 40.0, 100.3, 90.0),                                     # a sliver inside one column
        Point(w - 5.0, h / 2).buffer(25.0),                                # reaching off the grid
    ]
    for _ in range(12):
        pts = rng.uniform((0, 0), (w, h), size=(9, 2))
        shapes.append(shapely.convex_hull(shapely.multipoints(pts)))
        angles = np.sort(rng.uniform(0, 2 * np.pi, 11))
        radii = rng.uniform(8, 45, 11)
        c = rng.uniform((50, 50), (w - 50, h - 50))
        shapes.append(shapely.Polygon(np.column_stack([c[0] + radii * np.cos(angles), c[1] + radii * np.sin(angles)])))
    for shape in shapes:
        np.testing.assert_allclose(solid_fractions(g, shape), _by_clipping(g, shape), rtol=0, atol=1e-12)


def test_whole_and_empty_elements_are_exactly_one_and_zero():
    # The optimiser's design region is the elements at exactly 1.0: a panel drawn far from the origin comes in
    # with sides like 3000.000000000388 mm, and the area sums must still give whole elements exactly 1.
    g = Grid(60, 12, 3000.000000000388 / 60, 600.000000000078 / 12)
    f = solid_fractions(g, box(0, 0, 3000.000000000388, 600.000000000078).difference(box(1300, 200, 1700, 400)))
    assert set(np.unique(f)) == {0.0, 1.0}
    assert np.count_nonzero(f == 0.0) == 8 * 4
