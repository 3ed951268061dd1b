"""Results into a copy of the drawing: nothing of the input lost, our entities where the frame puts them.

Check values come from outside the code under test: expected drawing positions from tests/drawings.py's
Placement (its own rotation formula, not Frame), bulge = tan(sweep / 4) from the DXF reference (LWPOLYLINE,
group code 42), and entity counts from tests/group_codes.py, a reader that shares no code with ezdxf.
"""

from __future__ import annotations

import io
import math
from collections import Counter

import ezdxf
import numpy as np
import pytest
from ezdxf import disassemble
from ezdxf.lldxf.tagwriter import TagCollector
from shapely.geometry import Point as ShapelyPoint
from shapely.geometry import Polygon, box

import group_codes
from drawings import Placement, add_rectangle, new_doc, sample_panel, write
from toolkit.dxf_in import read_drawing
from toolkit.errors import LacunaError
from toolkit.model import Frame, Void
from toolkit.write.dxf_copy import add_results, nearest_aci, result_copy_bytes
from toolkit.write.dxf_file import VERSIONS
from toolkit.write.layers import CENTRE, CHECK, DIM, FREEFORM, LOOKS, NOTE, OUR_LAYERS, VOID_LAYERS
from toolkit.write.shapes import Marker

# Header variables a writer must change: when and by what the file was saved, and the next free handle.
# ($TDUPDATE/$TDUUPDATE: "local/universal date and time of the last update", DXF reference, header section.)
CHANGES_ON_SAVE = {"$TDUPDATE", "$TDUUPDATE", "$HANDSEED", "$VERSIONGUID", "$TDINDWG"}
# ezdxf stamps the creation date with the time of *loading* a document (ezdxf/document.py,
# Drawing._setup_metadata, ezdxf 1.4; tests/test_determinism.py): two loads a second apart differ, so the dates are
# compared in the files' own bytes instead (test_the_copy_keeps_the_drawings_creation_date).
STAMPED_ON_LOAD = {"$TDCREATE", "$TDUCREATE"}

FAR = Placement("mm", 30.0, (6_000_000.0, 2_000_000.0))
# bulge of a quarter circle = tan(90 deg / 4) = tan(22.5 deg); of a half circle tan(45 deg) = 1 (DXF reference).
QUARTER = math.tan(math.radians(22.5))


def office_drawing(tmp_path, pl: Placement = FAR, version: str = "R2018"):
    """The sample panel inside a drafting office's drawing: text, dimensions, attributes, hatch, a sheet."""
    doc = new_doc("mm", version)
    msp = doc.modelspace()
    sample_panel(msp, pl)
    doc.layers.add("NOTES", color=2, linetype="Continuous")
    doc.layers.add("DIMS", color=3)
    doc.layers.add("FILL", color=8)
    doc.layers.add("TAGS", color=5)
    doc.styles.add("OFFICE-TEXT", font="DejaVuSans.ttf")
    doc.dimstyles.new("OFFICE-DIM", dxfattribs={"dimtxt": 40.0, "dimasz": 30.0})
    doc.header["$USERI1"] = 7
    doc.header["$LTSCALE"] = 20.0
    msp.add_text("LINTEL L3 - loft, grid C", dxfattribs={"layer": "NOTES", "insert": pl.point((0, 900)),
                                                        "height": 60, "style": "OFFICE-TEXT",
                                                        "rotation": pl.angle_deg})
    msp.add_mtext("Glulam GL24h\\PFire rating R30", dxfattribs={"layer": "NOTES", "insert": pl.point((0, 1200)),
                                                               "char_height": 50})
    dim = msp.add_linear_dim(base=pl.point((0, -300)), p1=pl.point((0, 0)), p2=pl.point((3000, 0)),
                             angle=pl.angle_deg, dimstyle="OFFICE-DIM", dxfattribs={"layer": "DIMS"})
    dim.render()
    tag = doc.blocks.new("ROOM-TAG")
    tag.add_circle((0, 0), 40)
    tag.add_attdef("ROOM", (50, 0), dxfattribs={"height": 30})
    ref = msp.add_blockref("ROOM-TAG", pl.point((3300, 300)), dxfattribs={"layer": "TAGS"})
    ref.add_auto_attribs({"ROOM": "Loft 2"})
    hatch = msp.add_hatch(color=8, dxfattribs={"layer": "FILL"})
    hatch.paths.add_polyline_path([pl.point(p) for p in [(3100, 0), (3400, 0), (3400, 600), (3100, 600)]])
    sheet = doc.layouts.new("Sheet A3")
    sheet.add_viewport(center=(200, 140), size=(380, 250), view_center_point=pl.point((1500, 300)),
                       view_height=2000)
    sheet.add_text("Drawing 117-S-04", dxfattribs={"insert": (10, 10), "height": 5, "layer": "NOTES"})
    path = write(doc, tmp_path / "office.dxf")
    return path


def rounded_square(cx, cy, half, r):
    """A square with corners eased by quarter arcs of radius r, counter-clockwise, as (x, y, bulge)."""
    x0, y0, x1, y1 = cx - half, cy - half, cx + half, cy + half
    return (
        (x0 + r, y0, 0.0), (x1 - r, y0, QUARTER), (x1, y0 + r, 0.0), (x1, y1 - r, QUARTER),
        (x1 - r, y1, 0.0), (x0 + r, y1, QUARTER), (x0, y1 - r, 0.0), (x0, y0 + r, QUARTER),
    )


def results():
    """A polygon void with eased corners, a slot, two bores, a freeform outline with a hole, notes, a marker."""
    square = Void("P1", "polygon", (1000.0, 300.0), 200.0, box(900, 200, 1100, 400),
                  outline=rounded_square(1000.0, 300.0, 100.0, 20.0), sides=4, tool="router 20 mm")
    slot = Void("S1", "slot", (2000.0, 300.0), 100.0, box(1850, 250, 2150, 350),
                outline=((1900.0, 250.0, 0.0), (2100.0, 250.0, 1.0), (2100.0, 350.0, 0.0), (1900.0, 350.0, 1.0)),
                length_mm=300.0, tool="slot cutter 100")
    bores = [Void(f"B{k}", "bore", c, d, ShapelyPoint(c).buffer(d / 2), tool=f"bore {d:g} mm")
             for k, (c, d) in enumerate([((300.0, 300.0), 50.0), ((2800.0, 300.0), 65.0)], start=1)]
    freeform = box(850, 150, 1150, 450).difference(box(900, 200, 1100, 400))
    return dict(
        voids=[square, slot, *bores],
        freeform=[freeform],
        notes=["Voids for design exploration; members to be checked by a qualified engineer."],
        check_markers=[Marker((2800.0, 300.0), "web 35 < 60"), {"where": (300.0, 300.0), "rule": "edge_cover",
                                                                 "measured": 30, "required": 50}],
        panel_size_mm=(3000.0, 600.0),
    )


@pytest.fixture(scope="module")
def round_trip(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("office")
    path = office_drawing(tmp)
    frame = read_drawing(path).frame
    data = result_copy_bytes(path, frame, **results())
    return path, frame, data, ezdxf.readfile(path), ezdxf.read(io.StringIO(data.decode("utf-8")))


def _write_stamp(doc) -> str | None:
    for entity in doc.entitydb.values():
        if entity.dxftype() == "DICTIONARY" and "WRITTEN_BY_EZDXF" in entity:
            return entity["WRITTEN_BY_EZDXF"].dxf.handle
    return None


def _tags(entity, version):
    collector = TagCollector(dxfversion=version)
    entity.export_dxf(collector)
    return collector.tags


def test_every_input_entity_kept_with_handle_and_attributes(round_trip):
    path, _frame, data, before, after = round_trip
    before_bytes = path.read_bytes()
    # Every handle written in the input file (ezdxf adds a few objects of its own while loading; those are
    # not the drafter's and get fresh handles on each load).
    in_file = group_codes.read(before_bytes).handles()
    assert len(in_file) > 100  # the office drawing is not trivially small
    changed = []
    for handle in sorted(in_file):
        entity = before.entitydb.get(handle)
        if entity is None:
            continue  # table heads are not entities to ezdxf
        other = after.entitydb.get(handle)
        assert other is not None, f"handle {handle} ({entity.dxftype()}) lost"
        assert other.dxftype() == entity.dxftype()
        if dict(entity.dxfattribs()) != dict(other.dxfattribs()):
            changed.append((handle, entity.dxftype()))
    # The one object allowed to differ: the writer's time stamp of the last save (a DICTIONARYVAR that ezdxf
    # keeps under WRITTEN_BY_EZDXF and renews on every write; "timestamps aside").
    assert changed == [(_write_stamp(before), "DICTIONARYVAR")] or changed == []
    # Stronger: every graphic entity of every layout and block writes the very same group codes.
    for layout in before.layouts_and_blocks():
        for entity in layout:
            assert _tags(entity, before.dxfversion) == _tags(after.entitydb[entity.dxf.handle], after.dxfversion)
    assert path.read_bytes() == before_bytes  # the input is never written


def test_tables_blocks_header_and_layouts_kept(round_trip):
    _path, _frame, _data, before, after = round_trip
    for table in ("layers", "styles", "dimstyles", "linetypes", "appids"):
        names_before = {e.dxf.name for e in getattr(before, table)}
        names_after = {e.dxf.name for e in getattr(after, table)}
        assert names_before <= names_after, table
    assert {e.dxf.name for e in after.layers} - {e.dxf.name for e in before.layers} == set(OUR_LAYERS)
    # The only blocks added are the ones holding our ordinate dimensions' lines, one per DIMENSION (DXF reference,
    # DIMENSION group code 2: the name of the block that contains the entities that make up the dimension).
    ours = [d.dxf.geometry for d in after.modelspace().query(f'DIMENSION[layer=="{DIM}"]')]
    assert [b.name for b in before.blocks] == [b.name for b in after.blocks if b.name not in ours]
    assert len(set(ours)) == len(ours) and all(name in after.blocks for name in ours)
    assert before.layout_names() == after.layout_names()
    for var in before.header.varnames():
        if var not in CHANGES_ON_SAVE | STAMPED_ON_LOAD:
            assert before.header.get(var) == after.header.get(var), var
    assert after.dxfversion == before.dxfversion == "AC1032"
    assert after.header["$INSUNITS"] == 4


def test_output_audits_clean(round_trip):
    *_, after = round_trip
    auditor = after.audit()
    assert auditor.has_errors is False, [e.message for e in auditor.errors]
    assert auditor.has_fixes is False, [f.message for f in auditor.fixes]


def test_voids_come_back_where_the_frame_puts_them(round_trip):
    _path, frame, _data, _before, after = round_trip
    msp = after.modelspace()
    spec = results()
    square, slot, bore1, bore2 = spec["voids"]
    # Expected positions from the test's own placement formula (drawings.Placement), not from Frame.
    (poly,) = msp.query(f'LWPOLYLINE[layer=="{VOID_LAYERS["polygon"]}"]')
    got = np.array(poly.get_points("xyb"))
    want = np.array([(*FAR.point(v[:2]), v[2]) for v in square.outline])
    assert poly.closed
    assert np.abs(got - want).max() < 1e-6
    (s,) = msp.query(f'LWPOLYLINE[layer=="{VOID_LAYERS["slot"]}"]')
    got = np.array(s.get_points("xyb"))
    want = np.array([(*FAR.point(v[:2]), v[2]) for v in slot.outline])
    assert np.abs(got - want).max() < 1e-6
    assert list(got[:, 2]) == [0.0, 1.0, 0.0, 1.0]  # half circles: bulge 1, sign kept under the 30 deg turn
    circles = sorted(msp.query(f'CIRCLE[layer=="{VOID_LAYERS["bore"]}"]'), key=lambda c: c.dxf.radius)
    for c, v in zip(circles, (bore1, bore2)):
        assert np.hypot(*(np.array(np.array(c.dxf.center)[:2]) - FAR.point(v.centre))) < 1e-6
        assert abs(c.dxf.radius - v.size_mm / 2) < 1e-9
    # The panel really was found turned 30 degrees, 6,000 km out.
    assert abs(frame.angle_deg - 30.0) < 1e-9 and abs(frame.origin[0] - 6e6) < 1e-6


def test_freeform_rings_and_centre_marks(round_trip):
    *_, after = round_trip
    msp = after.modelspace()
    rings = list(msp.query(f'LWPOLYLINE[layer=="{FREEFORM}"]'))
    assert len(rings) == 2 and all(r.closed for r in rings)  # outer ring and the hole
    areas = sorted(abs(Polygon([p[:2] for p in r.get_points("xy")]).area) for r in rings)
    assert areas == pytest.approx([200 * 200, 300 * 300], rel=1e-9)  # rotation and shift keep areas
    lines = list(msp.query(f'LINE[layer=="{CENTRE}"]'))
    assert len(lines) == 2 * 4  # a cross per void
    lengths = sorted(round(math.dist(l.dxf.start, l.dxf.end), 9) for l in lines)
    assert lengths == [20.0] * 8  # 20 mm crosses (default); the smallest void is 50 mm, so none is shrunk
    first = lines[0]
    angle = math.degrees(math.atan2(first.dxf.end[1] - first.dxf.start[1], first.dxf.end[0] - first.dxf.start[0]))
    assert angle == pytest.approx(30.0, abs=1e-9)  # turned with the panel


def test_notes_lie_below_the_panel_in_its_frame(round_trip):
    _path, frame, _data, _before, after = round_trip
    texts = list(after.modelspace().query(f'TEXT[layer=="{NOTE}"]'))
    contents = [t.dxf.text for t in texts]
    assert "P1" in contents and "B2" in contents and "router 20 mm" in contents
    assert any("qualified engineer" in c for c in contents)
    for t in texts:
        corners = np.array([(v.x, v.y) for v in disassemble.make_primitive(t).vertices()])
        local = frame.to_local(corners)
        assert local[:, 1].max() < 0.0, t.dxf.text  # every glyph box under the panel's bottom edge (y = 0)
        assert t.dxf.rotation == pytest.approx(30.0, abs=1e-9)


def test_check_markers(round_trip):
    _path, frame, _data, _before, after = round_trip
    msp = after.modelspace()
    circles = list(msp.query(f'CIRCLE[layer=="{CHECK}"]'))
    labels = [t.dxf.text for t in msp.query(f'TEXT[layer=="{CHECK}"]')]
    assert len(circles) == 2 and labels == ["web 35 < 60", "edge_cover 30 < 50"]
    centres = sorted(tuple(np.round(frame.to_local(np.array(c.dxf.center)[:2]), 6)) for c in circles)
    assert centres == [(300.0, 300.0), (2800.0, 300.0)]


def test_layers_have_our_look(round_trip):
    *_, after = round_trip
    for look in LOOKS:
        layer = after.layers.get(look.name)
        assert layer.rgb == look.rgb
        assert layer.dxf.lineweight == look.lineweight
        assert layer.dxf.linetype.upper() == look.linetype.upper()
        assert layer.dxf.color == nearest_aci(look.rgb)
    # DXF standard line weights, 1/100 mm (DXF reference, group code 370).
    standard = {0, 5, 9, 13, 15, 18, 20, 25, 30, 35, 40, 50, 53, 60, 70, 80, 90, 100, 106, 120, 140, 158, 200, 211}
    assert {look.lineweight for look in LOOKS} <= standard
    # The nearest ACI to pure red (255, 0, 0) is index 1 (ACI table: 1 = red, common knowledge of DXF).
    assert nearest_aci((255, 0, 0)) == 1


def test_independent_reader_agrees_on_counts_per_layer(round_trip):
    _path, _frame, data, _before, after = round_trip
    parsed = group_codes.read(data)
    ezdxf_model = Counter(e.dxf.layer for e in after.modelspace())
    assert parsed.count_per_layer("model") == ezdxf_model
    # Paper space: the active sheet's entities are in ENTITIES (67 = 1), the others in their block.
    paper = Counter()
    for name in after.layout_names():
        if name != "Model":
            paper += Counter(e.dxf.layer for e in after.layouts.get(name))
    from_blocks = Counter(r.layer for name, recs in parsed.blocks.items()
                          if name.upper().startswith("*PAPER_SPACE") for r in recs)
    assert parsed.count_per_layer("paper") + from_blocks == paper
    assert ezdxf_model[VOID_LAYERS["bore"]] == 2 and ezdxf_model[FREEFORM] == 2
    # Every handle ezdxf knows of the output is in the file, as the plain reader sees it.
    assert {e.dxf.handle for e in after.modelspace()} <= parsed.handles()


def test_rotated_frame_in_metres(tmp_path):
    # The same panel in metres, turned 30 degrees: lengths shrink by 1000, bulges and the turn stay.
    pl = Placement("m", 30.0, (12.5, -3.0))
    doc = new_doc("m")
    sample_panel(doc.modelspace(), pl)
    frame = Frame(origin=pl.origin, angle_deg=30.0, mm_per_unit=1000.0, unit="m")
    added = add_results(doc, frame, **results())
    slot = doc.entitydb[added.handles[VOID_LAYERS["slot"]][0]]
    want = np.array([(*pl.point(v[:2]), v[2]) for v in results()["voids"][1].outline])
    assert np.abs(np.array(slot.get_points("xyb")) - want).max() < 1e-9
    bore = doc.entitydb[added.handles[VOID_LAYERS["bore"]][0]]
    assert bore.dxf.radius == pytest.approx(0.025, abs=1e-12)  # 50 mm bore in metres
    # Dash 12 mm + gap 6 mm = 0.018 m: group code 40 of the LTYPE record is the pattern length (DXF reference).
    tags = doc.linetypes.get("LACUNA-DASHED").pattern_tags.tags
    assert [t.value for t in tags if t.code == 40][0] == pytest.approx(0.018)


def test_second_run_refused_then_replaced(tmp_path):
    path = office_drawing(tmp_path)
    frame = read_drawing(path).frame
    once = tmp_path / "once.dxf"
    once.write_bytes(result_copy_bytes(path, frame, **results()))
    with pytest.raises(LacunaError) as err:
        result_copy_bytes(once, frame, **results())
    assert "LACUNA-" in err.value.where and "replace" in err.value.hint
    again = ezdxf.read(io.StringIO(result_copy_bytes(once, frame, replace=True, **results()).decode("utf-8")))
    counts = Counter(e.dxf.layer for e in again.modelspace())
    assert counts[VOID_LAYERS["bore"]] == 2 and counts[FREEFORM] == 2  # replaced, not doubled


def test_foreign_entities_on_our_layer_in_a_block_are_refused_even_with_replace(tmp_path):
    doc = new_doc("mm")
    doc.layers.add(NOTE)
    doc.blocks.new("HAND").add_text("drawn by hand", dxfattribs={"layer": NOTE})
    with pytest.raises(LacunaError) as err:
        add_results(doc, Frame(), notes=["x"], replace=True)
    assert err.value.where == f"layer {NOTE}" and "HAND" in str(err.value)


def test_r12_drawing_gets_polylines(tmp_path):
    doc = new_doc("mm", "R12")
    add_rectangle(doc.modelspace(), Placement(), 0.0, 0.0, 3000.0, 600.0, style="lines")
    added = add_results(doc, Frame(), **results())
    poly = doc.entitydb[added.handles[VOID_LAYERS["slot"]][0]]
    assert poly.dxftype() == "POLYLINE" and poly.is_closed
    assert [v.dxf.bulge for v in poly.vertices] == [0.0, 1.0, 0.0, 1.0]
    stream = io.StringIO()
    doc.write(stream)
    assert ezdxf.read(io.StringIO(stream.getvalue())).audit().has_errors is False


def test_version_upgrade_and_bad_versions(tmp_path):
    path = office_drawing(tmp_path, version="R2010")
    frame = read_drawing(path).frame
    out = ezdxf.read(io.StringIO(result_copy_bytes(path, frame, dxf_version="R2018", **results()).decode("utf-8")))
    assert out.dxfversion == "AC1032"
    for bad in ("R14", "2018", "AC1099"):
        with pytest.raises(LacunaError) as err:
            result_copy_bytes(path, frame, dxf_version=bad)
        assert err.value.where == "dxf_version"
        assert all(name in err.value.hint for name in VERSIONS)
    with pytest.raises(LacunaError) as err:
        result_copy_bytes(path, frame, dxf_version="R2000")  # older than the drawing
    assert "older" in err.value.message


def test_bad_results_are_named():
    doc = new_doc("mm")
    with pytest.raises(LacunaError) as err:
        add_results(doc, Frame(), voids=[Void("X9", "star", (0.0, 0.0), 10.0, box(0, 0, 1, 1))])
    assert err.value.where == "void X9" and "polygon" in err.value.hint
    with pytest.raises(LacunaError) as err:
        add_results(doc, Frame(), voids=[Void("B0", "bore", (0.0, 0.0), -5.0, box(0, 0, 1, 1))])
    assert err.value.where == "void B0"
    with pytest.raises(LacunaError) as err:
        add_results(doc, Frame(), freeform=["not a polygon"])
    assert err.value.where == "freeform 0"
    with pytest.raises(LacunaError):
        add_results(doc, Frame(mm_per_unit=0.0), notes=["x"])
    assert not any(name in doc.layers for name in OUR_LAYERS)  # nothing added before the checks passed


def test_the_copy_keeps_the_drawings_creation_date(tmp_path):
    # The drafter's $TDCREATE (here set to 2000-01-01, Julian day 2451545.0), read from the bytes of the input and
    # of the copy (not through a loader, which stamps its own time), is the same.
    from toolkit.write.dxf_copy import _creation_dates

    path = office_drawing(tmp_path)
    text = path.read_text(encoding="utf-8")
    old = _creation_dates(str(path))["$TDCREATE"]
    lines = text.splitlines(keepends=True)
    k = next(i for i, line in enumerate(lines) if line.strip() == "$TDCREATE")
    lines[k + 2] = lines[k + 2].replace(lines[k + 2].strip(), "2451545.0")
    path.write_text("".join(lines), encoding="utf-8")
    assert _creation_dates(str(path))["$TDCREATE"] == 2451545.0 != old
    data = result_copy_bytes(path, read_drawing(path).frame, **results())
    copy = tmp_path / "copy.dxf"
    copy.write_bytes(data)
    assert _creation_dates(str(copy))["$TDCREATE"] == 2451545.0
