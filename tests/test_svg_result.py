"""The optimisation figures: result sheet (output layers, true arcs, bores to scale), layout frames, convergence plot.

Inputs are built by hand: a panel 1200 x 600 mm (a scenario of our own), a density field with one round hole,
and three voids whose outlines are computed here from their definitions (DXF reference, LWPOLYLINE: bulge =
tan(theta / 4), positive counter-clockwise; a semicircle has bulge 1).
"""

from __future__ import annotations

import io
import math
import re
import xml.etree.ElementTree as ET

import cairosvg
import ezdxf
import ezdxf.math
import numpy as np
import pytest
from shapely.geometry import Point, box

from test_svg_out import SVG, all_text, groups, pixel_of
from toolkit import model
from toolkit.errors import LacunaError
from toolkit.fe.grid import Grid
from toolkit.rules.check import Violation
from toolkit.write import convergence_plot, fields, layout_frame, result_sheet
from toolkit.write.sheet import CAUTION, drawing_scale, nice_ticks, outline_path

# CONTRACT.md, "Output layers": DXF layer names; the SVG group ids are the same in lower case.
CONTRACT_LAYERS = ("LACUNA-VOID-POLYGON", "LACUNA-VOID-SLOT", "LACUNA-VOID-BORE", "LACUNA-FREEFORM",
                   "LACUNA-CENTRE", "LACUNA-NOTE", "LACUNA-CHECK")
DRAWING_GROUPS = ("panel", "openings", "keep", "supports", "loads")

W, H = 1200.0, 600.0
HOLE = (300.0, 300.0, 150.0)  # freeform void of the density field: centre x, y, radius
BORE = dict(centre=(300.0, 300.0), diameter=125.0)
# Slot along x: overall length 300, width 80 -> straight part 220, cap radius 40, caps reaching x = 650 and 950.
SLOT = dict(centre=(800.0, 300.0), width=80.0, length=300.0)
OPENING = (1050.0, 450.0, 60.0)


def slot_void() -> model.Void:
    cx, cy = SLOT["centre"]
    half, r = (SLOT["length"] - SLOT["width"]) / 2, SLOT["width"] / 2
    outline = ((cx - half, cy - r, 0.0), (cx + half, cy - r, 1.0), (cx + half, cy + r, 0.0), (cx - half, cy + r, 1.0))
    shape = box(cx - half, cy - r, cx + half, cy + r).union(Point(cx - half, cy).buffer(r, 64)).union(
        Point(cx + half, cy).buffer(r, 64))
    return model.Void(id="S1", family="slot", centre=SLOT["centre"], size_mm=SLOT["width"], shape=shape,
                      outline=outline, length_mm=SLOT["length"])


def bore_void() -> model.Void:
    c, d = BORE["centre"], BORE["diameter"]
    return model.Void(id="B1", family="bore", centre=c, size_mm=d, shape=Point(c).buffer(d / 2, 64))


def rounded_square_void() -> model.Void:
    # A 160 mm square centred at (500, 470) with corners rounded to r = 20: each corner a quarter arc,
    # bulge tan(90 deg / 4) = tan(22.5 deg) = 0.41421 (DXF reference, LWPOLYLINE).
    cx, cy, a, r = 500.0, 470.0, 80.0, 20.0
    b = math.tan(math.radians(22.5))
    pts = [(cx - a + r, cy - a, 0.0), (cx + a - r, cy - a, b), (cx + a, cy - a + r, 0.0), (cx + a, cy + a - r, b),
           (cx + a - r, cy + a, 0.0), (cx - a + r, cy + a, b), (cx - a, cy + a - r, 0.0), (cx - a, cy - a + r, b)]
    shape = box(cx - a, cy - a, cx + a, cy + a).buffer(-r).buffer(r, 32)
    return model.Void(id="P1", family="polygon", centre=(cx, cy), size_mm=2 * a * math.sqrt(2), shape=shape,
                      outline=tuple(pts), sides=4, length_mm=2 * a)


def wall_panel() -> model.Panel:
    return model.Panel(
        width_mm=W, height_mm=H, thickness_mm=60.0, material=model.Material(11500.0, 0.3, 420.0),
        openings=(model.Region(Point(OPENING[:2]).buffer(OPENING[2], quad_segs=16), layer="OPENING"),),
        keep=(model.Region(box(0, 0, 100, H), layer="KEEP"),),
        supports=(model.Support(((0.0, 0.0), (100.0, 0.0)), "xy"), model.Support(((W, 0.0),), "y")),
        loads=(model.PointLoad((W / 2, H), (0.0, -20e3)),),
        name="Test wall W3",
    )


GRID = Grid(nx=60, ny=30, dx=20.0, dy=20.0)


def hole_densities(panel: model.Panel) -> np.ndarray:
    """Solid (1) everywhere but a round hole of void elements (1e-3); elements cut by the opening carry their
    drawn solid share, as BESO hands them over."""
    from toolkit.fe.fractions import solid_fractions

    xc, yc = GRID.element_centres.T
    state = np.where(np.hypot(xc - HOLE[0], yc - HOLE[1]) < HOLE[2], 1e-3, 1.0)
    return state * solid_fractions(GRID, panel.solid)


@pytest.fixture(scope="module")
def sheet():
    panel = wall_panel()
    densities = hole_densities(panel)
    freeform = [Point(HOLE[:2]).buffer(HOLE[2], 32)]
    voids = [rounded_square_void(), slot_void(), bore_void()]
    violation = Violation("min_web", (600.0, 300.0), 42.0, 60.0, void_ids=("P1", "S1"))
    text = result_sheet.result_svg(panel, GRID, densities=densities, freeform=freeform, voids=voids,
                              profile="timber-bored", volume_removed_percent=7.25, mass_removed_kg=1.9,
                              date="2025-06-02", violations=[violation])
    return panel, voids, text


def render_sheet(text: str, px_per_mm: float = 8.0):
    """PNG pixels of an SVG at ``px_per_mm`` paper mm, as (rows, cols, 3) floats in [0, 1]."""
    from PIL import Image

    width_mm = float(ET.fromstring(text).get("width")[:-2])
    png = cairosvg.svg2png(bytestring=text.encode(), output_width=int(round(width_mm * px_per_mm)))
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB")).astype(float) / 255.0


def colour_at(img, text, xy, px_per_mm: float = 8.0):
    c, r = pixel_of(text, xy, px_per_mm)
    return np.median(img[r - 1 : r + 2, c - 1 : c + 2].reshape(-1, 3), axis=0)


def hex_rgb(code: str) -> np.ndarray:
    return np.array([int(code[i : i + 2], 16) for i in (1, 3, 5)]) / 255.0


SOLID_GREY = hex_rgb(fields.density_colours()[-1])
WHITE = np.ones(3)


# --- structure


def test_svg_parses_with_every_contract_group_in_the_drawing(sheet):
    *_, text = sheet
    g = groups(text)
    drawing_ids = {e.get("id") for e in g["drawing"].iter(f"{SVG}g") if e.get("id")}
    for name in CONTRACT_LAYERS:
        assert name.lower() in drawing_ids, name
        assert g[name.lower()].get("data-layer") == name
    assert set(DRAWING_GROUPS) <= drawing_ids
    assert {"heading", "legend", "scale-bar", "title"} <= set(g)


def test_the_key_of_a_sheet_with_nothing_on_our_layers_lists_the_panel_alone():
    # A panel with no voids, no markers and (here) no zone kept solid: every output layer's group is in the
    # file, empty, and the key names none of them.
    from dataclasses import replace

    bare = replace(wall_panel(), keep=())
    legend = all_text(groups(result_sheet.result_svg(bare, GRID, date="d"))["legend"])
    assert "panel and openings as drawn" in legend
    assert "zone kept solid" not in legend and "layer LACUNA" not in legend
    legend = all_text(groups(result_sheet.result_svg(wall_panel(), GRID, date="d"))["legend"])
    assert "zone kept solid" in legend  # the wall panel's KEEP zone


def test_layer_groups_present_even_when_empty():
    text = result_sheet.result_svg(wall_panel(), GRID, date="d")
    g = groups(text)
    for name in CONTRACT_LAYERS:
        assert name.lower() in g and len(list(g[name.lower()])) == 0, name
    assert g["drawing"].get("data-underlay") == "none"  # no densities: nothing to lay under


def test_sheet_in_millimetres_at_a_drafting_scale(sheet):
    *_, text = sheet
    root = ET.fromstring(text)
    assert root.get("width") == "260mm" and root.get("height").endswith("mm")
    # 1200 x 600 mm fits 196 x 150 mm of paper first at 1:10 (drafting scales: common practice, no source).
    assert drawing_scale(W, H) == 10
    assert "Scale 1:10" in all_text(groups(text)["heading"])
    assert groups(text)["scale-bar"].get("data-length") == "200 mm"


def test_each_void_on_its_family_layer_with_centre_mark_and_label(sheet):
    _, voids, text = sheet
    g = groups(text)
    for v in voids:
        layer = g[f"lacuna-void-{v.family}"]
        assert [e.get("data-void-id") for e in layer] == [v.id]
        assert [e.get("data-void-id") for e in g["lacuna-centre"]].count(v.id) == 1
        labels = [t for t in g["lacuna-note"].iter(f"{SVG}text") if t.get("data-void-id") == v.id]
        assert len(labels) == 1 and labels[0].text == v.id
    assert len(list(g["lacuna-freeform"])) == 1
    assert g["lacuna-freeform"].get("stroke-dasharray")  # the optimiser's outline thin and dashed
    stroke = lambda name: float(g[name].get("stroke-width"))  # noqa: E731
    assert stroke("lacuna-void-slot") > 2 * stroke("lacuna-freeform")  # voids to make bold


def test_violation_ringed_on_the_check_layer(sheet):
    *_, text = sheet
    check = groups(text)["lacuna-check"]
    rings = list(check.iter(f"{SVG}circle"))
    assert [(float(c.get("cx")), float(c.get("cy"))) for c in rings] == [(600.0, 300.0)]
    assert "min_web 42 < 60" in all_text(check)


def test_legend_names_each_layer_and_title_block_the_job(sheet):
    *_, text = sheet
    legend = all_text(groups(text)["legend"])
    for name in CONTRACT_LAYERS:
        assert f"layer {name}" in legend
    block = all_text(groups(text)["title"])
    for piece in ("Test wall W3", "profile: timber-bored", "volume removed 7.2 %", "1.9 kg", "2025-06-02",
                  "3 to make: 1 n-gon, 1 slot, 1 bore", CAUTION):
        assert piece in block, piece


# --- bores and arcs


def test_bore_radius_is_half_the_diameter_exactly_and_matches_the_dxf(sheet):
    from toolkit.write.dxf_copy import add_results

    _, voids, text = sheet
    circles = list(groups(text)["lacuna-void-bore"].iter(f"{SVG}circle"))
    assert len(circles) == 1
    # A circle's radius is half its diameter; the Void carries the diameter (toolkit/model.py).
    assert float(circles[0].get("r")) == BORE["diameter"] / 2 == 62.5
    assert (float(circles[0].get("cx")), float(circles[0].get("cy"))) == BORE["centre"]
    doc = ezdxf.new()
    add_results(doc, wall_panel().frame, voids=voids)
    (dxf_circle,) = doc.modelspace().query('CIRCLE[layer=="LACUNA-VOID-BORE"]')
    assert float(circles[0].get("r")) == dxf_circle.dxf.radius


@pytest.mark.parametrize("diameter", [20.0, 32.0, 0.1 + 0.2, 101.6, 1e-3 * 1234567])
def test_bore_radius_text_reads_back_exactly(diameter):
    v = model.Void(id="B", family="bore", centre=(600.0, 300.0), size_mm=diameter, shape=Point(600, 300).buffer(1))
    text = result_sheet.result_svg(wall_panel(), GRID, voids=[v], date="d")
    (circle,) = groups(text)["lacuna-void-bore"].iter(f"{SVG}circle")
    assert float(circle.get("r")) == diameter / 2


def arcs_of(d: str):
    """(rx, ry, rotation, large, sweep, x, y) of each A command in path data."""
    return [tuple(float(v) for v in m) for m in re.findall(
        r"A(-?[\d.]+) (-?[\d.]+) (-?[\d.]+) ([01]) ([01]) (-?[\d.]+) (-?[\d.]+)", d)]


def test_slot_caps_are_true_arcs_of_half_the_width(sheet):
    *_, text = sheet
    (path,) = groups(text)["lacuna-void-slot"].iter(f"{SVG}path")
    arcs = arcs_of(path.get("d"))
    assert len(arcs) == 2
    for (rx, ry, _, large, sweep, x, y), (sx, sy, b) in zip(arcs, [slot_void().outline[1], slot_void().outline[3]]):
        # Reference: ezdxf's own bulge -> arc conversion gives the radius of the cap.
        _, _, _, radius = ezdxf.math.bulge_to_arc((sx, sy), (x, y), b)
        assert rx == ry == pytest.approx(radius, abs=1e-4) and radius == pytest.approx(SLOT["width"] / 2)
        assert (large, sweep) == (0, 1)  # half circles, counter-clockwise in the local frame (y up)


@pytest.mark.parametrize("theta_deg, large, sweep", [(90, 0, 1), (180, 0, 1), (270, 1, 1), (-90, 0, 0), (-270, 1, 0)])
def test_bulge_to_arc_flags(theta_deg, large, sweep):
    # SVG 1.1, 8.3.8 "The elliptical arc curve commands": large-arc-flag 1 for a sweep over 180 degrees,
    # sweep-flag 1 for the positive-angle direction; DXF reference: bulge = tan(theta / 4), positive CCW.
    b = math.tan(math.radians(theta_deg) / 4)
    d = outline_path(((0.0, 0.0, b), (100.0, 0.0, 0.0)))
    ((rx, _, _, lg, sw, x, y),) = arcs_of(d)
    chord_radius = 50.0 / math.sin(math.radians(abs(theta_deg)) / 2)  # chord = 2 r sin(theta / 2)
    assert (lg, sw, x, y) == (large, sweep, 100.0, 0.0)
    assert rx == pytest.approx(chord_radius, abs=1e-4)


def test_slot_end_caps_render_as_void_where_the_arcs_say(sheet):
    # The density field is solid round the slot, so the drawn void (paper white) must show exactly inside the
    # stadium: inside both caps (up to their tips at x = 650 and 950) white, just beyond the cap's curve grey.
    *_, text = sheet
    img = render_sheet(text)
    (cx, cy), r = SLOT["centre"], SLOT["width"] / 2
    half = (SLOT["length"] - SLOT["width"]) / 2
    for side in (-1, 1):
        cap = cx + side * half
        d = (r - 15) * math.sqrt(0.5)  # on the 45-degree rays of the cap, 15 mm inside its curve
        for xy in [(cap + side * (r - 12), cy), (cap + side * d, cy + d), (cap + side * d, cy - d)]:
            assert np.abs(colour_at(img, text, xy) - WHITE).max() < 0.02, xy
        # Inside the cap's bounding box but outside the curve: a flipped arc would put white here.
        for xy in [(cap + side * (r + 14), cy), (cap + side * (r - 3), cy + r - 3), (cap + side * (r - 3), cy - r + 3)]:
            assert np.abs(colour_at(img, text, xy) - SOLID_GREY).max() < 0.03, xy


def test_rounded_corner_arcs_bulge_outwards_on_the_rendered_sheet(sheet):
    # Corner (580, 550) of the square, rounded with r = 20 about (560, 530): the corner point itself is cut off
    # (solid grey), a point on the arc's inner side (void white).
    *_, text = sheet
    img = render_sheet(text)
    assert np.abs(colour_at(img, text, (578.0, 548.0)) - SOLID_GREY).max() < 0.03
    assert np.abs(colour_at(img, text, (560.0 + 8.0, 530.0 + 8.0)) - WHITE).max() < 0.02


# --- underlays


def test_density_underlay_solid_grey_hole_white_opening_white(sheet):
    *_, text = sheet
    img = render_sheet(text)
    (c0, r0), (c1, r1) = pixel_of(text, (0.0, H)), pixel_of(text, (W, 0.0))
    panel_px = img[r0 + 3 : r1 - 3, c0 + 3 : c1 - 3]
    assert np.mean(panel_px.sum(axis=2) < 2.9) > 0.5  # rendered, not blank: most of the panel is material
    # The freeform hole (no rationalised void at its rim) shows paper; solid material the darkest grey class.
    assert np.abs(colour_at(img, text, (HOLE[0] - 120, HOLE[1])) - WHITE).max() < 0.02
    assert np.abs(colour_at(img, text, (200.0, 560.0)) - SOLID_GREY).max() < 0.03
    assert np.abs(colour_at(img, text, OPENING[:2]) - WHITE).max() < 0.02


def test_elements_cut_by_an_opening_are_drawn_by_their_material_state():
    # Density = state x drawn solid share (docs of BesoResult); dividing the share out gives back the state.
    panel = wall_panel()
    densities = hole_densities(panel)
    state, fractions = fields.material_state(panel, GRID, densities)
    cut = (fractions > 0.05) & (fractions < 0.95)
    assert cut.sum() > 10
    assert np.allclose(state[cut], 1.0)
    # Each share checked against shapely's area of the element inside the opening's complement.
    e = np.flatnonzero(cut)[0]
    x, y = GRID.element_centres[e]
    cell = box(x - 10, y - 10, x + 10, y + 10)
    assert fractions[e] == pytest.approx(cell.intersection(panel.solid).area / 400.0, rel=1e-9)


def test_density_greys_darken_evenly_from_void_to_solid():
    # Equal steps of density, equal steps of CIE L* (our design rule for the scale; L* from CIE 1976).
    from toolkit.write import palette

    colours = fields.density_colours()
    assert colours[0] == "#ffffff" and len(colours) == fields.DENSITY_CLASSES
    lab = palette.srgb_to_lab(np.array([hex_rgb(c) for c in colours[1:]]))
    steps = np.diff(lab[:, 0])
    assert np.all(steps < 0) and np.ptp(steps) < 0.6
    assert lab[-1, 0] < 55 and abs(lab[:, 1]).max() < 2 and abs(lab[:, 2]).max() < 3  # a grey, not a hue
    assert list(fields.density_classes([0.0, 0.1249, 0.125, 0.5, 0.999, 1.0])) == [0, 0, 1, 4, 7, 7]


def test_stress_underlay_uses_the_stress_drawing_and_its_legend():
    panel = wall_panel()
    voids = [slot_void()]
    xc, yc = GRID.element_centres.T
    # Bending of a simply supported beam: sx = -M y / I, M > 0 (tension at the bottom fibre); sign only matters.
    stress = np.column_stack([-(yc - H / 2) / (H / 2) * 4.0, np.zeros_like(xc), np.zeros_like(xc)])
    text = result_sheet.result_svg(panel, GRID, densities=hole_densities(panel), voids=voids, stress=stress,
                              underlay="stress", date="d")
    g = groups(text)
    assert "stress" in g and "density" not in g
    assert g["drawing"].get("data-stress-limit-MPa") == "4"
    assert "TENSION" in all_text(g["legend"])
    img = render_sheet(text)
    from test_svg_out import side_of_pixels

    c, r = pixel_of(text, (200.0, 40.0))
    assert np.mean(side_of_pixels(img[r - 2 : r + 3, c - 2 : c + 3]) == 1) > 0.8  # bottom fibre: tension side
    # The stress belongs to the panel with the voids cut: the hole of the density field is drawn too.
    assert np.abs(colour_at(img, text, (HOLE[0] - 120, HOLE[1])) - WHITE).max() > 0.05


# --- layout frames


def test_layout_frames_share_size_and_show_the_evolving_layout():
    panel = wall_panel()
    from toolkit.fe.fractions import solid_fractions

    solid = solid_fractions(GRID, panel.solid)  # every element full: iteration 0
    a = layout_frame.layout_frame_svg(panel, GRID, solid, iteration=0, compliance_Nmm=1234.5, volume_fraction=1.0)
    b = layout_frame.layout_frame_svg(panel, GRID, hole_densities(panel), iteration=12, compliance_Nmm=1501.0,
                                 volume_fraction=0.8125)
    ra, rb = ET.fromstring(a), ET.fromstring(b)
    assert (ra.get("width"), ra.get("height")) == (rb.get("width"), rb.get("height"))
    assert ra.get("width").endswith("mm")
    caption = all_text(groups(b)["heading"])
    assert "iteration 12" in caption and "1501 N mm" in caption and "0.812" in caption
    assert CAUTION in all_text(groups(b)["caution"])
    img_a, img_b = render_sheet(a), render_sheet(b)
    probe = (HOLE[0] - 100, HOLE[1])
    assert np.abs(colour_at(img_a, a, probe) - SOLID_GREY).max() < 0.03
    assert np.abs(colour_at(img_b, b, probe) - WHITE).max() < 0.02


# --- convergence


def beso_volume_history(target: float, rate: float, n: int) -> np.ndarray:
    # V_{k+1} = max(V*, V_k (1 - ER)) from V_0 = 1 (Huang & Xie 2009, Comput Mech 43:393-401).
    v = [1.0]
    for _ in range(n - 1):
        v.append(max(target, v[-1] * (1 - rate)))
    return np.array(v)


@pytest.fixture(scope="module")
def plot():
    v = beso_volume_history(0.55, 0.02, 45)
    c = 28000.0 / v**0.6  # compliance rising as material goes; any monotone stand-in will do for the plot
    return c, v, convergence_plot.convergence_svg(c, v, target=0.55, title="Test wall W3")


def test_convergence_polylines_one_vertex_per_iteration(plot):
    c, v, text = plot
    root = ET.fromstring(text)
    lines = {p.get("id"): p for p in root.iter(f"{SVG}polyline")}
    assert set(lines) == {"compliance-line", "volume-line"}
    for line in lines.values():
        pts = np.array([p.split(",") for p in line.get("points").split()], dtype=float)
        assert len(pts) == len(c) == 45
        assert np.all(np.diff(pts[:, 0]) > 0)  # iterations left to right
    # Compliance rises, so its line climbs (paper y grows downwards); the volume line falls.
    cy = np.array([p.split(",") for p in lines["compliance-line"].get("points").split()], dtype=float)[:, 1]
    vy = np.array([p.split(",") for p in lines["volume-line"].get("points").split()], dtype=float)[:, 1]
    assert cy[-1] < cy[0] and vy[-1] > vy[0]


def test_convergence_target_marker_at_the_first_iteration_on_target(plot):
    _, _, text = plot
    # 0.98^k first within 0.005 of 0.55 (<= 0.555) at k = ceil(ln 0.555 / ln 0.98) = 30: iteration 31.
    k = math.ceil(math.log(0.555) / math.log(0.98))
    assert k == 30
    g = groups(text)
    assert g["target"].get("data-iteration") == "31"
    assert "iteration 31" in all_text(g["target"]) and "target 0.55 reached" in all_text(g["legend"])


def test_convergence_ticks_at_round_values(plot):
    _, _, text = plot
    labels = [t.text for t in groups(text)["tick-labels"].iter(f"{SVG}text")]
    assert "compliance, 10\u00b3 N mm" in labels and "volume fraction of the design region" in labels
    # Round values of the 1-2-5 series (common practice, no source).
    assert nice_ticks(28380.0, 34200.0).tolist() == [28000, 30000, 32000, 34000, 36000]
    assert nice_ticks(0.55, 1.0).tolist() == pytest.approx([0.5, 0.6, 0.7, 0.8, 0.9, 1.0])
    assert nice_ticks(0, 45, 6).tolist() == [0, 10, 20, 30, 40, 50]
    for piece in ("0.5", "1.0", "10", "40"):
        assert piece in labels


def test_one_iteration_history_still_draws():
    text = convergence_plot.convergence_svg([100.0], [0.9], target=0.5)
    (line, _) = ET.fromstring(text).iter(f"{SVG}polyline")
    assert len(line.get("points").split()) == 1
    assert "not reached" in all_text(groups(text)["legend"])


# --- bad input


def test_bad_requests_are_refused_in_words():
    panel = wall_panel()
    with pytest.raises(LacunaError, match="unknown underlay 'heat'.*density, stress, none"):
        result_sheet.result_svg(panel, GRID, underlay="heat")
    with pytest.raises(LacunaError, match="no stresses were given"):
        result_sheet.result_svg(panel, GRID, underlay="stress")
    with pytest.raises(LacunaError, match="densities array has shape"):
        result_sheet.result_svg(panel, GRID, densities=np.ones(10))
    with pytest.raises(LacunaError, match="unknown void family 'hole'"):
        result_sheet.result_svg(panel, GRID, voids=[model.Void("X", "hole", (1, 1), 5.0, Point(1, 1).buffer(2))])
    with pytest.raises(LacunaError, match="check marker 0"):
        result_sheet.result_svg(panel, GRID, violations=[42])
    with pytest.raises(LacunaError, match="same length"):
        convergence_plot.convergence_svg([1.0, 2.0], [1.0])
    with pytest.raises(LacunaError, match="target volume fraction"):
        convergence_plot.convergence_svg([1.0], [1.0], target=1.5)
    with pytest.raises(LacunaError, match="not finite"):
        convergence_plot.convergence_svg([1.0, np.nan], [1.0, 0.9])
    with pytest.raises(LacunaError, match="volume fraction between 0 and 1"):
        layout_frame.layout_frame_svg(panel, GRID, np.ones(GRID.nx * GRID.ny), iteration=3, compliance_Nmm=1.0,
                                 volume_fraction=1.2)


def test_masses_on_the_sheet_are_written_without_an_exponent():
    # A precast panel's saving runs to tonnes: "1.21e+03 kg" is not how a drawing states a mass.
    from toolkit.write.sheet import kilograms as _kilograms

    assert _kilograms(1210.4) == "1210 kg"
    assert _kilograms(20.63) == "20.6 kg"
    assert _kilograms(0.534) == "0.534 kg"
    assert all("e" not in _kilograms(m).split()[0] for m in (1e-3, 0.5, 7.0, 99.96, 1234.5, 2.5e5))


def test_void_ids_never_overlap_each_other_other_voids_or_a_point_load():
    # A crowded cantilever of our own: 56 bores three rows deep, 95 mm apart, a 50 kN load at the free end. Every
    # id's lettering box (estimated from the font's proportions) is clear of every other id, of every void but its
    # own, of the 12 mm square round the load's point, and inside the panel.
    from shapely.geometry import Point as P

    from toolkit.model import Material, Panel, PointLoad, Support, Void
    from toolkit.write.result_sheet import LABEL_SIZE, _label_spots, label_box
    from toolkit.write.sheet import Figure

    panel = Panel(width_mm=3000, height_mm=800, thickness_mm=20, element_size_mm=25,
                  material=Material(E_MPa=210000, nu=0.3), supports=(Support(((0, 0), (0, 800)), "xy"),),
                  loads=(PointLoad((3000, 400), (0, -50000)),), name="crowded cantilever")
    rng = np.random.default_rng(2)
    voids = []
    for x in np.arange(150, 2900, 95):
        for y in (200, 400, 600):
            if rng.random() < 0.35:
                continue
            d = float(rng.choice([25, 32, 51, 64]))
            c = (float(x + rng.uniform(-10, 10)), float(y + rng.uniform(-40, 40)))
            voids.append(Void(id=f"V{len(voids) + 1}", family="bore", centre=c, size_mm=d,
                              shape=P(c).buffer(d / 2, quad_segs=16)))
    fig = Figure(panel)
    spots = _label_spots(fig, voids, LABEL_SIZE)
    boxes = [label_box(fig, v.id, at, LABEL_SIZE) for v, (at, _) in zip(voids, spots)]
    load_zone = P(3000, 400).buffer(fig.paper(12.0), cap_style="square")
    for i, lettering in enumerate(boxes):
        assert not any(lettering.intersects(boxes[j]) for j in range(len(boxes)) if j != i), voids[i].id
        assert not any(lettering.intersects(v.shape) for j, v in enumerate(voids) if j != i), voids[i].id
        assert not lettering.intersects(load_zone), voids[i].id
        assert lettering.within(panel.solid), voids[i].id
    # Ids that stand away from their void point at it: the leader starts on the void's outline.
    for v, (_, leader) in zip(voids, spots):
        if leader is not None:
            assert v.shape.boundary.distance(P(leader[0])) < 1e-6



def test_a_void_id_with_no_leader_stands_clearly_nearer_its_void_than_an_opening():
    # A 5.4 x 0.9 m precast lintel of our own with a duct opening and a pipe sleeve, and the ten pentagons lacuna
    # made in it (their sharp corners as the schedule gave them, mm). Placed just outside its void, an id with no
    # leader must stand at most LABEL_NEARER as far from its void as from any other void or opening; before that
    # rule V8's id stood above the sleeve, 0.95 as far from V8 as from it, and read as the sleeve's. No id or leader
    # crosses an opening.
    import shapely
    from shapely.geometry import Point as P
    from shapely.geometry import Polygon as Poly

    from toolkit.model import Material, Panel, Region, Support, Void
    from toolkit.write.result_sheet import LABEL_NEARER, LABEL_SIZE, _label_spots, label_box
    from toolkit.write.sheet import Figure

    corners = {
        "V1": [(225, 415), (230, 820), (80, 805), (80, 420), (135, 385)],
        "V2": [(540, 790), (420, 830), (330, 765), (335, 565), (435, 540)],
        "V3": [(760, 745), (760, 825), (665, 820), (615, 705), (675, 680)],
        "V4": [(935, 310), (875, 355), (805, 395), (750, 305), (900, 220)],
        "V5": [(1670, 530), (1775, 635), (1665, 640), (1555, 630), (1590, 515)],
        "V6": [(2385, 440), (2385, 625), (2240, 635), (1910, 375), (2210, 285)],
        "V7": [(3300, 295), (3430, 338), (3084, 643), (2487, 639), (2485, 272)],
        "V8": [(3880, 460), (3505, 655), (3325, 615), (3410, 495), (3615, 300)],
        "V9": [(5065, 760), (4985, 825), (4845, 795), (4985, 575), (5075, 595)],
        "V10": [(5320, 435), (5320, 805), (5175, 820), (5180, 410), (5265, 395)],
    }
    duct = Poly([(1200, 350), (1400, 350), *[(1400 + 100 * np.sin(t), 450 - 100 * np.cos(t))
                                              for t in np.linspace(0, np.pi, 17)[1:-1]], (1400, 550), (1200, 550)])
    sleeve = P(4100, 450).buffer(80, quad_segs=16)
    panel = Panel(width_mm=5400, height_mm=900, thickness_mm=200, element_size_mm=15,
                  material=Material(E_MPa=30000, nu=0.2),
                  supports=(Support(((0, 0), (250, 0)), "xy"), Support(((5150, 0), (5400, 0)), "y")),
                  openings=(Region(duct, "OPENING"), Region(sleeve, "OPENING")), name="garage lintel")
    voids = []
    for vid, pts in corners.items():
        shape = Poly(pts)
        c = shape.centroid
        voids.append(Void(id=vid, family="polygon", centre=(c.x, c.y), size_mm=float(shape.length / 3), shape=shape,
                          sides=5))
    fig = Figure(panel)
    spots = _label_spots(fig, voids, LABEL_SIZE)
    drawn = [v.shape for v in voids] + [duct, sleeve]
    for k, (v, (at, leader)) in enumerate(zip(voids, spots)):
        box = label_box(fig, v.id, at, LABEL_SIZE)
        assert not box.intersects(duct) and not box.intersects(sleeve), v.id
        if leader is not None:
            line = shapely.LineString(leader)
            assert not line.intersects(duct) and not line.intersects(sleeve), v.id
        elif not v.shape.covers(box):
            others = [g for j, g in enumerate(drawn) if j != k]
            assert box.distance(v.shape) <= LABEL_NEARER * min(box.distance(g) for g in others) + 1e-9, v.id


# The sheets letter in DejaVu Sans first (toolkit/write/sheet.py, FONT); the glyphs' ink boxes and advance widths are
# read here from the font files themselves with Pillow, not from the writer's estimate of them.
DEJAVU = {False: "/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf",
          True: "/usr/share/fonts/truetype/dejavu/DejaVuSans-Bold.ttf"}


def lettering_boxes(svg: str):
    """Every piece of lettering inside the sheet's drawing (local mm), measured from the SVG as written: its
    transform, font size, anchor and weight, and the font's own glyph boxes. Returns [(box, text, group id,
    data-void-id)]; a cased label's white copy underneath is left out, its stroke widens the box instead."""
    from pathlib import Path

    from PIL import ImageFont
    from shapely.affinity import affine_transform
    from shapely.geometry import box

    if not all(Path(f).exists() for f in DEJAVU.values()):
        pytest.skip("DejaVu Sans is not installed: the sheet's lettering cannot be measured")
    fonts = {bold: ImageFont.truetype(path, 1000) for bold, path in DEJAVU.items()}
    root = ET.fromstring(svg)
    (drawing,) = [g for g in root.iter(f"{SVG}g") if g.get("id") == "drawing"]
    out = []
    for group in drawing.iter(f"{SVG}g"):
        for t in group.findall(f"{SVG}text"):
            if t.get("data-casing"):
                continue
            text = "".join(t.itertext())
            size = float(t.get("font-size"))
            font = fonts[t.get("font-weight") == "bold"]
            x0, y0, x1, y1 = font.getbbox(text, anchor="ls")  # ink box, baseline at 0, y down, at 1000 units
            advance = font.getlength(text)
            shift = {"start": 0.0, "middle": 0.5, "end": 1.0}[t.get("text-anchor", "start")] * advance
            k = size / 1000.0
            casing = 0.3 if any(c.get("data-casing") and "".join(c.itertext()) == text
                                and c.get("transform") == t.get("transform") for c in group) else 0.0
            glyphs = box((x0 - shift) * k - casing, y0 * k - casing, (x1 - shift) * k + casing, y1 * k + casing)
            a, b, c, d, e, f = (float(v) for v in re.fullmatch(r"matrix\(([^)]*)\)", t.get("transform")).group(1)
                                .replace(",", " ").split())
            out.append((affine_transform(glyphs, (a, c, b, d, e, f)), text, group.get("id"), t.get("data-void-id")))
    return out


def arrow_shapes(svg: str):
    """The load arrows as drawn (local mm): each shaft a line of its stroke width, each head its triangle."""
    from shapely.geometry import LineString, Polygon

    loads = groups(svg)["loads"]
    out = []
    for line in loads.iter(f"{SVG}line"):
        width = float(line.get("stroke-width") or loads.get("stroke-width"))
        ends = [(float(line.get("x1")), float(line.get("y1"))), (float(line.get("x2")), float(line.get("y2")))]
        out.append(LineString(ends).buffer(width / 2.0))
    for path in loads.iter(f"{SVG}path"):
        numbers = [float(v) for v in re.findall(r"-?\d+(?:\.\d+)?", path.get("d"))]
        out.append(Polygon(list(zip(numbers[0::2], numbers[1::2]))))
    return out


def crowded_bracket():
    """A steel bracket of our own, 600 x 300 mm, welded along its left edge: a 50 kN hanger load at the tip's
    mid-depth and 20 kN on the top edge, 30 voids (hexagons and bores, 36 and 44 mm) in six columns, the last one
    hard by the tip's arrow."""
    from shapely.geometry import Polygon

    panel = model.Panel(width_mm=600.0, height_mm=300.0, thickness_mm=12.0, material=model.Material(210000.0, 0.3),
                        supports=(model.Support(((0.0, 0.0), (0.0, 300.0)), "xy"),),
                        loads=(model.PointLoad((600.0, 150.0), (0.0, -50e3)), model.PointLoad((300.0, 300.0),
                                                                                               (0.0, -20e3))),
                        name="crowded bracket")
    voids = []
    for i, x in enumerate((70.0, 170.0, 270.0, 370.0, 470.0, 570.0)):
        for j, y in enumerate((45.0, 97.0, 150.0, 203.0, 255.0)):
            d = 44.0 if (i + j) % 2 else 36.0
            vid = f"V{len(voids) + 1}"
            if (i + j) % 3:
                corners = [(x + d / 2 * math.cos(math.radians(60 * k)), y + d / 2 * math.sin(math.radians(60 * k)))
                           for k in range(6)]
                voids.append(model.Void(vid, "polygon", (x, y), d, Polygon(corners), sides=6, length_mm=d))
            else:
                voids.append(model.Void(vid, "bore", (x, y), d, Point(x, y).buffer(d / 2, 64)))
    return panel, voids


def test_labels_on_the_sheet_overlap_no_label_load_arrow_or_void():
    # The crowded bracket's sheet, as a shop gets it: every void id, load figure and ordinate read back from the
    # written SVG and measured with the font itself. No two overlap; none covers a load arrow; none covers a void
    # outline (a void's id may stand inside its own void, clear of its outline).
    panel, voids = crowded_bracket()
    svg = result_sheet.result_svg(panel, Grid(nx=60, ny=30, dx=10.0, dy=10.0), voids=voids, underlay="made")
    boxes = lettering_boxes(svg)
    by_group = {g for _, _, g, _ in boxes}
    assert {"lacuna-note", "loads", "lacuna-dim"} <= by_group
    assert sorted(t for _, t, g, _ in boxes if g == "loads") == ["20 kN", "50 kN"]
    assert len([1 for _, _, g, _ in boxes if g == "lacuna-note"]) == len(voids)
    for i, (a, text_a, group_a, _) in enumerate(boxes):
        for b, text_b, group_b, _ in boxes[i + 1:]:
            assert not a.intersects(b), f"{group_a} {text_a!r} overlaps {group_b} {text_b!r}"
    arrows = arrow_shapes(svg)
    assert len(arrows) == 4  # two shafts, two heads
    for lettering, text, group, owner in boxes:
        assert not any(lettering.intersects(arrow) for arrow in arrows), f"{group} {text!r} covers an arrow"
        for v in voids:
            if v.id == owner and v.shape.buffer(-1e-6).contains(lettering):
                continue  # inside its own void
            assert not lettering.intersects(v.shape), f"{group} {text!r} covers void {v.id}"


def test_a_long_run_of_ordinates_stays_between_the_heading_and_the_legend():
    # 40 bores of our own at 40 different heights on a 600 x 300 plate (1:5, 60 mm high on paper): their y
    # ordinates need more room than the panel's side; the lettering keeps to the sheet's room (under the heading,
    # which ends 8 + 15 mm from the sheet's top edge, toolkit/write/sheet.py MARGIN and HEADING, our layout), does
    # not overlap, and still names every centre.
    panel, _ = crowded_bracket()
    voids = []
    for k in range(40):
        c = (40.0 + 13.0 * k, 12.0 + 6.9 * k)
        voids.append(model.Void(f"V{k + 1}", "bore", c, 10.0, Point(c).buffer(5.0, 32)))
    svg = result_sheet.result_svg(panel, Grid(nx=60, ny=30, dx=10.0, dy=10.0), voids=voids, underlay="made")
    a, _, _, d, e, f = (float(v) for v in re.fullmatch(r"matrix\(([^)]*)\)", groups(svg)["drawing"].get("transform"))
                        .group(1).split())
    legend_top = min(float(t.get("y")) for t in groups(svg)["legend"].iter(f"{SVG}text")) - 3.0
    dims = [(b, text) for b, text, group, _ in lettering_boxes(svg) if group == "lacuna-dim"]
    assert len(dims) == 2 * 41  # x and y of 40 centres and the datum's two zeros
    for b, text in dims:
        x0, y0, x1, y1 = b.bounds
        top, bottom = f + d * y1, f + d * y0  # paper y grows downwards
        assert top >= 8.0 + 15.0 and bottom <= legend_top, text
    for i, (b, text) in enumerate(dims):
        assert not any(b.intersects(other) for other, _ in dims[i + 1:]), text
    shown = set(re.findall(r'data-ordinate="y ([-\d.]+)"', svg))
    assert shown == {f"{v.centre[1]:.0f}" for v in voids} | {"0"}


def test_the_result_sheet_is_the_panel_as_made_with_ordinates_and_the_layout_a_figure_of_its_own(tmp_path):
    # The demo through optimize: the result sheet shows the panel as it will be made (no density cells, no
    # freeform outlines) with an ordinate from the datum to every void's centre, x and y, in the drawing's unit;
    # the optimiser's densities and freeform voids go to the layout figure.
    import json
    import re
    from pathlib import Path

    from toolkit.api import demo_files, optimize_file

    dxf, toml = demo_files()
    outcome = optimize_file(dxf, toml, out_dir=tmp_path / "out")
    stem = Path(dxf).stem
    sheet = (tmp_path / "out" / f"{stem}-result.svg").read_text()
    layout = (tmp_path / "out" / f"{stem}-layout.svg").read_text()
    assert 'data-underlay="made"' in sheet and 'data-underlay="density"' in layout
    assert 'id="density"' not in sheet and 'id="made"' in sheet
    def freeform_paths(svg: str) -> int:
        root = ET.fromstring(svg)
        (group,) = [g for g in root.iter("{http://www.w3.org/2000/svg}g") if g.get("id") == "lacuna-freeform"]
        return len(list(group))

    assert freeform_paths(sheet) == 0 and freeform_paths(layout) > 0
    # ... and the sheet's key does not list what it does not show.
    assert "layer LACUNA-FREEFORM" not in sheet and "layer LACUNA-FREEFORM" in layout
    ordinates = set(re.findall(r'data-ordinate="([xy]) ([-\d.]+)"', sheet))
    voids = json.loads((tmp_path / "out" / f"{stem}-optimize.json").read_text())["voids"]
    assert voids
    for v in voids:
        # The drawing's frame may differ from the panel's local frame only by a shift and turn; the demo's is
        # the local one, so its centres are the ordinates (to the nearest mm, as written).
        assert ("x", f"{v['centre'][0]:.0f}") in ordinates, v["id"]
        assert ("y", f"{v['centre'][1]:.0f}") in ordinates, v["id"]
    assert 'data-datum="1"' in sheet
    assert f"{stem}-layout.svg" in {Path(p).name for p in outcome.summary["outputs"]}
    # The key lists a family's layer only where the sheet has voids of it, and the rule markers only where there
    # are some; the empty layers' groups stay in the file (to toggle in a viewer).
    families = {v["family"] for v in voids}
    for family, layer in (("polygon", "LACUNA-VOID-POLYGON"), ("slot", "LACUNA-VOID-SLOT"),
                          ("bore", "LACUNA-VOID-BORE")):
        for svg in (sheet, layout):
            assert (f"layer {layer}" in svg) == (family in families), (family, families)
            assert f'id="{layer.lower()}"' in svg
    assert families != {"polygon", "slot", "bore"}  # so the test sees a family left out
    assert outcome.summary["rules"]["violations"] == [] and "layer LACUNA-CHECK" not in sheet


def test_rule_markers_labels_keep_off_each_other_and_the_void_ids():
    # Markers of our own in a close diagonal run (each label's first spot, up and to the right of its ring, would
    # sit on the next marker's label), beside a void whose id stands where the first label would go: every label
    # goes through the sheet's one placer, so no two labels overlap, nor a label and a ring.
    from shapely.geometry import Point as P

    from toolkit.model import Material, Panel, Support, Void
    from toolkit.write.labels import Labels, text_box
    from toolkit.write.result_sheet import LABEL_SIZE, MARKER_SIZE, _label_spots, _marker_spots, label_box
    from toolkit.write.sheet import Figure
    from toolkit.write.shapes import Marker

    panel = Panel(width_mm=3000, height_mm=1000, thickness_mm=20, element_size_mm=25,
                  material=Material(E_MPa=210000, nu=0.3), supports=(Support(((0, 0), (0, 1000)), "xy"),),
                  name="markers")
    fig = Figure(panel)
    step = fig.paper(6.0)  # six paper mm apart along the diagonal: the labels are some 18 paper mm long
    markers = [Marker((1200.0 + k * step, 400.0 + k * step), "min_web 42 < 60") for k in range(4)]
    void = Void(id="V1", family="bore", centre=(1230.0, 560.0), size_mm=60.0,
                shape=P(1230.0, 560.0).buffer(30.0, quad_segs=16))
    labels = Labels(fig)
    labels.block(void.shape, owner="V1")
    (id_at, _), = _label_spots(fig, [void], LABEL_SIZE, labels)
    placed = _marker_spots(fig, markers, labels)
    boxes = [label_box(fig, "V1", id_at, LABEL_SIZE)] + [
        text_box(fig, m.label, at, MARKER_SIZE, anchor=anchor) for m, (_, at, anchor) in zip(markers, placed)]
    rings = [P(m.where).buffer(r) for m, (r, _, _) in zip(markers, placed)]
    for i, a in enumerate(boxes):
        assert not any(a.intersects(b) for b in boxes[i + 1:]), i
        assert not any(a.intersects(ring) for ring in rings), i
    # ... where every label on its first spot would not do: the run needs the placer.
    first = [text_box(fig, m.label, (m.where[0] + d, m.where[1] + d), MARKER_SIZE)
             for m, d in ((m, r * math.sqrt(0.5) + fig.paper(0.5)) for m, (r, _, _) in zip(markers, placed))]
    assert any(a.intersects(b) for i, a in enumerate(first) for b in first[i + 1:] + rings[i + 1:])


def test_a_markers_figures_carry_three_digits_or_as_many_as_tell_them_apart():
    # The label beside a rule marker: three significant digits, more only where three would print the measured
    # and required figures alike (the rule is broken, so they differ).
    from toolkit.write.shapes import as_marker

    def label(rule, measured, required):
        return as_marker({"where": (0.0, 0.0), "rule": rule, "measured": measured, "required": required}, 0).label

    assert label("max_edge_stress", 1.90915, 1.2) == "max_edge_stress 1.91 > 1.2"
    assert label("max_edge_stress", 1.2004, 1.2) == "max_edge_stress 1.2004 > 1.2"
    assert label("min_web", 42.0, 60.0) == "min_web 42 < 60"
    assert label("edge_cover", 49.99, 50.0) == "edge_cover 49.99 < 50"
