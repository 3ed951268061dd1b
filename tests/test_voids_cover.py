"""The searches of voids.cover run along the direction they are given, and their vectorised sums agree with shapely.

A slanted bar is the test case: the freeform voids of a truss-like layout lie along its diagonals, and a search
that ran along the mirror image of the bar's axis (as one once did) finds a chord across the bar instead of one
along it. Every expected figure below is plain geometry of the bar.
"""

import math

import numpy as np
import pytest
import shapely
import shapely.affinity as affinity

from toolkit.voids.cover import (clipped_areas, hex_cells, inscribed_slot, longest_chords, major_axis_deg, split,
                                 slot_rows)

ANGLE = 30.0  # the bar's axis, degrees
LENGTH, DEPTH = 400.0, 40.0


def _bar(angle: float = ANGLE):
    return affinity.rotate(shapely.box(-LENGTH / 2, -DEPTH / 2, LENGTH / 2, DEPTH / 2), angle, origin=(0, 0))


def _axis_angle(p, q) -> float:
    d = np.asarray(q) - np.asarray(p)
    return math.degrees(math.atan2(d[1], d[0])) % 180.0


@pytest.mark.parametrize("angle", [ANGLE, -ANGLE, 75.0, 0.0, 90.0])
def test_longest_chord_runs_along_the_direction_asked(angle):
    bar = _bar(angle)
    along, across = longest_chords(bar, [angle, angle + 90.0])
    # Along the bar: its full length (a chord line at the middle of the bar runs end to end).
    assert along[0] == pytest.approx(LENGTH, rel=1e-6)
    assert _axis_angle(along[1], along[2]) == pytest.approx(angle % 180.0, abs=1e-6)
    # Across it: its depth.
    assert across[0] == pytest.approx(DEPTH, rel=1e-6)


def _chords_cut_by_geos(region, angles_deg, lines=24):
    """Every chord line cut by GEOS, the longest piece per direction: what longest_chords answered before it
    ruled chords out in numpy (the reference its answers must equal to the bit)."""
    angles = np.radians(np.asarray(angles_deg, dtype=float))
    x0, y0, x1, y1 = region.bounds
    centre = np.array([(x0 + x1) / 2.0, (y0 + y1) / 2.0])
    half = 0.5 * math.hypot(x1 - x0, y1 - y0) + 1.0
    U = np.column_stack([np.cos(angles), np.sin(angles)])
    V = np.column_stack([-U[:, 1], U[:, 0]])
    across = (shapely.get_coordinates(region) - centre) @ V.T
    lo, hi = across.min(axis=0), across.max(axis=0)
    offsets = lo[:, None] + ((np.arange(lines) + 0.5) / lines)[None, :] * (hi - lo)[:, None]
    mid = centre + offsets[..., None] * V[:, None, :]
    ends = np.stack([mid - half * U[:, None, :], mid + half * U[:, None, :]], axis=2)
    parts, index = shapely.get_parts(shapely.intersection(region, shapely.linestrings(ends.reshape(-1, 2, 2))),
                                     return_index=True)
    lengths = shapely.length(parts)
    out = []
    for k in range(len(angles)):
        mine = np.flatnonzero(index // lines == k)
        j = mine[np.argmax(lengths[mine])] if mine.size else None
        pts = shapely.get_coordinates(parts[j]) if j is not None else []
        out.append((float(lengths[j]), pts[0], pts[-1]) if len(pts) >= 2 else None)
    return out


def test_longest_chords_are_those_of_every_chord_cut_by_geos():
    # Staircase outlines on a 10 mm grid (a freeform void's: chord lines at 0, 45 and 90 degrees pass through
    # their corners, where counting crossings can go wrong), the same shrunk as a slot's core is (arcs of many
    # corners), random star shapes with a hole: the same lengths and end points to the bit as cutting every chord.
    rng = np.random.default_rng(11)
    # two such outlines with holes, where a chord through corners miscounts its span above the true longest: a
    # chord in doubt must not set the bar for the others (a first version let it, and answered a shorter chord)
    regions = [shapely.from_wkt(
        "POLYGON ((80 40, 70 40, 70 50, 60 50, 60 40, 40 40, 40 50, 50 50, 50 60, 40 60, 40 70, 30 70, 30 80, 40 80, "
        "40 90, 50 90, 50 70, 60 70, 60 110, 80 110, 80 120, 110 120, 110 110, 120 110, 120 90, 110 90, 110 100, "
        "100 100, 100 110, 90 110, 90 100, 80 100, 80 90, 90 90, 90 70, 100 70, 100 60, 90 60, 90 50, 100 50, "
        "100 40, 110 40, 110 30, 120 30, 120 10, 100 10, 100 0, 90 0, 90 20, 80 20, 80 40), "
        "(90 40, 90 30, 100 30, 100 40, 90 40), (80 80, 70 80, 70 60, 80 60, 80 80))"), shapely.from_wkt(
        "POLYGON ((50 30, 50 40, 40 40, 40 50, 30 50, 30 60, 40 60, 40 70, 30 70, 30 80, 40 80, 40 90, 50 90, "
        "50 100, 60 100, 60 80, 50 80, 50 60, 60 60, 60 70, 70 70, 70 100, 80 100, 80 110, 90 110, 90 120, "
        "120 120, 120 90, 110 90, 110 80, 140 80, 140 70, 120 70, 120 50, 110 50, 110 30, 80 30, 80 20, 60 20, "
        "60 30, 50 30), (60 40, 60 50, 50 50, 50 40, 60 40), (70 60, 80 60, 80 70, 70 70, 70 60), (90 70, 90 60, "
        "110 60, 110 70, 100 70, 100 90, 80 90, 80 70, 90 70), (90 100, 100 100, 100 110, 90 110, 90 100), "
        "(100 50, 70 50, 70 40, 100 40, 100 50))")]
    for _ in range(12):
        cells = [shapely.box(10 * x, 10 * y, 10 * x + 10, 10 * y + 10) for x in range(30) for y in range(12)
                 if rng.random() < 0.6 and abs(x - 15) + abs(y - 6) < 14]
        regions += [g for g in shapely.get_parts(shapely.union_all(cells)) if g.area > 300]
    regions += [shapely.buffer(g, -12.5, quad_segs=8) for g in regions[:10]]
    for _ in range(10):
        n = int(rng.integers(6, 30))
        angle = np.sort(rng.uniform(0, 2 * np.pi, n))
        radius = rng.uniform(60, 250, n)
        star = shapely.Polygon(np.column_stack([radius * np.cos(angle), radius * np.sin(angle)])).buffer(0)
        regions.append(star.difference(star.centroid.buffer(20.0)))
    regions = [g for g in regions if not g.is_empty]
    assert len(regions) > 30
    for region in regions:
        for angles in ([0.0, 90.0, 45.0, -45.0, 30.0], list(rng.uniform(-90.0, 90.0, 5))):
            got, want = longest_chords(region, angles), _chords_cut_by_geos(region, angles)
            for g, w in zip(got, want):
                assert (g is None) == (w is None)
                if g is not None:
                    assert g[0] == w[0] and np.array_equal(g[1], w[1]) and np.array_equal(g[2], w[2])


def test_slot_in_a_slanted_bar_lies_along_it():
    centre, angle, width, length = inscribed_slot(_bar(), [20.0, 30.0])
    assert angle == pytest.approx(ANGLE, abs=1e-6)
    assert width == 30.0  # the wider stock width: the bar is 40 deep
    assert length == pytest.approx(LENGTH, rel=1e-6)  # the axis runs the bar's length less a width, plus the ends
    assert shapely.covers(_bar().buffer(1e-6), shapely.Point(centre))


def test_slot_rows_lie_along_a_slanted_bar_and_inside_it():
    rows = slot_rows(_bar(), [20.0, 30.0], lambda a, b: 10.0)
    assert rows
    for centre, angle, width, length in rows:
        assert angle == pytest.approx(ANGLE, abs=1e-6)
        u = np.array([math.cos(math.radians(angle)), math.sin(math.radians(angle))])
        half = (length - width) / 2.0
        slot = shapely.LineString([np.asarray(centre) - half * u, np.asarray(centre) + half * u]).buffer(width / 2)
        assert _bar().buffer(1e-6).covers(slot)


def test_split_cuts_across_the_major_axis():
    bar = _bar()
    assert major_axis_deg(bar) == pytest.approx(ANGLE, abs=1e-6)
    pieces = split(bar, 2, 10.0)
    assert len(pieces) == 2
    # Two halves along the axis, a 10 mm web between: each (400 - 10) / 2 long and the full depth.
    for p in pieces:
        assert p.area == pytest.approx((LENGTH - 10.0) / 2 * DEPTH, rel=1e-6)
    c0, c1 = (np.asarray(p.centroid.coords[0]) for p in pieces)
    assert _axis_angle(c0, c1) == pytest.approx(ANGLE, abs=1e-6)
    assert np.linalg.norm(c1 - c0) == pytest.approx((LENGTH + 10.0) / 2, rel=1e-6)


@pytest.mark.parametrize("angle", [20.0, -20.0])
def test_honeycomb_rows_run_along_the_direction_asked(angle):
    # (Not 30 degrees: a honeycomb has rows every 60 degrees, so rows at +30 and at -30 are the same lattice.)
    # A big square turned by the same angle: the whole cells' centres lie on rows along ``angle``, one row height
    # (pitch * sqrt(3) / 2) apart, so their offsets across that direction differ by whole row heights.
    pitch, web = 60.0, 10.0
    square = affinity.rotate(shapely.box(-300, -300, 300, 300), angle, origin=(0, 0))
    full = 3.0 * math.sqrt(3.0) / 2.0 * ((pitch - web) / math.sqrt(3.0)) ** 2  # one whole cell
    whole = [p for p in hex_cells(square, pitch, web, angle) if p.area >= full * (1 - 1e-9)]
    assert len(whole) >= 50
    t = math.radians(angle)
    normal = np.array([-math.sin(t), math.cos(t)])
    offsets = np.array([np.asarray(p.centroid.coords[0]) @ normal for p in whole])
    rows = (offsets - offsets.min()) / (pitch * math.sqrt(3.0) / 2.0)
    assert np.allclose(rows, np.round(rows), atol=1e-6)


def test_clipped_areas_agree_with_shapely():
    rng = np.random.default_rng(7)
    shape = shapely.Point(0, 0).buffer(50).difference(shapely.box(-10, -60, 10, 0))
    shape = shape.difference(shapely.Point(20, 20).buffer(8))  # a hole: the clipping handles its ring too
    P = rng.uniform(-60, 60, (100, 2))
    a = rng.uniform(0, 2 * np.pi, 100)
    N = np.column_stack([np.cos(a), np.sin(a)])
    got = clipped_areas(shape, P, N)
    for k in range(100):
        U = np.array([N[k, 1], -N[k, 0]])
        half = shapely.Polygon([P[k] - 500 * U, P[k] + 500 * U, P[k] + 500 * U + 500 * N[k],
                                P[k] - 500 * U + 500 * N[k]])
        assert got[k] == pytest.approx(shape.intersection(half).area, abs=1e-6)


@pytest.mark.parametrize("sides", [4, 5, 6, 8])
def test_a_tidied_hull_has_the_corners_asked_none_too_close_flat_or_sharp(sides):
    """Random convex hulls (some with corners every few mm along their sides) cut down to ``sides`` corners:
    exactly that many, inside the hull, no side under the least feature, no corner turning under 5 degrees or
    sharper than 30 (the limits of voids.cover, common practice, no source)."""
    from toolkit.voids.cover import MIN_INTERIOR_DEG, MIN_TURN_DEG, corner_measures, tidy_ngon

    rng = np.random.default_rng(sides)
    made = 0
    for k in range(150):
        hull = shapely.convex_hull(shapely.multipoints(rng.normal(size=(20, 2)) * (200, 80)))
        if k % 2:
            hull = shapely.segmentize(hull, 15.0)
        feature = float(rng.choice([0.0, 5.0, 20.0]))
        got = tidy_ngon(shapely.get_coordinates(hull.exterior)[:-1], sides, feature)
        if got is None:
            continue
        made += 1
        interior, turn, side, _ = corner_measures(got)
        assert len(got) == sides
        assert side.min() >= feature - 1e-9
        assert turn.min() >= MIN_TURN_DEG - 1e-9 and interior.min() >= MIN_INTERIOR_DEG - 1e-9
        assert shapely.buffer(hull, 1e-6).covers(shapely.Polygon(got))
    assert made >= 100


def _staircase(rng, cell=10.0):
    """A freeform void as the optimiser leaves it: the union of the grid's square elements inside a tilted
    ellipse, its outline running in steps of the element."""
    cx, cy = rng.uniform(300, 2000), rng.uniform(100, 600)
    a, b, t = rng.uniform(60, 250), rng.uniform(25, 90), rng.uniform(0, np.pi)
    xs = np.arange(cx - 260, cx + 260, cell)
    ys = np.arange(cy - 260, cy + 260, cell)
    X, Y = np.meshgrid(xs + cell / 2, ys + cell / 2)
    u = (X - cx) * math.cos(t) + (Y - cy) * math.sin(t)
    v = -(X - cx) * math.sin(t) + (Y - cy) * math.cos(t)
    inside = (u / a) ** 2 + (v / b) ** 2 <= 1.0
    cells = [shapely.box(x - cell / 2, y - cell / 2, x + cell / 2, y + cell / 2) for x, y in zip(X[inside], Y[inside])]
    return shapely.union_all(cells)


def test_a_fit_does_not_move_with_the_last_bits_of_its_region():
    """Staircase voids (grid outlines) fitted as hexagons, then fitted again with every coordinate moved by
    1e-13 of itself (what another processor's arithmetic upstream does): each fit the same to 1e-9 of its area.
    Before the hull was taken on a 1e-6 mm grid and a touching fit counted as inside, a fifth of the plate's fits
    moved by 3 - 10 % of their area under such a change."""
    from toolkit.voids.cover import hull_ngon

    rng = np.random.default_rng(3)
    for k in range(40):
        region = _staircase(rng)
        if region.geom_type != "Polygon":
            continue
        moved = shapely.transform(region, lambda xy: xy * (1.0 + 1e-13 * np.sin(0.37 * xy[:, ::-1] + k)))
        a, b = hull_ngon(region, 6, 25.0), hull_ngon(moved, 6, 25.0)
        assert (a is None) == (b is None)
        if a is not None:
            assert shapely.Polygon(b).area == pytest.approx(shapely.Polygon(a).area, rel=1e-9)
