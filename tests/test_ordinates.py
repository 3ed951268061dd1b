"""Ordinate dimensions in the drawing copy (layer LACUNA-DIM) and on the result sheet (group lacuna-dim).

A steel bracket of our own, 1200 x 300 mm, drawn turned 30 degrees 6,000 km from the origin (site coordinates),
welded along its left edge and loaded at its tip, optimised with bores: the copy is read back with ezdxf and every
figure is measured here from the drawn geometry. The panel's axes and datum come from the test's own placement
(tests/drawings.py, Placement: its own rotation formula, not the toolkit's Frame); a bore's centre is its CIRCLE's
centre as drawn. Ordinate dimensions measure the distance from the datum along one axis (DXF reference, ordinate
dimension group codes: 10 the origin, 13 the feature, 14 the leader's end; group 51 the horizontal direction, the
negative of the angle of the measuring x axis); their lines live in the block named by group code 2.
"""

from __future__ import annotations

import csv
import io
import math

import ezdxf
import numpy as np
import pytest

from drawings import Placement, add_load, add_rectangle, add_support, new_doc, write
from toolkit.api import optimize_file

FAR = Placement("mm", 30.0, (6_000_000.0, 2_000_000.0))
W, H = 1200.0, 300.0
JOB = """units = "mm"
[panel]
name = "far bracket"
thickness = 20
element_size = 25
[material]
E_MPa = 210000
nu = 0.3
density_kg_m3 = 7850
[optimize]
volume_fraction = 0.6
filter_radius = 75
[voids]
family = "bore"
[rules]
edge_cover = 20
min_web = 20
min_void = 20
bearing_clearance = 50
"""


@pytest.fixture(scope="module")
def bracket(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("ordinates")
    doc = new_doc("mm")
    msp = doc.modelspace()
    add_rectangle(msp, FAR, 0.0, 0.0, W, H)
    add_support(msp, FAR, [(0.0, 0.0), (0.0, H)], fix="xy", text_at=(-100.0, H / 2))
    add_load(msp, FAR, (W, H / 2), (0.0, -1.0), kN=30, text_offset=(30.0, 30.0), length_mm=200.0)
    dxf = write(doc, tmp / "bracket.dxf")
    (tmp / "job.toml").write_text(JOB)
    optimize_file(dxf, tmp / "job.toml", out_dir=tmp / "out")
    out = tmp / "out"
    copy = ezdxf.readfile(out / "bracket-lacuna.dxf")
    rows = list(csv.DictReader(io.StringIO((out / "bracket-schedule.csv").read_text())))
    return copy, rows, (out / "bracket-result.svg").read_text()


def to_local(xy) -> np.ndarray:
    """Drawing -> the panel's frame by the placement's own numbers: subtract the corner, turn back 30 degrees."""
    a = math.radians(FAR.angle_deg)
    d = np.asarray(xy, dtype=float)[..., :2] - np.asarray(FAR.origin)
    return np.stack([d[..., 0] * math.cos(a) + d[..., 1] * math.sin(a),
                     -d[..., 0] * math.sin(a) + d[..., 1] * math.cos(a)], axis=-1)


def ordinates(doc, along_x: bool) -> list:
    """The ordinate DIMENSIONs on LACUNA-DIM measuring along the panel's x (or y): DXF reference, DIMENSION group
    code 70: 6 = ordinate, bit value 64 set for an x-type ordinate."""
    out = []
    for d in doc.modelspace().query('DIMENSION[layer=="LACUNA-DIM"]'):
        assert d.dxf.dimtype & 0x0F == 6
        if bool(d.dxf.dimtype & 64) == along_x:
            out.append(d)
    return out


def lettering(doc, dim) -> str:
    """The value a reader sees: the text in the dimension's block."""
    texts = [e for e in doc.blocks.get(dim.dxf.geometry) if e.dxftype() in ("TEXT", "MTEXT")]
    assert len(texts) == 1
    return texts[0].plain_text() if texts[0].dxftype() == "MTEXT" else texts[0].dxf.text


def test_every_bore_centre_has_an_x_and_a_y_ordinate_from_the_panels_corner(bracket):
    doc, rows, _ = bracket
    bores = list(doc.modelspace().query('CIRCLE[layer=="LACUNA-VOID-BORE"]'))
    assert len(bores) >= 8, "a layout with enough voids to crowd the ordinates"
    centres = to_local(np.array([b.dxf.center for b in bores]))
    assert (centres > 0).all() and (centres[:, 0] < W).all() and (centres[:, 1] < H).all()
    for along_x, axis in ((True, 0), (False, 1)):
        dims = ordinates(doc, along_x)
        datum = to_local(np.array([d.dxf.defpoint for d in dims]))
        assert np.abs(datum).max() < 1e-6  # measured from the panel's lower-left corner as drawn
        # The measuring axes turned with the panel (group 51 is minus their angle).
        assert all(d.dxf.horizontal_direction == pytest.approx(-FAR.angle_deg) for d in dims)
        features = to_local(np.array([d.dxf.defpoint2 for d in dims]))[:, axis]
        shown = [lettering(doc, d) for d in dims]
        # The value written is the feature's distance from the datum along the axis, to the millimetre.
        assert shown == [f"{v:.0f}" for v in features]
        # Every bore centre's ordinate is there (once per value written), and the datum's own "0".
        wanted = {f"{v:.0f}" for v in centres[:, axis]} | {"0"}
        assert sorted(shown, key=float) == sorted(wanted, key=float)
        for v in centres[:, axis]:
            k = shown.index(f"{v:.0f}")
            assert abs(features[k] - v) < 1.0  # measured to this centre, or one within the rounding of it


def test_the_ordinates_agree_with_the_schedule_csv(bracket):
    doc, rows, _ = bracket
    bores = [(b.dxf.center.x, b.dxf.center.y) for b in doc.modelspace().query('CIRCLE[layer=="LACUNA-VOID-BORE"]')]
    scheduled = [(float(r["centre_x_mm"]), float(r["centre_y_mm"])) for r in rows]
    assert len(scheduled) == len(bores)
    shown_x = {lettering(doc, d) for d in ordinates(doc, True)}
    shown_y = {lettering(doc, d) for d in ordinates(doc, False)}
    for c in scheduled:
        # The schedule's centre (drawing coordinates, to 0.001 mm) is a bore drawn there ...
        assert min(math.dist(c, b) for b in bores) < 2e-3
        # ... and its ordinates, taken into the panel's frame here, are written in the drawing.
        x, y = to_local(np.array(c))
        assert f"{x:.0f}" in shown_x and f"{y:.0f}" in shown_y


def test_ordinates_stand_outside_the_panel_clear_of_the_drawing_and_the_notes(bracket):
    doc, _, _ = bracket
    # The drawing's own lines under and beside the panel: the load marker reaches 200 mm below the tip's point
    # (to y = -50), the support's "xy" stands 100 mm left of the edge.
    for along_x, axis in ((True, 1), (False, 0)):
        for d in ordinates(doc, along_x):
            lines = [np.array([e.dxf.start, e.dxf.end]) for e in doc.blocks.get(d.dxf.geometry)
                     if e.dxftype() == "LINE"]
            assert len(lines) == 3  # a leader with a jog (two straight parts and the jog between)
            local = to_local(np.concatenate(lines))[:, axis]
            assert local.max() < (-50.0 if along_x else -100.0)  # the leader starts beyond the drawing's lines
            assert to_local(np.array(d.dxf.defpoint3))[axis] <= local.max()
    # Every schedule note lies below the x ordinates' lettering.
    lowest_dim_text = min(
        to_local(np.array(e.dxf.insert))[1]
        for d in ordinates(doc, True) for e in doc.blocks.get(d.dxf.geometry) if e.dxftype() == "MTEXT")
    notes = [to_local(np.array(t.dxf.insert))[1] for t in doc.modelspace().query('TEXT[layer=="LACUNA-NOTE"]')]
    assert notes and max(notes) < lowest_dim_text


def test_ezdxfs_drawing_add_on_draws_the_ordinates_where_they_stand(bracket):
    # Drawn by ezdxf's drawing add-on (the front end the convert command uses), LACUNA-DIM alone: every line and
    # every glyph of the lettering lies outside the panel, under it (x ordinates) or left of it (y ordinates).
    from ezdxf.addons.drawing import Frontend, RenderContext
    from ezdxf.addons.drawing.recorder import Recorder
    from ezdxf.math import Matrix44

    doc, _, _ = bracket
    ctx = RenderContext(doc)

    def only_dims(layers) -> None:
        for props in layers:
            props.is_visible = props.layer.upper() == "LACUNA-DIM"

    ctx.set_layer_properties_override(only_dims)
    recorder = Recorder()
    Frontend(ctx, recorder).draw_layout(doc.modelspace(), finalize=True)
    player = recorder.player()
    # Into the panel's frame: shift the corner to the origin, turn back 30 degrees.
    player.transform(Matrix44.translate(-FAR.origin[0], -FAR.origin[1], 0) @ Matrix44.z_rotate(
        -math.radians(FAR.angle_deg)))
    boxes = [record.bbox() for record, _ in player.recordings()]
    glyphs = [r for r, _ in player.recordings() if type(r).__name__ == "FilledPathsRecord"]
    count = len(ordinates(doc, True)) + len(ordinates(doc, False))
    assert count > 2 and len(glyphs) >= count  # lettering drawn, at least one glyph per value
    for box in boxes:
        (x0, y0), (x1, y1) = box.extmin, box.extmax
        assert y1 < 0.0 or x1 < 0.0, (x0, y0, x1, y1)
        # ... and near it: within a panel's length of its corner, not somewhere else on the site.
        assert -W < x0 and x1 < 2 * W and -W < y0 and y1 < 2 * H, (x0, y0, x1, y1)


def test_the_sheet_writes_the_same_ordinates_as_the_drawing(bracket):
    doc, _, svg = bracket
    import re

    assert 'id="lacuna-dim"' in svg and 'data-layer="LACUNA-DIM"' in svg and 'id="ordinates"' not in svg
    sheet = set(re.findall(r'data-ordinate="([xy]) ([-\d.]+)"', svg))
    drawing = {("x", lettering(doc, d)) for d in ordinates(doc, True)} | {
        ("y", lettering(doc, d)) for d in ordinates(doc, False)}
    assert sheet == drawing


def test_a_replaced_run_takes_its_dimensions_and_their_blocks_with_it(bracket, tmp_path):
    from toolkit.dxf_in import read_drawing
    from toolkit.write.dxf_copy import result_copy_bytes

    doc, _, _ = bracket
    path = tmp_path / "once.dxf"
    doc.saveas(path)
    blocks_before = {b.name for b in doc.blocks}
    dims = ordinates(doc, True) + ordinates(doc, False)
    assert dims and all(d.dxf.geometry in blocks_before for d in dims)
    frame = read_drawing(path).frame
    again = ezdxf.read(io.StringIO(result_copy_bytes(path, frame, replace=True).decode("utf-8")))
    assert not list(again.modelspace().query('DIMENSION[layer=="LACUNA-DIM"]'))
    assert {b.name for b in again.blocks} == blocks_before - {d.dxf.geometry for d in dims}
    assert again.audit().has_errors is False
