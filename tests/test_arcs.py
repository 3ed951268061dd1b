"""toolkit.arcs, the bulge geometry every stage shares, against circles whose answers are known.

The bulge of an arc is tan(theta / 4), theta its included angle, positive counter-clockwise (DXF reference,
LWPOLYLINE group code 42, from memory): a half circle has bulge 1, a quarter circle tan(pi / 8) = sqrt(2) - 1.
The other check values are consequences of the mathematics of the circle (named at each).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from toolkit import arcs

QUARTER = math.sqrt(2.0) - 1.0  # tan(pi / 8): the bulge of a quarter circle


@pytest.mark.parametrize("theta", [0.3, math.pi / 2, math.pi, 1.5 * math.pi, -2.0])
def test_bulge_and_sweep_undo_each_other(theta):
    assert arcs.sweep_of(arcs.bulge_of(theta)) == pytest.approx(theta, rel=1e-12)


def test_a_half_and_a_quarter_circle_have_the_bulges_of_the_definition():
    assert arcs.bulge_of(math.pi) == pytest.approx(1.0, rel=1e-15)
    assert arcs.bulge_of(math.pi / 2) == pytest.approx(QUARTER, rel=1e-15)


@pytest.mark.parametrize("b", [0.05, QUARTER, 1.0, 2.5, -0.4])
def test_radius_and_sagitta_match_the_circular_segment(b):
    """Radius from the chord and the included angle, r = c / (2 sin(theta / 2)); sagitta of the segment,
    s = r - sqrt(r^2 - (c / 2)^2) for the minor arc, r + sqrt(...) past a half circle (circle geometry, from
    memory)."""
    chord = 300.0
    theta = 4.0 * math.atan(abs(b))
    r = chord / (2.0 * math.sin(theta / 2.0))
    assert arcs.arc_radius(chord, b) == pytest.approx(r, rel=1e-12)
    rise = math.sqrt(max(r * r - (chord / 2.0) ** 2, 0.0))
    s = r - rise if theta <= math.pi else r + rise
    assert arcs.sagitta(np.array([0.0, 0.0]), np.array([chord, 0.0]), b) == pytest.approx(s, rel=1e-9)


def test_the_centre_of_a_quarter_circle_is_the_circles_centre():
    """(r, 0) to (0, r) counter-clockwise about the origin, then the same arc turned clockwise (its centre the
    mirror image across the chord)."""
    r = 125.0
    p0, p1 = np.array([r, 0.0]), np.array([0.0, r])
    centre, radius = arcs.arc_centre(p0, p1, QUARTER)
    assert np.allclose(centre, [0.0, 0.0], atol=1e-12 * r) and radius == pytest.approx(r, rel=1e-12)
    centre, radius = arcs.arc_centre(p0, p1, -QUARTER)
    assert np.allclose(centre, [r, r], atol=1e-12 * r) and radius == pytest.approx(r, rel=1e-12)


def test_a_flattened_circle_stays_on_it_within_the_tolerance():
    """Two half circles (bulge 1 each) of radius 50 about (10, 20): every chord point on the circle, every chord's
    middle no further than the tolerance inside it, at least one chord per 45 degrees."""
    c, r, tol = np.array([10.0, 20.0]), 50.0, 0.2
    pts = np.array([c - (r, 0.0), c + (r, 0.0)])
    ring = arcs.flatten(pts, np.array([1.0, 1.0]), True, tol)
    assert np.allclose(np.hypot(*(ring - c).T), r, rtol=1e-12)
    mids = (ring + np.roll(ring, -1, axis=0)) / 2.0
    assert (r - np.hypot(*(mids - c).T)).max() <= tol * (1 + 1e-9)
    assert len(ring) >= 8
    # counter-clockwise: positive signed area (shoelace formula)
    x, y = ring.T
    assert 0.5 * np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y) > 0


def test_arcs_on_one_circle_merge_and_a_whole_turn_is_a_circle():
    """Four quarter arcs of the circle of radius 30 about (5, -5) join into one run whose pieces make a whole
    circle; two quarters join into a half (bulge 1); a quarter and a straight side stay apart."""
    c, r = np.array([5.0, -5.0]), 30.0
    corners = [c + r * np.array([math.cos(a), math.sin(a)]) for a in (0.0, math.pi / 2, math.pi, 1.5 * math.pi)]
    quarters = [(p, QUARTER) for p in corners]
    merged = arcs.merge_arcs(quarters)
    assert len(merged) < len(quarters)
    assert sum(arcs.sweep_of(b) for _, b in merged) == pytest.approx(2.0 * math.pi, rel=1e-12)
    (centre, radius) = arcs.whole_circle(merged)
    assert np.allclose(centre, c, atol=1e-9) and radius == pytest.approx(r, rel=1e-12)
    half = arcs.merge_arcs([(corners[0], QUARTER), (corners[1], QUARTER), (corners[2], 0.0)])
    assert len(half) == 2 and half[0][1] == pytest.approx(1.0, rel=1e-12)
    assert arcs.whole_circle(half) is None


@pytest.mark.parametrize("closed", [True, False])
def test_a_run_of_sides_and_arcs_flattens_to_each_arcs_own_chord_points(closed):
    """Straight sides, arcs both ways, a zero-length arc and a whole half circle in one run: the run's points are
    each vertex followed by that segment's own chord points (``arc_chord_points``), in order, and an open run ends
    on its last vertex."""
    pts = np.array([[0.0, 0.0], [100.0, 0.0], [100.0, 0.0], [140.0, 60.0], [60.0, 90.0], [-20.0, 40.0]])
    bulges = np.array([0.3, 0.7, -0.4, 0.0, 1.0, 0.2])
    run = bulges if closed else bulges[:-1]
    ring = arcs.flatten(pts, run, closed, 0.05)
    want = []
    for i, b in enumerate(run):
        want.append(pts[i][None, :])
        if b:
            want.append(arcs.arc_chord_points(pts[i], pts[(i + 1) % len(pts)], float(b), 0.05))
    if not closed:
        want.append(pts[-1][None, :])
    want = np.concatenate(want)
    assert ring.shape == want.shape
    assert np.allclose(ring, want, rtol=0, atol=1e-9)
