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
