"""Symmetric void layouts: when the problem is symmetric, and layouts that map onto themselves under the mirror.

The check values are the definition of a mirror image about a panel mid-line (x -> W - x for "x", y -> H - y
for "y", CONTRACT.md's naming), of a force under it (the component across the line reverses), and the rules'
own numbers; no other outside values are needed.
"""

import math

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings, strategies as st
from shapely import affinity
from shapely.geometry import LineString, Point, Polygon, box

from test_voids_layout import brute_force_problems
from toolkit.errors import LacunaError
from toolkit.jobfile import parse_job
from toolkit.voids.settings import DEFAULT_BORE_DIAMETERS_MM, VoidOptions
from toolkit.model import LineLoad, Material, Panel, PointLoad, Region, Rules, Support
from toolkit.rules.check import check_layout
from toolkit.voids.layout import rationalise
from toolkit.voids.symmetry import Mirror, asymmetry, group_average, mirror_points, problem_symmetry

TIMBER = Material(E_MPa=11500, nu=0.3, density_kg_m3=420)
RULES = Rules(min_web_mm=40.0, edge_cover_mm=50.0, min_void_mm=20.0, bearing_clearance_mm=100.0)


def panel(w=2000.0, h=600.0, supports=(), loads=(), openings=(), keep=(), weights=(), self_weight=False):
    return Panel(width_mm=w, height_mm=h, thickness_mm=40.0, material=TIMBER, supports=supports, loads=loads,
                 openings=openings, keep=keep, case_weights=weights, self_weight=self_weight)


def simply_supported(w=2000.0, h=600.0, load_x=None, **kw):
    """Bearings at both bottom corners and a point load on the top edge (mid-span unless load_x is given)."""
    return panel(w, h, supports=(Support(((0.0, 0.0), (150.0, 0.0))), Support(((w, 0.0), (w - 150.0, 0.0)))),
                 loads=(PointLoad((w / 2 if load_x is None else load_x, h), (0.0, -40e3)),), **kw)


# --- is the problem symmetric? -------------------------------------------------------------------------------------


def test_simply_supported_beam_with_a_central_load_is_symmetric_about_the_vertical_mid_line():
    # Mirror image about x = W/2: each bearing lands on the other, the load on itself with fx = 0 unchanged.
    # About y = H/2 the bearings would land on the top edge: no.
    assert problem_symmetry(simply_supported()) == {"x"}
    assert "support" in asymmetry(simply_supported(), "y")


def test_off_centre_load_within_and_beyond_the_tolerance():
    # 0.4 mm off the mid-line is within a 1 mm drafting tolerance (common practice, no source); 5 mm is not.
    assert problem_symmetry(simply_supported(load_x=1000.4), tol=1.0) == {"x"}
    assert problem_symmetry(simply_supported(load_x=1005.0), tol=1.0) == set()
    assert "point load" in asymmetry(simply_supported(load_x=1005.0), "x", tol=1.0)


def test_a_force_across_the_mirror_line_reverses():
    # A horizontal push at mid-span mirrors to a pull the other way: the problem is not symmetric about x.
    p = panel(supports=(Support(((0.0, 0.0), (150.0, 0.0))), Support(((2000.0, 0.0), (1850.0, 0.0)))),
              loads=(PointLoad((1000.0, 600.0), (5e3, -40e3)),))
    assert "x" not in problem_symmetry(p)
    # A cantilever (left edge held) pulled along its axis at mid-height: symmetric about the horizontal
    # mid-line only; pushed down at the tip instead, about neither.
    held = (Support(((0.0, 0.0), (0.0, 600.0))),)
    assert problem_symmetry(panel(supports=held, loads=(PointLoad((2000.0, 300.0), (10e3, 0.0)),))) == {"y"}
    assert problem_symmetry(panel(supports=held, loads=(PointLoad((2000.0, 300.0), (0.0, -10e3)),))) == set()


def test_mirrored_load_cases_of_equal_weight_make_a_symmetric_problem():
    # Two cases, each the mirror image of the other: with equal weights the weighted compliance is the same
    # under the mirror; with unequal weights it is not.
    sup = (Support(((0.0, 0.0), (150.0, 0.0))), Support(((2000.0, 0.0), (1850.0, 0.0))))
    loads = (PointLoad((500.0, 600.0), (0.0, -10e3), case="left"),
             PointLoad((1500.0, 600.0), (0.0, -10e3), case="right"))
    assert problem_symmetry(panel(supports=sup, loads=loads)) == {"x"}
    assert problem_symmetry(panel(supports=sup, loads=loads, weights=(("left", 2.0), ("right", 1.0)))) == set()


def test_line_loads_openings_keep_zones_and_self_weight():
    sup = (Support(((0.0, 0.0), (150.0, 0.0))), Support(((2000.0, 0.0), (1850.0, 0.0))))
    udl = (LineLoad((0.0, 600.0), (2000.0, 600.0), (0.0, -5.0)),)
    pair = (Region(Point(500, 300).buffer(60, quad_segs=8), "OPENING", "A1"),
            Region(Point(1500, 300).buffer(60, quad_segs=8), "OPENING", "A2"))
    assert problem_symmetry(panel(supports=sup, loads=udl, openings=pair)) == {"x"}
    # a circle flattened from another start angle is still the same circle within the tolerance
    turned = (pair[0], Region(affinity.rotate(pair[1].shape, 11.25, origin=(1500, 300)), "OPENING", "A2"))
    assert problem_symmetry(panel(supports=sup, loads=udl, openings=turned)) == {"x"}
    lone = (Region(box(300, 200, 420, 400), "KEEP", "K1"),)
    why = asymmetry(panel(supports=sup, loads=udl, keep=lone), "x")
    assert why is not None and "K1" in why
    # Self-weight acts along -y: mirrored about the horizontal mid-line it would act along +y.
    posts = (Support(((0.0, 0.0), (0.0, 600.0))), Support(((2000.0, 0.0), (2000.0, 600.0))))
    assert problem_symmetry(panel(supports=posts)) == {"x", "y"}
    assert problem_symmetry(panel(supports=posts, self_weight=True)) == {"x"}


def test_bad_axis_or_tolerance_is_refused_with_a_key():
    with pytest.raises(LacunaError) as err:
        asymmetry(simply_supported(), "z")
    assert err.value.where and err.value.hint
    with pytest.raises(LacunaError) as err:
        problem_symmetry(simply_supported(), tol=-1.0)
    assert err.value.where and err.value.hint


# --- symmetric n-gons ----------------------------------------------------------------------------------------------


def test_group_average_gives_an_exact_mirror_image_and_keeps_a_symmetric_polygon():
    m = Mirror(axes=("x", "y"), centre=(1000.0, 300.0))
    rng = np.random.default_rng(3)
    a = np.radians(np.arange(0, 360, 60)) + 0.1
    hexagon = np.column_stack([1000 + 80 * np.cos(a), 300 + 50 * np.sin(a)]) + rng.normal(0, 3, (6, 2))
    for fixed in (("x",), ("y",), ("x", "y")):
        sym = group_average(hexagon, fixed, m)
        for axis in fixed:
            image = mirror_points(sym, axis, m.about(axis))
            # every corner's mirror image is a corner (definition of mirror symmetry), to the last bit
            gaps = np.linalg.norm(image[:, None, :] - sym[None, :, :], axis=2).min(axis=1)
            assert gaps.max() == 0.0
    # A regular hexagon with a corner on each mid-line is already symmetric about both: returned as it is.
    b = np.radians(np.arange(0, 360, 60))
    regular = np.column_stack([1000 + 80 * np.cos(b), 300 + 80 * np.sin(b)])
    assert np.allclose(group_average(regular, ("x", "y"), m), regular, atol=1e-9)
    # No pentagon is symmetric about two lines at right angles (its symmetry group has no half turn).
    assert group_average(regular[:5], ("x", "y"), m) is None


# --- layouts -------------------------------------------------------------------------------------------------------


def assert_symmetric(voids, axes, W, H, tol=1e-6):
    """Every void's mirror image is a void of the layout: same family, size and sides, centre within ``tol``
    (definition of a mirror image about x = W/2 or y = H/2)."""
    for axis in axes:
        about = W / 2 if axis == "x" else H / 2
        for v in voids:
            c = mirror_points([v.centre], axis, about)[0]
            twins = [w for w in voids if math.dist(w.centre, c) <= tol]
            assert len(twins) == 1, (axis, v.id, v.centre)
            w = twins[0]
            assert (w.family, w.sides) == (v.family, v.sides)
            assert abs(w.size_mm - v.size_mm) <= 1e-9 and abs(w.length_mm - v.length_mm) <= 1e-6
            image = shapely.transform(v.shape, lambda xy, a=axis, m=about: mirror_points(xy, a, m))
            # the flattened arcs may start at other points: within twice the chord tolerance (0.01 mm)
            assert shapely.hausdorff_distance(image, w.shape, densify=0.1) <= 0.05


def on_grid(value, origin, snap):
    k = (value - origin) / snap
    return abs(k - round(k)) * snap <= 1e-6


def test_a_nearly_symmetric_freeform_gives_an_exactly_symmetric_layout():
    # What an optimiser run without symmetry leaves: twins a few mm apart from exact, one void astride the axis.
    p = simply_supported(w=2012.0)
    W, H = p.width_mm, p.height_mm
    freeform = [Point(400, 300).buffer(70), Point(1612, 303).buffer(68), Point(1003, 290).buffer(90),
                affinity.scale(Point(700, 250).buffer(50), 2, 1), affinity.scale(Point(1308, 254).buffer(50), 2, 1)]
    for family in ("polygon", "slot", "bore", "mixed"):
        res = rationalise(p, freeform, VoidOptions(family=family, sides=6, snap_mm=5.0, symmetric=True), RULES)
        assert res.violations == () and check_layout(p, res.voids, RULES) == []
        assert res.voids and any("mirror-symmetric" in n for n in res.notes)
        assert_symmetric(res.voids, ("x",), W, H)
        middle = [v for v in res.voids if abs(v.centre[0] - W / 2) < 1.0]
        assert middle and all(v.centre[0] == W / 2 for v in middle)  # on the mid-line exactly
        # The mid-line x = 1006 is off the corner's 5 mm grid, on which no twins could both stand; the grid
        # through the mid-line, x = 1006 +- 5k, is its own mirror image.
        # An irregular n-gon is set out by its corners, so its corners are on the grid (its centre, the centroid,
        # falls where it falls); any other void by its centre.
        points = [c for v in res.voids for c in (v.corners if v.family == "polygon" and not v.regular
                                                  else (v.centre,))]
        assert all(on_grid(x, W / 2, 5.0) and on_grid(y, 0.0, 5.0) for x, y in points)


def test_twins_near_the_axis_keep_the_web_across_it():
    # Two voids 10 mm apart astride the mid-line, each 5 mm from it: with a 40 mm web they cannot both stay
    # (rules: min_web 40 mm between any two voids).
    p = simply_supported()
    freeform = [Point(1000 - 5 - 60, 300).buffer(60), Point(1000 + 5 + 60, 300).buffer(60)]
    res = rationalise(p, freeform, VoidOptions(family="bore", snap_mm=5.0, symmetric=True), RULES)
    assert res.violations == () and len(res.voids) >= 1
    assert_symmetric(res.voids, ("x",), 2000.0, 600.0)
    for i, v in enumerate(res.voids):
        for w in res.voids[:i]:
            assert v.shape.distance(w.shape) >= RULES.min_web_mm - 0.02  # flattening of the circles


def test_every_mirror_image_is_checked_where_it_lands():
    # The region open to voids is cut on the right only (as a drawing a little off symmetric would): the seed
    # fits on the left, its image would land in the cut, so the pair must move, shrink or go.
    from toolkit.rules.check import allowed_region

    p = simply_supported()
    cut = box(1500, 150, 1700, 450)
    allowed = allowed_region(p, RULES).difference(cut)
    res = rationalise(p, [Point(400, 300).buffer(70)], VoidOptions(family="bore", symmetric=True), RULES,
                      allowed=allowed)
    assert_symmetric(res.voids, ("x",), 2000.0, 600.0)
    assert all(not v.shape.intersects(cut.buffer(-0.01)) for v in res.voids)
    assert res.changes or res.dropped


def test_both_mid_lines_and_an_odd_polygon_at_the_centre():
    posts = (Support(((0.0, 0.0), (0.0, 801.0))), Support(((1999.0, 0.0), (1999.0, 801.0))))
    p = panel(1999.0, 801.0, supports=posts, loads=(PointLoad((1999.0, 400.5), (1e3, 0.0)),
                                                    PointLoad((0.0, 400.5), (-1e3, 0.0))))
    assert problem_symmetry(p) == {"x", "y"}
    centre = affinity.rotate(affinity.scale(Point(1002, 398).buffer(150), 1.5, 1), 10)
    freeform = [centre, LineString([(750, 200), (1250, 200)]).buffer(35),
                LineString([(300, 200), (300, 600)]).buffer(45)]
    for family, sides in (("polygon", 5), ("polygon", 6), ("bore", 6), ("slot", 6)):
        opts = VoidOptions(family=family, sides=sides, optimize_symmetry="xy", corner="radius", corner_size_mm=8.0)
        res = rationalise(p, freeform, opts, RULES)
        assert res.violations == () and check_layout(p, res.voids, RULES) == []
        assert_symmetric(res.voids, ("x", "y"), 1999.0, 801.0)
        if family == "polygon":
            assert all(v.sides == sides and len(v.outline) == 2 * sides for v in res.voids)
        if sides == 5:
            # a pentagon cannot sit on both mid-lines: the centre void became a pair, and a note says so
            assert any("cannot be symmetric about both" in n for n in res.notes)
            assert not any(v.centre == (999.5, 400.5) for v in res.voids)


def test_symmetry_the_problem_lacks_is_noted_and_not_enforced():
    p = simply_supported(load_x=700.0)  # load off centre: no mirror symmetry
    freeform = [Point(400, 300).buffer(70), Point(1580, 310).buffer(66)]
    plain = rationalise(p, freeform, VoidOptions(family="bore"), RULES)
    for opts in (VoidOptions(family="bore", symmetric=True), VoidOptions(family="bore", optimize_symmetry="x")):
        res = rationalise(p, freeform, opts, RULES)
        assert [(v.centre, v.size_mm) for v in res.voids] == [(v.centre, v.size_mm) for v in plain.voids]
        assert any("not" in n and "symmetric" in n and "point load" in n for n in res.notes)
    # "xy" asked on a problem symmetric about x only: x is kept, y is refused in a note.
    res = rationalise(simply_supported(), freeform, VoidOptions(family="bore", optimize_symmetry="xy"), RULES)
    assert_symmetric(res.voids, ("x",), 2000.0, 600.0)
    assert any("horizontal mid-line" in n and "not kept symmetric" in n for n in res.notes)


def test_symmetric_false_overrides_the_optimiser_setting():
    p = simply_supported()
    freeform = [Point(400, 300).buffer(70), Point(1580, 310).buffer(66)]
    off = rationalise(p, freeform, VoidOptions(family="bore", symmetric=False, optimize_symmetry="x"), RULES)
    on = rationalise(p, freeform, VoidOptions(family="bore", optimize_symmetry="x"), RULES)
    assert not any("symmetric" in n for n in off.notes)
    assert math.dist(off.voids[0].centre, mirror_points([off.voids[-1].centre], "x", 1000.0)[0]) > 1.0
    assert_symmetric(on.voids, ("x",), 2000.0, 600.0)


def test_bad_symmetric_setting_names_the_key():
    for opts, key in ((VoidOptions(symmetric="yes"), "[voids] symmetric"),
                      (VoidOptions(optimize_symmetry="z"), "[optimize] symmetry")):
        with pytest.raises(LacunaError) as err:
            rationalise(simply_supported(), [Point(400, 300).buffer(60)], opts, RULES)
        assert err.value.where == key and err.value.hint


# --- the job file key ----------------------------------------------------------------------------------------------


def test_job_file_symmetric_key():
    j = parse_job('[optimize]\nsymmetry = "x"\n')
    assert j.voids.symmetric is None and j.voids.optimize_symmetry == "x"  # default: follow [optimize]
    j = parse_job('[optimize]\nsymmetry = "xy"\n[voids]\nsymmetric = false\n')
    assert j.voids.symmetric is False and j.voids.optimize_symmetry == "xy" and j.is_set("voids.symmetric")
    assert parse_job("[voids]\nsymmetric = true\n").voids.symmetric is True
    with pytest.raises(LacunaError) as err:
        parse_job('[voids]\nsymmetric = "yes"\n', source="job.toml")
    assert err.value.where == "job.toml [voids] symmetric" and err.value.hint


# --- property: symmetric panels give layouts that are their own mirror image and break no rule ---------------------


@st.composite
def symmetric_scenes(draw):
    axes = draw(st.sampled_from([("x",), ("y",), ("x", "y")]))
    w, h = draw(st.floats(900, 2400)), draw(st.floats(400, 900))
    m = Mirror(axes=axes, centre=(w / 2, h / 2))

    def orbit_points(p):
        pts = [np.asarray(p, dtype=float)]
        for g in m.elements():
            img = np.asarray(p, dtype=float)[None, :]
            for a in g:
                img = mirror_points(img, a, m.about(a))
            pts.append(img[0])
        return pts

    # supports: a corner bearing and its images (fixity kept by a mirror)
    corner = (draw(st.sampled_from([0.0, w])), 0.0)
    supports = tuple(Support((tuple(q),), fix="xy") for q in orbit_points(corner))
    # loads: one point load on the top or left edge and its images, the force mirrored with it
    at = (draw(st.floats(0.1, 0.9)) * w, h)
    force = np.array([0.0, -draw(st.floats(1e3, 5e4))])
    loads = []
    for g in [()] + m.elements():
        p, f = np.asarray(at)[None, :], force.copy()
        for a in g:
            p = mirror_points(p, a, m.about(a))
            f[0 if a == "x" else 1] *= -1
        loads.append(PointLoad(tuple(p[0]), tuple(f)))
    openings = ()
    if draw(st.booleans()):
        ox, oy = draw(st.floats(0.15, 0.85)) * w, draw(st.floats(0.3, 0.7)) * h
        shapes = [m.geometry(box(ox - 35, oy - 35, ox + 35, oy + 35), g) for g in [()] + m.elements()]
        merged = shapely.union_all(shapes)
        # overlapping images become one opening: the box around them, as symmetric as they are
        openings = tuple(Region(shapely.envelope(q), "OPENING", f"O{k}")
                         for k, q in enumerate(shapely.get_parts(merged)))
    rules = Rules(min_web_mm=draw(st.floats(0, 80)), edge_cover_mm=draw(st.floats(0, 90)),
                  min_void_mm=draw(st.floats(10, 40)), bearing_clearance_mm=draw(st.sampled_from([0.0, 80.0])))
    shapes = []
    for _ in range(draw(st.integers(1, 5))):
        cx, cy = draw(st.floats(0.05, 0.95)) * w, draw(st.floats(0.05, 0.95)) * h
        r = draw(st.floats(15, 150))
        g = affinity.rotate(affinity.scale(Point(cx, cy).buffer(r, quad_segs=12), draw(st.floats(1, 3)), 1),
                            draw(st.floats(0, 180)))
        shapes.append(g.intersection(box(0, 0, w, h)))
    if draw(st.booleans()):  # a symmetric freeform, as an optimiser run with symmetry gives
        shapes = [m.geometry(s, g) for s in shapes for g in [()] + m.elements()]
    freeform = [q for q in shapely.get_parts(shapely.union_all(shapes)) if isinstance(q, Polygon) and q.area > 1]
    opts = VoidOptions(family=draw(st.sampled_from(["polygon", "slot", "bore", "mixed"])),
                       sides=draw(st.integers(3, 12)), max_types=draw(st.integers(1, 3)),
                       snap_mm=draw(st.sampled_from([0.0, 5.0, 10.0])),
                       corner=draw(st.sampled_from(["none", "none", "radius", "chamfer"])), corner_size_mm=6.0,
                       optimize_symmetry="".join(axes))
    p = Panel(width_mm=w, height_mm=h, thickness_mm=40.0, material=TIMBER, supports=supports,
              loads=tuple(loads), openings=openings)
    return p, freeform, opts, rules, axes


def check_symmetric_scene(p, freeform, opts, rules, axes):
    assert set(axes) <= problem_symmetry(p)  # the scene is built symmetric
    try:
        res = rationalise(p, freeform, opts, rules)
    except LacunaError as err:  # the rules may leave no room at all: said in words, with a key
        assert "no void can be placed" in str(err) and err.where
        return
    voids = res.voids
    assert res.violations == () and check_layout(p, voids, rules) == []
    assert brute_force_problems(p, voids, rules) == []
    assert_symmetric(voids, axes, p.width_mm, p.height_mm)
    for v in voids:
        if v.family == "polygon":
            assert v.sides == opts.sides and len(v.outline) == opts.sides * (1 if opts.corner == "none" else 2)
        if v.family in ("bore", "slot"):
            assert v.size_mm in DEFAULT_BORE_DIAMETERS_MM
    # Sizes are types for bores, slots and regular n-gons; an irregular n-gon is cut to its own corners.
    assert len({(v.family, round(v.size_mm, 6)) for v in voids
                if not (v.family == "polygon" and not v.regular)}) <= opts.max_types
    assert [v.id for v in voids] == [f"V{k}" for k in range(1, len(voids) + 1)]
    assert [v.centre for v in voids] == sorted(v.centre for v in voids)


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(symmetric_scenes())
def test_symmetric_layouts_are_their_own_mirror_image(scene):
    check_symmetric_scene(*scene)


@pytest.mark.slow
@settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(symmetric_scenes())
def test_symmetric_layouts_are_their_own_mirror_image_long(scene):
    check_symmetric_scene(*scene)
