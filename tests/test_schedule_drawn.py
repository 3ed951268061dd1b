"""What is scheduled is what is drawn: every schedule line against the entity in the written DXF, read back with
ezdxf and measured here, independently of the fitting code (no toolkit geometry is used for the measuring).

Checked per void, on scenarios of our own (a steel plate and a timber beam), one per family:
- area: the entity's area (arcs from their bulges, flattened finely here) equals the schedule's within 0.2 %;
- n-gons: the corners listed are where the straight sides of the drawn outline meet (the easing cuts them off;
  two neighbouring straight sides extended meet at the sharp corner) within 0.01 mm; no two corners closer
  than the profile's least feature; every interior angle between 30 and 175 degrees; a regular n-gon has equal
  sides and its size is twice its centre-to-corner distance as drawn; any n-gon's size is the diameter of the
  smallest circle round its corners (at least its longest corner-to-corner distance, at most 2/sqrt(3) of it:
  Jung's theorem in the plane, a fact of geometry);
- slots: the two arc centres of the drawn stadium are the schedule's ends, its width the arcs' diameter;
- bores: the CIRCLE's diameter and centre are the schedule's.
Then `lacuna check` on the written drawing finds no violation (the proof, run again from the file).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import ezdxf
import numpy as np
import pytest
from click.testing import CliRunner

from drawings import Placement, add_rectangle, new_doc, write
from toolkit.api import optimize_file
from toolkit.cli import main
from toolkit.rules.profiles import TOOL_FAMILIES, rules_for

PLATE = """units = "mm"
[panel]
name = "gusset study"
thickness = 10
element_size = 20
[material]
E_MPa = 210000
nu = 0.3
density_kg_m3 = 7850
[[support]]
from = [0, 0]
to = [0, 500]
fix = "x"
[[support]]
from = [1450, 0]
to = [1500, 0]
fix = "y"
[[load]]
at = [0, 500]
fy_kN = -20
[optimize]
volume_fraction = 0.5
max_iterations = 60
[voids]
family = "{family}"
sides = {sides}
regular = {regular}
[rules]
profile = "steel-cut"
"""

BEAM = """units = "mm"
[panel]
name = "beam study"
thickness = 90
element_size = 25
[material]
E_MPa = 11500
nu = 0.3
[[support]]
from = [0, 0]
to = [100, 0]
fix = "xy"
[[support]]
from = [2400, 0]
to = [2500, 0]
fix = "y"
[[load]]
at = [1250, 600]
fy_kN = -30
[optimize]
volume_fraction = 0.5
max_iterations = 60
[voids]
family = "{family}"
[rules]
profile = "timber-bored"
"""

# Least feature of each profile (toolkit/rules/profiles/*.toml, "common practice, no source" there).
LEAST_FEATURE = {"steel-cut": 25.0, "timber-bored": 40.0}


def _bulge_points(p, q, bulge: float, steps: int = 64) -> np.ndarray:
    """Points of the arc from p to q with the given bulge (tan of a quarter of the included angle), p excluded."""
    p, q = np.asarray(p, float), np.asarray(q, float)
    if bulge == 0:
        return q[None, :]
    theta = 4.0 * math.atan(bulge)
    chord = q - p
    c = np.linalg.norm(chord)
    r = c / (2.0 * math.sin(theta / 2.0))
    mid = (p + q) / 2.0
    normal = np.array([-chord[1], chord[0]]) / c
    centre = mid + normal * r * math.cos(theta / 2.0)
    a0 = math.atan2(*(p - centre)[::-1])
    t = a0 + np.linspace(0.0, theta, steps + 1)[1:]
    return centre + abs(r) * np.column_stack([np.cos(t), np.sin(t)])


def _area(points: np.ndarray) -> float:
    x, y = points[:, 0], points[:, 1]
    return 0.5 * abs(float(np.sum(x * np.roll(y, -1) - np.roll(x, -1) * y)))


def _outline_points(e) -> np.ndarray:
    v = [(x, y, b) for x, y, _, _, b in e.get_points("xyseb")]
    pts = []
    for i, (x, y, b) in enumerate(v):
        nx, ny, _ = v[(i + 1) % len(v)]
        pts.append(_bulge_points((x, y), (nx, ny), b))
    return np.vstack(pts)


def _sharp_corners(e, n: int) -> np.ndarray:
    """Where the straight sides of an n-gon's outline meet when extended. Without easing the outline's vertices
    are the corners; with easing (a chamfer, or a radius as an arc) each corner is two vertices, the easing runs
    from the first to the second and a straight side from the second to the next corner's first."""
    v = np.array([(x, y) for x, y, *_ in e.get_points("xyseb")])
    if len(v) == n:
        return v
    assert len(v) == 2 * n, "an eased n-gon has two vertices a corner"
    sides = [(v[2 * i + 1], v[(2 * i + 2) % len(v)]) for i in range(n)]
    out = []
    for (p1, q1), (p2, q2) in zip(sides[-1:] + sides[:-1], sides):
        d1, d2 = q1 - p1, q2 - p2
        t = np.linalg.solve(np.column_stack([d1, -d2]), p2 - p1)
        out.append(p1 + t[0] * d1)
    return np.array(out)


def _interior_angles(c: np.ndarray) -> np.ndarray:
    a, b = np.roll(c, 1, axis=0) - c, np.roll(c, -1, axis=0) - c
    cos = np.sum(a * b, axis=1) / (np.linalg.norm(a, axis=1) * np.linalg.norm(b, axis=1))
    return np.degrees(np.arccos(np.clip(cos, -1, 1)))


def _run(tmp_path: Path, job: str, size=(1500, 500)) -> tuple[dict, Path]:
    doc = new_doc("mm")
    add_rectangle(doc.modelspace(), Placement(), 0, 0, *size)
    dxf = write(doc, tmp_path / "panel.dxf")
    (tmp_path / "job.toml").write_text(job)
    optimize_file(dxf, tmp_path / "job.toml", out_dir=tmp_path / "out")
    schedule = json.loads((tmp_path / "out" / "panel-schedule.json").read_text())
    summary = json.loads((tmp_path / "out" / "panel-optimize.json").read_text())
    # The share of the freeform saving kept is the two removed shares' ratio; the made layout is no softer.
    assert summary["capture_percent"] == pytest.approx(
        100 * summary["mass_removed_percent"] / summary["mass_removed_freeform_percent"], rel=1e-9)
    assert summary["compliance_rationalized_Nmm"] <= summary["compliance_freeform_Nmm"] * (1 + 1e-9)
    shape = summary["shape_optimisation"]
    assert shape["compliance_same_mass_Nmm"] <= shape["compliance_first_fit_Nmm"]
    return schedule, tmp_path / "out" / "panel-lacuna.dxf"


def _entity_for(msp, layer: str, centre, kind: str):
    best, gap = None, math.inf
    for e in msp.query(f'{kind}[layer=="{layer}"]'):
        if kind == "CIRCLE":
            at = np.array(e.dxf.center)[:2]
        else:
            at = _outline_points(e).mean(axis=0)
        d = float(np.hypot(*(at - np.asarray(centre))))
        if d < gap:
            best, gap = e, d
    return best


def _check_schedule(schedule: dict, drawn: Path, profile: str) -> int:
    msp = ezdxf.readfile(drawn).modelspace()
    assert schedule["voids"], "the scenario gives voids to check"
    words = dict(zip(TOOL_FAMILIES, rules_for(profile).tool_words))
    for v in schedule["voids"]:
        # The tool in the profile's own words (tests/test_tool_words.py); timber and steel are never cast.
        assert words[v["family"]] in v["tool"] and "former" not in v["tool"], (v["id"], v["tool"])
        if v["family"] == "bore":
            e = _entity_for(msp, "LACUNA-VOID-BORE", v["centre"], "CIRCLE")
            assert 2 * e.dxf.radius == pytest.approx(v["diameter"], abs=1e-6)
            assert np.allclose(np.array(e.dxf.center)[:2], v["centre"], atol=1e-6)
            assert math.pi * e.dxf.radius ** 2 == pytest.approx(v["area"], rel=2e-3)
            continue
        layer = "LACUNA-VOID-POLYGON" if v["family"] == "polygon" else "LACUNA-VOID-SLOT"
        e = _entity_for(msp, layer, v["centre"], "LWPOLYLINE")
        assert e is not None, v["id"]
        assert _area(_outline_points(e)) == pytest.approx(v["area"], rel=2e-3), v["id"]
        if v["family"] == "slot":
            pts = [(x, y, b) for x, y, _, _, b in e.get_points("xyseb")]
            arcs = [i for i, p in enumerate(pts) if abs(p[2]) > 0]
            assert len(arcs) == 2, "a stadium: two half-circle arcs"
            centres = [(np.array(pts[i][:2]) + np.array(pts[(i + 1) % len(pts)][:2])) / 2 for i in arcs]
            widths = [np.linalg.norm(np.array(pts[i][:2]) - np.array(pts[(i + 1) % len(pts)][:2])) for i in arcs]
            assert widths[0] == pytest.approx(v["width"], abs=1e-6) and widths[1] == pytest.approx(v["width"], abs=1e-6)
            ends = np.array(v["ends"])
            got = np.array(centres)
            assert (np.allclose(got, ends, atol=1e-6) or np.allclose(got[::-1], ends, atol=1e-6)), v["id"]
            continue
        corners = np.array(v["corners"])
        assert len(corners) == v["sides"]
        drawn_corners = _sharp_corners(e, v["sides"])
        assert len(drawn_corners) == v["sides"], v["id"]
        # The same corners, in some cyclic order.
        k = int(np.argmin(np.hypot(*(drawn_corners - corners[0]).T)))
        assert np.allclose(np.roll(drawn_corners, -k, axis=0), corners, atol=0.01), v["id"]
        sides = np.linalg.norm(np.roll(corners, -1, axis=0) - corners, axis=1)
        assert sides.min() >= LEAST_FEATURE[profile] - 0.01, (v["id"], sides.min())
        angles = _interior_angles(corners)
        assert 30.0 - 1e-6 <= angles.min() and angles.max() <= 175.0 + 1e-6, (v["id"], angles)
        longest = max(np.linalg.norm(a - b) for a in corners for b in corners)
        assert longest - 1e-6 <= v["size"] <= 2 / math.sqrt(3) * longest + 1e-6, v["id"]
        if v["regular"]:
            assert sides.max() - sides.min() <= 1e-6 * sides.max(), v["id"]
            centre = np.asarray(v["centre"])
            assert v["size"] == pytest.approx(2 * np.hypot(*(corners - centre).T).mean(), rel=1e-9)
    return len(schedule["voids"])


def _check_cli(drawn: Path, profile: str, tmp_path: Path):
    result = CliRunner().invoke(main, ["check", str(drawn), "--profile", profile, "--json", "--out",
                                       str(tmp_path / "check")])
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["violations"] == []


@pytest.mark.parametrize("family, sides, regular", [("polygon", 6, "false"), ("polygon", 4, "true"),
                                                    ("slot", 6, "false")])
def test_steel_plate_schedule_is_what_is_drawn(tmp_path, family, sides, regular):
    schedule, drawn = _run(tmp_path, PLATE.format(family=family, sides=sides, regular=regular))
    _check_schedule(schedule, drawn, "steel-cut")
    _check_cli(drawn, "steel-cut", tmp_path)


def test_timber_beam_bores_schedule_is_what_is_drawn(tmp_path):
    schedule, drawn = _run(tmp_path, BEAM.format(family="bore"), size=(2500, 600))
    _check_schedule(schedule, drawn, "timber-bored")
    _check_cli(drawn, "timber-bored", tmp_path)


def test_slots_in_metres_with_a_round_one_are_what_is_drawn(tmp_path):
    """The sample panel in metres (tests/drawings.py "m", the job of tests/same_outputs.py) gives steel-cut slots, one
    of them as long as it is wide: written as a circle on the slot layer, scheduled as that slot (its two ends
    one point), and read back by `lacuna check` as a slot of a stock width, not as a bore of no stock diameter."""
    from drawings import sample_drawing
    from same_outputs import METRES_JOB

    dxf = sample_drawing(tmp_path, "m")
    (tmp_path / "job.toml").write_text(METRES_JOB)
    optimize_file(dxf, tmp_path / "job.toml", out_dir=tmp_path / "out")
    schedule = json.loads((tmp_path / "out" / f"{dxf.stem}-schedule.json").read_text())
    drawn = tmp_path / "out" / f"{dxf.stem}-lacuna.dxf"
    assert schedule["units"] == "m"
    round_ones = [v for v in schedule["voids"] if v["family"] == "slot" and np.allclose(*v["ends"], atol=1e-12)]
    assert round_ones and all("as long as it is wide" in v["tool"] for v in round_ones)
    _check_schedule(schedule, drawn, "steel-cut")
    result = CliRunner().invoke(main, ["check", str(drawn), "--profile", "steel-cut", "--json", "--out",
                                       str(tmp_path / "check")])
    assert result.exit_code == 0, result.output
    checked = json.loads(result.stdout)
    assert checked["violations"] == [] and not any("drawn as a" in w for w in checked["warnings"])
    for v in round_ones:
        (read,) = [w for w in checked["voids"] if np.allclose(w["centre"], v["centre"], atol=1e-9)]
        assert read["family"] == "slot", read
