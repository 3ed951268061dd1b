"""The rules' ceiling (toolkit/voids/ceiling.py): the most a void family can open of the ground it stands on.

Check values: a void grown by a band t has the area of its parallel body, which for a disk of diameter d is
pi (d/2 + t)^2 and for a stadium of width w and straight length s is (w + 2t) s + pi (w/2 + t)^2 (Steiner's
formula for parallel bodies; Santalo, Integral Geometry and Geometric Probability, 1976, from memory). The grown
areas are taken here by shapely's buffer (GEOS), a general-purpose geometry library, not by the module's formulas;
the random convex voids check the inequalities the module relies on (isoperimetric and isodiametric, from memory).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from shapely.geometry import LineString, Point

from toolkit.voids.ceiling import ceiling, ceiling_sentence, family_ceiling


def _share(shape, web: float) -> float:
    """The void's area over its area grown by half ``web`` (by GEOS)."""
    return shape.area / shape.buffer(web / 2.0, quad_segs=256).area


def test_closed_forms():
    # n-gons: 1 / (1 + r)^2 whatever the size; none without a web ratio
    assert family_ceiling("polygon", min_web_mm=10, web_ratio=0.5).share == pytest.approx(4.0 / 9.0, rel=1e-12)
    assert family_ceiling("polygon", min_web_mm=10, web_ratio=1.0).share == pytest.approx(0.25, rel=1e-12)
    assert family_ceiling("polygon", min_web_mm=10) is None
    # slots of the precast-formed profile's widths with its 100 mm web: 250 / 350
    got = family_ceiling("slot", min_web_mm=100, slot_widths_mm=(100, 150, 200, 250), min_void_mm=100)
    assert got.share == pytest.approx(250.0 / 350.0, rel=1e-12)
    assert "250 mm wide" in got.why and "100 mm" in got.why
    # a web ratio that binds harder than the widths: the convex bound, named as the ratio
    got = family_ceiling("slot", min_web_mm=100, web_ratio=0.5, slot_widths_mm=(100, 200))
    assert got.share == pytest.approx(4.0 / 9.0, rel=1e-12) and "0.5 x the larger slot's length" in got.why
    # bores: (d / (d + g))^2 at the best stock diameter; the least void rules out the smaller ones
    got = family_ceiling("bore", min_web_mm=30, bore_diameters_mm=(20, 32, 40), min_void_mm=25)
    assert got.share == pytest.approx((40.0 / 70.0) ** 2, rel=1e-12)
    assert family_ceiling("bore", min_web_mm=30, bore_diameters_mm=(20,), min_void_mm=25) is None
    # mixed: the largest family's; none where one family is unbounded
    rules = dict(min_web_mm=100, web_ratio=0.0, slot_widths_mm=(250,), bore_diameters_mm=(400,))
    assert ceiling(("slot", "bore"), **rules).share == pytest.approx(250.0 / 350.0)
    assert ceiling(("polygon", "slot"), **rules) is None


def test_disk_and_stadium_meet_their_ceiling():
    """A bore and a slot grown by half their web take exactly the module's share (GEOS's area, 1e-5)."""
    d, web = 160.0, 100.0
    bore = family_ceiling("bore", min_web_mm=web, bore_diameters_mm=(d,))
    assert _share(Point(0, 0).buffer(d / 2.0, quad_segs=256), web) == pytest.approx(bore.share, rel=1e-5)
    w = 250.0
    slot = family_ceiling("slot", min_web_mm=web, slot_widths_mm=(w,))
    for length in (w, 2 * w, 40 * w):  # the share rises towards w / (w + g) as the slot grows longer
        stadium = LineString([(0, 0), (length - w, 0)]).buffer(w / 2.0, quad_segs=256) if length > w \
            else Point(0, 0).buffer(w / 2.0, quad_segs=256)
        assert _share(stadium, web) <= slot.share * (1 + 1e-9)
    assert _share(LineString([(0, 0), (1e6, 0)]).buffer(w / 2.0, quad_segs=256), web) == \
        pytest.approx(slot.share, rel=1e-3)


@pytest.mark.parametrize("ratio", [0.25, 0.5, 1.0])
def test_random_convex_voids_keep_under_the_ceiling(ratio):
    """Random convex voids, grown by half the web their extent asks (the smallest enclosing circle's diameter):
    none opens more than 1 / (1 + r)^2 of its grown self."""
    rng = np.random.default_rng(7)
    bound = family_ceiling("polygon", min_web_mm=0.0, web_ratio=ratio).share
    worst = 0.0
    for _ in range(300):
        pts = rng.normal(size=(rng.integers(3, 30), 2)) * rng.uniform(1, 400, size=2)
        void = shapely.convex_hull(shapely.multipoints(pts))
        if void.area <= 0:
            continue
        extent = 2.0 * shapely.minimum_bounding_radius(void)
        worst = max(worst, _share(void, ratio * extent))
    assert 0.5 * bound < worst <= bound
    # and a regular 64-gon, nearly a disk, comes within 1 % of it
    disk = Point(0, 0).buffer(100.0, quad_segs=16)
    assert _share(disk, ratio * 2.0 * shapely.minimum_bounding_radius(disk)) == pytest.approx(bound, rel=1e-2)


def test_sentence_names_the_share_and_the_rule():
    c = family_ceiling("slot", min_web_mm=100, slot_widths_mm=(150, 250))
    words = ceiling_sentence(c)
    assert "at most 71 % of the ground" in words and "250 mm wide" in words and "100 mm" in words
    assert math.isclose(c.share, 250 / 350)


def test_profiles_listing_gives_each_familys_ceiling():
    """`lacuna profiles` gives the ceilings from each profile's own values, read here from its TOML file."""
    import tomllib
    from pathlib import Path

    from toolkit.rules.profiles import profiles_table, profiles_text

    folder = Path(__file__).resolve().parents[1] / "toolkit" / "rules" / "profiles"
    table = {p["name"]: p for p in profiles_table()["profiles"]}
    precast = tomllib.loads((folder / "precast-formed.toml").read_text())
    w, g = max(precast["slot_widths"]["values_mm"]), precast["min_web"]["value_mm"]
    d = max(precast["bore_diameters"]["values_mm"])
    assert table["precast-formed"]["ceiling_percent"] == {
        "polygon": None, "slot": round(100 * w / (w + g), 1), "bore": round(100 * (d / (d + g)) ** 2, 1)}
    steel = tomllib.loads((folder / "steel-cut.toml").read_text())
    k = steel["web_ratio"]["ratio"]
    assert table["steel-cut"]["ceiling_percent"]["polygon"] == round(100 / (1 + k) ** 2, 1)
    assert "n-gons no bound, slots 71 %, bores 64 %" in profiles_text()
