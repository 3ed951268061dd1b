"""The whole rationalising step: rules kept (proved twice), sides, stock sizes, types, ids, changes."""

import math
import tempfile
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings, strategies as st
from shapely import affinity
from shapely.geometry import LineString, Point, Polygon, box

from toolkit.errors import LacunaError
from toolkit.voids.settings import DEFAULT_BORE_DIAMETERS_MM, VoidOptions
from toolkit.model import Material, Panel, Region, Rules, Support
from toolkit.rules.check import check_layout
from toolkit.voids.layout import energy_sampler, mean_over, rationalise

TIMBER = Material(E_MPa=11500, nu=0.3)


def make_panel(w=2000.0, h=600.0, openings=(), supports=()):
    return Panel(width_mm=w, height_mm=h, thickness_mm=40.0, material=TIMBER, openings=openings,
                 supports=supports)


# --- an independent measure of the rules: dense points on the true outlines, plain numpy distances -------------


def boundary_points(v, step=0.5):
    """Points along the void's true outline: circles and stadia from their defining numbers, polygons from
    the (x, y, bulge) outline with every arc drawn from its centre."""
    if v.family == "bore":
        n = max(64, int(math.pi * v.size_mm / step))
        a = np.linspace(0, 2 * np.pi, n, endpoint=False)
        return np.column_stack([v.centre[0] + v.size_mm / 2 * np.cos(a), v.centre[1] + v.size_mm / 2 * np.sin(a)])
    pts = []
    out = v.outline
    for i, (x0, y0, bulge) in enumerate(out):
        x1, y1, _ = out[(i + 1) % len(out)]
        chord = math.hypot(x1 - x0, y1 - y0)
        if bulge == 0.0:
            t = np.linspace(0, 1, max(2, int(chord / step)), endpoint=False)
            pts.append(np.column_stack([x0 + t * (x1 - x0), y0 + t * (y1 - y0)]))
            continue
        theta = 4 * math.atan(bulge)
        radius = chord / (2 * math.sin(theta / 2))
        mx, my = (x0 + x1) / 2, (y0 + y1) / 2
        nx, ny = -(y1 - y0) / chord, (x1 - x0) / chord
        d = radius * math.cos(theta / 2)
        cx, cy = mx + nx * d, my + ny * d
        a0 = math.atan2(y0 - cy, x0 - cx)
        a = a0 + theta * np.linspace(0, 1, max(8, int(abs(theta * radius) / step)), endpoint=False)
        pts.append(np.column_stack([cx + abs(radius) * np.cos(a), cy + abs(radius) * np.sin(a)]))
    return np.concatenate(pts)


def brute_force_problems(panel, voids, rules, allowed_pts_tol=0.6):
    """Rule breaks found without shapely: edge cover and webs by point distances, overlaps by containment."""
    problems = []
    pts = [boundary_points(v) for v in voids]
    for v, p in zip(voids, pts):
        edge = np.min(np.concatenate([p[:, 0], panel.width_mm - p[:, 0], p[:, 1], panel.height_mm - p[:, 1]]))
        if edge < rules.edge_cover_mm - allowed_pts_tol:
            problems.append(f"{v.id} edge {edge:.2f}")
    for i in range(len(voids)):
        for j in range(i):
            d = np.min(np.linalg.norm(pts[i][:, None, :] - pts[j][None, :, :], axis=2))
            if d < rules.min_web_mm - allowed_pts_tol:
                problems.append(f"{voids[i].id}-{voids[j].id} web {d:.2f}")
            if voids[j].shape.contains(Point(voids[i].centre)) or voids[i].shape.contains(Point(voids[j].centre)):
                problems.append(f"{voids[i].id}-{voids[j].id} overlap")
    return problems


# --- random void sets and rules ----------------------------------------------------------------------------------


@st.composite
def scenes(draw):
    w = draw(st.floats(800, 2400))
    h = draw(st.floats(350, 900))
    rules = Rules(min_web_mm=draw(st.floats(0, 80)), edge_cover_mm=draw(st.floats(0, 90)),
                  min_void_mm=draw(st.floats(10, 40)), bearing_clearance_mm=100.0)
    shapes = []
    for _ in range(draw(st.integers(1, 5))):
        cx, cy = draw(st.floats(0.05, 0.95)) * w, draw(st.floats(0.05, 0.95)) * h
        r = draw(st.floats(15, 150))
        kind = draw(st.sampled_from(["circle", "ellipse", "box"]))
        if kind == "circle":
            g = Point(cx, cy).buffer(r, quad_segs=12)
        elif kind == "ellipse":
            g = affinity.rotate(affinity.scale(Point(cx, cy).buffer(r, quad_segs=12), draw(st.floats(1, 3)), 1),
                                draw(st.floats(0, 180)))
        else:
            g = affinity.rotate(box(cx - r, cy - r / 2, cx + r, cy + r / 2), draw(st.floats(0, 180)))
        g = g.intersection(box(0, 0, w, h))
        if not g.is_empty and g.area > 1:
            shapes.append(g)
    merged = shapely.union_all(shapes)
    freeform = [p for p in shapely.get_parts(merged) if isinstance(p, Polygon)]
    opts = VoidOptions(family=draw(st.sampled_from(["polygon", "slot", "bore", "mixed"])),
                       sides=draw(st.integers(3, 12)), max_types=draw(st.integers(1, 3)),
                       snap_mm=draw(st.sampled_from([0.0, 5.0, 10.0])),
                       corner=draw(st.sampled_from(["none", "none", "radius", "chamfer"])), corner_size_mm=6.0)
    openings = ()
    if draw(st.booleans()):
        ox, oy = draw(st.floats(0.2, 0.8)) * w, draw(st.floats(0.3, 0.7)) * h
        openings = (Region(box(ox - 40, oy - 40, ox + 40, oy + 40), "OPENING"),)
    supports = (Support(((0.0, 0.0), (150.0, 0.0))),)
    return make_panel(w, h, openings, supports), freeform, opts, rules


def check_scene(panel, freeform, opts, rules):
    try:
        res = rationalise(panel, freeform, opts, rules)
    except LacunaError as err:  # the rules may leave no room at all: must be said in words, with a key
        assert "no void can be placed" in str(err) and err.where
        return
    voids = res.voids
    # the proof inside, the proof again here, and the independent measure
    assert res.violations == ()
    assert check_layout(panel, voids, rules) == []
    assert brute_force_problems(panel, voids, rules) == []
    for v in voids:
        if v.family == "polygon":
            assert v.sides == opts.sides
            assert len(v.outline) == opts.sides * (1 if opts.corner == "none" else 2)
        if v.family == "bore":
            assert v.size_mm in DEFAULT_BORE_DIAMETERS_MM
        if v.family == "slot":
            assert v.size_mm in DEFAULT_BORE_DIAMETERS_MM  # slot widths default to the bit sizes
    # Sizes are types for tools and formers: bores, slot widths and regular n-gons. An irregular n-gon is cut to
    # its own corner list, so its size is no type.
    typed = {(v.family, round(v.size_mm, 6)) for v in voids if not (v.family == "polygon" and not v.regular)}
    assert len(typed) <= opts.max_types
    assert [v.id for v in voids] == [f"V{k}" for k in range(1, len(voids) + 1)]
    assert [(v.centre[0], v.centre[1]) for v in voids] == sorted((v.centre[0], v.centre[1]) for v in voids)


@settings(max_examples=8, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(scenes())
def test_no_output_breaks_a_rule(scene):
    check_scene(*scene)


@pytest.mark.slow
@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(scenes())
def test_no_output_breaks_a_rule_long(scene):
    check_scene(*scene)


# --- shapes that already are what a shop makes come back as themselves ---------------------------------------------


RULES = Rules(min_web_mm=40.0, edge_cover_mm=50.0, min_void_mm=20.0, bearing_clearance_mm=0.0)


def test_hexagon_stadium_and_circle_come_back_within_snap():
    hexagon = Polygon([(400 + 60 * math.cos(a), 300 + 60 * math.sin(a)) for a in np.radians(np.arange(0, 360, 60))])
    stadium = LineString([(900, 300), (1000, 300)]).buffer(25, quad_segs=32)  # 50 wide, 150 long
    circle = Point(1500, 300).buffer(32.5, quad_segs=32)                         # 65 across
    snap = 5.0
    for family, target, size in (("polygon", hexagon, 120.0), ("slot", stadium, 50.0), ("bore", circle, 65.0)):
        res = rationalise(make_panel(), [target], VoidOptions(family=family, sides=6, snap_mm=snap), RULES)
        (v,) = res.voids
        assert v.size_mm == pytest.approx(size, abs=snap)
        assert math.dist(v.centre, target.centroid.coords[0]) <= snap
        assert res.fit_errors[0][1] < 0.1
        assert res.violations == ()
    slot = rationalise(make_panel(), [stadium], VoidOptions(family="slot", snap_mm=snap), RULES).voids[0]
    assert slot.length_mm == pytest.approx(150.0, abs=snap) and slot.angle_deg % 180 == pytest.approx(0.0, abs=1)


def test_void_too_near_the_edge_is_moved_or_shrunk_and_said_so():
    near = Point(90, 300).buffer(40)  # 50 mm from the left edge; the cover is 50 mm, the allowed region starts there
    res = rationalise(make_panel(), [near], VoidOptions(family="bore", snap_mm=0.0), RULES)
    (v,) = res.voids
    assert v.centre[0] - v.size_mm / 2 >= 50.0 - 1e-6
    assert res.violations == ()


def test_two_voids_too_close_keep_the_web():
    a, b = Point(500, 300).buffer(60), Point(630, 300).buffer(60)  # 10 mm apart, web 40
    res = rationalise(make_panel(), [a, b], VoidOptions(family="polygon", sides=8, snap_mm=0.0), RULES)
    assert len(res.voids) == 2
    assert res.voids[0].shape.distance(res.voids[1].shape) >= 40.0
    assert any("web" in c for c in res.changes)


def test_max_types_holds_with_many_sizes():
    voids = [Point(150 + 170 * k, 300).buffer(30 + 6 * k) for k in range(10)]
    res = rationalise(make_panel(), voids, VoidOptions(family="polygon", sides=6, max_types=2, regular=True), RULES)
    assert len(res.voids) >= 8 and all(v.regular for v in res.voids)
    assert len({v.size_mm for v in res.voids}) <= 2
    assert res.violations == ()


def test_ids_run_left_to_right():
    voids = [Point(x, 300).buffer(40) for x in (1500, 300, 900)]
    res = rationalise(make_panel(), voids, VoidOptions(family="bore", snap_mm=5), RULES)
    xs = [v.centre[0] for v in res.voids]
    assert [v.id for v in res.voids] == ["V1", "V2", "V3"] and xs == sorted(xs)


def test_impossible_rules_said_plainly():
    rules = Rules(edge_cover_mm=300.0, min_web_mm=40.0, min_void_mm=20.0)
    with pytest.raises(LacunaError) as err:
        rationalise(make_panel(h=500.0), [Point(900, 250).buffer(60)], VoidOptions(), rules)
    assert "no void can be placed" in str(err.value) and "edge_cover" in err.value.where


def test_stock_under_the_least_void_is_refused_naming_the_list_and_the_thickness_behind_the_least_void():
    # A 200 mm thick panel under a profile whose least void is 1.5 thicknesses (300 mm) and whose widest slot is
    # 200 mm: refused before any work, naming whose list it is, its sizes, why the least void is 300 mm and the
    # smallest change. With the job's own list the sentence says so; a thin panel (least void 20 mm) passes.
    from toolkit.voids.layout import refuse_impossible

    rules = Rules(profile="steel-cut", min_web_mm=25, edge_cover_mm=25, min_void_mm=20, min_void_per_thickness=1.5,
                  slot_widths_mm=(40.0, 100.0, 200.0), sources=(("slot_widths", "common practice, no source"),))
    thick = replace(make_panel(w=3000.0, h=1500.0), thickness_mm=200.0)
    with pytest.raises(LacunaError) as err:
        refuse_impossible(thick, VoidOptions(family="slot"), rules)
    assert str(err.value).startswith(
        "[voids] slot_widths: no void can be made: every slot width in the steel-cut profile's list (40, 100, 200 mm) "
        "is under the least void of 300 mm (1.5 x the 200 mm thickness, the steel-cut profile's "
        "min_void_per_thickness)"), str(err.value)
    assert err.value.where == "[voids] slot_widths"
    assert "at least 300 mm in [voids] slot_widths" in err.value.hint
    with pytest.raises(LacunaError) as err:
        refuse_impossible(thick, VoidOptions(family="slot"), replace(rules, sources=(("slot_widths", "job file"),)))
    assert "every slot width in the job's list (40, 100, 200 mm)" in str(err.value)
    refuse_impossible(replace(thick, thickness_mm=10.0), VoidOptions(family="slot"), rules)  # 20 mm least void


def test_stock_or_sides_too_large_for_the_room_the_rules_leave_are_refused():
    # Edge covers of 250 mm on a 600 mm deep panel leave a band 100 mm deep: the job's bores of 150 and 200 mm,
    # or 12-gons with sides of at least 80 mm (298 mm across their flats), cannot be made there.
    from toolkit.voids.layout import refuse_impossible

    rules = Rules(min_web_mm=25, edge_cover_mm=250, min_void_mm=20, least_feature_mm=80.0)
    panel = make_panel()
    with pytest.raises(LacunaError) as err:
        refuse_impossible(panel, VoidOptions(family="bore", bore_diameters_mm=(150.0, 200.0)), rules)
    assert "is 100 mm across, and the smallest bore in the job's list is 150 mm" in str(err.value)
    assert err.value.where == "[voids] bore_diameters" and "of at most 100 mm" in err.value.hint
    with pytest.raises(LacunaError) as err:
        refuse_impossible(panel, VoidOptions(family="polygon", sides=12), rules)
    assert "the smallest 12-gon with sides of the least feature 80 mm is 299 mm across its flats" in str(err.value)
    assert err.value.where == "[voids] sides" and "fewer sides" in err.value.hint
    refuse_impossible(panel, VoidOptions(family="bore", bore_diameters_mm=(50.0, 150.0)), rules)  # 50 mm fits


@pytest.mark.parametrize("key, opts", [
    ("[voids] family", VoidOptions(family="hexagon")),
    ("[voids] sides", VoidOptions(sides=2)),
    ("[voids] bore_diameters", VoidOptions(bore_diameters_mm=())),
    ("[voids] max_types", VoidOptions(max_types=0)),
    ("[voids] corner_size", VoidOptions(corner="radius", corner_size_mm=None)),
])
def test_bad_settings_name_the_key(key, opts):
    with pytest.raises(LacunaError) as err:
        rationalise(make_panel(), [Point(900, 300).buffer(60)], opts, RULES)
    assert err.value.where == key and err.value.hint


# --- the mixed family's measure --------------------------------------------------------------------------------


def test_mean_over_a_linear_field_is_its_value_at_the_centroid():
    # The mean of a linear function over a region is its value at the centroid (definition of the centroid).
    shape = box(100, 50, 300, 150)
    assert mean_over(shape, lambda p: 2.0 * p[:, 0] + p[:, 1], 1.0) == pytest.approx(2 * 200 + 100, rel=1e-9)


def test_energy_on_the_grid_is_read_per_element():
    from toolkit.fe.grid import Grid

    grid = Grid(nx=4, ny=2, dx=10.0, dy=10.0)
    sample, spacing = energy_sampler((grid, np.arange(8.0)))
    assert sample(np.array([[5.0, 5.0], [35.0, 15.0]])).tolist() == [0.0, 7.0] and spacing == 5.0
    with pytest.raises(LacunaError) as err:
        energy_sampler((grid, np.arange(7.0)))
    assert err.value.where == "energy"


def test_mixed_picks_the_family_that_removes_idle_material():
    # A long round-ended void: the slot of its width fills it, bores fill part of it, a 4-gon inside it loses the
    # round ends. Every family's candidate lies inside the void, so with no field (or an even one) the family
    # removing most wins: the slot. With the energy high in the void's right half and low in its left half, a
    # layout is worth its area less what it costs where the material works: the choice removes less from the
    # hot half than the plain choice does.
    target = LineString([(600, 300), (900, 300)]).buffer(25, quad_segs=32)
    opts = VoidOptions(family="mixed", sides=4, max_types=3, snap_mm=0.0)
    plain = rationalise(make_panel(), [target], opts, RULES)
    assert {v.family for v in plain.voids} == {"slot"}
    singles = [rationalise(make_panel(), [target], replace(opts, family=f), RULES) for f in ("polygon", "bore")]
    assert sum(v.area_mm2 for v in plain.voids) >= max(sum(v.area_mm2 for v in s.voids) for s in singles)
    hot_right = lambda p: np.where(np.asarray(p)[:, 0] > 750.0, 100.0, 1.0)  # noqa: E731
    res = rationalise(make_panel(), [target], opts, RULES, energy=hot_right)
    right = shapely.box(750, 0, 2000, 1000)
    hot = lambda voids: sum(v.shape.intersection(right).area for v in voids)  # noqa: E731
    assert res.voids and hot(res.voids) < hot(plain.voids)


def _glulam_case(family: str):
    """The whole job on a glulam beam of our own: 3000 x 600 x 100 mm, pin + roller, 6 kN/m on top, timber-bored
    with a 60 mm web and edge cover, voids of ``family``: (panel, job)."""
    from toolkit.jobfile import parse_job
    from toolkit.model import LineLoad

    panel = Panel(width_mm=3000, height_mm=600, thickness_mm=100, element_size_mm=50,
                  material=Material(E_MPa=11000, nu=0.3),
                  supports=(Support(((0, 0), (150, 0)), "xy"), Support(((2850, 0), (3000, 0)), "y")),
                  loads=(LineLoad((0, 600), (3000, 600), (0.0, -6.0)),))
    job = parse_job(f'units = "mm"\n[optimize]\nvolume_fraction = 0.5\nfilter_radius = 150\n[voids]\n'
                    f'family = "{family}"\n[rules]\nprofile = "timber-bored"\nmin_web = 60\nedge_cover = 60\n'
                    'bearing_clearance = 150\n')
    return panel, job


def _glulam_beam(family: str):
    """The whole job on the glulam beam of ``_glulam_case``; a 50 mm grid keeps it to a second or two."""
    from toolkit.pipeline import optimize_panel

    return optimize_panel(*_glulam_case(family))


def test_every_void_gets_its_own_id_when_a_honeycomb_layout_is_filled_further():
    # A glulam beam of our own under a uniform load, bores, timber-bored: the honeycomb over the region wins and
    # the fill then adds voids of the same (honeycomb) source. Each void must keep its own id (the schedule, the
    # drawing's labels and the change records all follow it).
    run = _glulam_beam("bore")
    notes = " ".join(run.rationalised.notes)
    assert "honeycomb" in notes and "more void(s) placed" in notes  # the path this test is about was taken
    ids = [v.id for v in run.voids]
    assert len(ids) == len(set(ids)), ids
    assert set(ids) == {f"V{k}" for k in range(1, len(ids) + 1)}


def _steel_web_ratio_half():
    """Resolved n-gon settings of a steel plate with a web of half the larger void's size."""
    from toolkit.voids import layout as L

    steel = Rules(min_web_mm=25, edge_cover_mm=25, min_void_mm=20)
    return replace(L.resolve_settings(VoidOptions(family="polygon", sides=6, snap_mm=0.0), steel), web_ratio=0.5)


def _worth_rising_to_the_right():
    """A layout's worth and its bound, as rationalise makes them, under an energy field rising to the right."""
    from toolkit.voids import layout as L

    field = lambda p: 1.0 + np.asarray(p)[:, 0] / 500.0  # noqa: E731
    return L.Worth(field, 10.0, 4.0), L.Worth(field, 10.0, 4.0, ceiling=True)


def _with_fits_counted(call):
    """``call()`` and how many fits (layout._settled) it made."""
    from toolkit.voids import layout as L

    fits = []
    real = L._settled

    def counting(*args):
        fits.append(1)
        return real(*args)

    L._settled = counting
    try:
        return call(), len(fits)
    finally:
        L._settled = real


def test_the_bounded_search_finds_the_layout_the_full_search_finds():
    # A long tapering void in a 0.5 web-ratio profile, under an energy field rising to the right: the candidate
    # layouts (whole, split) are scored; fitted in falling order of their pieces' bound, the search
    # that stops early must pick a layout of the same worth as the one that fits them all, with fewer fits.
    from toolkit.voids import layout as L
    from toolkit.voids.measure import clean

    r = _steel_web_ratio_half()
    shape = Polygon([(200, 250), (1500, 120), (1500, 420)])
    neighbour = box(1560, 100, 1800, 450)
    kept, _ = clean([shape], r.min_void_mm)
    score, bound = _worth_rising_to_the_right()
    room = L.Room(kept[0], box(0, 0, 2000, 600), [neighbour], r, 1.0)
    every, n_every = _with_fits_counted(lambda: L.candidates(room, "polygon", r))
    bounded, n_bounded = _with_fits_counted(lambda: L.candidates(room, "polygon", r, score=score, bound=bound))
    worth = lambda layouts: max(score(L._removed(ds)) for ds in layouts)  # noqa: E731
    assert len(every) >= 3 and bounded
    assert worth(bounded) == pytest.approx(worth(every), rel=1e-9)
    assert n_bounded < n_every


def test_the_bounded_honeycomb_search_keeps_the_honeycomb_the_full_search_keeps():
    # The honeycomb over a region (lattice_layout) under an energy field rising to the right: fitted in falling
    # order of its cells' bound and stopped early, it must keep the same voids as the search of every size and
    # offset, with fewer fits.
    from toolkit.voids import layout as L

    r = _steel_web_ratio_half()
    region = Polygon([(0, 0), (2400, 0), (2400, 700), (900, 700), (0, 450)])
    score, bound = _worth_rising_to_the_right()
    every, n_every = _with_fits_counted(lambda: L.lattice_layout(region, "polygon", r, score))
    bounded, n_bounded = _with_fits_counted(lambda: L.lattice_layout(region, "polygon", r, score, bound=bound))
    assert every and [(d.centre, d.corners) for d in bounded] == [(d.centre, d.corners) for d in every]
    assert n_bounded < n_every


def test_each_layout_says_its_kind_and_a_kind_can_be_fitted_alone():
    # The limiting rule refits each freeform void as the kind of layout the first fit chose (pipeline.limiting_rule):
    # asked for one kind, candidates must give that layout alone, the same as the full search gives it.
    from toolkit.voids import layout as L
    from toolkit.voids.measure import clean

    steel = Rules(min_web_mm=25, edge_cover_mm=25, min_void_mm=20)
    r = replace(L.resolve_settings(VoidOptions(family="polygon", sides=6, snap_mm=0.0), steel), web_ratio=0.5)
    kept, _ = clean([Polygon([(200, 250), (1500, 120), (1500, 420)])], r.min_void_mm)
    room = L.Room(kept[0], box(0, 0, 2000, 600), [box(1560, 100, 1800, 450)], r, 1.0)
    every = L.candidates(room, "polygon", r)
    kinds = [layout.kind for layout in every]
    assert "split 1" in kinds and any(k.startswith("split ") and k != "split 1" for k in kinds)
    assert len(set(kinds)) == len(kinds)
    for layout in every:
        alone = L.candidates(room, "polygon", r, only=layout.kind)
        assert [a.kind for a in alone] == [layout.kind]
        assert list(alone[0]) == list(layout)
    assert L.candidates(room, "polygon", r, only="split 9") == []


def test_the_limiting_rule_refits_the_chosen_layouts_in_a_fraction_of_the_fits():
    # The demo lintel (timber-bored, web ratio 1): the first fit's layouts refitted under a web ratio of 0.5 gain
    # area, and the refit of the chosen kinds alone takes fewer fits than a new search.
    from toolkit import pipeline
    from toolkit.api import demo_files
    from toolkit.inputs import load_panel
    from toolkit.voids import layout as L

    drawing, job_path = demo_files()
    panel, job, _ = load_panel(drawing, job_path)
    run = pipeline.optimize_panel(panel, job)
    assert run.rationalised.layouts and all(kind for _, _, kind in run.rationalised.layouts)
    freeform = list(run.freeform)
    made = sum(v.area_mm2 for v in run.voids)
    free = sum(g.area for g in freeform)
    energy = (run.solid.grid, pipeline.strain_energy_density(run.solid, panel))
    options = replace(job.voids, optimize_symmetry=job.optimize.symmetry)
    fits = []
    real = L._settled

    def counting(*args):
        fits.append(1)
        return real(*args)

    texts = {}
    L._settled = counting
    try:
        for name, layouts in (("again", run.rationalised.layouts), ("search", None)):
            fits.clear()
            texts[name] = pipeline.limiting_rule(panel, freeform, options, run.rules, run.voids, made, free,
                                                 energy=energy, first_fit_mm2=run.rationalised.first_fit_mm2,
                                                 layouts=layouts)
            texts[name + " fits"] = len(fits)
    finally:
        L._settled = real
    assert texts["again"] == run.limit  # what the job reported
    assert texts["again"].startswith("the web ratio (1 x the larger void's size) held the voids to make")
    gain = float(texts["again"].split("fitted again, removes ")[1].split(" %")[0])
    assert gain >= 2
    assert texts["again fits"] < texts["search fits"]


def test_largest_first_keeps_two_large_voids_where_the_first_fit_keeps_five_small():
    # Two 250 x 500 freeform voids between three 100 x 100 ones, 50 mm bars between them, a web of half the larger
    # void's size: the first fit gives every void its share of the bars, so all five stay small; largest first
    # fits the large ones whole and drops the small ones beside them. Rules measured here with shapely distances
    # and the smallest enclosing circle, not with the fitting's own checks.
    from toolkit.rules import check as rule_check
    from toolkit.voids import layout as L
    from toolkit.voids.measure import clean

    panel = Panel(width_mm=2000.0, height_mm=600.0, thickness_mm=10.0, material=Material(E_MPa=210000, nu=0.3))
    rules = Rules(min_web_mm=25, edge_cover_mm=25, min_void_mm=20, web_ratio=0.5)
    options = VoidOptions(family="polygon", sides=6, snap_mm=0.0)
    free = [box(300, 250, 400, 350), box(450, 50, 700, 550), box(750, 250, 850, 350), box(900, 50, 1150, 550),
            box(1200, 250, 1300, 350)]
    r = L.resolve_settings(options, rules, panel.thickness_mm)
    allowed = rule_check.impossible_rules(panel, rules)
    site = L.Site(allowed, r.min_web_mm, r.snap_mm, r.web_ratio, r.min_void_mm, feature_mm=r.least_feature_mm)
    big, _, dropped = L.largest_first(clean(free, r.min_void_mm)[0], allowed, site, r)
    shapes = [d.shape() for d in big]
    area = sum(g.area for g in shapes)
    first = rationalise(panel, free, options, rules, first_fit_only=True)
    assert area > 1.3 * first.first_fit_mm2
    assert sorted(d.source for d in big) == [1, 3] and sorted(s for s, _ in dropped) == [0, 2, 4]
    inside = shapely.buffer(allowed, 1e-6)
    sizes = [2.0 * shapely.minimum_bounding_radius(g) for g in shapes]
    for i, g in enumerate(shapes):
        assert inside.covers(g)
        for j in range(i):
            assert shapely.distance(g, shapes[j]) >= max(25.0, 0.5 * max(sizes[i], sizes[j])) - 1e-6
    # a refit of a layout made largest first (the limiting rule's) makes it the same way: the same area
    again = rationalise(panel, free, options, rules, first_fit_only=True, layouts={-1: ("polygon", L.LARGEST_FIRST)})
    assert again.first_fit_mm2 == pytest.approx(area, rel=1e-12)


@pytest.mark.parametrize("family", ["polygon", "mixed"])
def test_a_plate_made_largest_first_keeps_more_and_every_rule(monkeypatch, family):
    # A 3000 x 1000 steel plate under half-MBB loading (25 mm elements, volume 0.5, hexagons or any family,
    # steel-cut: web ratio 0.5): its freeform voids are long and the bars between them thin, so the job takes the
    # largest-first fit. Its layout keeps every rule (the independent check), is no softer than the freeform
    # layout, and removes more than the same job with the largest-first fit left out.
    from panels import half_mbb_plate
    from toolkit import pipeline
    from toolkit.voids import layout as L

    panel, job = half_mbb_plate()
    job = replace(job, voids=replace(job.voids, family=family))
    # the finer honeycomb over the region (taken on this plate: it removes more still) left out, so that the
    # largest-first fit is weighed against the voids fitted one by one
    monkeypatch.setattr(L, "LATTICE_FINE", ())
    run = pipeline.optimize_panel(panel, job)
    assert any(n.startswith("the voids are fitted largest first") for n in run.rationalised.notes)
    assert (-1, family, L.LARGEST_FIRST) in run.rationalised.layouts
    assert check_layout(panel, run.voids, run.rules) == []
    assert run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm
    monkeypatch.setattr(L, "largest_first", lambda *args, **kwargs: ([], [], []))
    shares = pipeline.optimize_panel(panel, job)
    assert not any("largest first" in n for n in shares.rationalised.notes)
    assert run.mass_removed_percent > shares.mass_removed_percent


@pytest.mark.parametrize("family", ["polygon", "slot"])
def test_a_plate_takes_the_finer_honeycomb_where_it_removes_more_once_shaped(monkeypatch, family):
    # The same 3000 x 1000 steel plate: the honeycomb of the large sizes cuts through the load paths (too soft),
    # the finer one is within the cap and, shaped and grown, removes more than the layout made otherwise, so it is
    # taken, with a note giving both figures; every rule holds (the independent check) and the panel is no softer
    # than the freeform layout. Left out, the job removes less.
    from panels import half_mbb_plate
    from toolkit import pipeline
    from toolkit.voids import layout as L

    panel, job = half_mbb_plate()
    job = replace(job, voids=replace(job.voids, family=family))
    run = pipeline.optimize_panel(panel, job)
    notes = [n for n in run.rationalised.notes if n.startswith("the finer honeycomb")]
    assert len(notes) == 1 and notes[0].endswith("taken.")
    assert check_layout(panel, run.voids, run.rules) == []
    assert run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm
    monkeypatch.setattr(L, "LATTICE_FINE", ())
    coarse = pipeline.optimize_panel(panel, job)
    assert not any(n.startswith("the finer honeycomb") for n in coarse.rationalised.notes)
    assert run.mass_removed_percent > coarse.mass_removed_percent


def test_stock_trials_add_the_next_preferred_numbers():
    # ISO 3, series R10 (1, 1.25, 1.6, 2, 2.5, 3.15, 4, 5, 6.3, 8 times a power of ten): most profiles' stock lists
    # follow it, so a "larger stock" trial takes the next two of it, a step (1.2 x) or more above the largest held.
    from toolkit.pipeline import larger_stock

    assert larger_stock(250) == (315.0, 400.0)
    assert larger_stock(200) == (250.0, 315.0)
    assert larger_stock(152) == (200.0, 250.0)   # an imperial auger list: not 160, 5 % above it
    assert larger_stock(630) == (800.0, 1000.0)
    assert larger_stock(8.4) == (12.5, 16.0)


def test_the_limiting_rule_names_the_largest_stock_bore_when_it_holds_the_layout_back():
    # The demo lintel with bores (timber-bored, largest stock auger 152 mm, web ratio 1): its freeform voids are
    # wider than the largest bit, so two larger bits add more than a web ratio of 0.5 would; the report says so,
    # and the relaxed refit it quotes does remove that much more. Without the stock trial the web ratio is named.
    from toolkit import pipeline
    from toolkit.api import demo_files
    from toolkit.inputs import load_panel
    from toolkit.voids.layout import first_fit_area

    drawing, job_path = demo_files()
    panel, job, _ = load_panel(drawing, job_path)
    job = replace(job, voids=replace(job.voids, family="bore"))
    run = pipeline.optimize_panel(panel, job)
    assert max(run.rules.bore_diameters_mm) == 152
    assert run.limit.startswith("the largest stock bore (152 mm) held the voids to make"), run.limit
    assert "bores up to 250 mm across (stock sizes of 200 and 250 mm added)" in run.limit
    assert "[voids] bore_diameters" in run.limit
    options = replace(job.voids, optimize_symmetry=job.optimize.symmetry)
    energy = (run.solid.grid, pipeline.strain_energy_density(run.solid, panel))
    wider = replace(run.rules, bore_diameters_mm=tuple(run.rules.bore_diameters_mm) + (200.0, 250.0))
    area = first_fit_area(panel, list(run.freeform), options, wider, energy, run.rationalised.layouts)
    gain = float(run.limit.split("fitted again, removes ")[1].split(" %")[0])
    assert area / run.rationalised.first_fit_mm2 == pytest.approx(1 + gain / 100, abs=0.006)
    assert gain >= 5


def test_sizes_all_keep_that_are_still_too_soft_hold_the_group_that_grew_most(monkeypatch):
    # The glulam beam's bores again. Stand-in: every size choice triples the bores, the sizes all keep too, until a
    # group is held to its smallest member's size (``held``), which the stand-in answers with the drafts as they
    # were. The layout must hold a group rather than take the too-soft sizes all keep (taken unchecked before:
    # 0.12 % softer than the freeform layout on a spandrel of our own, 2026-12-03).
    import toolkit.voids.layout as layout

    calls = []

    def standardise(drafts, max_types, snap, stock, smallest, fits, most_material=True, upward=False, held=()):
        calls.append(tuple(held))
        if held:
            return list(drafts), []
        return [d.scaled(3.0 * d.size) for d in drafts], []

    monkeypatch.setattr(layout, "standardise_sizes", standardise)
    # the stand-in answers the standard sizes of the layout made; the finer honeycomb's comparison asks for them
    # too, so it is left out
    monkeypatch.setattr(layout, "LATTICE_FINE", ())
    run = _glulam_beam("bore")
    assert calls[:3] == [(), (), ()] and len(calls) == 4 and len(calls[3]) == 1, calls
    assert calls[3][0][0] == "bore"  # a (family, group) key of size_groups
    sizes = {v.size_mm for v in run.voids}
    assert sizes and sizes <= set(run.rules.bore_diameters_mm)
    assert run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm


def test_a_snap_that_would_make_the_panel_softer_is_not_taken(monkeypatch):
    # The glulam beam's bores. Stand-in for a snap that grows the voids (a corner snapped to its nearest grid point
    # takes a void a little further): both tries triple them, so the layout stays as shaped, each void told it was
    # not snapped, and no softer than the freeform layout (a timber beam of our own was 0.01 % softer, 2026-12-03).
    import toolkit.voids.layout as layout

    calls = []

    def snap(drafts, snap_mm, fits, origin=(0.0, 0.0), inward_only=False):
        calls.append(inward_only)
        return [d.scaled(3.0 * d.size) if d is not None else None for d in drafts], []

    monkeypatch.setattr(layout, "snap_centres", snap)
    run = _glulam_beam("bore")
    assert calls == [False, True]
    assert run.voids and all(any(c.startswith(f"{v.id}: not snapped to the grid") for c in run.rationalised.changes)
                             for v in run.voids), run.rationalised.changes
    assert run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm


def test_mixed_gets_the_honeycomb_and_the_fill_too():
    # The glulam beam of the test above, voids of any family: the honeycomb over the region (of one family, the
    # one worth most) competes with the fitted voids as it does for a single family, so mixed removes no less
    # than the n-gons alone here (before, mixed skipped it: 9.7 % against the n-gons' 11.8 %).
    mixed, ngons = _glulam_beam("mixed"), _glulam_beam("polygon")
    assert any("honeycomb" in n for n in mixed.rationalised.notes)
    assert mixed.mass_removed_percent >= 0.98 * ngons.mass_removed_percent
    assert mixed.final.compliance_Nmm <= mixed.freeform_analysis.compliance_Nmm
    assert not mixed.rationalised.violations


def test_a_honeycomb_a_little_too_soft_is_made_smaller_not_thinned():
    """Four square voids whose panel is 3 % softer than the cap, where dropping one would remove less than the
    caller needs: each void is made smaller (2 % of its size a round) until the panel is within the cap, all four
    kept. Without a rules check to allow it nothing is made smaller and the compliance comes back above the cap.
    The panel here is a stand-in whose compliance rises with the area cut (1 N mm per mm2 over 10,000)."""
    from types import SimpleNamespace

    from toolkit.voids import layout as L
    from toolkit.voids.outline import Draft

    corners = ((50.0, 50.0), (-50.0, 50.0), (-50.0, -50.0), (50.0, -50.0))
    drafts = [Draft(family="polygon", centre=(200.0 + 300.0 * k, 200.0), size=2.0 * math.hypot(50, 50), source=-1,
                    part=k, corners=corners) for k in range(4)]

    def evaluate(state):
        return 10_000.0 + sum(d.shape().area for d in state), np.zeros(100)

    evaluate.grid = SimpleNamespace(nx=10, ny=10, dx=100.0, dy=100.0)
    area = sum(d.shape().area for d in drafts)
    cap = 10_000.0 + 0.97 * area
    c, kept, _ = L._within_cap(drafts, evaluate, cap, floor_mm2=0.8 * area, fits=lambda t, i, s: t)
    assert c <= cap and len(kept) == 4
    assert all(k.size < d.size for k, d in zip(kept, drafts))
    assert sum(d.shape().area for d in kept) >= 0.93 * area  # two rounds of 0.98^2 = 0.96 of the area at most
    c, kept, _ = L._within_cap(drafts, evaluate, cap, floor_mm2=0.8 * area)
    assert c > cap and kept == drafts


def test_a_honeycomb_no_round_can_bring_within_the_cap_is_not_made_smaller_round_by_round():
    """Four square voids whose panel is far softer than the cap, none of which may be dropped (the floor): every
    round would make them smaller, and even all of them made smaller as many times as rounds are left is softer
    than the cap, so the rounds are not analysed (two analyses, not six) and the answer is above the cap, as the
    rounds would have ended. Where that bound is within the cap the rounds go on as before. Stand-in panel: the
    compliance rises with the area cut (1 N mm per mm2 over 10,000)."""
    from types import SimpleNamespace

    from toolkit.voids import layout as L
    from toolkit.voids.outline import Draft

    corners = ((50.0, 50.0), (-50.0, 50.0), (-50.0, -50.0), (50.0, -50.0))
    drafts = [Draft(family="polygon", centre=(200.0 + 300.0 * k, 200.0), size=2.0 * math.hypot(50, 50), source=-1,
                    part=k, corners=corners) for k in range(4)]
    analysed = []

    def evaluate(state):
        analysed.append(sum(d.shape().area for d in state))
        return 10_000.0 + analysed[-1], np.zeros(100)

    evaluate.grid = SimpleNamespace(nx=10, ny=10, dx=100.0, dy=100.0)
    area = sum(d.shape().area for d in drafts)
    for share, analyses, within in ((0.5, 2, False), (0.9, 5, True)):
        analysed.clear()
        cap = 10_000.0 + share * area
        c, kept, _ = L._within_cap(drafts, evaluate, cap, floor_mm2=0.8 * area, fits=lambda t, i, s: t)
        assert len(analysed) == analyses and (c <= cap) is within and len(kept) == 4
        # the bound: every void 0.98 of its size (CAP_SHRINK, a house choice, no source) five times over, a little
        # over 0.98^10 of the area; the stand-in panel and its cap shares are our own test scenario
        assert analysed[1] == pytest.approx(0.98 ** 10 * area, rel=2e-3)


def test_a_honeycomb_cut_down_to_the_cap_keeps_stock_sizes():
    # Made smaller to meet the cap, a bore takes the next stock diameter down and a slot first gets shorter at its
    # stock width, then the next stock width down; an n-gon is scaled. A bore scaled by 0.98 a round had left
    # the demo lintel's honeycomb of bores (steel-cut, mixed) at 470.6 and 376.5 mm, sizes no shop stocks, which
    # the proof then listed as violations (2026-12-03).
    from types import SimpleNamespace

    from toolkit.voids import layout as L
    from toolkit.voids.outline import Draft

    r = SimpleNamespace(bore_diameters_mm=(20.0, 40.0, 80.0, 150.0), slot_widths_mm=(20.0, 50.0, 100.0),
                        min_void_mm=30.0)
    bore = Draft(family="bore", centre=(0.0, 0.0), size=150.0, source=-1)
    assert L._a_size_smaller(bore, r).size == 80.0
    assert L._a_size_smaller(bore.scaled(40.0), r) is None  # 20 mm is under the least void
    slot = Draft(family="slot", centre=(0.0, 0.0), size=100.0, length=300.0, angle_deg=0.0, source=-1)
    shorter = L._a_size_smaller(slot, r)
    assert (shorter.size, shorter.length) == (100.0, pytest.approx(0.98 * 300.0))
    round_one = slot.with_length(100.0)
    narrower = L._a_size_smaller(round_one, r)
    assert narrower.size == 50.0 and narrower.length >= narrower.size
    square = Draft(family="polygon", centre=(0.0, 0.0), size=100.0, source=-1,
                   corners=((50.0, 0.0), (0.0, 50.0), (-50.0, 0.0), (0.0, -50.0)), regular=True)
    assert L._a_size_smaller(square, r).size == pytest.approx(98.0)


def test_the_web_check_on_packed_members_is_the_check_on_the_list():
    # Site.clear on the others packed once as arrays (with a void's own mirror images added after them) answers
    # as on the plain list of members, for voids near and far, with and without a web ratio; a Site's memory of
    # members is not pickled along with it.
    import pickle

    from toolkit.voids.layout import Packed, Site
    from toolkit.voids.outline import Draft

    rng = np.random.default_rng(11)
    drafts = [Draft(family="bore", centre=(float(x), float(y)), size=float(d), source=k)
              for k, (x, y, d) in enumerate(zip(rng.uniform(0, 900, 40), rng.uniform(0, 300, 40),
                                                rng.uniform(20, 80, 40)))]
    opening = box(400, 120, 460, 180)
    for ratio in (0.0, 0.5):
        site = Site(box(0, 0, 900, 300), 15.0, 5.0, web_ratio=ratio, openings=[opening])
        answers = []
        for i, d in enumerate(drafts):
            members = [m for j, e in enumerate(drafts) if j != i for m in site.members(e)]
            packed = Packed(members + site.openings)
            # a bore beside this one, 10 mm away (under the least web) for every other void
            beside = Draft(family="bore", centre=(d.centre[0] + d.size / 2 + 20.0 if i % 2 else 2000.0, d.centre[1]),
                           size=20.0, source=99)
            extra = site.members(beside)
            m = site.members(d)[0]
            answers.append((site.clear(m, members), site.clear(m, packed), site.clear(m, packed.plus(extra)),
                            site.clear(m, members + extra)))
        assert [a[0] for a in answers] == [a[1] for a in answers]
        assert [a[2] for a in answers] == [a[3] for a in answers]
        assert any(a[0] for a in answers) and not all(a[0] for a in answers)
        assert not any(a[2] for a in answers[1::2]) and any(a[2] for a in answers[0::2])
        assert site.members(drafts[3]) is site.members(drafts[3])
        sent = pickle.loads(pickle.dumps(site))
        assert sent._members == {}
        assert shapely.is_prepared(sent.inner)  # its region prepared again where it lands (the helper)


def test_the_report_says_what_was_tried_when_no_rule_held_the_layout_back(monkeypatch):
    # Refits that gain nothing (first_fit_area stands in, answering the first fit's own area): the sentence names
    # what was relaxed, and says so where nothing could be.
    from toolkit import pipeline

    monkeypatch.setattr(pipeline, "first_fit_area", lambda *args, **kwargs: 1000.0)
    panel = make_panel()
    free = [box(100, 100, 300, 300)]

    def sentence(rules, family):
        return pipeline.limiting_rule(panel, free, VoidOptions(family=family), rules, [], 10.0, 100.0,
                                      first_fit_mm2=1000.0)

    ratio = sentence(Rules(min_web_mm=25, edge_cover_mm=25, min_void_mm=20, web_ratio=0.5), "polygon")
    assert "fitted again with the web ratio or the minimum web halved, the same layout keeps less than 2 % more" \
        in ratio and "the stock sizes, the least feature" in ratio
    bores = sentence(Rules(min_web_mm=25, edge_cover_mm=25, min_void_mm=20), "bore")
    assert "fitted again with the minimum web halved, or with larger stock sizes," in bores
    assert "the stock sizes" not in bores
    none = sentence(Rules(min_web_mm=0, edge_cover_mm=25, min_void_mm=20), "polygon")
    assert "no web rule or stock list is set that a refit could relax" in none and "fitted again" not in none


def test_a_least_void_that_drops_narrow_freeform_voids_is_named_with_the_figure_relaxing_it_gives(monkeypatch):
    # Freeform voids 60 and 100 mm wide beside a 300 mm one, a least void of 1.5 x the 100 mm thickness (150 mm)
    # and no web ratio: the refit with the least void halved (a stand-in answering twice the area where it is)
    # is the one named, with the thickness behind it and where it is set. Where every freeform void is wide
    # enough, the least void is not tried (a refit costs a fitting run).
    from toolkit import pipeline

    def refit(panel, freeform, options, rules, *args, **kwargs):
        return 2000.0 if pipeline.least_void_size(rules, panel.thickness_mm) < 150.0 else 1000.0

    monkeypatch.setattr(pipeline, "first_fit_area", refit)
    panel = replace(make_panel(), thickness_mm=100.0)
    rules = Rules(min_web_mm=25, edge_cover_mm=25, min_void_mm=20, min_void_per_thickness=1.5)
    narrow = [box(100, 100, 400, 400), box(500, 100, 560, 400), box(700, 100, 800, 400)]
    said = pipeline.limiting_rule(panel, narrow, VoidOptions(family="polygon"), rules, [], 10.0, 100.0,
                                  first_fit_mm2=1000.0)
    assert said.startswith("the least void size (150 mm: 1.5 x the 100 mm thickness) held the voids to make"), said
    assert "with a least void size of 75 mm the same layout, fitted again, removes 100 % more" in said
    assert "the profile" in said and "min_void_per_thickness" in said
    wide = pipeline.limiting_rule(panel, narrow[:1], VoidOptions(family="polygon"), rules, [], 10.0, 100.0,
                                  first_fit_mm2=1000.0)
    assert "least void" not in wide.split(":")[0] and "the minimum web halved" in wide, wide
    # Only a 60 mm freeform void under the 150 mm least void, nothing made: halving would still leave it out, so
    # the least void is brought to 0.8 of its width, and the sentence gives what the refit removes of the panel.
    monkeypatch.setattr(pipeline, "first_fit_area", lambda panel, freeform, options, rules, *args, **kwargs:
                        2000.0 if pipeline.least_void_size(rules, panel.thickness_mm) < 60.0 else 0.0)
    alone = pipeline.limiting_rule(panel, [narrow[1]], VoidOptions(family="polygon"), rules, [], 0.0, 100.0)
    assert alone.startswith("the least void size (150 mm: 1.5 x the 100 mm thickness) left no void to fit in the "
                            "freeform voids (the freeform layout removed"), alone
    assert f"with a least void size of 48 mm the freeform voids, fitted again, remove about " \
           f"{100 * 2000.0 / panel.solid.area:.1f} % of the panel" in alone


def test_stock_sizes_too_large_for_the_freeform_voids_are_named_with_smaller_ones_that_fit(monkeypatch):
    # Slots of 300 and 400 mm only, freeform voids 100 and 200 mm wide (a least void of 20 mm): no slot fits one.
    # The refit that adds the two largest preferred widths up to 0.8 of the widest such void (125 and 160 mm: ISO 3
    # series R10, ..., 100, 125, 160, 200, ...; from memory) is
    # named, as is, where the least void is also too large, the least void with the slots it needs. A stand-in
    # refit answers by the smallest slot the rules it is given hold (the real one would fit the voids).
    from toolkit import pipeline

    def refit(panel, freeform, options, rules, *args, **kwargs):
        r = pipeline.resolve_settings(options, rules, panel.thickness_mm)
        return 3000.0 if min(w for w in r.slot_widths_mm if w >= r.min_void_mm) <= 160.0 else 0.0

    monkeypatch.setattr(pipeline, "first_fit_area", refit)
    panel = make_panel()
    rules = Rules(min_web_mm=25, edge_cover_mm=25, min_void_mm=20)
    freeform = [box(100, 100, 200, 400), box(500, 100, 700, 400)]
    options = VoidOptions(family="slot", slot_widths_mm=(300.0, 400.0))
    said = pipeline.limiting_rule(panel, freeform, options, rules, [], 500.0, 1000.0)
    assert said.startswith("the smallest stock slot (300 mm, wider than 2 of the freeform voids) left no void to "
                           "fit in the freeform voids (the voids to make, laid over the region instead, remove"), said
    assert "with slots of 125 and 160 mm added the freeform voids, fitted again, remove about" in said
    assert "[voids] slot_widths" in said
    # a least void of 300 mm as well: halving it admits nothing without smaller slots, so they come with it
    strict = replace(rules, min_void_mm=300.0)
    said = pipeline.limiting_rule(panel, freeform, options, strict, [], 0.0, 1000.0)
    assert said.startswith("the least void size (300 mm) left no void to fit in the freeform voids (the freeform "
                           "layout removed"), said
    assert "with a least void size of 150 mm (slots of 160 mm added)" in said
    assert "[rules] min_void and [voids] slot_widths" in said
    # narrow voids holding under NARROW_SHARE of the freeform area are not worth a refit of their own
    wide = [box(100, 100, 1100, 600), box(1500, 100, 1600, 400)]  # 500 x 1000 and 100 x 300 mm: 5.7 % narrow
    keys = [t.key for t in pipeline.limit_trials(rules, options, [300.0], panel, wide)]
    assert "slot_widths_smaller" not in keys and "slot_widths" in keys
    assert "slot_widths_smaller" in [t.key for t in pipeline.limit_trials(rules, options, [300.0], panel, freeform)]


def test_dropped_voids_are_placed_in_drawing_coordinates():
    # A panel drawn in metres with its lower-left corner at (12, -3) m: the sentences that drop a freeform void
    # place it as the drafter reads the drawing, not in the panel's local millimetres.
    from toolkit.model import Frame

    panel = replace(make_panel(), frame=Frame(origin=(12.0, -3.0), mm_per_unit=1000.0, unit="m"))
    thin = box(400, 280, 700, 290)             # 10 mm wide: under the least void
    res = rationalise(panel, [thin, Point(1400, 300).buffer(120)], VoidOptions(family="polygon", sides=6),
                      Rules(min_web_mm=30, edge_cover_mm=40, min_void_mm=20))
    said = [d for d in res.dropped if "freeform void #1" in d]
    assert said and "at (12.55, -2.715) m" in said[0], res.dropped
    assert not any("(550, 285)" in d for d in res.dropped)


def _slots_and_bores(count: int, seed: int):
    """Slots and bores of our own at random places, sizes and directions."""
    from toolkit.voids.outline import Draft

    rng = np.random.default_rng(seed)
    out = []
    for k in range(count):
        size = float(rng.choice([20.0, 40.0, 65.0]))
        centre = (float(rng.uniform(0, 600)), float(rng.uniform(0, 300)))
        if k % 3 == 2:
            out.append(Draft(family="bore", centre=centre, size=size, source=k))
        else:
            out.append(Draft(family="slot", centre=centre, size=size, length=size * float(rng.uniform(1.0, 5.0)),
                             angle_deg=float(rng.uniform(0, 180)), source=k))
    return out


def test_a_slot_or_bore_outline_lies_between_the_stadiums_of_its_radii():
    # Draft.radii: the drawn outline (arcs flattened to chords) holds the stadium of the inner radius round its core
    # and lies within the one of the outer radius, the two a hair apart (the chords' sagittas). They are measured
    # once per width and point count (widened by RADII_SLACK_MM), so each slot here is also checked against the
    # radii of another of its width, drawn longer and turned.
    from shapely.geometry import LineString, Point

    from toolkit.voids.outline import RADII_SLACK_MM

    for d in _slots_and_bores(30, 3):
        twin = replace(d, length=d.length + 37.0, angle_deg=(d.angle_deg + 71.0) % 180.0)
        if d.family == "slot":
            twin.radii()  # measured first on the twin where the two are drawn with as many points
        ax, ay, bx, by = d.core()
        inner, outer = d.radii()
        core = LineString([(ax, ay), (bx, by)]) if (ax, ay) != (bx, by) else Point(ax, ay)
        assert 0.0 < inner <= outer <= 0.5 * d.size * (1 + 1e-12) + RADII_SLACK_MM and outer - inner < 0.01 * d.size
        ring = d.shape().exterior
        assert d.shape().covers(core) and float(shapely.distance(core, ring)) >= inner * (1 - 1e-12)
        assert float(np.max(shapely.distance(core, shapely.points(shapely.get_coordinates(ring))))) <= outer * (1 + 1e-12)
        moved = d.moved(13.7, -4.2)  # carried by a moved copy
        assert moved.radii() == (inner, outer) and moved.core() == pytest.approx((ax + 13.7, ay - 4.2, bx + 13.7, by - 4.2))


@pytest.mark.parametrize("few", [12, 0], ids=["plain floats", "arrays"])
def test_the_web_check_between_slots_and_bores_is_the_exact_distances(few, monkeypatch):
    # Site.clear decides a slot or bore pair by its cores' distance and the radii, and measures the drawn outlines
    # only when the web falls within a hair of that band: the answer must be the exact distance's, also for webs
    # set a ten-thousandth of a millimetre either side of a pair's exact distance; the cores' distances worked in
    # plain floats (a few pairs) or as arrays.
    from toolkit.voids import layout
    from toolkit.voids.layout import SAFETY_MM, Site

    monkeypatch.setattr(layout, "FEW_PAIRS", few)

    drafts = _slots_and_bores(24, 7)
    region = box(-500, -500, 1200, 900)
    checked = 0
    for i, a in enumerate(drafts):
        for b in drafts[i + 1:]:
            exact = float(shapely.distance(a.shape(), b.shape()))
            for web in (5.0, 40.0, exact - SAFETY_MM - 1e-4, exact - SAFETY_MM + 1e-4, exact - SAFETY_MM - 0.02,
                        exact - SAFETY_MM + 0.02):
                if web <= 0.0:
                    continue
                site = Site(region, web, 5.0)
                got = site.clear(site.members(a)[0], site.members(b))
                assert got == (exact >= web + SAFETY_MM), (a, b, web, exact)
                checked += 1
    assert checked > 1000
    # Against many at once (their cores' distances then worked as arrays): clear only if clear of every one.
    for i, a in enumerate(drafts):
        others = [m for b in drafts if b is not a for m in Site(region, 1.0, 5.0).members(b)]
        least = min(float(shapely.distance(a.shape(), m[0])) for m in others)
        for web in (least - SAFETY_MM - 1e-4, least - SAFETY_MM + 1e-4):
            if web > 0.0:
                site = Site(region, web, 5.0)
                assert site.clear(site.members(a)[0], others) == (least >= web + SAFETY_MM)


def _eased_ngons(count: int, seed: int):
    """Convex n-gons of our own, regular and irregular, with radius and chamfer corners, at random places."""
    from shapely.geometry.polygon import orient

    from toolkit.voids.outline import Draft

    rng = np.random.default_rng(seed)
    out = []
    for k in range(count):
        n = int(rng.integers(4, 9))
        turn = np.sort(rng.uniform(0, 2 * np.pi, n)) if k % 2 else 2 * np.pi * np.arange(n) / n
        radius = float(rng.uniform(30, 90))
        rel = radius * np.column_stack([np.cos(turn), np.sin(turn)])
        hull = orient(shapely.convex_hull(shapely.multipoints(rel)), 1.0)  # counter-clockwise, as drafts run
        rel = np.asarray(hull.exterior.coords)[:-1]
        rel = rel - np.asarray(hull.centroid.coords[0])
        corner = "radius" if k % 3 else "chamfer"
        out.append(Draft(family="polygon", centre=(float(rng.uniform(0, 600)), float(rng.uniform(0, 300))),
                         size=2.0 * float(np.max(np.linalg.norm(rel, axis=1))), source=k,
                         corners=tuple(map(tuple, rel.tolist())), corner=corner,
                         corner_mm=float(rng.uniform(2.0, 15.0)), regular=not k % 2))
    return out


def test_the_web_check_between_eased_ngons_is_the_exact_distances():
    # Site.clear decides a pair with an eased n-gon by the sharp n-gons first (the outlines' distance lies between
    # theirs and that plus the corners' stand-off) and measures the drawn outlines only inside that band: the
    # answer must be the exact distance's, for webs a ten-thousandth of a millimetre either side of a pair's exact
    # distance and across the band; beside slots, bores and an opening too.
    from toolkit.voids.layout import SAFETY_MM, Site, _hull_of

    drafts = _eased_ngons(18, 11) + _slots_and_bores(9, 5)
    opening = box(250, 120, 330, 170)
    region = box(-500, -500, 1200, 900)
    checked = banded = 0
    for i, a in enumerate(drafts):
        hull, slack = _hull_of(a)
        assert hull.buffer(1e-9).covers(a.shape())  # to rounding: a chamfer's corners lie on the sides
        corners = shapely.points(a.sharp) if a.family == "polygon" else shapely.points(a.centre)
        stand_off = float(np.max(shapely.distance(corners, a.shape()))) if a.family == "polygon" else 0.0
        assert stand_off <= slack <= stand_off * (1 + 1e-6) + 1e-6
        for b in drafts[i + 1:] + [opening]:
            shape_b = b if b is opening else b.shape()
            exact = float(shapely.distance(a.shape(), shape_b))
            for web in (5.0, 40.0, exact - SAFETY_MM - 1e-4, exact - SAFETY_MM + 1e-4, exact - SAFETY_MM - 0.5,
                        exact - SAFETY_MM + 0.5, exact - SAFETY_MM - 2.0, exact - SAFETY_MM + 2.0):
                if web <= 0.0:
                    continue
                if b is opening:
                    site = Site(region, web, 5.0, web_ratio=1e-9, openings=[opening])
                    got = site.clear(site.members(a)[0], [])
                else:
                    site = Site(region, web, 5.0)
                    got = site.clear(site.members(a)[0], site.members(b))
                assert got == (exact >= web + SAFETY_MM), (a, b, web, exact)
                checked += 1
                hull_gap = float(shapely.distance(hull, opening if b is opening else _hull_of(b)[0]))
                banded += hull_gap < web + SAFETY_MM <= exact
    assert checked > 2000 and banded > 50


def test_segment_distances_are_shapelys():
    # Random segments, points among them, crossing, touching and on one line: the distances shapely measures, by
    # the array form and by the one-pair form.
    from shapely.geometry import LineString, Point

    from toolkit.voids.outline import segment_distance, segment_distances

    rng = np.random.default_rng(9)
    cases = [((0, 0, 10, 0), (5, -3, 5, 3)), ((0, 0, 10, 0), (10, 0, 12, 4)), ((0, 0, 10, 0), (12, 0, 20, 0)),
             ((0, 0, 10, 0), (4, 0, 20, 0)), ((1, 1, 1, 1), (4, 5, 4, 5)), ((1, 1, 1, 1), (0, 0, 2, 2)),
             ((0, 0, 10, 0), (3, 2, 3, 2))]
    cases += [(tuple(rng.uniform(-5, 5, 4)), tuple(rng.uniform(-5, 5, 4))) for _ in range(200)]
    for s1, s2 in cases:
        def geom(s):
            return Point(s[:2]) if s[:2] == s[2:] else LineString([s[:2], s[2:]])
        got = float(segment_distances(*s1, *(np.array([v]) for v in s2))[0])
        assert got == pytest.approx(geom(s1).distance(geom(s2)), abs=1e-12), (s1, s2)
        # the one-pair form in plain floats (Site.clear's few pairs): the same distance
        one = segment_distance(*(float(v) for v in s1), *(float(v) for v in s2))
        assert isinstance(one, float) and one == pytest.approx(got, abs=1e-12), (s1, s2)


@pytest.mark.parametrize("example, voids, share", [
    # The example beam loaded at 0.7 of its span, under the precast-formed rules, where the n-gons alone keep most
    # of the saving (86.4 %, against slots 66.5 % and bores 57.3 %). Picked at the optimiser's own price of
    # stiffness, mixed took slots and bores for two of the n-gons' voids and kept 68.8 %, with stiffness to spare
    # (11,774 against a cap of 12,566 N mm); picked at MIXED_PRICE it keeps 86.3 % (2026-12-03).
    ("beam-load-at-0.7", "snap = 5", 0.95),
    # The example wall leaf with regular squares under the same rules: at the first fit slots removed more than the
    # squares (21.0 against 19.5 % of the panel), but the squares grow in the shape optimisation where stock slots
    # cannot: mixed kept 41.6 % of the saving against the squares' 67.0 % until it made the voids as n-gons alone
    # too and took what removes more (_mixed_or_ngons, 2026-12-03).
    ("wall-leaf-on-two-bearings", "sides = 4\nregular = true", 0.99),
])
def test_mixed_keeps_about_what_the_best_single_family_keeps(example, voids, share):
    from toolkit import pipeline
    from toolkit.inputs import load_panel

    examples = Path(__file__).resolve().parents[1] / "fixtures" / "examples"
    drawing = examples / f"{example}.dxf"
    text = (examples / f"{example}.toml").read_text(encoding="utf-8")
    text = text.split("[voids]")[0] + ('[voids]\nfamily = "{family}"\n' + voids
                                       + '\n[rules]\nprofile = "precast-formed"\n')
    kept = {}
    with tempfile.TemporaryDirectory() as tmp:
        for family in ("polygon", "mixed"):
            job_path = Path(tmp) / f"{family}.toml"
            job_path.write_text(text.replace("{family}", family), encoding="utf-8")
            panel, job, _ = load_panel(drawing, job_path)
            run = pipeline.optimize_panel(panel, job)
            assert run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm * (1 + 1e-9)
            kept[family] = run.capture_percent
    assert kept["mixed"] >= share * kept["polygon"], kept


def test_after_the_fill_the_layout_is_shaped_and_grown_again(tmp_path):
    # The sample panel in metres with steel-cut slots (tests/same_outputs.py) at half its volume: the fill adds a
    # void in the room the grown layout left, with stiffness to spare under the freeform layout's; shaping the whole
    # layout again from there grows it (2026-12-04: 122,379 -> 125,377 mm2), no softer than the freeform layout.
    # (At the sample's own 0.6 it did until the zones stopped counting round-off slivers, 2026-12-04: its design
    # region grew by four elements and its layout needs no fill now.)
    import re

    from drawings import sample_drawing
    from same_outputs import METRES_JOB
    from toolkit.api import optimize_file

    dxf = sample_drawing(tmp_path, "m")
    job = METRES_JOB.replace("volume_fraction = 0.6", "volume_fraction = 0.5")
    assert job != METRES_JOB
    (tmp_path / "job.toml").write_text(job)
    run = optimize_file(dxf, tmp_path / "job.toml", out_dir=tmp_path / "out").run
    notes = run.rationalised.notes
    assert any("more void(s) placed in the room the layout left" in n for n in notes), notes
    (again,) = [n for n in notes if "shaped and grown again" in n]
    grown, before = (float(x) for x in re.findall(r"(\d+) against (\d+) mm2", again)[0])
    assert grown > before
    assert run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm
    assert not run.rationalised.violations


def test_standard_sizes_that_would_make_the_panel_softer_fall_back_to_the_sizes_all_keep(monkeypatch):
    # The glulam beam's bores. Stand-in for a group size that grows small members: the sizes keeping most
    # material, tried up to the group's largest member and then up to its median, come back three times as large
    # (softer than the freeform layout by far); the layout must then take the sizes every member keeps (asked for
    # with most_material=False), here the drafts as they were.
    import toolkit.voids.layout as layout

    calls = []

    def standardise(drafts, max_types, snap, stock, smallest, fits, most_material=True, upward=False, held=()):
        calls.append((most_material, upward))
        if most_material:
            return [d.scaled(3.0 * d.size) for d in drafts], []
        return list(drafts), []

    monkeypatch.setattr(layout, "standardise_sizes", standardise)
    # the stand-in answers the standard sizes of the layout made; the finer honeycomb's comparison asks for them
    # too, so it is left out
    monkeypatch.setattr(layout, "LATTICE_FINE", ())
    run = _glulam_beam("bore")
    assert calls == [(True, True), (True, False), (False, False)]
    sizes = {v.size_mm for v in run.voids}
    assert sizes and sizes <= set(run.rules.bore_diameters_mm)  # stock sizes: not the tripled ones
    assert run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm


def panel_drawing(path, width: float, height: float, openings) -> None:
    """A drawing in mm of a width x height panel on layer PANEL, ``openings(modelspace)`` adding what goes on
    layer OPENING."""
    import ezdxf

    doc = ezdxf.new("R2010")
    doc.header["$INSUNITS"] = 4
    for layer in ("PANEL", "OPENING"):
        doc.layers.add(layer)
    doc.modelspace().add_lwpolyline([(0, 0), (width, 0), (width, height), (0, height)], close=True,
                                     dxfattribs={"layer": "PANEL"})
    openings(doc.modelspace())
    doc.saveas(path)


DAPPED_JOB = """units = "mm"
[panel]
thickness = 200
element_size = 12.5
[material]
E_MPa = 30000
nu = 0.2
[[support]]
from = [0, 0]
to = [200, 0]
[[support]]
from = [2800, 150]
to = [3000, 150]
fix = "y"
[[load]]
from = [0, 450]
to = [3000, 450]
wy_kN_m = -20
{optimize}[rules]
profile = "precast-formed"
"""


def test_a_default_filter_far_finer_than_the_minimum_web_is_named_with_the_radius_to_set(tmp_path):
    # A 3000 x 450 mm precast lintel of our own with a dapped end (drawn as an opening), 8,352 elements: the default
    # filter radius, three elements (37.5 mm), lays out members far finer than the profile's 100 mm web and the voids
    # to make keep 44 % of the saving (measured 2026-12-04). The warning names the radius to set; set, the voids to
    # make keep 81 % (no warning).
    from toolkit.api import optimize_file

    panel_drawing(tmp_path / "lintel.dxf", 3000, 450, lambda msp: msp.add_lwpolyline(
        [(2700, 0), (3000, 0), (3000, 150), (2700, 150)], close=True, dxfattribs={"layer": "OPENING"}))
    kept = {}
    for name, optimize in (("default", ""), ("set", "[optimize]\nfilter_radius = 100\n")):
        (tmp_path / f"{name}.toml").write_text(DAPPED_JOB.format(optimize=optimize))
        s = optimize_file(tmp_path / "lintel.dxf", tmp_path / f"{name}.toml", out_dir=tmp_path / name).summary
        fine = [w for w in s["warnings"] if "filter radius" in w]
        kept[name] = s["capture_percent"]
        assert bool(fine) == (name == "default"), fine
        if fine:
            assert "Set [optimize] filter_radius to the minimum web, 100 mm" in fine[0]
            assert f"keep {kept[name]:.0f} %" in fine[0]
    assert kept["set"] > 1.5 * kept["default"]


ONE_FORMER_JOB = """units = "mm"
[panel]
thickness = 180
element_size = 40
self_weight = true
[material]
E_MPa = 32000
nu = 0.2
density_kg_m3 = 2400
[[support]]
from = [0, 0]
to = [250, 0]
[[support]]
from = [5150, 0]
to = [5400, 0]
fix = "y"
[[load]]
from = [0, 1200]
to = [5400, 1200]
wy_kN_m = -18
[optimize]
volume_fraction = 0.55
filter_radius = 100
symmetry = "x"
[voids]
family = "polygon"
regular = true
corner = "chamfer"
corner_size = 20
max_types = {types}
[rules]
profile = "precast-formed"
"""


def test_standard_sizes_that_take_most_of_the_layout_are_named_as_what_held_it_back(tmp_path):
    # A 5.4 m precast spandrel of our own cast with one former ([voids] max_types = 1, regular hexagons): as shaped
    # the voids removed 18.6 % of the panel, at the one size 8.1 % (measured 2026-12-04); the limit named the
    # minimum web, whose halving gave back a few per cent. Now the standard sizes are named, with both figures, and
    # the rule after them; with three sizes the same job keeps more (18.6 %; 19.3 % when regular n-gons were grouped
    # by k-means, standardise.GROUPING), as the sentence says.
    import re

    from toolkit.api import optimize_file

    panel_drawing(tmp_path / "spandrel.dxf", 5400, 1200,
                  lambda msp: msp.add_circle((3900, 600), 110, dxfattribs={"layer": "OPENING"}))
    removed = {}
    for types in (1, 3):
        (tmp_path / f"{types}.toml").write_text(ONE_FORMER_JOB.format(types=types))
        run = optimize_file(tmp_path / "spandrel.dxf", tmp_path / f"{types}.toml", out_dir=tmp_path / str(types)).run
        removed[types] = run.mass_removed_percent
        if types == 1:
            assert run.limit.startswith("the standard sizes held the voids to make"), run.limit
            shaped, left = (float(x) for x in re.findall(r"as shaped they removed ([\d.]+) %.* leaves ([\d.]+) %",
                                                         run.limit)[0])
            assert left == pytest.approx(run.mass_removed_percent, abs=0.05)
            assert shaped > 1.5 * left
            assert "max_types = 1" in run.limit and "Of the rules" in run.limit
    assert removed[3] > 1.5 * removed[1]


def _beside(crowd, trials, gap: float):
    """Each trial moved to stand ``gap`` (to 0.01 mm) from a member of ``crowd``, along the line of their centres."""
    out = []
    for k, (a, t) in enumerate(zip(crowd, trials)):
        u = np.array([math.cos(k), math.sin(k)])
        lo, hi = 0.0, 400.0
        for _ in range(40):
            mid = 0.5 * (lo + hi)
            c = np.asarray(a.centre) + mid * u
            moved = t.moved(float(c[0] - t.centre[0]), float(c[1] - t.centre[1]))
            lo, hi = (mid, hi) if float(shapely.distance(moved.shape(), a.shape())) < gap else (lo, mid)
        out.append(moved)
    return out


@pytest.mark.parametrize("crowd", ["ngons", "slots"])
def test_moved_copies_ruled_out_at_once_leave_the_answer_of_the_one_by_one_tests(crowd):
    # Site.fits weeds out the moved copies of a trial that reach outside the region or whose sharp hulls or cores
    # already break a web (Site._not_ruled_out, vectorised) before testing the rest one by one: the copy it returns
    # must be the first the one-by-one tests (inside, then clear, on each copy in order) take, or None with them.
    from toolkit.voids.layout import Site

    crowd_drafts = []  # voids of our own at least 60 mm apart, so that copies placed beside one may fit
    for d in (_eased_ngons(60, 3) if crowd == "ngons" else _slots_and_bores(60, 4)):
        if all(shapely.distance(d.shape(), e.shape()) >= 60.0 for e in crowd_drafts):
            crowd_drafts.append(d)
    trials = _eased_ngons(14, 8) + _slots_and_bores(14, 9)
    region = box(-40, -40, 660, 340)
    outcomes = {"moved": 0, "where it stood": 0, "none": 0}
    weeded = 0
    for ratio, web in ((0.0, 12.0), (0.5, 12.0), (0.0, 40.0), (0.0, 21.0), (0.25, 30.0), (0.0, 55.0)):
        site = Site(region, web, 5.0, web_ratio=ratio, openings=[box(250, 120, 330, 170)])
        for t in trials + _beside(crowd_drafts, trials, web + 1.0):
            got = site.fits(t, -1, crowd_drafts)
            others = site.others(crowd_drafts, -1)
            moves = site.mirror.along(t, site.offsets(t.size))
            expected = None
            for dx, dy in moves:
                cand = t.moved(dx, dy) if (dx or dy) else t
                if site.big_enough(cand) and site.inside(cand.shape()) and site.clear(site.members(cand)[0], others):
                    expected = cand
                    break
            assert (got is None) == (expected is None), (crowd, ratio, web, t)
            if got is not None:
                assert got.centre == expected.centre
                outcomes["moved" if got.centre != t.centre else "where it stood"] += 1
            else:
                outcomes["none"] += 1
            weeded += len(moves) - len(site._not_ruled_out(t, moves, others))
    assert all(outcomes.values()), outcomes  # each kind of answer came up
    assert weeded > 500 and len(crowd_drafts) >= 5
