"""The analysis figure: structure, drawing to scale, and the right colours where beam theory says so.

The check case is a simply supported beam under a uniform load, built by hand from beam theory (no FE run):
M(x) = w x (L - x) / 2, sx = -M (y - h/2) / I, V(x) = w (L/2 - x), txy = -V (h^2/4 - (y - h/2)^2) / (2 I),
v(x) = -w x (L^3 - 2 L x^2 + x^3) / (24 E I), u = -(y - h/2) v'(x), mid-span deflection 5 w L^4 / (384 E I)
(Roark's Formulas for Stress and Strain, table 8.1, uniformly distributed load on a simply supported span;
the shear distribution from Gere, Mechanics of Materials, "shear stresses in rectangular beams").
"""

from __future__ import annotations

import io
import math
import re
import xml.etree.ElementTree as ET
from dataclasses import dataclass

import cairosvg
import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from shapely.geometry import Point, box

from toolkit import model
from toolkit.errors import LacunaError
from toolkit.fe.grid import Grid
from toolkit.fe.stress import principal_stresses
from toolkit.write import analysis_figure, fields, palette, sheet

SVG = "{http://www.w3.org/2000/svg}"


@dataclass(frozen=True)
class StandInGrid:
    """Only what the figure may rely on: nx, ny, dx, dy, node_xy, element_centres (toolkit/fe/__init__.py)."""

    nx: int
    ny: int
    dx: float
    dy: float

    @property
    def node_xy(self):
        x, y = np.meshgrid(np.arange(self.nx + 1) * self.dx, np.arange(self.ny + 1) * self.dy)
        return np.column_stack([x.ravel(), y.ravel()])

    @property
    def element_centres(self):
        x, y = np.meshgrid((np.arange(self.nx) + 0.5) * self.dx, (np.arange(self.ny) + 0.5) * self.dy)
        return np.column_stack([x.ravel(), y.ravel()])


# The beam (a scenario of our own): 2000 x 400 mm, 100 mm thick, E = 10 000 MPa, uniform load 4 kN/m on top.
L, H, T, E, NU, W = 2000.0, 400.0, 100.0, 10000.0, 0.3, 4.0
I = T * H**3 / 12.0
HOLE = (500.0, 200.0, 80.0)


def beam_panel(**changes) -> model.Panel:
    values = dict(
        width_mm=L, height_mm=H, thickness_mm=T, material=model.Material(E, NU),
        openings=(model.Region(Point(HOLE[0], HOLE[1]).buffer(HOLE[2], quad_segs=16), layer="OPENING"),),
        keep=(model.Region(box(0, 0, 150, H), layer="KEEP"),),
        supports=(model.Support(((0.0, 0.0),), "xy"), model.Support(((L, 0.0),), "y")),
        loads=(model.LineLoad((0.0, H), (L, H), (0.0, -W)), model.PointLoad((L / 2, H), (0.0, -12e3), case="plant")),
        name="Test beam B1",
    )
    values.update(changes)
    return model.Panel(**values)


def beam_arrays(grid, panel):
    xc, yc = np.asarray(grid.element_centres).T
    m = W * xc * (L - xc) / 2.0
    v_shear = W * (L / 2.0 - xc)
    yp = yc - H / 2.0
    stress = np.column_stack([-m * yp / I, np.zeros_like(xc), -v_shear * (H * H / 4.0 - yp * yp) / (2.0 * I)])
    xn, yn = np.asarray(grid.node_xy).T
    v = -W * xn * (L**3 - 2 * L * xn**2 + xn**3) / (24.0 * E * I)
    dv = -W * (L**3 - 6 * L * xn**2 + 4 * xn**3) / (24.0 * E * I)
    u = -(yn - H / 2.0) * dv
    displacement = np.column_stack([u, v]).ravel()
    cells = shapely.box(xc - grid.dx / 2, yc - grid.dy / 2, xc + grid.dx / 2, yc + grid.dy / 2)
    fractions = shapely.area(shapely.intersection(cells, panel.solid)) / (grid.dx * grid.dy)
    return fractions, displacement, stress


@pytest.fixture(scope="module")
def beam():
    panel = beam_panel()
    grid = StandInGrid(nx=40, ny=8, dx=L / 40, dy=H / 8)
    fractions, displacement, stress = beam_arrays(grid, panel)
    text = analysis_figure.analysis_svg(panel, grid, fractions, displacement, stress, date="2025-03-14")
    return panel, grid, fractions, displacement, stress, text


def groups(text: str) -> dict[str, ET.Element]:
    root = ET.fromstring(text)
    return {g.get("id"): g for g in root.iter(f"{SVG}g") if g.get("id")}


def all_text(element: ET.Element) -> str:
    return " ".join("".join(t.itertext()) for t in element.iter(f"{SVG}text"))


def drawing_matrix(text: str) -> tuple[float, ...]:
    transform = groups(text)["drawing"].get("transform")
    return tuple(float(v) for v in re.fullmatch(r"matrix\(([^)]*)\)", transform).group(1).split())


def render(text: str, px_per_mm: float = 8.0):
    from PIL import Image

    png = cairosvg.svg2png(bytestring=text.encode(), output_width=int(round(sheet.SHEET_WIDTH_MM * px_per_mm)))
    return np.asarray(Image.open(io.BytesIO(png)).convert("RGB")).astype(float) / 255.0


def pixel_of(text: str, xy, px_per_mm: float = 8.0) -> tuple[int, int]:
    a, _, _, d, e, f = drawing_matrix(text)
    return int(round((e + a * xy[0]) * px_per_mm)), int(round((f + d * xy[1]) * px_per_mm))


def side_of_pixels(pixels: np.ndarray) -> np.ndarray:
    """+1 where a pixel is nearest a tension class colour, -1 nearest a compression one (CIE76)."""
    classes = palette.class_colours(fields.STRESS_CLASSES_PER_SIDE)
    lab_classes = palette.srgb_to_lab(np.array([palette.hex_to_rgb(c) for c in classes]))
    lab = palette.srgb_to_lab(pixels.reshape(-1, 3))
    nearest = np.argmin(np.linalg.norm(lab[:, None, :] - lab_classes[None, :, :], axis=2), axis=1)
    return np.where(nearest >= fields.STRESS_CLASSES_PER_SIDE, 1, -1)


def stress_cells(text: str) -> dict[int, int]:
    """Element -> colour class, read back from the stress group's merged runs."""
    colours = palette.class_colours(fields.STRESS_CLASSES_PER_SIDE)
    cells: dict[int, int] = {}
    for path in groups(text)["stress"].iter(f"{SVG}path"):
        c = colours.index(path.get("fill"))
        for ix, iy, n in re.findall(r"M(\d+) (\d+)h(\d+)v1h-\d+z", path.get("d")):
            for k in range(int(n)):
                key = (int(iy), int(ix) + k)
                assert key not in cells, "an element drawn twice"
                cells[key] = c
    return cells


# --- structure


def test_svg_parses_with_every_group(beam):
    *_, text = beam
    found = set(groups(text))
    expected = {"heading", "drawing", "stress", "directions", "panel", "openings", "keep", "deflected", "supports",
                "loads", "legend", "scale-bar", "title"}
    assert expected <= found
    assert all(name == name.lower() for name in found)


def test_sheet_is_sized_in_millimetres_and_panel_drawn_to_the_stated_scale(beam):
    panel, *_, text = beam
    root = ET.fromstring(text)
    width, height = root.get("width"), root.get("height")
    assert width == "260mm" and height.endswith("mm")
    assert [float(v) for v in re.split(r"[\s,]+", root.get("viewBox"))] == [0.0, 0.0, 260.0, float(height[:-2])]
    a, b, c, d, _, _ = drawing_matrix(text)
    n = sheet.drawing_scale(L, H)
    assert (a, b, c, d) == pytest.approx((1.0 / n, 0.0, 0.0, -1.0 / n))  # y flipped: local y points up
    heading = all_text(groups(text)["heading"])
    assert f"Scale 1:{n}" in heading and "x to the right, y up" in heading


def test_title_block_names_the_job_and_carries_the_caution(beam):
    *_, text = beam
    block = all_text(groups(text)["title"])
    for piece in ("Test beam B1", "load case: main", "E = 10000 MPa", "\u03bd = 0.3", "thickness 100 mm",
                  "2025-03-14", sheet.CAUTION):
        assert piece in block, piece


def test_legend_says_which_side_is_tension(beam):
    *_, text = beam
    legend = groups(text)["legend"]
    labels = {t.text: t for t in legend.iter(f"{SVG}text") if t.text}
    tension = next(t for k, t in labels.items() if "TENSION" in k)
    compression = next(t for k, t in labels.items() if "COMPRESSION" in k)
    assert float(tension.get("x")) > float(compression.get("x"))  # tension on the right of the bar
    bar = next(g for g in legend.iter(f"{SVG}g") if g.get("id") == "legend-bar")
    fills = [r.get("fill") for r in bar.iter(f"{SVG}rect")]
    assert fills[-1] == palette.class_colours(fields.STRESS_CLASSES_PER_SIDE)[-1]
    assert "MPa" in all_text(legend)


def test_supports_loads_and_keep_zones(beam):
    *_, text = beam
    g = groups(text)
    fixes = sorted(s.get("data-fix") for s in g["supports"] if s.get("data-fix"))
    assert fixes == ["xy", "y"]
    loads = all_text(g["loads"])
    assert "4 kN/m" in loads and "12 kN" not in loads  # the point load belongs to another case
    assert g["keep"].get("stroke-dasharray")  # kept-solid zones dashed


def test_other_load_case_draws_its_own_loads(beam):
    panel, grid, fractions, displacement, stress, _ = beam
    text = analysis_figure.analysis_svg(panel, grid, fractions, displacement, stress, case="plant", date="2025-03-14")
    assert "12 kN" in all_text(groups(text)["loads"])
    assert "load case: plant" in all_text(groups(text)["title"])


# --- content against beam theory


def test_deflection_scale_from_the_beam_formula(beam):
    *_, text = beam
    mid = 5.0 * W * L**4 / (384.0 * E * I)  # Roark table 8.1: 0.15625 mm here
    # 4 % of the smaller side over the largest deflection, nearest on the 1-2-5 series: 16 / 0.15625 = 102 -> 100
    assert analysis_figure.deflection_scale_for(mid, L, H) == 100.0
    assert groups(text)["drawing"].get("data-deflection-scale") == "100"
    assert "drawn \u00d7 100" in all_text(groups(text)["legend"])
    outline = next(p for p in groups(text)["deflected"].iter(f"{SVG}path") if p.get("data-ring") == "outline")
    pts = np.array(re.findall(r"(-?[\d.]+) (-?[\d.]+)", outline.get("d")), dtype=float)
    bottom_mid = pts[np.argmin(np.hypot(pts[:, 0] - L / 2, pts[:, 1]))]
    assert bottom_mid == pytest.approx([L / 2, -100.0 * mid], abs=0.01)


def test_bottom_fibre_in_tension_top_in_compression_on_the_rendered_figure(beam):
    *_, text = beam
    img = render(text)

    def region(x0, x1, y0, y1):
        (c0, r0), (c1, r1) = pixel_of(text, (x0, y1)), pixel_of(text, (x1, y0))
        return img[r0:r1, c0:c1]

    bottom = side_of_pixels(region(0.35 * L, 0.65 * L, 0.02 * H, 0.12 * H))
    top = side_of_pixels(region(0.35 * L, 0.65 * L, 0.88 * H, 0.98 * H))
    assert bottom.size > 200 and top.size > 200
    # Ticks and their casings cover some pixels; the fill dominates.
    assert np.mean(bottom == 1) > 0.8
    assert np.mean(top == -1) > 0.8


def test_bottom_mid_span_cell_has_the_class_colour_of_the_beam_stress(beam):
    *_, text = beam
    vmax = float(groups(text)["drawing"].get("data-stress-limit-MPa"))
    dy = H / 8
    sx = (W * L * L / 8.0) * (H / 2 - dy / 2) / I  # M y / I at the bottom row's centre: 0.656 MPa
    expected = palette.class_colours(fields.STRESS_CLASSES_PER_SIDE)[
        int(palette.classify(np.array([sx]), vmax, fields.STRESS_CLASSES_PER_SIDE)[0])
    ]
    assert expected in palette.class_colours(fields.STRESS_CLASSES_PER_SIDE)[fields.STRESS_CLASSES_PER_SIDE:]
    img = render(text)
    c, r = pixel_of(text, (L / 2 + 0.25 * L / 40, 0.25 * dy))  # off the tick at the element centre
    patch = img[r - 1 : r + 2, c - 1 : c + 2].reshape(-1, 3)
    lab = palette.srgb_to_lab(np.median(patch, axis=0))
    assert np.linalg.norm(lab - palette.srgb_to_lab(palette.hex_to_rgb(expected))) < 3.0


def test_rendered_panel_is_filled_and_the_opening_left_white(beam):
    *_, text = beam
    img = render(text)
    (c0, r0), (c1, r1) = pixel_of(text, (0.2 * L, 0.9 * H)), pixel_of(text, (0.95 * L, 0.1 * H))
    inside = img[r0:r1, c0:c1]
    assert np.mean(inside.sum(axis=2) < 2.97) > 0.95  # not paper white
    c, r = pixel_of(text, HOLE[:2])
    assert np.all(img[r - 2 : r + 3, c - 2 : c + 3] > 0.99)


def test_void_elements_not_drawn_and_every_solid_element_drawn_once(beam):
    _, grid, fractions, _, stress, text = beam
    cells = stress_cells(text)
    drawn = {(e // grid.nx, e % grid.nx) for e in np.flatnonzero(fractions > 0)}
    assert set(cells) == drawn
    assert len(drawn) < grid.nx * grid.ny  # the hole empties some elements


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    nx=st.integers(1, 9), ny=st.integers(1, 6), seed=st.integers(0, 2**31 - 1),
)
def test_cells_carry_the_class_of_their_dominant_principal_stress(nx, ny, seed):
    rng = np.random.default_rng(seed)
    panel = model.Panel(width_mm=nx * 10.0, height_mm=ny * 10.0, thickness_mm=10, material=model.Material(1000, 0.3))
    grid = StandInGrid(nx=nx, ny=ny, dx=10.0, dy=10.0)
    fractions = np.where(rng.random(nx * ny) < 0.3, 0.0, 1.0)
    stress = rng.normal(scale=rng.uniform(0.1, 50.0), size=(nx * ny, 3))
    text = analysis_figure.analysis_svg(panel, grid, fractions, np.zeros(2 * (nx + 1) * (ny + 1)), stress, date="d")
    vmax = float(groups(text)["drawing"].get("data-stress-limit-MPa"))
    dominant = fields.dominant_principal(stress)
    classes = palette.classify(dominant, vmax, fields.STRESS_CLASSES_PER_SIDE)
    expected = {(e // nx, e % nx): int(classes[e]) for e in np.flatnonzero(fractions > 0)}
    assert stress_cells(text) == expected


def test_same_figure_with_the_project_grid(beam):
    panel, grid, fractions, displacement, stress, text = beam
    real = Grid(nx=grid.nx, ny=grid.ny, dx=grid.dx, dy=grid.dy)
    again = analysis_figure.analysis_svg(panel, real, fractions, displacement, stress, date="2025-03-14")
    assert again == text


def test_twenty_thousand_elements_stay_small():
    # Worst case for merging: every element a random class. Measured: about 0.5 MB.
    nx, ny = 200, 100
    panel = model.Panel(width_mm=4000, height_mm=2000, thickness_mm=50, material=model.Material(1000, 0.3))
    grid = StandInGrid(nx=nx, ny=ny, dx=20.0, dy=20.0)
    rng = np.random.default_rng(7)
    stress = rng.normal(size=(nx * ny, 3))
    displacement = rng.normal(scale=0.1, size=2 * (nx + 1) * (ny + 1))
    text = analysis_figure.analysis_svg(panel, grid, np.ones(nx * ny), displacement, stress, date="d")
    size = len(text.encode())
    print(f"20,000 random-class elements: {size / 1e6:.2f} MB")
    assert size < 3e6


# --- pieces


def test_bilinear_interpolation_reproduces_a_linear_field():
    # Bilinear shape functions reproduce any linear field exactly (completeness; Zienkiewicz & Taylor, The Finite
    # Element Method, vol. 1, on the patch test).
    grid = StandInGrid(nx=7, ny=4, dx=13.0, dy=9.0)
    a, b = np.array([0.3, -0.2]), np.array([[0.01, -0.004], [0.002, 0.007]])
    u = (a + grid.node_xy @ b.T).ravel()
    pts = np.random.default_rng(1).random((100, 2)) * [7 * 13.0, 4 * 9.0]
    assert np.allclose(analysis_figure.interpolate_displacement(grid, u, pts), a + pts @ b.T, atol=1e-12)


def test_principal_stresses_obey_the_tensor_invariants():
    # Trace and determinant of the 2-D stress tensor are invariant (any mechanics-of-materials text), and pure
    # shear tau has principals +-tau at 45 degrees (Mohr's circle centred at the origin).
    s = np.random.default_rng(2).normal(scale=20.0, size=(200, 3))
    s1, s2, theta = principal_stresses(s)
    assert np.allclose(s1 + s2, s[:, 0] + s[:, 1])
    assert np.allclose(s1 * s2, s[:, 0] * s[:, 1] - s[:, 2] ** 2)
    c, sn = np.cos(theta), np.sin(theta)
    normal_on_s1 = s[:, 0] * c * c + s[:, 1] * sn * sn + 2 * s[:, 2] * c * sn
    assert np.allclose(normal_on_s1, s1)
    s1, s2, theta = principal_stresses(np.array([[0.0, 0.0, 5.0]]))
    assert (s1[0], s2[0], math.degrees(theta[0])) == pytest.approx((5.0, -5.0, 45.0))
    assert fields.dominant_principal(np.array([[-7.0, 2.0, 0.0]]))[0] == -7.0


@pytest.mark.parametrize("x, nearest", [(102.4, 100), (160, 200), (3.3, 5), (0.0041, 0.005), (6.9, 5), (7.2, 10)])
def test_one_two_five_series(x, nearest):
    # The 1-2-5 series of round numbers for scale bars and magnifications (common practice, no source); nearest
    # on a log scale, so the switch from 5 to 10 sits at sqrt(50) = 7.07.
    assert sheet.nice_125(x) == pytest.approx(nearest)


@pytest.mark.parametrize("w, h, scale", [(3000, 600, 20), (2000, 400, 20), (150, 90, 1), (24000, 3000, 200)])
def test_drawing_scale_is_a_drafting_scale_that_fits(w, h, scale):
    # Drafting scales 1:1, 1:2, 1:5, 1:10, 1:20, 1:25, 1:50 ... (common practice, no source).
    assert sheet.drawing_scale(w, h) == scale


# --- bad input


def test_wrong_array_shapes_are_refused(beam):
    panel, grid, fractions, displacement, stress, _ = beam
    with pytest.raises(LacunaError, match="stress array has shape"):
        analysis_figure.analysis_svg(panel, grid, fractions, displacement, stress[:-1])
    with pytest.raises(LacunaError, match="displacement array"):
        analysis_figure.analysis_svg(panel, grid, fractions, displacement[:-2], stress)


def test_non_finite_results_and_unknown_case_are_refused(beam):
    panel, grid, fractions, displacement, stress, _ = beam
    bad = stress.copy()
    bad[3, 0] = np.nan
    with pytest.raises(LacunaError, match="not finite"):
        analysis_figure.analysis_svg(panel, grid, fractions, displacement, bad)
    with pytest.raises(LacunaError, match="'wind'.*main, plant"):
        analysis_figure.analysis_svg(panel, grid, fractions, displacement, stress, case="wind")
    with pytest.raises(LacunaError, match="grid covers"):
        analysis_figure.analysis_svg(panel, StandInGrid(nx=40, ny=8, dx=10.0, dy=50.0), fractions, displacement, stress)


def test_no_deflection_draws_no_deflected_shape(beam):
    panel, grid, fractions, displacement, stress, _ = beam
    text = analysis_figure.analysis_svg(panel, grid, fractions, np.zeros_like(displacement), stress, date="d")
    assert len(list(groups(text)["deflected"])) == 0
    assert "no deflection to draw" in all_text(groups(text)["legend"])


def test_no_convergence_line_runs_along_the_frame():
    # A volume fraction starting at 1.0 and a compliance at its largest at the end: both lines stay clear of the
    # plot's frame (they hid under its top edge when the axes ended at their end ticks).
    import xml.etree.ElementTree as ET

    from toolkit.write.convergence_plot import convergence_svg

    c = np.linspace(100.0, 140.0, 30)
    v = np.linspace(1.0, 0.5, 30)
    root = ET.fromstring(convergence_svg(c, v, target=0.5))
    ns = "{http://www.w3.org/2000/svg}"
    frame = [r for g in root.iter(f"{ns}g") if g.get("id") == "axes" for r in g.iter(f"{ns}rect")][0]
    top, bottom = float(frame.get("y")), float(frame.get("y")) + float(frame.get("height"))
    lines = [e for e in root.iter(f"{ns}polyline") if e.get("id") in ("volume-line", "compliance-line")]
    assert {e.get("id") for e in lines} == {"volume-line", "compliance-line"}
    for e in lines:
        pts = np.array([[float(a) for a in p.split(",")] for p in e.get("points").split()])
        assert pts[:, 1].min() > top + 1.0 and pts[:, 1].max() < bottom - 1.0, e.get("id")


def test_lengths_in_sentences_follow_the_drawing_unit():
    from toolkit.model import lengths_in_unit

    metres = model.Frame(mm_per_unit=1000.0, unit="m")
    assert lengths_in_unit("with slots up to 315 mm wide (stock sizes of 250 and 315 mm added)", metres) == \
        "with slots up to 0.315 m wide (stock sizes of 0.25 and 0.315 m added)"
    assert lengths_in_unit("size 125.0 -> 100 mm; slot 100 x 450.0 mm", metres) == \
        "size 0.125 -> 0.1 m; slot 0.1 x 0.45 m"
    # areas follow the unit squared; coordinates in brackets and other units are not lengths in mm
    assert lengths_in_unit("563525 against 504000 mm2 removed at (1200, 350) mm, compliance 5642 N mm", metres) == \
        "0.5635 against 0.504 m2 removed at (1200, 350) mm, compliance 5642 N mm"
    assert lengths_in_unit("an area of 645.16 mm2", model.Frame(mm_per_unit=25.4, unit="in")) == \
        "an area of 1 in2"
    assert lengths_in_unit("a minimum web of 50 mm", model.Frame()) == "a minimum web of 50 mm"
    inches = model.Frame(mm_per_unit=25.4, unit="in")
    assert lengths_in_unit("a minimum web of 50.8 mm", inches) == "a minimum web of 2 in"
