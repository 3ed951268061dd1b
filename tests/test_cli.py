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


def test_demo_writes_json_and_svg(tmp_path):
    out = tmp_path / "demo"
    result = run("demo", "--out", out, "--json")
    assert result.exit_code == 0, result.output
    summary = json.loads(result.stdout)
    for key in ("units", "elements", "compliance_Nmm", "max_deflection_mm", "max_von_mises_MPa",
                "reaction_sum_kN", "load_sum_kN", "outputs"):  # CONTRACT.md, analyze keys
        assert key in summary
    for path in summary["outputs"]:
        assert Path(path).is_file()
    # Equilibrium: reactions balance the loads (statics), to 1e-9 relative.
    load, reaction = summary["load_sum_kN"], summary["reaction_sum_kN"]
    scale = max(abs(v) for v in load)
    assert all(abs(l + r) <= 1e-9 * scale for l, r in zip(load, reaction))
    # The demo's loads: 9.5 kN/m over 4.2 m plus 16 kN (fixtures/demo/loft-lintel.toml) = 55.9 kN down.
    assert load[1] == pytest.approx(-55.9, rel=1e-9)


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
