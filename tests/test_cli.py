"""The command line as a drafting office uses it: exit codes, messages, files written whole or not at all."""

from __future__ import annotations

import hashlib
import json
import shutil
import tomllib
from pathlib import Path

import pytest
from click.testing import CliRunner

from toolkit.cli import main

FIXTURES = Path(__file__).resolve().parents[1] / "fixtures"
BAD = FIXTURES / "bad"
EXPECTED = tomllib.loads((BAD / "expected.toml").read_text())


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def run(*args):
    return CliRunner().invoke(main, [str(a) for a in args], catch_exceptions=False)


@pytest.mark.parametrize("case", sorted(EXPECTED))
def test_bad_input_exits_2_with_message_and_writes_nothing(case, tmp_path):
    # The corpus is ours (fixtures/make_bad.py); each file plants one fault.
    dxf, job = tmp_path / f"{case}.dxf", tmp_path / f"{case}.toml"
    shutil.copy(BAD / dxf.name, dxf)
    shutil.copy(BAD / job.name, job)
    before = {p.name: _digest(p) for p in (dxf, job)}
    out = tmp_path / "out"
    command = "optimize" if case.startswith("optimize-") else "analyze"
    result = run(command, dxf, "--job", job, "--out", out)
    assert result.exit_code == 2, result.output
    assert EXPECTED[case].lower() in result.output.lower()
    assert "Traceback" not in result.output
    assert not out.exists()
    assert {p.name: _digest(p) for p in (dxf, job)} == before


def test_demo_runs_the_whole_job(tmp_path):
    out = tmp_path / "demo"
    result = run("demo", "--out", out, "--json")
    assert result.exit_code == 0, result.output
    top = json.loads(result.stdout)
    summary = top["solid"]
    for key in ("units", "elements", "compliance_Nmm", "max_deflection_mm", "max_von_mises_MPa",
                "reaction_sum_kN", "load_sum_kN"):  # CONTRACT.md, analyze keys (the solid panel's, in optimize)
        assert key in summary
    names = {Path(p).name for p in top["outputs"]}
    for suffix in ("analysis.svg", "analysis.json", "lacuna.dxf", "result.svg", "convergence.svg",
                   "schedule.csv", "report.md", "optimize.json"):
        assert f"loft-lintel-{suffix}" in names
    for path in top["outputs"]:
        assert Path(path).is_file()
    assert top["rules"]["violations"] == []
    # Equilibrium: reactions balance the loads (statics), to 1e-9 relative.
    load, reaction = summary["load_sum_kN"], summary["reaction_sum_kN"]
    scale = max(abs(v) for v in load)
    assert all(abs(l + r) <= 1e-9 * scale for l, r in zip(load, reaction))
    # The demo's loads: 9.5 kN/m over 4.2 m plus 16 kN (fixtures/demo/loft-lintel.toml) = 55.9 kN down.
    assert load[1] == pytest.approx(-55.9, rel=1e-9)
    # The report names every rule in force (the profile's depth band, web ratio, least side and corner easing as
    # well as the plain ones), each with where the layout comes closest to it; the JSON carries the same.
    report = (out / "loft-lintel-report.md").read_text()
    table = report[report.index("## Fabrication rules"):report.index("### Proof")]
    for rule in ("edge_cover", "depth_band", "web_ratio", "min_web", "bearing_clearance", "min_void",
                 "least_feature", "corner", "keep"):
        assert f"| {rule} |" in table, rule
    margins = {m["rule"]: m for m in top["rules"]["margins"]}
    assert all(m["margin"] >= -1e-6 for m in margins.values() if m["margin"] is not None)  # the proof found none


def test_existing_output_needs_force(tmp_path):
    out = tmp_path / "demo"
    assert run("demo", "--out", out).exit_code == 0
    again = run("demo", "--out", out)
    assert again.exit_code == 2 and "--force" in again.output
    assert run("demo", "--out", out, "--force").exit_code == 0


def test_help_carries_the_engineering_caution():
    for args in (["--help"], ["analyze", "--help"], ["demo", "--help"]):
        assert "qualified engineer" in run(*args).output


def test_init_writes_a_template_that_analyses(tmp_path):
    result = run("init", tmp_path / "start")
    assert result.exit_code == 0, result.output
    job, dxf = tmp_path / "start" / "job.toml", tmp_path / "start" / "sample-panel.dxf"
    assert job.is_file() and dxf.is_file()
    analysed = run("analyze", dxf, "--job", job, "--out", tmp_path / "res", "--json")
    assert analysed.exit_code == 0, analysed.output


CHECK = FIXTURES / "check"


@pytest.mark.parametrize("drawing, code, words", [
    ("planted.dxf", 1, "5 violations"),      # five faults planted by fixtures/make_check.py
    ("clean.dxf", 0, "keep the precast-formed rules"),
    ("empty.dxf", 0, "nothing to check"),
])
def test_check_exit_codes(drawing, code, words, tmp_path):
    result = run("check", CHECK / drawing, "--job", CHECK / "check.toml", "--out", tmp_path / "out")
    assert result.exit_code == code, result.output
    assert words in result.output


def test_check_json_is_one_object_with_contract_keys(tmp_path):
    result = run("check", CHECK / "planted.dxf", "--job", CHECK / "check.toml", "--out", tmp_path / "o", "--json")
    assert result.exit_code == 1
    s = json.loads(result.stdout)
    assert s["checked"] == 6
    for v in s["violations"]:  # CONTRACT.md, check
        assert {"rule", "where", "measured", "required", "handles"} <= set(v)


def test_profiles_lists_each_value_with_its_source():
    result = run("profiles", "--json")
    assert result.exit_code == 0
    table = json.loads(result.stdout)
    text = json.dumps(table)
    for name in ("timber-bored", "precast-formed", "steel-cut"):
        assert name in text
    assert "source" in text


def test_convert_round_trip_through_svg(tmp_path):
    svg, back = tmp_path / "lintel.svg", tmp_path / "lintel.dxf"
    assert run("convert", FIXTURES / "demo" / "loft-lintel.dxf", svg, "--layers", "PANEL,OPENING").exit_code == 0
    result = run("convert", svg, back)
    assert result.exit_code == 0, result.output
    import ezdxf

    doc = ezdxf.readfile(back)
    circles = doc.modelspace().query("CIRCLE")
    # The demo's duct: 180 mm bore at (3150, 430) (fixtures/make_demo.py).
    assert len(circles) == 1 and circles[0].dxf.radius == pytest.approx(90.0, abs=1e-6)
    assert tuple(circles[0].dxf.center)[:2] == pytest.approx((3150.0, 430.0), abs=1e-6)


def test_a_message_about_a_job_key_names_the_job_file(tmp_path):
    # An unknown profile is found late (when the rules are built), under a bare key: the message still names the
    # file it is about, like every message about the job file.
    from click.testing import CliRunner

    from toolkit.api import demo_files
    from toolkit.cli import main

    dxf, toml = demo_files()
    job = tmp_path / "job.toml"
    text = Path(toml).read_text()
    assert 'profile = "' in text
    import re

    job.write_text(re.sub(r'profile = "[^"]*"', 'profile = "timber-screwed"', text))
    done = CliRunner().invoke(main, ["optimize", str(dxf), "--job", str(job), "--out", str(tmp_path / "out")])
    assert done.exit_code == 2
    assert f"{job} [rules] profile: unknown fabrication profile" in done.output
    assert not (tmp_path / "out").exists()


def test_balanced_force_sums_print_as_zero_not_round_off(tmp_path):
    # The demo lintel carries vertical loads only: the horizontal sum of its reactions is zero to round-off
    # (about 1e-13 of the load) and is given as 0, in the JSON and the printed line.
    from toolkit.api import analyze_file, demo_files

    dxf, toml = demo_files()
    outcome = analyze_file(dxf, toml, out_dir=tmp_path / "out")
    s = outcome.summary
    assert s["load_sum_kN"][0] == 0.0 and s["reaction_sum_kN"][0] == 0.0
    assert s["reaction_sum_kN"][1] == pytest.approx(-s["load_sum_kN"][1], rel=1e-9)
    line = next(t for t in outcome.text_lines() if "reactions" in t)
    assert "e-" not in line and "e+" not in line, line


def test_progress_line_estimates_the_time_left():
    # 10 iterations of 0.5 s each at 80 % kept, target 50 %, rate 2 %: ceil(log(0.5/0.8)/log(0.98)) = 24 more to
    # the target, plus twice the convergence window of 5 = 34 iterations, about 17 s; capped by the iteration limit.
    from toolkit.cli import _Progress

    p = _Progress(limit=200, target=0.5, rate=0.02, window=5)
    p.started = 100.0
    import time as clock

    real = clock.perf_counter
    try:
        clock.perf_counter = lambda: 100.0 + 0.5 * 9  # ten iterations: nine gaps since the first
        assert p.left(10, 0.8) == "  about 17 s left"
        capped = _Progress(limit=12, target=0.5, rate=0.02, window=5)
        capped.started = 100.0
        assert capped.left(10, 0.8) == "  about 1 s left"  # two iterations to the limit
        last = _Progress(limit=11, target=0.5, rate=0.02, window=5)
        last.started = 100.0
        assert last.left(10, 0.8) == "  under 1 s left"  # one iteration of 0.5 s: not "about 0 s"
    finally:
        clock.perf_counter = real
