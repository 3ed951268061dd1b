"""Supports on the grid and the rigid-body check that runs before any solve."""

import numpy as np
import pytest
from shapely.geometry import box

from toolkit.errors import LacunaError
from toolkit.fe.boundary import check_mechanism, fixed_dofs
from toolkit.fe.grid import Grid
from toolkit.model import Frame, Support

G = Grid(20, 6, 50.0, 50.0)  # a 1000 x 300 mm panel


def mechanism_message(supports, active=None):
    fixed = fixed_dofs(G, supports)
    with pytest.raises(LacunaError) as info:
        check_mechanism(G, fixed, active)
    return str(info.value)


def test_well_held_panels_pass():
    # Pin and roller (a simply supported beam), and a built-in edge: both statically determinate or better.
    for supports in [
        (Support(((0.0, 0.0),), "xy"), Support(((1000.0, 0.0),), "y")),
        (Support(((0.0, 0.0), (0.0, 300.0)), "xy"),),
        (Support(((0.0, 0.0),), "y"), Support(((1000.0, 0.0),), "y"), Support(((500.0, 300.0),), "x")),
    ]:
        check_mechanism(G, fixed_dofs(G, supports))


def test_no_supports_at_all():
    assert "no support at all" in mechanism_message(())


def test_single_pin_leaves_rotation_about_it():
    message = mechanism_message((Support(((0.0, 0.0),), "xy"),))
    assert "rotate about (0, 0) mm" in message


def test_single_roller_slides_and_rotates():
    message = mechanism_message((Support(((500.0, 0.0),), "y"),))
    assert "slide in x" in message and "rotate about (500, 0) mm" in message
    assert 'fix = "xy" or "x"' in message


def test_collinear_rollers_in_y_let_the_panel_slide_in_x():
    message = mechanism_message((Support(((0.0, 0.0),), "y"), Support(((1000.0, 0.0),), "y")))
    assert "slide in x" in message and "rotate" not in message


def test_supports_all_in_x_let_the_panel_slide_in_y():
    message = mechanism_message((Support(((0.0, 0.0), (0.0, 300.0)), "x"),))
    assert "slide in y" in message and "rotate" not in message


def test_x_held_along_the_bottom_and_y_at_one_point_of_it_still_rotates():
    # Turning about (500, 0) moves the bottom edge's nodes only in y, which just one support holds.
    message = mechanism_message((Support(((0.0, 0.0), (1000.0, 0.0)), "x"), Support(((500.0, 0.0),), "y")))
    assert "slide" not in message and "rotate about (500, 0) mm" in message


def test_x_held_along_a_vertical_edge_and_y_at_one_point_is_held():
    # Turning about any point would move some of the x-held nodes along x = 0 in x: no mechanism.
    check_mechanism(G, fixed_dofs(G, (Support(((0.0, 0.0), (0.0, 300.0)), "x"), Support(((0.0, 150.0),), "y"))))


def test_part_cut_off_by_openings_is_named():
    active = np.ones(G.n_elements, bool).reshape(G.ny, G.nx)
    active[:, 10] = False  # a full-height slot splits the panel in two
    message = mechanism_message(
        (Support(((0.0, 0.0),), "xy"), Support(((0.0, 300.0),), "x")), active.ravel()
    )
    assert "the part of the panel around (775, 125) mm has no support" in message
    assert "(225," not in message  # the held left part is fine


def test_messages_use_drawing_coordinates_when_given_a_frame():
    frame = Frame(origin=(5000.0, 2000.0), mm_per_unit=10.0, unit="cm")
    fixed = fixed_dofs(G, (Support(((0.0, 0.0),), "xy"),))
    with pytest.raises(LacunaError, match=r"rotate about \(5000, 2000\) cm"):
        check_mechanism(G, fixed, frame=frame)


def test_segment_support_holds_every_node_along_it():
    fixed = fixed_dofs(G, (Support(((0.0, 0.0), (150.0, 0.0)), "y"),))
    assert np.flatnonzero(fixed).tolist() == [1, 3, 5, 7]


def test_support_off_the_outline_is_refused():
    with pytest.raises(LacunaError, match="does not lie on the panel's outline") as info:
        fixed_dofs(G, (Support(((100.0, 150.0), (400.0, 150.0)), "xy", source="[[support]] #2"),))
    assert info.value.where == "[[support]] #2" and info.value.hint


def test_support_on_an_opening_edge_is_accepted():
    solid = box(0, 0, 1000, 300).difference(box(400, 100, 600, 200))
    fixed = fixed_dofs(G, (Support(((400.0, 100.0), (600.0, 100.0)), "y"),), solid=solid)
    assert fixed.sum() == 5


def test_point_support_off_the_panel_is_refused():
    with pytest.raises(LacunaError, match="off the panel"):
        fixed_dofs(G, (Support(((1200.0, 0.0),), "xy"),))
    solid = box(0, 0, 1000, 300).difference(box(400, 100, 600, 200))
    with pytest.raises(LacunaError, match="inside an opening"):
        fixed_dofs(G, (Support(((500.0, 150.0),), "xy"),), solid=solid)


def test_the_parts_of_the_panel_are_those_scipy_ndimage_labels():
    # element_parts (a graph of shared edges, scipy.sparse.csgraph) against scipy.ndimage.label with its default
    # cross-shaped structure (a general-purpose reference: parts joined through edges, not corners, numbered in
    # raster order of their first element) on random grids of random densities.
    from scipy import ndimage

    from toolkit.fe.boundary import element_parts
    from toolkit.fe.grid import Grid

    rng = np.random.default_rng(7)
    for _ in range(200):
        nx, ny = (int(v) for v in rng.integers(1, 30, 2))
        active = rng.random(nx * ny) < rng.uniform(0.2, 0.9)
        expected, n = ndimage.label(active.reshape(ny, nx))
        labels, parts = element_parts(Grid(nx, ny, 1.0, 1.0), active)
        assert parts == n and np.array_equal(labels, expected.ravel())


def _held_by_every_node(grid, supports, solid, active_nodes):
    """The nodes each support holds, measured from every usable node with GEOS (the search before its numpy
    bound): the reference for ``fixed_dofs``."""
    import shapely
    from shapely.geometry import LineString, Point

    usable = np.flatnonzero(active_nodes)
    points = shapely.points(grid.node_xy[usable])
    band = 0.5 * min(grid.dx, grid.dy) * (1.0 + 1e-9)
    fixed = np.zeros(grid.n_dofs, dtype=bool)
    for s in supports:
        if s.is_point:
            nodes = usable[[int(np.argmin(shapely.distance(points, Point(s.points[0]))))]]
        else:
            segment = LineString(s.points)
            near = shapely.distance(points, segment) <= band
            nodes = usable[near] if near.any() else \
                usable[[int(np.argmin(shapely.distance(points, segment.interpolate(0.5, True))))]]
        fixed[2 * nodes] |= "x" in s.fix
        fixed[2 * nodes + 1] |= "y" in s.fix
    return fixed


def test_nodes_held_are_those_measured_from_every_node():
    # Points anywhere on the material (on nodes, half-way between them, on an opening's edge) and segments along
    # the outline and the opening's edges, off the node lines by less than half an element: the numpy bound
    # before GEOS's distances leaves the same nodes held as measuring every node.
    from toolkit.fe.fractions import solid_fractions

    grid = Grid(24, 10, 25.0, 25.0)
    solid = box(0.0, 0.0, 600.0, 250.0).difference(box(200.0, 75.0, 350.0, 175.0))
    active_nodes = grid.active_nodes(solid_fractions(grid, solid) > 1e-6)
    rng = np.random.default_rng(7)
    cases = [Support(((x, y),), fix) for x, y in [(0.0, 0.0), (12.5, 0.0), (600.0, 250.0), (200.0, 75.0),
                                                 (275.0, 175.0), (212.5, 112.5), (350.0, 120.0)]
             for fix in ("xy", "y")]
    for _ in range(40):
        x = float(rng.uniform(0.0, 600.0))
        cases.append(Support(((x, float(rng.choice([0.0, 250.0]))),), "xy"))
        a, b = sorted(rng.uniform(0.0, 600.0, 2))
        y = float(rng.choice([0.0, 250.0])) + float(rng.uniform(-12.0, 12.0)) * (rng.random() < 0.3)
        y = min(max(y, 0.0), 250.0)
        cases.append(Support(((a, y), (b, y)), "x"))
        c, d = sorted(rng.uniform(75.0, 175.0, 2))
        cases.append(Support(((float(rng.choice([200.0, 350.0])), c), (200.0 if rng.random() < 0.5 else 350.0, d)),
                             "xy"))
    checked = 0
    for support in cases:
        try:
            got = fixed_dofs(grid, (support,), solid=solid, active_nodes=active_nodes)
        except LacunaError:
            continue  # off the outline: refused before any node is looked for
        want = _held_by_every_node(grid, (support,), solid, active_nodes)
        assert np.array_equal(got, want), support
        checked += 1
    assert checked > 60
