"""Reading panels from DXF drawings (toolkit.dxf_in).

Check values and their sources:
- the sample panel's sizes, openings and markers are the scenario drawn by tests/drawings.py: what was drawn
  is what must be read back;
- areas of circles, ellipses and rectangles: elementary geometry; a polygon inscribed in a convex curve with
  every chord within t of the curve loses at most (perimeter x t) of the area (elementary geometry);
- $INSUNITS codes 1 in, 2 ft, 4 mm, 5 cm, 6 m, 0 unitless: DXF reference, header section;
- 1 in = 25.4 mm and 1 ft = 304.8 mm exactly: international yard and pound agreement (1959);
- bulge = tan(theta / 4), theta the included angle, positive counter-clockwise: DXF reference;
- a circle is exactly a rational quadratic B-spline (Piegl & Tiller, The NURBS Book, ch. 7; from memory);
- turning axes by an angle a turns a vector's components by -a: elementary geometry.
"""

from __future__ import annotations

import math

import ezdxf
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from ezdxf.math import rational_bspline_from_arc

import drawings as dw
from toolkit.dxf_in import XDATA_APPID, marker_xdata, read_document, read_drawing
from toolkit.errors import LacunaError
from toolkit.model import Layers

WAYS = ["mm", "m", "insert", "far"]
CHORD_MM = 0.1  # read_drawing's default chord tolerance


@pytest.fixture(scope="module")
def sample_readings(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("sample")
    return {way: read_drawing(dw.sample_drawing(tmp, way)) for way in WAYS}


def _panel_doc(unit="mm", pl=None, **kw):
    """A drawing holding only the outline of the sample panel (3000 x 600 mm)."""
    doc = dw.new_doc(unit, **kw)
    dw.add_rectangle(doc.modelspace(), pl or dw.Placement(unit), 0, 0, dw.WIDTH, dw.HEIGHT)
    return doc


def _read(doc, **kw):
    return read_document(doc, path="test.dxf", **kw)


def _error(doc, **kw) -> LacunaError:
    with pytest.raises(LacunaError) as info:
        _read(doc, **kw)
    return info.value


# --- one panel drawn four ways -------------------------------------------------------------------------------


@pytest.mark.parametrize("way", WAYS)
def test_sample_panel_read_as_drawn(sample_readings, way):
    d = sample_readings[way]
    # Sizes as drawn (scenario).
    assert d.width_mm == pytest.approx(3000.0, abs=1e-6)
    assert d.height_mm == pytest.approx(600.0, abs=1e-6)
    assert d.unit == ("m" if way == "m" else "mm")
    round_, rect, slot = d.openings  # sorted left to right
    r = dw.ROUND_DIAMETER / 2
    # Inscribed polygon: 0 < pi r^2 - A <= 2 pi r t (elementary geometry).
    assert 0 < math.pi * r**2 - round_.shape.area <= 2 * math.pi * r * CHORD_MM
    assert round_.shape.centroid.coords[0] == pytest.approx(dw.ROUND_CENTRE, abs=1e-6)
    assert rect.shape.area == pytest.approx(400 * 200, abs=1e-6)
    assert rect.shape.centroid.coords[0] == pytest.approx((1500, 300), abs=1e-6)
    slot_area = 200 * 160 + math.pi * 80**2  # rectangle + two half circles
    assert 0 < slot_area - slot.shape.area <= 2 * math.pi * 80 * CHORD_MM
    assert slot.shape.centroid.coords[0] == pytest.approx((2400, 300), abs=1e-6)
    (keep,) = d.keep
    assert keep.shape.area == pytest.approx(100 * 100, abs=1e-6)
    line, point = d.supports
    assert np.allclose(line.points, dw.SUPPORT_LINE, atol=1e-6) and line.fix == "xy"
    assert np.allclose(point.points, [dw.SUPPORT_POINT], atol=1e-6) and point.fix == "y"
    text_load, xdata_load = d.loads
    assert np.allclose(text_load.at, dw.LOAD_TEXT_AT, atol=1e-6)
    assert np.allclose(text_load.force_N, (0, -40_000), atol=1e-6) and text_load.case == "main"
    assert np.allclose(xdata_load.at, dw.LOAD_XDATA_AT, atol=1e-6)
    assert np.allclose(xdata_load.force_N, (0, -12_500), atol=1e-6) and xdata_load.case == "wind"
    assert not [w for w in d.warnings if "gap" in w or "overlap" in w]


@pytest.mark.parametrize("way", WAYS[1:])
def test_four_ways_give_the_same_drawing(sample_readings, way):
    a, b = sample_readings["mm"], sample_readings[way]
    assert b.width_mm == pytest.approx(a.width_mm, abs=1e-6)
    assert b.height_mm == pytest.approx(a.height_mm, abs=1e-6)
    for ra, rb in zip(a.openings + a.keep, b.openings + b.keep, strict=True):
        assert rb.layer == ra.layer
        assert rb.shape.area == pytest.approx(ra.shape.area, abs=1e-6)
        assert rb.shape.centroid.coords[0] == pytest.approx(ra.shape.centroid.coords[0], abs=1e-6)
    for sa, sb in zip(a.supports, b.supports, strict=True):
        assert sb.fix == sa.fix and np.allclose(sb.points, sa.points, atol=1e-6)
    for la, lb in zip(a.loads, b.loads, strict=True):
        assert lb.case == la.case
        assert np.allclose(lb.at, la.at, atol=1e-6) and np.allclose(lb.force_N, la.force_N, atol=1e-6)


@pytest.mark.parametrize("way", WAYS)
def test_frame_maps_drawing_to_local(sample_readings, way):
    """The Frame read back agrees with the placement the drawing was built with."""
    d, pl = sample_readings[way], dw.PLACEMENTS[way]
    for local in [(0, 0), (3000, 0), (3000, 600), (1234.5, 321.0)]:
        assert d.frame.to_local(pl.point(local)) == pytest.approx(local, abs=1e-6)
        assert d.frame.to_drawing(local) == pytest.approx(pl.point(local), abs=1e-6 / pl.mm_per_unit)
    assert d.frame.unit == pl.unit and d.frame.mm_per_unit == dw.MM_PER_UNIT[pl.unit]


@settings(max_examples=25, deadline=None)
@given(
    angle=st.floats(-180, 180),
    x=st.floats(-1e7, 1e7),
    y=st.floats(-1e7, 1e7),
    unit=st.sampled_from(["mm", "cm", "m", "in", "ft"]),
)
def test_any_placement_reads_the_same(angle, x, y, unit):
    """Turned anywhere, placed anywhere up to 10 km out, in any unit: the same panel (sizes as drawn)."""
    pl = dw.Placement(unit, angle, (x / dw.MM_PER_UNIT[unit], y / dw.MM_PER_UNIT[unit]))
    doc = _panel_doc(unit, pl=pl)
    dw.add_circle(doc.modelspace(), pl, (600, 200), 200)
    d = _read(doc)
    size = (d.width_mm, d.height_mm)
    assert sorted(size) == pytest.approx([600, 3000], abs=1e-6)
    (hole,) = d.openings
    assert 0 < math.pi * 100**2 - hole.shape.area <= 2 * math.pi * 100 * CHORD_MM
    # the hole's drawn centre, through the frame read back, is the centroid of the hole read back
    assert d.frame.to_local(pl.point((600, 200))) == pytest.approx(hole.shape.centroid.coords[0], abs=1e-6)


def test_far_coordinates_keep_precision(sample_readings):
    """6,000,000 mm from the origin, sizes still come out to well under a micrometre."""
    d = sample_readings["far"]
    assert d.frame.origin == pytest.approx((6_000_000.0, 2_000_000.0), abs=1e-6)
    assert d.frame.angle_deg == pytest.approx(30.0, abs=1e-9)
    assert abs(d.width_mm - 3000.0) < 1e-6 and abs(d.height_mm - 600.0) < 1e-6


def test_outline_handles_and_block_handles(sample_readings):
    assert len(sample_readings["m"].outline_handles) == 4  # four LINEs
    (handle,) = sample_readings["insert"].outline_handles
    assert "/" in handle  # INSERT handle / handle in the block


# --- the frame rule ------------------------------------------------------------------------------------------


@pytest.mark.parametrize("angle", [0.0, 30.0, 44.0, 46.0, 90.0, 135.0, 180.0, -60.0, 225.0, -44.9])
def test_local_x_along_the_side_nearest_drawing_x(angle):
    """Local x runs along the side whose direction lies in (-45, 45] degrees of drawing x (the reader's rule)."""
    pl = dw.Placement("mm", angle, (1000.0, -500.0))
    d = _read(_panel_doc(pl=pl))
    long_side_is_x = 0 < (angle + 45) % 180 <= 90
    assert (d.width_mm, d.height_mm) == pytest.approx((3000, 600) if long_side_is_x else (600, 3000), abs=1e-6)
    assert -45 < d.frame.angle_deg <= 45
    corners = [pl.point(c) for c in [(0, 0), (3000, 0), (3000, 600), (0, 600)]]
    local = np.array([d.frame.to_local(c) for c in corners])
    assert local.min(axis=0) == pytest.approx((0, 0), abs=1e-6)  # origin: corner with least local coords
    assert local.max(axis=0) == pytest.approx((d.width_mm, d.height_mm), abs=1e-6)


def test_collinear_extra_vertices_are_fine():
    doc = dw.new_doc("mm")
    dw.add_rectangle(doc.modelspace(), dw.Placement(), 0, 0, 3000, 600, extra_vertices=True)
    d = _read(doc)
    assert (d.width_mm, d.height_mm) == pytest.approx((3000, 600))


# --- files, versions, units ----------------------------------------------------------------------------------


@pytest.mark.parametrize("version", ["R12", "R2000", "R2007", "R2018"])
@pytest.mark.parametrize("fmt", ["asc", "bin"])
def test_versions_and_binary(tmp_path, version, fmt):
    doc = dw.new_doc("mm", version=version)
    msp = doc.modelspace()
    dw.add_rectangle(msp, dw.Placement(), 0, 0, 3000, 600, style="polyline")  # R12 has no LWPOLYLINE
    dw.add_circle(msp, dw.Placement(), (600, 300), 200)
    path = dw.write(doc, tmp_path / f"p-{version}.dxf", fmt=fmt)
    d = read_drawing(path)
    assert (d.width_mm, d.height_mm) == pytest.approx((3000, 600))
    assert len(d.openings) == 1
    if version == "R12":  # R12 has no $INSUNITS: taken as mm, with a warning
        assert any("millimetres" in w for w in d.warnings)


def test_input_file_is_not_touched(tmp_path):
    path = dw.sample_drawing(tmp_path, "mm")
    before, mtime = path.read_bytes(), path.stat().st_mtime_ns
    read_drawing(path)
    assert path.read_bytes() == before and path.stat().st_mtime_ns == mtime
    assert sorted(p.name for p in tmp_path.iterdir()) == [path.name]


def test_not_a_dxf(tmp_path):
    path = tmp_path / "notes.dxf"
    path.write_text("these are notes, not a drawing\n")
    with pytest.raises(LacunaError, match="is not a DXF drawing") as info:
        read_drawing(path)
    assert info.value.where == str(path) and info.value.hint


def test_other_bytes_are_not_a_dxf(tmp_path):
    path = tmp_path / "scan.dxf"
    path.write_bytes(b"%PDF-1.4\nsomething else entirely\n")  # ezdxf's recover reader would make it empty
    with pytest.raises(LacunaError, match="is not a DXF drawing"):
        read_drawing(path)


def test_missing_file(tmp_path):
    with pytest.raises(LacunaError, match="no such file"):
        read_drawing(tmp_path / "absent.dxf")


def test_damaged_file_is_recovered_with_warnings(tmp_path):
    path = dw.sample_drawing(tmp_path, "mm")
    text = path.read_text()
    at = text.rindex("ENDSEC")
    path.write_text(text[:at] + "XXXXXX" + text[at + 6 :])  # the ENTITIES section loses its end marker
    d = read_drawing(path)
    assert d.width_mm == pytest.approx(3000) and len(d.openings) == 3
    assert any("recovery mode" in w for w in d.warnings)
    assert any("repaired" in w for w in d.warnings)  # the audit's fixes are reported


@pytest.mark.parametrize(
    "code, unit, size, expected_mm",
    [
        (1, "in", (120.0, 24.0), (3048.0, 609.6)),  # 1 in = 25.4 mm
        (2, "ft", (10.0, 2.0), (3048.0, 609.6)),  # 1 ft = 304.8 mm
        (5, "cm", (300.0, 60.0), (3000.0, 600.0)),
        (6, "m", (3.0, 0.6), (3000.0, 600.0)),
        (4, "mm", (3000.0, 600.0), (3000.0, 600.0)),
    ],
)
def test_units(code, unit, size, expected_mm):
    doc = ezdxf.new("R2018")
    doc.header["$INSUNITS"] = code
    doc.modelspace().add_lwpolyline([(0, 0), (size[0], 0), size, (0, size[1])], close=True,
                                    dxfattribs={"layer": "PANEL"})
    d = _read(doc)
    assert d.unit == unit
    assert (d.width_mm, d.height_mm) == pytest.approx(expected_mm, rel=1e-12)


def test_unitless_is_mm_with_a_warning():
    d = _read(_panel_doc(None, pl=dw.Placement("mm")))
    assert d.unit == "mm" and d.width_mm == pytest.approx(3000)
    assert any("unitless" in w and "millimetres" in w for w in d.warnings)


def test_a_file_without_a_header_is_unitless_not_metres(tmp_path):
    # An R12 export of the entities alone, written here tag by tag (no HEADER, no TABLES: DXF reference, "DXF
    # file structure", a minimal file is an ENTITIES section and EOF; from memory). ezdxf gives such a file its
    # new-drawing header, whose $INSUNITS is 6 (metres); the drawing says nothing of its unit, so it is read as a
    # unitless one: millimetres, with the warning, not a 3.6 km beam.
    tags = ["0", "SECTION", "2", "ENTITIES", "0", "POLYLINE", "8", "PANEL", "66", "1", "70", "1"]
    for x, y in ((0, 0), (3600, 0), (3600, 750), (0, 750)):
        tags += ["0", "VERTEX", "8", "PANEL", "10", f"{x:.1f}", "20", f"{y:.1f}", "30", "0.0"]
    tags += ["0", "SEQEND", "8", "PANEL", "0", "ENDSEC", "0", "EOF"]
    path = tmp_path / "entities-only.dxf"
    path.write_text("\n".join(tags) + "\n")
    assert ezdxf.readfile(path).header.get("$INSUNITS") == 6  # what ezdxf alone would say
    d = read_drawing(path)
    assert d.unit == "mm" and (d.width_mm, d.height_mm) == pytest.approx((3600, 750), rel=1e-12)
    assert any("no length unit" in w and "millimetres" in w for w in d.warnings)
    # a file with a header keeps its unit: the same entities in metres, written with their header by ezdxf
    doc = ezdxf.new("R2000", units=6)
    doc.modelspace().add_lwpolyline([(0, 0), (3.6, 0), (3.6, 0.75), (0, 0.75)], close=True,
                                    dxfattribs={"layer": "PANEL"})
    doc.saveas(tmp_path / "metres.dxf")
    d = read_drawing(tmp_path / "metres.dxf")
    assert d.unit == "m" and (d.width_mm, d.height_mm) == pytest.approx((3600, 750), rel=1e-12)


def test_unknown_unit_code():
    doc = _panel_doc()
    doc.header["$INSUNITS"] = 14  # decimetres in the DXF reference: not one of ours
    err = _error(doc)
    assert "$INSUNITS = 14" in str(err) and "mm" in err.hint


# --- outline errors ------------------------------------------------------------------------------------------


def test_empty_drawing():
    err = _error(dw.new_doc("mm"))
    assert "empty" in err.message and err.hint


def test_missing_outline_layer_lists_layers():
    doc = dw.new_doc("mm")
    doc.layers.add("WALLS")
    doc.modelspace().add_line((0, 0), (1, 1), dxfattribs={"layer": "WALLS"})
    err = _error(doc)
    assert "'PANEL'" in err.message and "'WALLS'" in err.message and "layer PANEL" in err.where


def test_renamed_outline_layer():
    doc = dw.new_doc("mm")
    dw.add_rectangle(doc.modelspace(), dw.Placement(), 0, 0, 3000, 600, layer="Panel-Outline")
    assert _read(doc, layers=Layers(outline="PANEL-OUTLINE")).width_mm == pytest.approx(3000)
    assert "nothing is drawn" in _error(doc).message


def test_open_outline_reports_gap_and_position():
    doc = dw.new_doc("mm")
    doc.modelspace().add_lwpolyline([(0, 0), (3000, 0), (3000, 600), (0, 600), (0, 2.0)],
                                    dxfattribs={"layer": "PANEL"})
    err = _error(doc)
    assert "open" in err.message and "gap of 2 mm" in err.message
    assert "(0, 0) mm" in err.message and "(0, 2) mm" in err.message
    assert "LWPOLYLINE" in err.where


def test_gap_within_tolerance_is_closed_with_a_warning():
    doc = dw.new_doc("mm")
    msp = doc.modelspace()
    for a, b in [((0, 0), (3000, 0)), ((3000, 0), (3000, 600)), ((3000, 600), (0, 600)), ((0, 600), (0, 0.3))]:
        msp.add_line(a, b, dxfattribs={"layer": "PANEL"})
    d = _read(doc)
    assert (d.width_mm, d.height_mm) == pytest.approx((3000, 600), abs=0.3)
    assert any("closed a gap of 0.3 mm" in w for w in d.warnings)
    # the same drawing with a tighter tolerance stays open
    assert "gap of 0.3 mm" in _error(doc, join_tolerance_mm=0.1).message


def test_duplicated_and_overlapping_lines_are_merged():
    doc = dw.new_doc("mm")
    msp = doc.modelspace()
    lines = [((0, 0), (3000, 0)), ((3000, 0), (3000, 600)), ((3000, 600), (0, 600)), ((0, 600), (0, 0))]
    for a, b in lines:
        msp.add_line(a, b, dxfattribs={"layer": "PANEL"})
    msp.add_line((3000, 0), (0, 0), dxfattribs={"layer": "PANEL"})  # drawn twice, reversed
    msp.add_line((1000, 600), (2000, 600), dxfattribs={"layer": "PANEL"})  # overlapping part of a side
    d = _read(doc)
    assert (d.width_mm, d.height_mm) == pytest.approx((3000, 600))
    assert any("merged" in w for w in d.warnings)
    assert len(d.outline_handles) == 6


def test_exploded_polyline_in_any_order_and_direction():
    doc = dw.new_doc("mm")
    msp = doc.modelspace()
    pts = [(0, 0), (1500, 0), (3000, 0), (3000, 600), (0, 600)]
    segs = [(pts[i], pts[(i + 1) % 5]) for i in range(5)]
    for k, (a, b) in enumerate([segs[3], segs[0], segs[4], segs[2], segs[1]]):
        msp.add_line(*((b, a) if k % 2 else (a, b)), dxfattribs={"layer": "PANEL"})
    assert _read(doc).width_mm == pytest.approx(3000)


def test_two_candidate_outlines_named():
    doc = _panel_doc()
    second = doc.modelspace().add_lwpolyline([(0, 1000), (10, 1000), (10, 1010), (0, 1010)], close=True,
                                             dxfattribs={"layer": "PANEL"})
    err = _error(doc)
    assert "two candidate outlines" in err.message and second.dxf.handle in err.where


@pytest.mark.parametrize(
    "points, words",
    [
        ([(0, 0), (3000, 0), (3100, 600), (100, 600)], "corner"),  # a parallelogram: angle
        ([(0, 0), (3000, 0), (3000, 600), (1500, 900), (0, 600)], "5 sides"),
        ([(0, 0), (3000, 0), (3000, 300), (1500, 300), (1500, 600), (0, 600)], "6 sides"),  # L shape
        ([(0, 0), (3000, 0), (3000, 610), (0, 600)], "corner"),  # atan(10 / 3000) = 0.19 deg off square
    ],
)
def test_non_rectangular_outline(points, words):
    doc = dw.new_doc("mm")
    doc.modelspace().add_lwpolyline(points, close=True, dxfattribs={"layer": "PANEL"})
    err = _error(doc)
    assert "not a rectangle" in err.message and words in err.message and err.hint


def test_drafting_slip_within_angle_tolerance():
    doc = dw.new_doc("mm")
    # the top side rises 0.7 mm over 3000 mm: corners off square by atan(0.7 / 3000) = 0.013 degrees
    doc.modelspace().add_lwpolyline([(0, 0), (3000, 0), (3000, 600.7), (0, 600)], close=True,
                                    dxfattribs={"layer": "PANEL"})
    d = _read(doc)
    assert d.width_mm == pytest.approx(3000, abs=0.1)
    assert 600 <= d.height_mm <= 600.7 + 1e-9  # the envelope of the slightly skew outline


def test_curved_side_named():
    doc = dw.new_doc("mm")
    # bulge 0.1 on the top side: sagitta = 3000 / 2 * 0.1 = 150 mm (sagitta = chord / 2 * bulge)
    doc.modelspace().add_lwpolyline([(0, 0, 0), (3000, 0, 0), (3000, 600, 0.1), (0, 600, 0)], format="xyb",
                                    close=True, dxfattribs={"layer": "PANEL"})
    err = _error(doc)
    assert "curved side" in err.message and "(3000, 600) mm" in err.message


def test_arc_loop_outline_is_not_a_rectangle():
    doc = dw.new_doc("mm")
    doc.modelspace().add_circle((0, 0), 100, dxfattribs={"layer": "PANEL"})
    assert "curved side" in _error(doc).message


def test_tiny_bulge_counts_as_straight():
    doc = dw.new_doc("mm")
    # bulge 1e-4 over 3000 mm: sagitta 0.15 mm, under the 0.5 mm join tolerance
    doc.modelspace().add_lwpolyline([(0, 0, 1e-4), (3000, 0, 0), (3000, 600, 0), (0, 600, 0)], format="xyb",
                                    close=True, dxfattribs={"layer": "PANEL"})
    assert _read(doc).width_mm == pytest.approx(3000)


# --- openings and keep zones ---------------------------------------------------------------------------------


def test_opening_crossing_the_outline():
    doc = _panel_doc()
    c = dw.add_circle(doc.modelspace(), dw.Placement(), (2950, 300), 200)
    err = _error(doc)
    assert "crosses the panel outline" in err.message and c.dxf.handle in err.where
    assert "(3000, " in err.message  # where it crosses: on the right side


def test_opening_wholly_outside():
    doc = _panel_doc()
    c = dw.add_circle(doc.modelspace(), dw.Placement(), (4000, 300), 200)
    err = _error(doc)
    assert "wholly outside" in err.message and c.dxf.handle in err.where


def test_keep_zone_crossing_the_outline():
    doc = _panel_doc()
    dw.add_rectangle(doc.modelspace(), dw.Placement(), -50, 100, 100, 200, layer="KEEP")
    assert "keep zone" in _error(doc).message


def test_overlapping_openings_are_united_with_a_warning():
    doc = _panel_doc()
    msp = doc.modelspace()
    dw.add_rectangle(msp, dw.Placement(), 100, 100, 300, 300, layer="OPENING")
    dw.add_rectangle(msp, dw.Placement(), 200, 200, 400, 400, layer="OPENING")
    d = _read(doc)
    (opening,) = d.openings
    assert opening.shape.area == pytest.approx(2 * 200 * 200 - 100 * 100)  # union of two squares
    assert "," in opening.handle
    assert any("overlap" in w for w in d.warnings)


def test_ellipse_opening():
    doc = _panel_doc()
    doc.modelspace().add_ellipse((1000, 300), major_axis=(200, 0), ratio=0.5, dxfattribs={"layer": "OPENING"})
    (o,) = _read(doc).openings
    a, b = 200, 100
    exact = math.pi * a * b
    assert 0 < exact - o.shape.area <= 2 * math.pi * a * CHORD_MM  # perimeter < 2 pi a
    assert o.shape.centroid.coords[0] == pytest.approx((1000, 300), abs=1e-6)
    assert o.shape.bounds == pytest.approx((800, 200, 1200, 400), abs=CHORD_MM)


def test_spline_opening_exact_circle():
    doc = _panel_doc()
    spline = doc.modelspace().add_spline(dxfattribs={"layer": "OPENING"})
    spline.apply_construction_tool(rational_bspline_from_arc(center=(1000, 300), radius=150, start_angle=0,
                                                             end_angle=360))
    (o,) = _read(doc).openings
    assert 0 < math.pi * 150**2 - o.shape.area <= 2 * math.pi * 150 * CHORD_MM
    assert o.handle == spline.dxf.handle


def test_open_spline_on_opening_layer_is_refused():
    doc = _panel_doc()
    spline = doc.modelspace().add_spline([(100, 100), (200, 300), (400, 200)], dxfattribs={"layer": "OPENING"})
    err = _error(doc)
    assert "SPLINE" in err.message and spline.dxf.handle in err.where


def test_hatch_opening_with_island():
    doc = _panel_doc()
    hatch = doc.modelspace().add_hatch(dxfattribs={"layer": "OPENING"})
    hatch.paths.add_polyline_path([(1000, 100), (1400, 100), (1400, 500), (1000, 500)], is_closed=True)
    edges = hatch.paths.add_edge_path()
    edges.add_arc((1200, 300), 100, 0, 360)
    (o,) = _read(doc).openings
    ring = 400 * 400 - math.pi * 100**2  # the square less its island, even-odd as the hatch shows
    assert 0 <= o.shape.area - ring <= 2 * math.pi * 100 * CHORD_MM
    assert len(o.shape.interiors) == 1


def test_slot_lines_and_arcs_in_any_order(tmp_path):
    doc = _panel_doc()
    entities = dw.add_slot(doc.modelspace(), dw.Placement(), (1000, 300), (1400, 300), 50)
    for e in entities[::2]:  # reverse two of them: direction does not matter
        if e.dxftype() == "LINE":
            e.dxf.start, e.dxf.end = e.dxf.end, e.dxf.start
    (o,) = _read(doc).openings
    assert 0 < (400 * 100 + math.pi * 50**2) - o.shape.area <= 2 * math.pi * 50 * CHORD_MM


def test_mirrored_block_arcs():
    """A slot in a block inserted mirrored (x scale -1): arcs turn the other way and still close the slot."""
    doc = _panel_doc()
    block = doc.blocks.new("SLOT")
    dw.add_slot(block, dw.Placement(), (-200, 0), (200, 0), 50, layer="0")
    doc.modelspace().add_blockref("SLOT", (1500, 300), dxfattribs={"layer": "OPENING", "xscale": -1})
    (o,) = _read(doc).openings
    assert 0 < (400 * 100 + math.pi * 50**2) - o.shape.area <= 2 * math.pi * 50 * CHORD_MM
    assert o.shape.centroid.coords[0] == pytest.approx((1500, 300), abs=1e-6)


def test_minsert_array_of_holes():
    doc = _panel_doc()
    block = doc.blocks.new("HOLE")
    block.add_circle((0, 0), 40)
    doc.modelspace().add_blockref("HOLE", (300, 300), dxfattribs={
        "layer": "OPENING", "column_count": 4, "column_spacing": 600, "row_count": 1})
    d = _read(doc)
    assert [round(o.shape.centroid.x, 6) for o in d.openings] == [300, 900, 1500, 2100]


def test_text_on_opening_layer_is_ignored_with_a_warning():
    doc = _panel_doc()
    dw.add_text(doc.modelspace(), dw.Placement(), "hole 200", (600, 300), layer="OPENING")
    d = _read(doc)
    assert d.openings == () and any("annotation ignored" in w for w in d.warnings)


def test_closed_shapes_inside_the_panel_on_a_layer_not_read_are_named():
    # A cable duct drawn on "OPENINGS" (not the openings layer) would be left solid without a word: a warning names
    # the layer and the job key. Nothing is said of an open line, a shape outside the panel, or lacuna's own layers.
    doc = _panel_doc()
    msp = doc.modelspace()
    duct = msp.add_circle((900, 250), 60, dxfattribs={"layer": "OPENINGS"})
    msp.add_lwpolyline([(100, 100), (300, 100), (300, 300)], dxfattribs={"layer": "SERVICES"})
    msp.add_lwpolyline([(5000, 0), (5400, 0), (5400, 300)], close=True, dxfattribs={"layer": "TITLE"})
    msp.add_circle((1500, 250), 40, dxfattribs={"layer": "LACUNA-VOID-BORE"})
    d = _read(doc)
    named = [w for w in d.warnings if "does not read" in w]
    assert len(named) == 1 and "'OPENINGS'" in named[0] and f"CIRCLE {duct.dxf.handle}" in named[0]
    assert "[layers] openings" in named[0] and d.openings == ()


@pytest.mark.parametrize("kind", ["POINT", "open LWPOLYLINE"])
def test_unsupported_entity_on_opening_layer(kind):
    doc = _panel_doc()
    msp = doc.modelspace()
    if kind == "POINT":
        e = msp.add_point((500, 300), dxfattribs={"layer": "OPENING"})
    else:
        e = msp.add_lwpolyline([(100, 100), (300, 100), (300, 300)], dxfattribs={"layer": "OPENING"})
    err = _error(doc)
    assert kind.split()[-1] in err.message and e.dxf.handle in err.where and err.hint


# --- markers -------------------------------------------------------------------------------------------------


def test_support_fixity_sources():
    doc = _panel_doc()
    msp = doc.modelspace()
    pl = dw.Placement()
    dw.add_support(msp, pl, [(0, 0), (150, 0)], fix="x", text_at=(75, 50))
    dw.add_text(msp, pl, "y", (2950, 50), layer="SUPPORT", mtext=True)
    msp.add_point((3000, 0), dxfattribs={"layer": "SUPPORT"})
    dw.add_support(msp, pl, [(1500, 0)], fix="y", how="xdata")
    msp.add_point((3000, 600), dxfattribs={"layer": "SUPPORT"})  # no text: default
    block = doc.blocks.new("FIXING")
    block.add_circle((0, 0), 10)
    block.add_attdef("FIX", (0, 20))
    ref = msp.add_blockref("FIXING", (0, 600), dxfattribs={"layer": "SUPPORT"})
    ref.add_attrib("FIX", "x", (0, 620))
    d = _read(doc)
    got = {tuple(tuple(round(c, 6) + 0.0 for c in p) for p in s.points): s.fix for s in d.supports}
    assert got == {((0.0, 0.0), (150.0, 0.0)): "x", ((3000.0, 0.0),): "y", ((1500.0, 0.0),): "y",
                   ((3000.0, 600.0),): "xy", ((0.0, 600.0),): "x"}


def test_support_line_off_the_outline():
    doc = _panel_doc()
    line = dw.add_support(doc.modelspace(), dw.Placement(), [(100, 100), (300, 100)])
    err = _error(doc)
    assert "not on the panel outline" in err.message and line.dxf.handle in err.where


def test_support_text_equally_near_two_supports():
    doc = _panel_doc()
    msp = doc.modelspace()
    msp.add_point((1000, 0), dxfattribs={"layer": "SUPPORT"})
    msp.add_point((2000, 0), dxfattribs={"layer": "SUPPORT"})
    dw.add_text(msp, dw.Placement(), "x", (1500, 100), layer="SUPPORT")
    assert "equally near" in _error(doc).message


def test_bad_fixity_text():
    doc = _panel_doc()
    dw.add_support(doc.modelspace(), dw.Placement(), [(0, 0)], fix="pinned")
    err = _error(doc)
    assert "'pinned'" in err.message and "xy" in err.hint


@pytest.mark.parametrize(
    "text, kn, case",
    [("40 kN", 40.0, "main"), ("40", 40.0, "main"), ("12.5kN wind", 12.5, "wind"), ("7,5 KN snow", 7.5, "snow"),
     ("3 wind", 3.0, "wind")],
)
def test_load_texts(text, kn, case):
    doc = _panel_doc()
    dw.add_load(doc.modelspace(), dw.Placement(), (1500, 600), (1, -1), text=text)
    (load,) = _read(doc).loads
    c = kn * 1000 / math.sqrt(2)  # 45 degrees down to the right
    assert load.force_N == pytest.approx((c, -c)) and load.case == case


def test_load_in_mtext():
    doc = _panel_doc()
    dw.add_load(doc.modelspace(), dw.Placement(), (1500, 600), (0, -1), kN=40, mtext=True)
    assert _read(doc).loads[0].force_N == pytest.approx((0, -40_000))


def test_load_direction_turned_into_local_axes():
    """A load drawn along drawing x on a panel turned 30 degrees acts at -30 degrees in local axes."""
    pl = dw.Placement("mm", 30.0, (0.0, 0.0))
    doc = _panel_doc(pl=pl)
    line = doc.modelspace().add_line(pl.point((1500, 300)), np.add(pl.point((1500, 300)), (300, 0)),
                                     dxfattribs={"layer": "LOAD"})
    line.set_xdata(XDATA_APPID, marker_xdata(force_kN=10))
    (load,) = _read(doc).loads
    a = math.radians(30)
    assert load.force_N == pytest.approx((10_000 * math.cos(a), -10_000 * math.sin(a)))
    assert load.at == pytest.approx((1500, 300))


def test_load_without_magnitude():
    doc = _panel_doc()
    line = dw.add_load(doc.modelspace(), dw.Placement(), (1500, 600), (0, -1), how="none")
    dw.add_text(doc.modelspace(), dw.Placement(), "40 kN", (1500, 1000), layer="LOAD")  # beyond 300 mm
    err = _error(doc)
    assert "no magnitude" in err.message and line.dxf.handle in err.where


def test_load_with_two_texts_equally_near():
    doc = _panel_doc()
    msp = doc.modelspace()
    line = dw.add_load(msp, dw.Placement(), (1500, 600), (0, -1), how="none")
    dw.add_text(msp, dw.Placement(), "40 kN", (1400, 600), layer="LOAD")
    dw.add_text(msp, dw.Placement(), "30 kN", (1600, 600), layer="LOAD")
    err = _error(doc)
    assert "equally near" in err.message and line.dxf.handle in err.where


def test_nearest_text_wins():
    doc = _panel_doc()
    msp = doc.modelspace()
    dw.add_load(msp, dw.Placement(), (1500, 600), (0, -1), how="none")
    dw.add_text(msp, dw.Placement(), "40 kN", (1450, 600), layer="LOAD")
    dw.add_text(msp, dw.Placement(), "remark", (1700, 600), layer="LOAD")
    d = _read(doc)
    assert d.loads[0].force_N == pytest.approx((0, -40_000))
    assert any("'remark'" in w and "ignored" in w for w in d.warnings)


@pytest.mark.parametrize("text, words", [("40 N", "in N"), ("-40 kN", "positive"), ("kN 40", "number")])
def test_bad_load_texts(text, words):
    doc = _panel_doc()
    dw.add_load(doc.modelspace(), dw.Placement(), (1500, 600), (0, -1), text=text)
    err = _error(doc)
    assert words in err.message and err.hint


def test_load_outside_the_panel():
    doc = _panel_doc()
    dw.add_load(doc.modelspace(), dw.Placement(), (1500, 900), (0, -1), kN=5)
    assert "off the panel" in _error(doc).message


def test_load_inside_an_opening():
    doc = _panel_doc()
    hole = dw.add_circle(doc.modelspace(), dw.Placement(), (1500, 300), 200)
    dw.add_load(doc.modelspace(), dw.Placement(), (1500, 300), (0, -1), kN=5, length_mm=50)
    err = _error(doc)
    assert "off the panel" in err.message and hole.dxf.handle in err.message


def test_unknown_xdata_entry():
    doc = _panel_doc()
    line = dw.add_load(doc.modelspace(), dw.Placement(), (1500, 600), (0, -1), how="none")
    line.set_xdata(XDATA_APPID, [(1000, "force"), (1040, 3.0)])
    err = _error(doc)
    assert "'force'" in err.message and line.dxf.handle in err.where
