"""Planted violations: each found once, at the right place, with the right handles and figures.

Every expected figure below is a hand computation from the planted layout (distances between circles, lines and
rectangles in closed form), written beside the assertion.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from shapely.geometry import LineString, Point, Polygon, box

from toolkit.errors import LacunaError
from toolkit.model import Frame, Material, Panel, PointLoad, Region, Rules, Support, Void
from toolkit.rules.check import TOLERANCE_MM, Violation, allowed_region, check_layout, impossible_rules
from toolkit.rules.profiles import rules_for

MAT = Material(E_MPa=11500, nu=0.3)
RULES = Rules(min_web_mm=60, edge_cover_mm=50, min_void_mm=20, bearing_clearance_mm=100,
              bore_diameters_mm=(20, 25, 40, 50), slot_widths_mm=(40, 50))


def bore(vid, x, y, d, handle=None):
    return Void(id=vid, family="bore", centre=(x, y), size_mm=d, shape=Point(x, y).buffer(d / 2, quad_segs=32),
                handle=handle, layer="VOIDS" if handle else "")


def slot(vid, x, y, w, length, angle_deg=0.0, handle=None):
    a = math.radians(angle_deg)
    h = (length - w) / 2
    axis = LineString([(x - h * math.cos(a), y - h * math.sin(a)), (x + h * math.cos(a), y + h * math.sin(a))])
    return Void(id=vid, family="slot", centre=(x, y), size_mm=w, length_mm=length, angle_deg=angle_deg,
                shape=axis.buffer(w / 2, quad_segs=32), handle=handle)


def ngon(vid, x, y, circum_d, sides, rot=0.0, handle=None):
    t = np.radians(rot) + 2 * np.pi * np.arange(sides) / sides
    pts = np.column_stack([x + circum_d / 2 * np.cos(t), y + circum_d / 2 * np.sin(t)])
    return Void(id=vid, family="polygon", centre=(x, y), size_mm=circum_d, sides=sides, shape=Polygon(pts),
                handle=handle)


def panel(**kw):
    base = dict(width_mm=3000, height_mm=500, thickness_mm=90, material=MAT)
    base.update(kw)
    return Panel(**base)


def only(violations, rule):
    found = [v for v in violations if v.rule == rule]
    assert len(found) == 1, violations
    return found[0]


def test_clean_layout_has_no_violations():
    voids = [bore("V1", 500, 250, 50), bore("V2", 610, 250, 50), slot("V3", 900, 250, 50, 200)]
    assert check_layout(panel(), voids, RULES) == []


def test_web_too_thin_between_two_bores():
    # centres 90 apart, radii 25 + 25: web 90 - 50 = 40 mm at x = (425 + 465) / 2 = 445
    v = only(check_layout(panel(), [bore("V1", 400, 250, 50, "A1"), bore("V2", 490, 250, 50, "A2")], RULES),
             "min_web")
    assert v.measured == pytest.approx(40.0, abs=1e-9) and v.required == 60
    assert v.where == pytest.approx((445.0, 250.0), abs=1e-9)
    assert v.handles == ("A1", "A2") and v.void_ids == ("V1", "V2")


def test_web_between_a_slot_and_a_bore_at_an_angle():
    # slot axis from (600, 200) to (700, 300) (45 deg, width 40): bore d = 50 at (760, 240):
    # nearest axis point is (700, 300)? projection parameter of (760,240) on the axis: ((160,40).(100,100))/2e4 = 1.0
    # -> end (700, 300); distance sqrt(60^2 + 60^2) = 84.853; web = 84.853 - 20 - 25 = 39.853 mm
    s = slot("S1", 650, 250, 40, 40 + 2 * math.hypot(50, 50), 45.0, handle="1F")
    v = only(check_layout(panel(), [s, bore("B1", 760, 240, 50, "20")], RULES), "min_web")
    assert v.measured == pytest.approx(math.hypot(60, 60) - 45, abs=1e-9)
    u = np.array([60, -60]) / math.hypot(60, 60)
    mid = (np.array([700, 300]) + 20 * u + np.array([760, 240]) - 25 * u) / 2
    assert v.where == pytest.approx(tuple(mid), abs=1e-9)
    assert v.handles == ("1F", "20")


def test_hole_too_close_to_an_edge():
    # bore d = 50 at y = 60: gap to the bottom edge 60 - 25 = 35 mm; shortest segment (700, 0)-(700, 35)
    v = only(check_layout(panel(), [bore("V3", 700, 60, 50, "3C")], RULES), "edge_cover")
    assert v.measured == pytest.approx(35.0) and v.required == 50
    assert v.where == pytest.approx((700.0, 17.5))
    assert v.handles == ("3C",)


def test_hole_beyond_the_outline():
    # bore d = 50 at x = 2990: reaches 2990 + 25 - 3000 = 15 mm beyond the right edge
    v = only(check_layout(panel(), [bore("V9", 2990, 250, 50)], RULES), "outside")
    assert v.measured == pytest.approx(15.0)
    assert v.where == pytest.approx((3007.5, 250.0))  # midpoint of (3015, 250)-(3000, 250)
    assert not [x for x in check_layout(panel(), [bore("V9", 2990, 250, 50)], RULES) if x.rule == "edge_cover"]


def test_non_stock_bit():
    # 47 mm is not in (20, 25, 40, 50); the nearest stock size is 50
    v = only(check_layout(panel(), [bore("V4", 900, 250, 47, "4D")], RULES), "stock_size")
    assert v.measured == pytest.approx(47.0) and v.required == 50 and v.where == pytest.approx((900, 250))
    # within the stated tolerance a size counts as stock
    assert check_layout(panel(), [bore("V4", 900, 250, 50 + TOLERANCE_MM / 2)], RULES) == []


def test_non_stock_slot_width():
    v = only(check_layout(panel(), [slot("S2", 900, 250, 45, 200)], RULES), "stock_size")
    assert v.measured == pytest.approx(45.0) and v.required == 40  # |45-40| = |45-50|: the first listed wins


def test_void_in_a_bearing_zone_of_a_segment_support():
    # support along (0,0)-(150,0); bore d = 40 at (200, 80): nearest support point is the end (150, 0),
    # distance sqrt(50^2 + 80^2) = 94.340; clearance 94.340 - 20 = 74.340 < 100
    p = panel(supports=(Support(points=((0, 0), (150, 0)), source="[[support]] 1"),))
    v = only(check_layout(p, [bore("V5", 200, 80, 40, "5E")], RULES), "bearing_clearance")
    dist = math.hypot(50, 80)
    assert v.measured == pytest.approx(dist - 20)
    u = np.array([-50, -80]) / dist
    edge = np.array([200, 80]) + 20 * u
    assert v.where == pytest.approx(tuple((edge + np.array([150, 0])) / 2))
    assert "[[support]] 1" in v.message and v.handles == ("5E",)


def test_support_segment_of_no_length_counts_as_a_point():
    # (500, 0)-(500 + 1e-12, 0) is the point (500, 0); bore d = 50 at (500, 60): 60 - 25 = 35 mm < 100
    p = panel(supports=(Support(points=((500.0, 0.0), (500.0 + 1e-12, 0.0))),))
    v = only(check_layout(p, [bore("V5", 500, 60, 50)], RULES), "bearing_clearance")
    assert v.measured == pytest.approx(35.0) and v.where == pytest.approx((500.0, 17.5))


def test_void_over_a_point_load():
    # point load at (1500, 500) on the top edge; bore d = 100 at (1500, 400) (edge cover 50 kept): 50 - 0 = 50 mm
    p = panel(loads=(PointLoad(at=(1500, 500), force_N=(0, -1e4)),))
    v = only(check_layout(p, [bore("V6", 1500, 400, 100)], RULES), "bearing_clearance")
    assert v.measured == pytest.approx(50.0) and v.where == pytest.approx((1500, 475))


def test_void_touching_a_keep_zone():
    # rectangle 2010..2090 x 280..350 against keep 2000..2100 x 200..300: shared strip 80 x 20 -> depth 20 mm,
    # largest circle in the strip centred on its mid-line y = 290
    p = panel(keep=(Region(shape=box(2000, 200, 2100, 300), layer="KEEP", handle="K1"),))
    v = only(check_layout(p, [Void(id="V7", family="polygon", centre=(2050, 315), size_mm=100,
                                   shape=box(2010, 280, 2090, 350), handle="7A")], RULES), "keep")
    assert v.measured == pytest.approx(20.0, abs=0.01)
    assert v.where[1] == pytest.approx(290.0, abs=0.01) and 2010 <= v.where[0] <= 2090
    assert v.handles == ("7A", "K1")


def test_keep_zone_touched_edge_to_edge_is_allowed():
    p = panel(keep=(Region(shape=box(2000, 200, 2100, 300), layer="KEEP", handle="K1"),))
    assert check_layout(p, [Void(id="V7", family="polygon", centre=(2050, 325), size_mm=100,
                                 shape=box(2010, 300, 2090, 350))], RULES) == []


def test_web_to_an_existing_opening_and_running_into_it():
    p = panel(openings=(Region(shape=box(2500, 150, 2700, 350), layer="OPENING", handle="O1"),))
    # bore d = 50 at x = 2440: web 2500 - 2465 = 35 mm, at x = 2482.5
    v = only(check_layout(p, [bore("V8", 2440, 250, 50, "8B")], RULES), "min_web")
    assert v.measured == pytest.approx(35.0) and v.where == pytest.approx((2482.5, 250))
    assert v.handles == ("8B", "O1") and v.void_ids == ("V8",)
    # bore d = 50 at x = 2490: 15 mm inside the opening
    w = only(check_layout(p, [bore("V8", 2490, 250, 50)], RULES), "opening")
    assert w.measured == pytest.approx(15.0)


def test_overlapping_bores():
    # centres 30 apart, radii 25 + 25: overlap 50 - 30 = 20 mm; the lens spans x = 1005..1025, middle 1015
    v = only(check_layout(panel(), [bore("V1", 1000, 250, 50), bore("V2", 1030, 250, 50)], RULES), "overlap")
    assert v.measured == pytest.approx(20.0) and v.where == pytest.approx((1015.0, 250.0))


def test_overlapping_polygons():
    # two squares 100 x 100 sharing a 30 x 100 strip: largest circle in the strip has diameter 30
    a = Void(id="P1", family="polygon", centre=(1050, 250), size_mm=141, shape=box(1000, 200, 1100, 300))
    b = Void(id="P2", family="polygon", centre=(1120, 250), size_mm=141, shape=box(1070, 200, 1170, 300))
    v = only(check_layout(panel(), [a, b], RULES), "overlap")
    assert v.measured == pytest.approx(30.0, abs=0.01) and v.where[0] == pytest.approx(1085.0, abs=0.01)


def test_overlaps_are_found_when_no_web_is_required():
    # min_web 0: shapely's distance is 0 for touching and overlapping polygons alike; the overlap must still show.
    # triangle with circumradius 8 centred on the opening's corner: the shared part is the right triangle
    # (0,0) (8,0) (0, 8 tan 30 deg = 4.619), inradius (8 + 4.619 - 9.238) / 2 = 1.690 -> depth 3.381 mm
    rules = Rules(min_web_mm=0, edge_cover_mm=0, min_void_mm=0, bearing_clearance_mm=0)
    p = panel(openings=(Region(shape=box(1000, 250, 1020, 270), handle="O"),))
    tri = ngon("T", 1000, 250, 16, 3)
    v = only(check_layout(p, [tri], rules), "opening")
    assert v.measured == pytest.approx(8 + 8 * math.tan(math.pi / 6) - math.hypot(8, 8 * math.tan(math.pi / 6)),
                                       abs=0.01)
    a, b = ngon("A", 1000, 250, 16, 3), ngon("B", 1000, 251, 16, 3)
    assert only(check_layout(panel(), [a, b], rules), "overlap").void_ids == ("A", "B")
    # squares edge to edge touch but do not overlap: no violation without a web rule
    c = Void(id="C", family="polygon", centre=(0, 0), size_mm=1, shape=box(1000, 200, 1100, 300))
    d = Void(id="D", family="polygon", centre=(0, 0), size_mm=1, shape=box(1100, 200, 1200, 300))
    assert check_layout(panel(), [c, d], rules) == []


def test_small_polygon():
    # regular hexagon of circumscribed diameter 20: inscribed diameter 20 cos(30 deg) = 17.32 < 20
    v = only(check_layout(panel(), [ngon("H1", 1000, 250, 20, 6)], RULES), "min_void")
    assert v.measured == pytest.approx(20 * math.cos(math.pi / 6), abs=0.01)
    assert v.where == pytest.approx((1000, 250), abs=0.05)


def test_depth_band_of_the_timber_profile():
    # timber-bored keeps voids in the middle half: 500 deep -> at least 125 mm above and below.
    # A 76 mm bore at y = 150 leaves 150 - 38 = 112 mm below.
    rules = rules_for("timber-bored")
    v = only(check_layout(panel(), [bore("T1", 1500, 150, 76)], rules), "depth_band")
    assert v.measured == pytest.approx(112.0) and v.required == pytest.approx(125.0)
    assert v.where == pytest.approx((1500, 56.0))
    assert check_layout(panel(), [bore("T1", 1500, 250, 76)], rules) == []


def test_web_ratio_of_the_timber_profile():
    # web_ratio 1: a 152 and a 76 bore need at least 152 mm of web; centres 260 apart -> web 260 - 114 = 146
    rules = rules_for("timber-bored")
    v = only(check_layout(panel(), [bore("T1", 1000, 250, 152), bore("T2", 1260, 250, 76)], rules), "min_web")
    assert v.measured == pytest.approx(146.0) and v.required == pytest.approx(152.0)


def test_thickness_rule_of_the_steel_profile():
    # steel-cut: a void at least 1.5 plate thicknesses; 20 mm plate -> 30 mm; a 25 mm bore fails
    p = panel(thickness_mm=20)
    v = only(check_layout(p, [bore("S1", 1000, 250, 25)], rules_for("steel-cut")), "min_void")
    assert v.required == pytest.approx(30.0)


def test_the_proof_uses_the_true_circle_not_its_flattened_outline():
    # d = 100 bore whose polygon is a 16-gon (vertex on the arc): true gap 50 - 50 = 0 mm short of the 50 mm cover
    # when placed at y = 99.995 would pass on the polygon (its lowest point is at 99.995 - 50 cos(11.25 deg))
    # but fails on the circle by 0.005 mm, inside tolerance; at y = 99.9 it fails by 0.1 mm
    v = Void(id="C", family="bore", centre=(1000, 99.9), size_mm=100,
             shape=Point(1000, 99.9).buffer(50, quad_segs=4))
    assert only(check_layout(panel(), [v], RULES), "edge_cover").measured == pytest.approx(49.9)


def test_violation_json_in_drawing_units():
    frame = Frame(origin=(1000.0, 2000.0), mm_per_unit=10.0, unit="cm")
    v = Violation("min_web", (445.0, 250.0), 40.0, 60.0, ("A1",), ("V1", "V2"), "x")
    j = v.to_json(frame)
    assert j["where"] == [1044.5, 2025.0] and j["measured"] == 4.0 and j["required"] == 6.0
    assert set(j) >= {"rule", "where", "measured", "required", "handles"}
    # the message's lengths too, as the figures beside it
    worded = Violation("min_web", (445.0, 250.0), 40.0, 60.0, (), ("V1", "V2"),
                       "the web between V1 and V2 is 40 mm, less than the minimum web 60 mm")
    assert worded.to_json(frame)["message"] == "the web between V1 and V2 is 4 cm, less than the minimum web 6 cm"
    assert worded.to_json()["message"] == worded.message


def test_bad_voids_are_named():
    with pytest.raises(LacunaError) as e:
        check_layout(panel(), [Void(id="V1", family="bore", centre=(500, 250), size_mm=50,
                                    shape=box(470, 220, 530, 280), handle="2F", layer="VOIDS")], RULES)
    assert e.value.where == "void V1 (layer VOIDS, handle 2F)" and "bore" in str(e.value)
    bow = Polygon([(0, 0), (10, 10), (10, 0), (0, 10)])
    with pytest.raises(LacunaError) as e:
        check_layout(panel(), [Void(id="V2", family="polygon", centre=(5, 5), size_mm=10, shape=bow)], RULES)
    assert "V2" in e.value.where
    with pytest.raises(LacunaError):
        check_layout(panel(), [bore("V1", 500, 250, 50)], Rules(min_web_mm=-1))


def test_a_slot_not_drawn_as_a_stadium_is_checked_as_drawn():
    # rectangle 200 x 50 labelled "slot": width from its inscribed circle (50), distances from its corners
    v = Void(id="S", family="slot", centre=(1000, 250), size_mm=50, length_mm=200, shape=box(900, 225, 1100, 275))
    assert check_layout(panel(), [v], RULES) == []
    w = Void(id="S", family="slot", centre=(1000, 250), size_mm=50, length_mm=200, shape=box(900, 30, 1100, 80))
    assert only(check_layout(panel(), [w], RULES), "edge_cover").measured == pytest.approx(30.0)


# --- capacity ---------------------------------------------------------------------------------------------------


def test_edge_cover_leaving_no_room_is_said_plainly():
    with pytest.raises(LacunaError) as e:
        impossible_rules(panel(), Rules(edge_cover_mm=300))
    assert "no void can be placed: edge cover 300 mm leaves no room in a 500 mm deep panel" in str(e.value)
    assert e.value.where == "[rules] edge_cover"
    # 500 - 20 (least void) = 480, half of it: 240 mm is the largest cover that leaves room
    assert "at most 240 mm" in e.value.hint


def test_bearing_zones_eating_the_panel_are_said_plainly():
    # 1000 x 500 panel, supports at both bottom corners and a load mid-top; 700 mm clearance covers it all
    p = panel(width_mm=1000, supports=(Support(points=((0, 0),)), Support(points=((1000, 0),))),
              loads=(PointLoad(at=(500, 500), force_N=(0, -1e3)),))
    with pytest.raises(LacunaError) as e:
        impossible_rules(p, Rules(bearing_clearance_mm=700))
    assert "no void can be placed" in str(e.value) and "bearing zones of 700 mm" in str(e.value)
    assert e.value.where == "[rules] bearing_clearance"
    impossible_rules(p, Rules(bearing_clearance_mm=300))  # room is left


def test_keep_zones_filling_the_panel():
    p = panel(width_mm=1000, keep=(Region(shape=box(0, 0, 1000, 500), layer="KEEP", handle="9"),))
    with pytest.raises(LacunaError) as e:
        impossible_rules(p, Rules())
    assert "keep zone" in str(e.value) and e.value.where == "layer KEEP"


def test_webs_round_openings_filling_the_panel():
    p = panel(width_mm=600, openings=(Region(shape=box(200, 150, 400, 350), layer="OPENING"),))
    with pytest.raises(LacunaError) as e:
        impossible_rules(p, Rules(min_web_mm=200, edge_cover_mm=50))
    assert e.value.where == "[rules] min_web" and "opening" in str(e.value)


def test_depth_band_leaving_no_room():
    # 200 deep: edge cover 20 leaves 160 mm, enough for a 120 mm void, but the middle half is 50..150 = 100 mm
    with pytest.raises(LacunaError) as e:
        impossible_rules(panel(height_mm=200), rules_for("timber-bored", {"edge_cover": 20, "min_void": 120}))
    assert "depth_band" in e.value.where and "middle 50%" in str(e.value) and "leaves 100 mm" in str(e.value)
    impossible_rules(panel(height_mm=200), rules_for("timber-bored", {"edge_cover": 20, "min_void": 99}))


def test_allowed_region_pieces():
    # plain rectangle shrunk by the edge cover: (3000 - 100) x (500 - 100)
    assert allowed_region(panel(), Rules()).area == pytest.approx(2900 * 400)
    # an opening grown by the web: a bore inside the region keeps the web to it
    p = panel(openings=(Region(shape=box(1400, 200, 1600, 300)),))
    region = allowed_region(p, RULES)
    assert not region.contains(Point(1500 - 100 - 60 + 1, 250))
    assert region.contains(Point(1500 - 100 - 60 - 1, 250))


def test_margins_name_the_tightest_place_of_every_rule_in_force():
    # Hand figures: bores of 50 at x = 500 and 610 (web 110 - 50 = 60 mm, the minimum web exactly), a slot 50 x 200
    # centred at x = 900 (its left end at 800: web to V2 800 - 635 = 165); all at mid-depth y = 250 of 500, so
    # the nearest edge is 250 - 25 = 225 mm away (top and bottom alike); a support point at (0, 0): the nearest
    # void edge is V1's, hypot(500, 250) - 25 from it.
    from toolkit.rules.check import rule_margins

    voids = [bore("V1", 500, 250, 50), bore("V2", 610, 250, 50), slot("V3", 900, 250, 50, 200)]
    p = panel(supports=(Support(((0.0, 0.0),), "xy"),))
    m = {x.rule: x for x in rule_margins(p, voids, RULES)}
    assert m["edge_cover"].measured == pytest.approx(225.0, abs=1e-6) and m["edge_cover"].required == 50
    assert m["min_web"].measured == pytest.approx(60.0, abs=1e-6) and m["min_web"].margin == pytest.approx(0, abs=1e-6)
    assert set(m["min_web"].void_ids) == {"V1", "V2"}
    assert m["bearing_clearance"].measured == pytest.approx(math.hypot(500, 250) - 25, abs=1e-6)
    assert m["bearing_clearance"].void_ids == ("V1",)
    assert m["min_void"].measured == pytest.approx(50.0, abs=1e-6)
    assert "2 of 2 bores" in m["bore_diameters"].text and "1 of 1 slots" in m["slot_widths"].text
    # A web ratio of 2 asks 2 x 50 = 100 mm between the bores (40 mm short) but 2 x 200 = 400 mm between V2 and
    # the 200 mm slot (235 mm short): that pair is the tightest, under the web ratio.
    ratio = Rules(**{**RULES.__dict__, "web_ratio": 2.0})
    w = {x.rule: x for x in rule_margins(p, voids, ratio)}["web_ratio"]
    assert set(w.void_ids) == {"V2", "V3"}
    assert w.required == pytest.approx(400.0) and w.margin == pytest.approx(-235.0, abs=1e-6)
