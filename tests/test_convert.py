"""`lacuna convert`: DXF -> SVG -> DXF keeps closed outlines; SVG read per the SVG 1.1 rules; exact unit changes.

Sources of the check values: SVG 1.1 (W3C Recommendation, 2011) section 7 (user space, y down, transform
lists), section 8.3 (path data) and appendix F.6 (arc flags: sweep-flag 1 = "positive-angle" direction, which
is clockwise on screen with y down); the DXF reference for the bulge (tan of a quarter of the included angle,
positive counter-clockwise, LWPOLYLINE group code 42) and $INSUNITS codes (1 = inches, 4 = mm, 6 = m);
1 in = 25.4 mm exactly (international yard and pound agreement, 1959); CSS Values and Units Level 3 for
1 in = 96 px.
"""

from __future__ import annotations

import io
import math
import xml.etree.ElementTree as ET

import cairosvg
import ezdxf
import numpy as np
import pytest
from PIL import Image

from toolkit.convert import change_units, convert, dxf_to_svg, svg_to_dxf
from toolkit.convert.record import LACUNA_NS
from toolkit.errors import LacunaError

LAYER = f"{{{LACUNA_NS}}}layer"


def read_dxf(data: bytes):
    return ezdxf.read(io.StringIO(data.decode("utf-8")))


def outlines_drawing(unit_code: int = 4):
    """Closed outlines with arcs: a slot, an eased square turned 30 degrees far out, a big-arc shape, holes."""
    doc = ezdxf.new("R2018")
    doc.header["$INSUNITS"] = unit_code
    msp = doc.modelspace()
    for name in ("OUTLINES", "HOLES", "NOTES"):
        doc.layers.add(name)
    q = math.tan(math.radians(22.5))  # quarter circle
    a = math.radians(30.0)
    far = np.array([6_000_000.0, 2_000_000.0])

    def turned(x, y):
        return far + np.array([x * math.cos(a) - y * math.sin(a), x * math.sin(a) + y * math.cos(a)])

    eased = [(20, 0, 0), (180, 0, q), (200, 20, 0), (200, 180, q), (180, 200, 0), (20, 200, q), (0, 180, 0),
             (0, 20, q)]
    shapes = [
        [(0, 0, 0), (300, 0, 1), (300, 100, 0), (0, 100, 1)],                 # slot, half circles
        [(*turned(x, y), b) for x, y, b in eased],                           # eased square, turned, far out
        [(1000, 0, 0), (1100, 0, 0.4), (1100, 50, 0), (1000, 50, -2.0)],      # a 253.7 deg arc turning back
        [(0, 500, 0), (400, 500, 0), (400, 700, -0.25), (0, 700, 0)],         # straight sides and one flat arc
    ]
    for pts in shapes:
        msp.add_lwpolyline(pts, format="xyb", close=True, dxfattribs={"layer": "OUTLINES"})
    circles = [((600.0, 300.0), 40.0), ((float(far[0]), float(far[1])), 12.5)]
    for c, r in circles:
        msp.add_circle(c, r, dxfattribs={"layer": "HOLES"})
    msp.add_text("not an outline", dxfattribs={"layer": "NOTES", "insert": (0, -200), "height": 30})
    return doc, shapes, circles


def test_dxf_svg_dxf_keeps_closed_outlines():
    doc, shapes, circles = outlines_drawing()
    svg = dxf_to_svg(doc, layers=["OUTLINES", "holes"])
    back = read_dxf(svg_to_dxf(svg))
    assert back.header["$INSUNITS"] == 4
    polylines = list(back.modelspace().query('LWPOLYLINE[layer=="OUTLINES"]'))
    assert len(polylines) == len(shapes)
    worst = 0.0
    for original in shapes:
        want = np.array(original, dtype=float)
        match = min(polylines, key=lambda p: np.abs(np.array(p.get_points("xyb"))[:1, :2] - want[:1, :2]).sum())
        got = np.array(match.get_points("xyb"))
        assert match.closed and got.shape == want.shape
        worst = max(worst, float(np.abs(got - want).max()))
    assert worst < 1e-6
    got_circles = sorted(((tuple(c.dxf.center)[:2], c.dxf.radius) for c in back.modelspace().query("CIRCLE")),
                         key=lambda t: t[1])
    for (c, r), (gc, gr) in zip(sorted(circles, key=lambda t: t[1]), got_circles):
        assert math.dist(c, gc) < 1e-6 and abs(r - gr) < 1e-6
    assert not list(back.modelspace().query('*[layer=="NOTES"]'))  # not chosen, not drawn, not back


def test_svg_holds_chosen_layers_only_and_is_sized_in_mm():
    doc = ezdxf.new("R2018")
    doc.header["$INSUNITS"] = 6  # metres
    for name in ("PANEL", "NOTES"):
        doc.layers.add(name)
    doc.modelspace().add_lwpolyline([(0, 0), (3.0, 0), (3.0, 0.6), (0, 0.6)], close=True,
                                    dxfattribs={"layer": "PANEL"})
    doc.modelspace().add_text("title", dxfattribs={"layer": "NOTES", "insert": (0, 1.0), "height": 0.1})
    svg = dxf_to_svg(doc, layers=["PANEL"])
    root = ET.fromstring(svg)
    groups = [g.get(LAYER) for g in root.iter("{http://www.w3.org/2000/svg}g") if g.get(LAYER)]
    assert groups == ["PANEL"]
    # 3 m x 0.6 m at 1:1 is 3000 x 600 mm, plus the 5 mm page margin on each side.
    assert root.get("width") == "3010mm" and root.get("height") == "610mm"
    half = ET.fromstring(dxf_to_svg(doc, layers=["PANEL"], scale=2))
    assert half.get("width") == "1510mm"  # 1:2


def test_svg_renders_with_ink_inside_the_outline():
    doc, _shapes, _circles = outlines_drawing()
    doc.modelspace().delete_entity(doc.modelspace().query("LWPOLYLINE")[1])  # keep the picture compact
    for c in doc.modelspace().query("CIRCLE"):
        if c.dxf.center.x > 1e6:
            doc.modelspace().delete_entity(c)
    png = cairosvg.svg2png(bytestring=dxf_to_svg(doc, layers=["OUTLINES", "HOLES"]).encode(), output_width=600)
    pixels = np.asarray(Image.open(io.BytesIO(png)).convert("RGBA")).astype(float)
    ink = pixels[..., 3] > 0
    assert ink.mean() > 0.002  # lines were drawn, not a blank sheet, despite 1e15-unit coordinates


def hand_svg(body: str, width="100mm", height="50mm", view="0 0 100 50") -> str:
    return f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="{view}">{body}</svg>'


def test_svg_arcs_flags_flip_and_transforms():
    body = (
        # A half circle from (10,40) to (30,40) with sweep-flag 1: over the top on screen; the flags written
        # without separators as the grammar allows ("a10 10 0 0120 0").
        '<path d="M10 40 a10 10 0 0120 0 Z"/>'
        '<g transform="translate(50 25) rotate(90)"><circle cx="0" cy="-20" r="5"/></g>'
        '<rect x="60" y="5" width="30" height="20" rx="4"/>'
        '<ellipse cx="80" cy="40" rx="8" ry="4"/>'
        '<path d="M0 0 L 5 5"/>'  # open: left out
    )
    notes: list[str] = []
    doc = read_dxf(svg_to_dxf(hand_svg(body), messages=notes))
    msp = doc.modelspace()
    polys = list(msp.query("LWPOLYLINE"))
    half = [p for p in polys if len(p) == 2][0]
    # y flips about the view's height (50): (10,40) -> (10,10); clockwise in the y-up drawing: bulge -1.
    assert np.allclose(half.get_points("xyb"), [(10, 10, -1.0), (30, 10, 0.0)], atol=1e-12)
    (circle,) = msp.query("CIRCLE")
    # (0,-20) turned 90 deg -> (20, 0), moved to (70, 25) in SVG; flipped: (70, 25).
    assert np.allclose(tuple(circle.dxf.center)[:2], (70.0, 25.0), atol=1e-12) and circle.dxf.radius == 5.0
    rect = [p for p in polys if len(p) == 8][0]
    bulges = [b for *_, b in rect.get_points("xyb")]
    quarter = math.tan(math.radians(22.5))
    assert sorted(np.round(bulges, 12)) == [-round(quarter, 12)] * 4 + [0.0] * 4
    area = abs(_area(rect))
    assert area == pytest.approx(30 * 20 - (4 - math.pi) * 4 * 4, rel=1e-12)  # corners eased by r = 4
    ellipse = [p for p in polys if len(p) > 8][0]  # not circular: flattened within 0.01 mm
    assert all(b == 0 for *_, b in ellipse.get_points("xyb"))
    pts = np.array(ellipse.get_points("xy"))
    r = np.hypot((pts[:, 0] - 80) / 8, (pts[:, 1] - 10) / 4)
    assert np.allclose(r, 1.0, atol=1e-12)
    assert any("1 open path" in n for n in notes)


def _area(poly) -> float:
    """Area of a polyline with bulges: the straight polygon plus each arc's segment (signed by its bulge)."""
    v = poly.get_points("xyb")
    total = 0.0
    for (x0, y0, b), (x1, y1, _) in zip(v, v[1:] + v[:1]):
        total += 0.5 * (x0 * y1 - x1 * y0)
        if b:
            theta = 4 * math.atan(b)
            c = math.hypot(x1 - x0, y1 - y0)
            r = c / (2 * math.sin(abs(theta) / 2))
            total += math.copysign(0.5 * r * r * (abs(theta) - math.sin(abs(theta))), theta)
    return total


def test_svg_physical_size_sets_the_scale():
    # 1 user unit = 1 px = 1/96 in = 25.4/96 mm (no viewBox: user units are CSS pixels).
    svg = '<svg xmlns="http://www.w3.org/2000/svg" width="96" height="96"><rect width="96" height="48"/></svg>'
    doc = read_dxf(svg_to_dxf(svg))
    pts = np.array(doc.modelspace().query("LWPOLYLINE")[0].get_points("xy"))
    assert np.ptp(pts[:, 0]) == pytest.approx(25.4, rel=1e-15) and np.ptp(pts[:, 1]) == pytest.approx(12.7)
    inches = read_dxf(svg_to_dxf(svg, unit="in"))
    assert inches.header["$INSUNITS"] == 1
    pts = np.array(inches.modelspace().query("LWPOLYLINE")[0].get_points("xy"))
    assert np.ptp(pts[:, 0]) == pytest.approx(1.0, rel=1e-15)


def test_unit_change_scales_by_the_exact_factor(tmp_path):
    doc = ezdxf.new("R2018")
    doc.header["$INSUNITS"] = 1  # inches
    msp = doc.modelspace()
    line = msp.add_line((1.0, 2.0), (13.5, -7.25))
    circle = msp.add_circle((100.0, 10.0), 3.0)
    poly = msp.add_lwpolyline([(0, 0, 0), (12, 0, 1), (12, 6, 0)], format="xyb", close=True)
    block = doc.blocks.new("PLATE")
    block.add_line((0, 0), (1, 0))
    ref = msp.add_blockref("PLATE", (10.0, 20.0), dxfattribs={"xscale": 2.0, "yscale": 2.0})
    sheet = doc.layouts.new("Sheet")
    sheet.add_viewport(center=(100, 100), size=(150, 100), view_center_point=(50, 10), view_height=40)
    path = tmp_path / "inch.dxf"
    doc.saveas(path)
    out = read_dxf(convert(path, tmp_path / "mm.dxf", units="mm"))
    assert out.header["$INSUNITS"] == 4
    f = 25.4  # exact (1959 agreement)
    o = out.entitydb
    assert np.allclose(tuple(o[line.dxf.handle].dxf.start), (1.0 * f, 2.0 * f, 0), rtol=1e-15, atol=0)
    assert np.allclose(tuple(o[line.dxf.handle].dxf.end), (13.5 * f, -7.25 * f, 0), rtol=1e-15, atol=0)
    assert o[circle.dxf.handle].dxf.radius == pytest.approx(3.0 * f, rel=1e-15)
    got = np.array(o[poly.dxf.handle].get_points("xyb"))
    assert np.allclose(got, [(0, 0, 0), (12 * f, 0, 1), (12 * f, 6 * f, 0)], rtol=1e-15, atol=1e-12)
    r = o[ref.dxf.handle]
    assert tuple(r.dxf.insert)[:2] == pytest.approx((10.0 * f, 20.0 * f)) and r.dxf.xscale == pytest.approx(2 * f)
    vp = [v for v in out.layouts.get("Sheet").query("VIEWPORT") if v.dxf.status != 1][-1]
    assert vp.dxf.view_height == pytest.approx(40 * f) and tuple(vp.dxf.view_center_point)[:2] == pytest.approx(
        (50 * f, 10 * f))
    assert out.audit().has_errors is False
    # And back: mm -> in divides by exactly 25.4.
    path2 = tmp_path / "mm.dxf"
    path2.write_bytes(convert(path, path2.with_name("x.dxf"), units="mm"))
    again = read_dxf(convert(path2, tmp_path / "in.dxf", units="in"))
    assert tuple(again.entitydb[line.dxf.handle].dxf.end)[:2] == pytest.approx((13.5, -7.25), rel=1e-15)


def test_no_closed_paths_is_refused():
    svg = hand_svg('<path d="M0 0 L10 10 L20 0"/><line x1="0" y1="0" x2="5" y2="5"/>')
    with pytest.raises(LacunaError) as err:
        svg_to_dxf(svg, where="sketch.svg")
    assert str(err.value).startswith("sketch.svg: the SVG has no closed paths to convert")
    assert err.value.where == "sketch.svg" and "Z" in err.value.hint


def test_bad_inputs_are_named(tmp_path):
    with pytest.raises(LacunaError) as err:
        svg_to_dxf("<svg><rect", where="broken.svg")
    assert err.value.where == "broken.svg"
    with pytest.raises(LacunaError) as err:
        svg_to_dxf(hand_svg('<rect width="5" height="5"/>'), dxf_version="R15")
    assert err.value.where == "dxf_version" and "R2018" in err.value.hint
    with pytest.raises(LacunaError) as err:
        svg_to_dxf(hand_svg('<rect width="5" height="5"/>'), unit="yd")
    assert "--units" in err.value.where
    doc, _s, _c = outlines_drawing()
    with pytest.raises(LacunaError) as err:
        dxf_to_svg(doc, layers=["ROOF"])
    assert "ROOF" in err.value.message and "OUTLINES" in err.value.message
    unitless = ezdxf.new("R2018")
    unitless.header["$INSUNITS"] = 0
    unitless.modelspace().add_line((0, 0), (1, 1))
    with pytest.raises(LacunaError) as err:
        change_units(unitless, "mm", where="plan.dxf")
    assert err.value.where == "plan.dxf, header $INSUNITS"
    src = tmp_path / "a.dxf"
    doc.saveas(src)
    with pytest.raises(LacunaError):
        convert(src, tmp_path / "b.png")
    with pytest.raises(LacunaError):
        convert(src, tmp_path / "b.dxf")  # DXF -> DXF with no --units
    with pytest.raises(LacunaError):
        convert(src, src, units="m")
