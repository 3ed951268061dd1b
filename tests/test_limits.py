"""A grid too fine for the machine is refused before anything is allocated, with the element size that would fit.

The memory law itself (bytes per element against log2 of the element count) is measured, not published: its
figures come from ``python benchmarks/bench_load.py memory`` (docs/robustness-limits.md) and are not asserted
here. These tests hold the refusal to what it promises: the right job key, a figure and a size that really fit
under the same budget, and nothing written. The budget is monkeypatched small so each test takes milliseconds.
"""

from __future__ import annotations

import hashlib
import re
from pathlib import Path

import ezdxf
import pytest
from click.testing import CliRunner

from toolkit import limits
from toolkit.cli import main
from toolkit.errors import LacunaError
from toolkit.fe.grid import grid_shape

MESSAGE = re.compile(r"needs about (?P<need>[\d.]+) (?P<unit>MB|GB) of memory to (?P<verb>analyse|optimise)")
HINT = re.compile(r"Raise element_size to at least (?P<size>[\d.]+) mm \((?P<nx>\d+) x (?P<ny>\d+) elements\)")


def _budget(monkeypatch, n_bytes: float) -> None:
    monkeypatch.setattr(limits, "available_memory_bytes", lambda *a, **k: int(n_bytes))


# --- reading the free memory -------------------------------------------------------------------------------

# The format of /proc/meminfo: "Name:   value kB", values in kibibytes (Linux kernel documentation,
# Documentation/filesystems/proc.rst, section "meminfo"; MemAvailable since Linux 3.14). The figures below are
# made up in that format.
MEMINFO = """MemTotal:       32780412 kB
MemFree:         1875344 kB
MemAvailable:   24621544 kB
Buffers:          397212 kB
"""


def test_free_memory_is_memavailable_in_bytes(tmp_path):
    (tmp_path / "meminfo").write_text(MEMINFO)
    assert limits.available_memory_bytes(tmp_path / "meminfo", tmp_path / "no-cgroup") == 24621544 * 1024


def test_a_control_group_limit_lowers_the_budget(tmp_path):
    # cgroup v2: memory.max holds the limit in bytes or "max" (none); memory.current the bytes in use (Linux
    # kernel documentation, Documentation/admin-guide/cgroup-v2.rst, "Memory Interface Files").
    (tmp_path / "meminfo").write_text(MEMINFO)
    group = tmp_path / "cg"
    group.mkdir()
    (group / "memory.max").write_text("4294967296\n")
    (group / "memory.current").write_text("1073741824\n")
    assert limits.available_memory_bytes(tmp_path / "meminfo", group) == 4294967296 - 1073741824
    (group / "memory.max").write_text("max\n")
    assert limits.available_memory_bytes(tmp_path / "meminfo", group) == 24621544 * 1024


def test_unreadable_memory_falls_back_to_the_fixed_cap(tmp_path):
    assert limits.available_memory_bytes(tmp_path / "none", tmp_path / "none") == limits.FALLBACK_BYTES


# --- the estimate and the refusal ------------------------------------------------------------------------------

def test_optimising_needs_more_than_analysing_and_more_elements_more_memory():
    # The optimiser keeps the solid analysis while it runs (pipeline.optimize_panel): never less memory.
    for nx, ny in [(10, 5), (300, 100), (3000, 1000)]:
        a = limits.peak_memory_bytes(nx, ny, stage="analysis")
        o = limits.peak_memory_bytes(nx, ny, stage="optimize")
        assert 0 < a < o
    # n log n beyond a fixed allowance: four times the elements, more than four times the memory.
    grow = [limits.peak_memory_bytes(n, 100) - limits.FIXED_BYTES for n in (100, 400)]
    assert grow[1] > 4 * grow[0]


def test_a_larger_filter_costs_more_until_it_runs_by_fft():
    # optimize/filters.py: a sparse matrix up to 200 weights per element, FFT convolution beyond.
    base = limits.peak_memory_bytes(400, 130, 10, 10, stage="optimize")
    wide = limits.peak_memory_bytes(400, 130, 10, 10, stage="optimize", filter_radius_mm=70)  # 156 weights
    fft = limits.peak_memory_bytes(400, 130, 10, 10, stage="optimize", filter_radius_mm=120)  # 448 weights
    assert wide > base and fft == base


def test_a_stage_grid_refuses_a_grid_over_the_budget_and_names_a_size_that_fits(monkeypatch):
    # 4200 x 800 mm at 5 mm: 840 x 160 elements, against a 150 MB budget.
    _budget(monkeypatch, 150e6)
    with pytest.raises(LacunaError) as caught:
        limits.grid_within_memory(4200.0, 800.0, 5.0)
    error = caught.value
    assert error.where == "[panel] element_size"
    assert "840 x 160 elements" in error.message and MESSAGE.search(error.message).group("verb") == "analyse"
    need = float(MESSAGE.search(error.message).group("need")) * (1e9 if "GB" in error.message else 1e6)
    assert need == pytest.approx(limits.peak_memory_bytes(840, 160, 5.0, 5.0), rel=0.05)
    m = HINT.search(error.hint)
    size = float(m.group("size"))
    # The size named fits the same budget, and gives the grid the hint says.
    grid = limits.grid_within_memory(4200.0, 800.0, size)
    assert (grid.nx, grid.ny) == (int(m.group("nx")), int(m.group("ny")))
    # ... and it is the smallest that does at two significant figures (the next one down does not).
    step = 10.0 ** (len(str(int(size))) - 2) if size >= 10 else 0.1 if size >= 1 else 0.01
    with pytest.raises(LacunaError):
        limits.grid_within_memory(4200.0, 800.0, size - step)


def test_the_hint_reads_like_the_issue_example():
    # Issue 6: "this grid needs about 31 GB; raise element_size to at least 4 mm". A 20 m x 8 m wall at 1 mm
    # against a 31 GB budget.
    with pytest.raises(LacunaError) as caught:
        limits.check_memory(20000, 8000, 1.0, 1.0, stage="analysis", budget_bytes=31e9)
    text = str(caught.value)
    assert text.startswith("[panel] element_size: this grid (20000 x 8000 elements")
    assert re.search(r"needs about [\d.]+ TB of memory to analyse, and about 31 GB is free\.", text)
    assert HINT.search(text)


def test_nothing_fits_a_budget_below_one_element():
    with pytest.raises(LacunaError) as caught:
        limits.check_memory(100, 100, 1.0, 1.0, budget_bytes=1000)
    assert "Raise element_size" not in caught.value.hint and "more memory" in caught.value.hint


def test_the_suggested_size_matches_the_grid_rounding():
    for width, height, budget in [(3000.0, 600.0, 100e6), (4200.0, 800.0, 2e9), (150.0, 9000.0, 80e6)]:
        size = limits.smallest_element_size(width, height, budget, stage="optimize")
        nx, ny = grid_shape(width, height, size)
        assert limits.peak_memory_bytes(nx, ny, width / nx, height / ny, stage="optimize") <= budget


# --- the command line ---------------------------------------------------------------------------------------

JOB = """units = "mm"
[panel]
thickness = 90
element_size = {size}
[material]
E_MPa = 11500
nu = 0.3
[[support]]
from = [0, 0]
to = [150, 0]
[[support]]
from = [2850, 0]
to = [3000, 0]
fix = "y"
[[load]]
from = [0, 600]
to = [3000, 600]
wy_kN_m = -6
[rules]
profile = "timber-bored"
"""


def _panel(tmp_path: Path, size: float) -> tuple[Path, Path]:
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 4
    doc.modelspace().add_lwpolyline([(0, 0), (3000, 0), (3000, 600), (0, 600)], close=True,
                                    dxfattribs={"layer": "PANEL"})
    dxf = tmp_path / "wall.dxf"
    doc.saveas(dxf)
    job = tmp_path / "wall.toml"
    job.write_text(JOB.format(size=size))
    return dxf, job


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def test_optimize_is_refused_up_front_where_only_the_analysis_would_fit(tmp_path, monkeypatch):
    dxf, job = _panel(tmp_path, 50.0)  # 60 x 12 elements
    analysis = limits.peak_memory_bytes(60, 12, 50.0, 50.0, stage="analysis")
    optimisation = limits.peak_memory_bytes(60, 12, 50.0, 50.0, stage="optimize")
    _budget(monkeypatch, (analysis + optimisation) / 2)
    before = _digest(dxf), _digest(job)
    ran = CliRunner().invoke(main, ["analyze", str(dxf), "--job", str(job), "--out", str(tmp_path / "a")])
    assert ran.exit_code == 0, ran.output
    refused = CliRunner().invoke(main, ["optimize", str(dxf), "--job", str(job), "--out", str(tmp_path / "o")])
    assert refused.exit_code == 2
    assert "[panel] element_size" in refused.output and "to optimise" in refused.output
    assert "Traceback" not in refused.output
    assert not (tmp_path / "o").exists()
    assert (_digest(dxf), _digest(job)) == before


def test_a_hopeless_grid_is_refused_on_this_machine_too(tmp_path):
    # 0.01 mm elements over 3 m x 0.6 m: 18 billion elements, beyond any machine's memory (no monkeypatch).
    dxf, job = _panel(tmp_path, 0.01)
    refused = CliRunner().invoke(main, ["analyze", str(dxf), "--job", str(job), "--out", str(tmp_path / "o")])
    assert refused.exit_code == 2
    assert re.search(r"needs about [\d,.]+ TB of memory", refused.output), refused.output
    assert HINT.search(refused.output.replace("\n", " "))
    assert not (tmp_path / "o").exists()
