"""`lacuna check` as an API: hand-drawn voids read from a drawing and checked against a fabrication profile.

Fixtures: fixtures/check/, written by fixtures/make_check.py (a precast yard-wall panel of our own invention,
4000 x 1200 mm, bearings 300 mm long at both bottom corners, a 40 kN load at the top edge's middle).

Where the rule values come from: toolkit/rules/profiles/precast-formed.toml, whose every length rule states
its source as "common practice, no source"; its former (bore) diameters are the "nominal outside diameters of
PVC-U drain pipe (EN 1401-1, from memory)". The expected positions and figures of the planted faults are hand
computations from the planted layout (closed-form distances between circles, segments and rectangles),
written beside each assertion.
"""

from __future__ import annotations

import importlib.util
import io
import json
import math
import shutil
import sys
import tomllib
from pathlib import Path

import ezdxf
import numpy as np
import pytest

from toolkit.checking import NOTHING_TO_CHECK, check_drawing, check_outputs
from toolkit.dxf_in.voids import VOID_LAYERS, corner_count, read_voids
from toolkit.errors import LacunaError
from toolkit.model import Frame
from toolkit.rules.profiles import PROFILE_DIR

ROOT = Path(__file__).resolve().parents[1]
FIX = ROOT / "fixtures" / "check"
JOB = FIX / "check.toml"
HANDLES = json.loads((FIX / "handles.json").read_text(encoding="utf-8"))


def _generator():
    spec = importlib.util.spec_from_file_location("make_check", ROOT / "fixtures" / "make_check.py")
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("make_check", module)  # dataclasses look their module up there
    spec.loader.exec_module(module)
    return module


MAKE = _generator()

# precast-formed.toml values (source stated there: "common practice, no source" for each)
MIN_WEB, EDGE_COVER, MIN_VOID, BEARING = 100.0, 75.0, 100.0, 300.0
BORES = (110.0, 125.0, 160.0, 200.0, 250.0, 315.0, 400.0)  # EN 1401-1 pipe diameters, from memory (profile file)


def _check(name: str, **kw):
    return check_drawing(FIX / f"{name}.dxf", JOB, **kw)


def test_rules_are_the_profile_files_values_with_their_sources():
    profile = tomllib.loads((PROFILE_DIR / "precast-formed.toml").read_text(encoding="utf-8"))
    result = _check("clean")
    r = result.rules
    assert r.profile == "precast-formed"
    assert (r.min_web_mm, r.edge_cover_mm, r.min_void_mm, r.bearing_clearance_mm) == (
        MIN_WEB, EDGE_COVER, MIN_VOID, BEARING)
    assert r.bore_diameters_mm == BORES
    for rule in ("min_web", "edge_cover", "min_void", "bearing_clearance", "bore_diameters", "slot_widths"):
        assert r.source(rule) == profile[rule]["source"]
        assert result.summary["rules"]["sources"][rule] == profile[rule]["source"]
    assert result.summary["rules"]["values"]["min_web"] == MIN_WEB  # drawing in mm: the same figures


# --- the clean layout -----------------------------------------------------------------------------------------


def test_clean_layout_keeps_every_rule():
    result = _check("clean")
    s = result.summary
    assert s["checked"] == 5 and s["violations"] == [] and result.exit_code == 0
    assert "keep the precast-formed rules" in s["message"]
    by_handle = {v.handle: v for v in result.voids}
    h = HANDLES["clean"]
    # by construction (fixtures/make_check.py CLEAN): three circles, a stadium, a sharp hexagon
    assert [by_handle[h[t]].family for t in ("bore-200", "bore-160", "bore-110", "slot-150", "hexagon")] == [
        "bore", "bore", "bore", "slot", "polygon"]
    assert by_handle[h["bore-160"]].size_mm == pytest.approx(160.0, abs=1e-9)
    slot = by_handle[h["slot-150"]]
    assert (slot.size_mm, slot.length_mm, slot.angle_deg) == pytest.approx((150.0, 450.0, 0.0), abs=1e-9)
    assert slot.centre == pytest.approx((1850.0, 600.0), abs=1e-9)
    hexagon = by_handle[h["hexagon"]]
    assert hexagon.sides == 6
    assert hexagon.size_mm == pytest.approx(300.0, abs=1e-6)  # circumscribed diameter = 2 x 150
    # regular hexagon area 3 sqrt(3) / 2 R^2 (plane geometry, closed form)
    assert hexagon.area_mm2 == pytest.approx(1.5 * math.sqrt(3) * 150.0**2, rel=1e-9)
    assert all(v.id == f"H{v.handle}" for v in result.voids)


# --- the planted layout ---------------------------------------------------------------------------------------

# tag(s), rule, where (local mm), measured, required, tolerance on where / measured (mm)
_R_IN = 100 * math.sqrt(3) - 150  # inradius of the hexagon's tip inside the keep zone, see below
_U = np.array([-100.0, -300.0]) / math.hypot(100.0, 300.0)
PLANTED = [
    # Bores of 200 at x 900 and 125 at x 1150 on y 600: web = 1150 - 62.5 - (900 + 100) = 87.5; its middle is
    # halfway between x 1000 and x 1087.5.
    (("web-a", "web-b"), "min_web", (1043.75, 600.0), 87.5, MIN_WEB, 1e-6),
    # Bore of 110 at (1500, 1105): top of the bore at 1160, panel top at 1200: cover 40, middle at y 1180.
    (("edge",), "edge_cover", (1500.0, 1180.0), 40.0, EDGE_COVER, 1e-6),
    # Bore of 150: no former of that diameter; the nearest stock size is 160 (|150 - 160| < |150 - 125|).
    (("stock",), "stock_size", (1900.0, 500.0), 150.0, 160.0, 1e-6),
    # Bore of 160 at (400, 300) beside the bearing from (0, 0) to (300, 0): the nearest point of the bearing is its
    # end (300, 0); clearance = sqrt(100^2 + 300^2) - 80 = 236.228; marked halfway along that gap.
    (("bearing",), "bearing_clearance",
     tuple((np.array([400.0, 300.0]) + 80.0 * _U + np.array([300.0, 0.0])) / 2),
     math.hypot(100.0, 300.0) - 80.0, BEARING, 1e-6),
    # Hexagon R 150 at (2700, 600), corner on +x at x 2850, keep zone from x 2800: the shared part is a triangle
    # of height 50 and base 2 x 50 tan 60 = 100 sqrt(3), legs 100. Its inscribed circle (r = area / half
    # perimeter, plane triangle formulas) has r = 2500 sqrt(3) / (50 sqrt(3) + 100) = 100 sqrt(3) - 150 = 23.205,
    # centred on y 600 at x 2800 + r; the overlap depth is its diameter. shapely's inscribed circle is found to
    # a tolerance of 1e-3 x sqrt(area) = 0.066 mm (toolkit/rules/check.py), hence the looser tolerance.
    (("keep", "keep-zone"), "keep", (2800.0 + _R_IN, 600.0), 2 * _R_IN, 0.0, 0.15),
]


def _by_rule(summary: dict) -> dict:
    out = {}
    for v in summary["violations"]:
        assert v["rule"] not in out, f"{v['rule']} found twice"
        out[v["rule"]] = v
    return out


def test_planted_faults_are_each_found_once_at_the_planted_place():
    result = _check("planted")
    s = result.summary
    h = HANDLES["planted"]
    assert s["checked"] == 6 and result.exit_code == 1
    found = _by_rule(s)
    assert sorted(found) == sorted(rule for _, rule, *_ in PLANTED)
    for tags, rule, where, measured, required, tol in PLANTED:
        v = found[rule]
        assert sorted(v["handles"]) == sorted(h[t] for t in tags), rule
        assert v["where"] == pytest.approx(where, abs=tol), rule
        assert v["measured"] == pytest.approx(measured, abs=tol), rule
        assert v["required"] == pytest.approx(required, abs=1e-9), rule
        assert set(v) >= {"rule", "where", "measured", "required", "handles"}  # CONTRACT.md check keys


@pytest.mark.parametrize("name", ["planted-turned", "planted-metres"])
def test_a_turned_far_away_copy_gives_the_same_faults_mapped(name):
    place = MAKE.PLACES[name]
    result = _check(name)
    h = HANDLES[name]
    found = _by_rule(result.summary)
    assert result.summary["units"] == place.unit and len(found) == len(PLANTED)
    k = place.mm_per_unit
    for tags, rule, where, measured, required, tol in PLANTED:
        v = found[rule]
        assert sorted(v["handles"]) == sorted(h[t] for t in tags), rule
        # the planted place, put in the drawing by the generator's own placement (rotation, origin, unit)
        # (the JSON rounds to 6 decimals of the drawing's unit: 0.0005 mm in a drawing in metres)
        assert v["where"] == pytest.approx(place.point(where), abs=max(tol, 1e-3) / k), rule
        assert v["measured"] == pytest.approx(measured / k, abs=max(tol, 1e-3) / k), rule
        assert v["required"] == pytest.approx(required / k, abs=1e-9), rule


def test_a_drawing_without_voids_has_nothing_to_check():
    result = _check("empty")
    s = result.summary
    assert s["checked"] == 0 and s["violations"] == [] and result.exit_code == 0
    assert s["message"].startswith(NOTHING_TO_CHECK)
    assert "nothing to check" in result.text_lines()[0]


# --- the files ------------------------------------------------------------------------------------------------


def _figures(result) -> list[dict]:
    """The violations without their messages (which name the drawing's path)."""
    return [{k: v for k, v in entry.items() if k != "message"} for entry in result.summary["violations"]]


def _read(data: bytes):
    return ezdxf.read(io.StringIO(data.decode("utf-8")))


def test_the_marked_copy_keeps_the_drawing_and_marks_each_fault(tmp_path):
    src = FIX / "planted-turned.dxf"
    result = check_drawing(src, JOB)
    files = check_outputs(result, src)
    assert sorted(files) == ["planted-turned-check.dxf", "planted-turned-check.json"]
    assert json.loads(files["planted-turned-check.json"]) == result.summary
    out = _read(files["planted-turned-check.dxf"])
    assert len(out.audit().errors) == 0
    before = ezdxf.readfile(src)
    kept = {e.dxf.handle: e for e in out.modelspace()}
    for e in before.modelspace():
        assert e.dxf.handle in kept and kept[e.dxf.handle].dxf.layer == e.dxf.layer
    circles = out.modelspace().query('CIRCLE[layer=="LACUNA-CHECK"]')
    texts = out.modelspace().query('TEXT[layer=="LACUNA-CHECK"]')
    assert len(circles) == len(texts) == len(result.violations)
    centres = sorted((round(c.dxf.center.x, 4), round(c.dxf.center.y, 4)) for c in circles)
    assert centres == sorted((round(v["where"][0], 4), round(v["where"][1], 4))
                             for v in result.summary["violations"])
    assert any(t.dxf.text.startswith("min_web 87.5 < 100") for t in texts)


def test_markers_of_an_earlier_check_are_refused_or_replaced(tmp_path):
    src = FIX / "planted.dxf"
    first = tmp_path / "planted.dxf"
    first.write_bytes(check_outputs(check_drawing(src, JOB), src)["planted-check.dxf"])
    again = check_drawing(first, JOB)
    assert _figures(again) == _figures(check_drawing(src, JOB))  # the markers are not read as anything
    with pytest.raises(LacunaError) as err:
        check_outputs(again, first)
    assert "LACUNA-CHECK" in err.value.where and "replace" in err.value.hint
    out = _read(check_outputs(again, first, replace=True)["planted-check.dxf"])
    assert len(out.modelspace().query('CIRCLE[layer=="LACUNA-CHECK"]')) == 5  # replaced, not doubled
    assert len(out.modelspace().query('*[layer=="LACUNA-VOID-BORE"]')) == 5  # the voids stay


def test_a_circle_on_the_slot_layer_is_a_slot_as_long_as_it_is_wide(tmp_path):
    """The pipeline writes a slot whose length has shrunk to its width as a circle on the slot layer, and schedules
    it as "as long as it is wide (a round hole)": read back, it is that slot, its diameter one of the slot widths
    (precast-formed.toml, "common practice, no source": 100 mm is a former width and no pipe diameter). On the
    bore layer the same circle is a bore of no stock diameter; a circle on the slot layer of no slot width is a
    slot of no stock width."""
    doc = ezdxf.readfile(FIX / "clean.dxf")
    clean = check_drawing(FIX / "clean.dxf", JOB)
    assert clean.violations == ()
    # 4000 x 1200 panel, its voids between x = 550 and 2600 mm, a KEEP zone at x 2800 - 3000, an opening at
    # x 3200 - 3400, y 400 - 800 mm, supports along the foot: (3600, 900) is more than a web from all of them
    spot = tuple(clean.panel.frame.to_drawing((3600.0, 900.0)))
    cases = {"slot-100": ("LACUNA-VOID-SLOT", 100.0, ()), "bore-100": ("LACUNA-VOID-BORE", 100.0, ("stock_size",)),
             "slot-110": ("LACUNA-VOID-SLOT", 110.0, ("stock_size",))}
    for name, (layer, diameter, rules) in cases.items():
        doc = ezdxf.readfile(FIX / "clean.dxf")
        msp = doc.modelspace()
        msp.add_circle(spot, diameter / 2.0, dxfattribs={"layer": layer})
        path = tmp_path / f"{name}.dxf"
        doc.saveas(path)
        got = check_drawing(path, JOB)
        added = [v for v in got.voids if math.dist(v.centre, (3600.0, 900.0)) < 1e-6]
        assert len(added) == 1
        assert added[0].family == ("slot" if layer.endswith("SLOT") else "bore")
        if added[0].family == "slot":
            assert added[0].length_mm == pytest.approx(diameter)
        assert tuple(sorted({v.rule for v in got.violations})) == rules, (name, got.violations)
        assert not any("drawn as a bore" in n for n in got.summary["warnings"])


def test_voids_on_a_layer_of_their_own_are_named_with_the_option_that_checks_them(tmp_path):
    # A drafter puts hand-drawn holes on "HOLES": without --layers nothing is checked, and the warning names the
    # option that would check them (not only the job key that would make them openings); with --layers HOLES they
    # are checked and no warning calls them unread.
    spot = tuple(check_drawing(FIX / "clean.dxf", JOB).panel.frame.to_drawing((3600.0, 900.0)))
    doc = ezdxf.readfile(FIX / "clean.dxf")
    doc.layers.add("HOLES")
    doc.modelspace().add_circle(spot, 50.0, dxfattribs={"layer": "HOLES"})
    path = tmp_path / "holes.dxf"
    doc.saveas(path)
    unread = [w for w in check_drawing(path, JOB).summary["warnings"] if "'HOLES'" in w]
    assert len(unread) == 1 and "pass --layers HOLES" in unread[0]
    got = check_drawing(path, JOB, layers="HOLES")
    assert any(math.dist(v.centre, (3600.0, 900.0)) < 1e-6 for v in got.voids)
    assert not any("'HOLES'" in w for w in got.summary["warnings"])


def test_the_fixtures_are_what_the_generator_writes(tmp_path):
    handles = MAKE.main(tmp_path)
    assert handles == HANDLES
    shutil.copy(JOB, tmp_path / "job.toml")
    for name in ("clean", "planted", "planted-turned"):
        fresh = check_drawing(tmp_path / f"{name}.dxf", tmp_path / "check.toml")
        kept = _check(name)
        assert _figures(fresh) == _figures(kept) and fresh.summary["voids"] == kept.summary["voids"]


# --- rules from elsewhere -------------------------------------------------------------------------------------


def test_profile_option_overrides_the_jobs_profile():
    timber = tomllib.loads((PROFILE_DIR / "timber-bored.toml").read_text(encoding="utf-8"))
    result = _check("clean", profile="timber-bored")
    assert result.rules.profile == "timber-bored"
    assert result.rules.bore_diameters_mm == tuple(float(d) for d in timber["bore_diameters"]["values_mm"])
    stock = {v["handles"][0]: v for v in result.summary["violations"] if v["rule"] == "stock_size"}
    h = HANDLES["clean"]
    # hole-saw sizes of timber-bored.toml ("common practice, no source"): 110 -> 114 nearest, 160 -> 152,
    # 200 -> 152 (the largest); none of the three bores is a stock hole saw. Slot widths there: 51, 64, 76,
    # 102: the 150 mm slot is none of them, 102 the nearest.
    assert {k: v["required"] for k, v in stock.items()} == {h["bore-110"]: 114.0, h["bore-160"]: 152.0,
                                                             h["bore-200"]: 152.0, h["slot-150"]: 102.0}


def test_an_unknown_profile_names_the_option():
    with pytest.raises(LacunaError) as err:
        _check("clean", profile="precast-formd")
    assert err.value.where == "--profile" and "precast-formed" in err.value.hint


def test_without_a_job_the_defaults_apply_and_say_so():
    result = check_drawing(FIX / "clean.dxf")
    assert result.rules.profile == "custom" and result.panel.material is None
    assert result.summary["thickness"] is None
    assert result.summary["rules"]["sources"]["min_web"] == "lacuna default, no source"
    assert result.summary["violations"] == []
    assert any("not checked against stock" in w for w in result.summary["warnings"])


def test_a_thickness_rule_without_a_thickness_is_set_aside_with_a_warning():
    # steel-cut.toml: min_void_per_thickness 1.5 ("common practice, no source")
    result = check_drawing(FIX / "clean.dxf", profile="steel-cut")
    assert result.rules.min_void_per_thickness == 0.0
    assert any("min_void_per_thickness" in w for w in result.summary["warnings"])


# --- reading voids --------------------------------------------------------------------------------------------


def _doc():
    doc = ezdxf.new("R2018")
    doc.header["$INSUNITS"] = 4
    return doc, doc.modelspace()


def _one(doc, layers=None, frame=Frame()):
    voids = read_voids(doc, frame, layers, "test.dxf")
    assert len(voids) == 1
    return voids[0]


def _hexagon(cx=0.0, cy=0.0, r=100.0):
    return [(cx + r * math.cos(k * math.pi / 3), cy + r * math.sin(k * math.pi / 3)) for k in range(6)]


def _fillet_hexagon(r=100.0, f=15.0):
    """A hexagon with every corner rounded by an arc of radius f tangent to both sides (by construction)."""
    pts = np.array(_hexagon(r=r))
    out = []
    turn = math.pi / 3  # a hexagon turns 60 degrees at each corner
    back = f * math.tan(turn / 2)
    for i in range(6):
        p, prev, nxt = pts[i], pts[i - 1], pts[(i + 1) % 6]
        a = p + back * (prev - p) / np.linalg.norm(prev - p)
        b = p + back * (nxt - p) / np.linalg.norm(nxt - p)
        out += [(*a, math.tan(turn / 4)), (*b, 0.0)]
    return out


def test_an_eased_hexagon_has_six_sides_a_chamfered_one_twelve():
    doc, msp = _doc()
    msp.add_lwpolyline(_fillet_hexagon(), format="xyb", close=True, dxfattribs={"layer": VOID_LAYERS[0]})
    assert _one(doc).sides == 6  # the fillets are eased corners, not sides
    doc, msp = _doc()
    chamfered = [(x, y, 0.0) for x, y, _ in _fillet_hexagon()]
    msp.add_lwpolyline(chamfered, format="xyb", close=True, dxfattribs={"layer": VOID_LAYERS[0]})
    assert _one(doc).sides == 12  # a chamfer is a short straight side (docs/check.md)


def test_a_point_on_a_straight_side_is_no_corner_and_a_curved_side_makes_sides_zero():
    pts = np.array(_hexagon() + [(0.0, 0.0)])[[0, 1, 2, 3, 4, 5]]
    split = np.insert(pts, 1, (pts[0] + pts[1]) / 2, axis=0)  # a vertex in the middle of the first side
    assert corner_count(split, np.zeros(7)) == 6
    d_shape = np.array([[0.0, 0.0], [100.0, 0.0], [100.0, 100.0], [0.0, 100.0]])
    assert corner_count(d_shape, np.array([0.0, 0.3, 0.0, 0.0])) == 0  # the right side bows out: not an easing
    assert corner_count(d_shape, np.zeros(4)) == 4


def test_stadia_in_any_drawing_style_are_slots():
    # width 60, overall length 200, axis along 30 degrees, centre (500, 400): by construction
    a = math.radians(30.0)
    u, n = np.array([math.cos(a), math.sin(a)]), np.array([-math.sin(a), math.cos(a)])
    c = np.array([500.0, 400.0])
    p = [c - 70 * u - 30 * n, c + 70 * u - 30 * n, c + 70 * u + 30 * n, c - 70 * u + 30 * n]
    styles = []
    doc, msp = _doc()  # 2D POLYLINE drawn clockwise: bulges -1
    cw = [(*p[0], -1.0), (*p[3], 0.0), (*p[2], -1.0), (*p[1], 0.0)]
    msp.add_polyline2d(cw, format="xyb", close=True, dxfattribs={"layer": "LACUNA-VOID-SLOT"})
    styles.append(doc)
    doc, msp = _doc()  # two LINEs and two ARCs
    layer = {"layer": "LACUNA-VOID-SLOT"}
    msp.add_line(p[0], p[1], dxfattribs=layer)
    msp.add_line(p[2], p[3], dxfattribs=layer)
    deg = math.degrees(a)
    msp.add_arc(c + 70 * u, 30.0, deg - 90, deg + 90, dxfattribs=layer)
    msp.add_arc(c - 70 * u, 30.0, deg + 90, deg + 270, dxfattribs=layer)
    styles.append(doc)
    for doc in styles:
        v = _one(doc)
        assert v.family == "slot"
        assert (v.size_mm, v.length_mm, v.angle_deg) == pytest.approx((60.0, 200.0, 30.0), abs=1e-6)
        assert v.centre == pytest.approx((500.0, 400.0), abs=1e-6)
        # stadium area: w (L - w) + pi w^2 / 4, flattened to 0.01 mm chords
        assert v.area_mm2 == pytest.approx(60 * 140 + math.pi * 900, rel=1e-3)


def test_almost_stadia_and_polyline_circles():
    doc, msp = _doc()
    msp.add_lwpolyline([(0, 0, 0), (100, 0, 1), (100, 50, 0), (0, 50, 0.9)], format="xyb", close=True,
                       dxfattribs={"layer": "LACUNA-VOID-SLOT"})
    notes: list[str] = []
    v = read_voids(doc, Frame(), None, "t.dxf", warnings=notes)[0]
    assert v.family == "polygon" and v.sides == 0  # one end is not a half circle
    assert any("drawn as a polygon on the slot layer" in n for n in notes)
    doc, msp = _doc()
    msp.add_lwpolyline([(0, 0, 1), (64, 0, 1)], format="xyb", close=True, dxfattribs={"layer": "LACUNA-VOID-BORE"})
    v = _one(doc)
    assert (v.family, v.size_mm, v.centre) == ("bore", pytest.approx(64.0), pytest.approx((32.0, 0.0)))


def test_free_curves_and_hatches_are_polygons_without_sides():
    doc, msp = _doc()
    msp.add_ellipse((0, 0), major_axis=(80, 0), ratio=0.5, dxfattribs={"layer": "LACUNA-VOID-POLYGON"})
    v = _one(doc)
    # ellipse area pi a b (closed form), flattened to 0.01 mm
    assert (v.family, v.sides) == ("polygon", 0) and v.area_mm2 == pytest.approx(math.pi * 80 * 40, rel=1e-3)
    doc, msp = _doc()
    hatch = msp.add_hatch(dxfattribs={"layer": "LACUNA-VOID-POLYGON"})
    hatch.paths.add_polyline_path([(0, 0), (120, 0), (120, 80), (0, 80)], is_closed=True)
    v = _one(doc)
    assert (v.family, v.sides, v.handle) == ("polygon", 0, hatch.dxf.handle)
    assert v.area_mm2 == pytest.approx(120 * 80, rel=1e-12)


def test_blocks_extra_layers_and_the_frame():
    doc, msp = _doc()
    block = doc.blocks.new("HOLE")
    block.add_circle((0, 0), 25)
    ref = msp.add_blockref("HOLE", (1000, 2000), dxfattribs={"layer": "LACUNA-VOID-BORE"})
    msp.add_circle((10, 10), 5, dxfattribs={"layer": "HOLES"})
    # frame: drawing turned 90 degrees, origin (1000, 1000): local = R(-90) (p - origin)
    frame = Frame(origin=(1000.0, 1000.0), angle_deg=90.0)
    voids = read_voids(doc, frame, None, "t.dxf")
    assert len(voids) == 1
    assert voids[0].handle.startswith(f"{ref.dxf.handle}/") and voids[0].size_mm == pytest.approx(50.0)
    assert voids[0].centre == pytest.approx((1000.0, 0.0), abs=1e-9)
    voids = read_voids(doc, frame, list(VOID_LAYERS) + ["holes"], "t.dxf")
    assert len(voids) == 2 and {v.layer for v in voids} == {"LACUNA-VOID-BORE", "HOLES"}


def test_bad_void_drawings_name_the_entity():
    doc, msp = _doc()
    line = msp.add_lwpolyline([(0, 0), (100, 0), (100, 50)], dxfattribs={"layer": "LACUNA-VOID-POLYGON"})
    with pytest.raises(LacunaError) as err:
        read_voids(doc, Frame(), None, "t.dxf")
    assert line.dxf.handle in err.value.where and "LACUNA-VOID-POLYGON" in err.value.where
    assert "Close the shape" in err.value.hint
    doc, msp = _doc()
    bow = msp.add_lwpolyline([(0, 0), (200, 0), (200, 100), (100, -50), (0, 100)], close=True,
                             dxfattribs={"layer": "LACUNA-VOID-POLYGON"})
    with pytest.raises(LacunaError) as err:
        read_voids(doc, Frame(), None, "t.dxf")
    assert bow.dxf.handle in err.value.where and "crosses itself" in err.value.message


def test_a_void_layer_that_is_also_a_panel_layer_is_refused():
    with pytest.raises(LacunaError) as err:
        check_drawing(FIX / "clean.dxf", JOB, layers="OPENING")
    assert err.value.where == "--layers" and "openings" in err.value.message
