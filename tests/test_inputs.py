"""The panel assembled from a drawing and a job file: frame mapping of job positions, the override rule.

The expected local coordinates are worked by hand below. The frames use a 3-4-5 rotation (cos = 0.8,
sin = 0.6 exactly, so angle = atan2(3, 4)) and a quarter turn, so every expected figure is exact in decimals.
Length factors: 1 m = 1000 mm (SI); 1 in = 25.4 mm, 1 ft = 12 in (international yard and pound agreement,
1959). Force factors: 1 kN = 1000 N, 1 kN/m = 1 N/mm (SI).
"""

from __future__ import annotations

import math
import sys
import types
import warnings

import ezdxf
import pytest
from shapely.geometry import Point as ShapelyPoint

from toolkit.errors import LacunaError
from toolkit.inputs import build_panel, load_panel
from toolkit.jobfile import parse_job
from toolkit.model import Drawing, Frame, Layers, LineLoad, PointLoad, Region, Support

MATERIAL = "[material]\nE_MPa = 11500\nnu = 0.3\n"

# Drawing in metres, panel turned by atan2(3, 4) = 36.87 degrees, lower-left corner at site coordinates
# (5000 m, 2000 m). Local x runs along (0.8, 0.6) of the drawing, local y along (-0.6, 0.8).
TILTED = Frame(origin=(5000.0, 2000.0), angle_deg=math.degrees(math.atan2(3.0, 4.0)), mm_per_unit=1000.0, unit="m")


def drawing(frame=TILTED, **kw) -> Drawing:
    values = dict(path="/site/level2/panel-A.dxf", unit=frame.unit, frame=frame, width_mm=3000.0, height_mm=600.0)
    values.update(kw)
    return Drawing(**values)


def job(text: str, source="job.toml"):
    return parse_job(text, source=source)


def close(a, b, tol=1e-6):
    return all(abs(x - y) <= tol for x, y in zip(a, b, strict=True))


# --- frame mapping --------------------------------------------------------------------------------------------


def test_job_positions_go_through_a_rotated_scaled_offset_frame():
    # Hand computation, drawing position (mm) = origin (5,000,000; 2,000,000) + u (0.8, 0.6) + v (-0.6, 0.8):
    #   local (0, 0)       -> (5000000, 2000000)
    #   local (1000, 0)    -> (+800, +600)               = (5000800, 2000600)
    #   local (500, 0)     -> (+400, +300)               = (5000400, 2000300)
    #   local (1500, 600)  -> (1200 - 360, 900 + 480)    = (5000840, 2001380)
    #   local (0, 600)     -> (-360, +480)               = (4999640, 2000480)
    #   local (3000, 600)  -> (2400 - 360, 1800 + 480)   = (5002040, 2002280)
    # Forces along the drawing's axes turn onto the local ones by dotting with (0.8, 0.6) and (-0.6, 0.8):
    #   (0, -10 kN)  -> (-6, -8) kN;   (5, 0) kN/m -> (4, -3) N/mm.
    j = job(
        'units = "mm"\n[panel]\nthickness = 90\n' + MATERIAL + """
[[support]]
from = [5000000, 2000000]
to = [5000800, 2000600]
[[support]]
at = [5000400, 2000300]
fix = "y"
[[load]]
at = [5000840, 2001380]
fy_kN = -10
[[load]]
from = [4999640, 2000480]
to = [5002040, 2002280]
wx_kN_m = 5
case = "wind"
"""
    )
    panel = build_panel(drawing(), j)
    seg, pt = panel.supports
    assert close(seg.points[0], (0.0, 0.0)) and close(seg.points[1], (1000.0, 0.0)) and seg.fix == "xy"
    assert close(pt.points[0], (500.0, 0.0)) and pt.fix == "y"  # fixity letters name local axes: unchanged
    point, line = panel.loads
    assert isinstance(point, PointLoad) and close(point.at, (1500.0, 600.0))
    assert close(point.force_N, (-6000.0, -8000.0))
    assert isinstance(line, LineLoad) and close(line.start, (0.0, 600.0)) and close(line.end, (3000.0, 600.0))
    assert close(line.intensity_N_per_mm, (4.0, -3.0), 1e-12) and line.case == "wind"
    assert line.length_mm == pytest.approx(3000.0, abs=1e-6)
    assert point.source == "job.toml [[load]] #1"  # the job key stays traceable after mapping


def test_job_in_feet_on_a_drawing_in_inches_turned_a_quarter():
    # Drawing in inches, corner at (100 in, 50 in), local x along the drawing's +y, local y along its -x.
    # Drawing point (100, 62) in = 12 in up from the corner = local (304.8, 0) mm; in the job file, in feet,
    # that is (100/12, 62/12) ft. Drawing point (90, 74) in: offset (-10, 24) in -> local (24, 10) in =
    # (609.6, 254) mm. A force +1 kN along drawing x is -1 kN along local y (local y = drawing -x).
    frame = Frame(origin=(100.0, 50.0), angle_deg=90.0, mm_per_unit=25.4, unit="in")
    j = job(
        'units = "ft"\n[panel]\nthickness = 0.25\n' + MATERIAL + f"""
[[support]]
at = [{100 / 12!r}, {62 / 12!r}]
[[load]]
at = [7.5, {74 / 12!r}]
fx_kN = 1
"""
    )
    panel = build_panel(drawing(frame, width_mm=1219.2, height_mm=609.6), j)
    assert close(panel.supports[0].points[0], (304.8, 0.0), 1e-9)
    assert close(panel.loads[0].at, (609.6, 254.0), 1e-9)
    assert close(panel.loads[0].force_N, (0.0, -1000.0), 1e-9)
    assert panel.thickness_mm == pytest.approx(76.2, rel=1e-12)  # 0.25 ft = 3 in = 76.2 mm


def test_panel_takes_geometry_from_the_drawing_and_settings_from_the_job():
    opening = Region(ShapelyPoint(800, 300).buffer(100), layer="OPENING", handle="2F")
    keep = Region(ShapelyPoint(100, 100).buffer(40), layer="KEEP", handle="30")
    j = job('units = "mm"\n[panel]\nthickness = 90\nelement_size = 15\n' + MATERIAL + "density_kg_m3 = 420\n"
            "[cases]\nmain = 2.0\n")
    d = drawing(openings=(opening,), keep=(keep,),
                loads=(PointLoad(at=(1500.0, 600.0), force_N=(0.0, -1.0), source="LOAD handle 3A"),))
    panel = build_panel(d, j)
    assert (panel.width_mm, panel.height_mm) == (3000.0, 600.0)
    assert panel.openings == (opening,) and panel.keep == (keep,)
    assert panel.frame == TILTED and panel.source == d.path
    assert panel.thickness_mm == 90.0 and panel.element_size_mm == 15.0
    assert panel.material.density_kg_m3 == 420.0
    assert panel.case_weight("main") == 2.0
    assert panel.name == "panel-A"  # the drawing's file name when [panel] name is not given


# --- the override rule ----------------------------------------------------------------------------------------

DRAWN_SUPPORT = Support(points=((0.0, 0.0), (100.0, 0.0)), fix="xy", source="SUPPORT handle 41")
DRAWN_LOAD = PointLoad(at=(1500.0, 600.0), force_N=(0.0, -5000.0), source="LOAD handle 42")
PLAIN = Frame()  # drawing in mm, not turned: job positions equal local ones


def test_job_supports_replace_drawn_ones_and_say_so():
    j = job('units = "mm"\n[panel]\nthickness = 90\n' + MATERIAL + "[[support]]\nat = [3000, 0]\nfix = \"y\"\n")
    d = drawing(PLAIN, supports=(DRAWN_SUPPORT,), loads=(DRAWN_LOAD,))
    with pytest.warns(UserWarning, match=r"1 support marker\(s\) on the drawing were overridden"):
        panel = build_panel(d, j)
    assert panel.supports == (Support(points=((3000.0, 0.0),), fix="y", source="job.toml [[support]] #1"),)
    assert panel.loads == (DRAWN_LOAD,)  # no [[load]] in the job: the drawn load stays


def test_job_loads_replace_drawn_ones_and_say_so():
    j = job('units = "mm"\n[panel]\nthickness = 90\n' + MATERIAL + "[[load]]\nat = [10, 600]\nfx_kN = 2\n")
    d = drawing(PLAIN, supports=(DRAWN_SUPPORT,), loads=(DRAWN_LOAD,))
    with pytest.warns(UserWarning, match=r"1 load marker\(s\) on the drawing were overridden"):
        panel = build_panel(d, j)
    assert panel.supports == (DRAWN_SUPPORT,)
    assert len(panel.loads) == 1 and panel.loads[0].at == (10.0, 600.0) and panel.loads[0].force_N == (2000.0, 0.0)


def test_drawn_markers_stay_when_the_job_gives_none_and_nothing_is_said():
    j = job('units = "mm"\n[panel]\nthickness = 90\n' + MATERIAL)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        panel = build_panel(drawing(PLAIN, supports=(DRAWN_SUPPORT,), loads=(DRAWN_LOAD,)), j)
    assert panel.supports == (DRAWN_SUPPORT,) and panel.loads == (DRAWN_LOAD,)


def test_job_markers_on_a_drawing_without_markers_raise_no_note():
    j = job('units = "mm"\n[panel]\nthickness = 90\n' + MATERIAL + "[[support]]\nat = [0, 0]\n")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        panel = build_panel(drawing(PLAIN), j)
    assert panel.supports[0].points == ((0.0, 0.0),)


def test_case_weight_without_loads_is_noted_with_a_guess():
    j = job('units = "mm"\n[panel]\nthickness = 90\n' + MATERIAL + "[cases]\nmian = 2\n")
    with pytest.warns(UserWarning) as record:
        build_panel(drawing(PLAIN, loads=(DRAWN_LOAD,)), j)
    notes = sorted(str(w.message) for w in record)
    assert len(notes) == 2
    assert 'no load belongs to case "mian" (did you mean "main"?)' in notes[0]
    assert 'load case "main" has no weight' in notes[1]


# --- what must be given ---------------------------------------------------------------------------------------


def test_no_material_anywhere_asks_for_a_material_table():
    with pytest.raises(LacunaError) as info:
        build_panel(drawing(), job('units = "mm"\n[panel]\nthickness = 90\n'))
    assert info.value.where == "job.toml [material]" and "E_MPa" in info.value.hint


def test_no_thickness_names_the_panel_key():
    with pytest.raises(LacunaError) as info:
        build_panel(drawing(), job(MATERIAL))
    assert info.value.where == "job.toml [panel] thickness"


# --- load_panel -----------------------------------------------------------------------------------------------


def test_load_panel_reads_with_the_job_layers_and_returns_notes(tmp_path, monkeypatch):
    calls = []

    def read_drawing(path, layers=Layers(), **kw):
        calls.append((path, layers))
        return drawing(PLAIN, path=str(path), supports=(DRAWN_SUPPORT,), warnings=("drawing note",))

    monkeypatch.setitem(sys.modules, "toolkit.dxf_in", types.SimpleNamespace(read_drawing=read_drawing))
    job_path = tmp_path / "job.toml"
    job_path.write_text('units = "mm"\n[panel]\nthickness = 90\n' + MATERIAL + '[layers]\noutline = "SLAB"\n'
                        "[[support]]\nat = [0, 0]\n", encoding="utf-8")
    panel, j, d = load_panel(tmp_path / "p.dxf", job_path)
    assert calls == [(tmp_path / "p.dxf", Layers(outline="SLAB"))]
    assert d.warnings[0] == "drawing note" and "overridden" in d.warnings[1]
    assert panel.supports[0].source == f"{job_path} [[support]] #1"


def test_load_panel_without_a_job_needs_a_material(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "toolkit.dxf_in",
                        types.SimpleNamespace(read_drawing=lambda path, layers=Layers(), **kw: drawing(PLAIN)))
    with pytest.raises(LacunaError, match="no material"):
        load_panel(tmp_path / "p.dxf")


def test_load_panel_on_a_real_dxf(tmp_path):
    doc = ezdxf.new()
    doc.header["$INSUNITS"] = 6  # metres (DXF reference, header section)
    doc.modelspace().add_lwpolyline([(10, 20), (13, 20), (13, 20.6), (10, 20.6)], close=True,
                                    dxfattribs={"layer": "SLAB"})
    dxf = tmp_path / "slab.dxf"
    doc.saveas(dxf)
    job_path = tmp_path / "job.toml"
    # Job in mm along the drawing's axes: (11 m, 20 m) is 1000 mm right of the corner at (10 m, 20 m).
    job_path.write_text('units = "mm"\n[panel]\nthickness = 90\n' + MATERIAL + '[layers]\noutline = "SLAB"\n'
                        "[[support]]\nat = [11000, 20000]\n", encoding="utf-8")
    panel, _, _ = load_panel(dxf, job_path)
    assert (panel.width_mm, panel.height_mm) == pytest.approx((3000.0, 600.0), abs=1e-6)
    assert close(panel.supports[0].points[0], (1000.0, 0.0))
