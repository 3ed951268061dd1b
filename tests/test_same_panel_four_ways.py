"""The same panel drawn four ways gives the same analysis (issue: foundation, verification).

The four drawings (tests/drawings.py): polylines in mm; exploded LINEs/ARCs in metres; a scaled, turned block
INSERT; turned 30 degrees 6,000,000 mm from the origin. The loads are drawn as markers, so they turn with the
drawing. The reference is the plain mm drawing; the others must agree to round-off (relative 1e-9), since the
geometry in the panel's local frame agrees to 1e-6 mm or better.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
from click.testing import CliRunner

from drawings import sample_drawing
from toolkit.analysis import analyze
from toolkit.cli import main
from toolkit.inputs import load_panel

JOB = """units = "mm"
[panel]
thickness = 100
element_size = 50
[material]
E_MPa = 11000
nu = 0.3
"""

WAYS = ("mm", "m", "insert", "far")


@pytest.fixture(scope="module")
def results(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("ways")
    job = tmp / "job.toml"
    job.write_text(JOB)
    out = {}
    for way in WAYS:
        panel, _, _ = load_panel(sample_drawing(tmp, way), job)
        out[way] = (panel, analyze(panel))
    return out


@pytest.mark.parametrize("way", WAYS[1:])
def test_same_figures(results, way):
    ref_panel, ref = results["mm"]
    panel, res = results[way]
    assert res.elements == ref.elements
    assert res.compliance_Nmm == pytest.approx(ref.compliance_Nmm, rel=1e-9)
    assert res.max_deflection_mm == pytest.approx(ref.max_deflection_mm, rel=1e-9)
    assert res.max_von_mises_MPa == pytest.approx(ref.max_von_mises_MPa, rel=1e-8)
    np.testing.assert_allclose(res.U, ref.U, rtol=0, atol=1e-9 * np.abs(ref.U).max())
    np.testing.assert_allclose(res.load_sum_N, ref.load_sum_N, atol=1e-6)


def test_force_sums_reported_in_the_drawing_axes(tmp_path):
    # On the turned drawing the markers point along the drawing's -y turned by 30 degrees; the JSON gives the
    # sums along the drawing's axes: (40 + 12.5) kN * (sin 30, -cos 30) (statics, drawings.py marker values).
    job = tmp_path / "job.toml"
    job.write_text(JOB)
    dxf = sample_drawing(tmp_path, "far")
    result = CliRunner().invoke(main, ["analyze", str(dxf), "--job", str(job), "--out", str(tmp_path / "o"),
                                       "--json"])
    assert result.exit_code == 0, result.output
    s = json.loads(result.stdout)
    total = 52.5
    assert s["load_sum_kN"] == pytest.approx([total * np.sin(np.radians(30)), -total * np.cos(np.radians(30))],
                                             rel=1e-9)
    assert s["reaction_sum_kN"] == pytest.approx([-v for v in s["load_sum_kN"]], rel=1e-9)


def test_analysis_is_deterministic(results, tmp_path):
    # Common practice, no source: the same input must give the same numbers, bit for bit.
    job = tmp_path / "job.toml"
    job.write_text(JOB)
    panel, _, _ = load_panel(sample_drawing(tmp_path, "far"), job)
    again = analyze(panel)
    assert np.array_equal(again.U, results["far"][1].U)
