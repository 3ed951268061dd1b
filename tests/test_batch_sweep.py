"""`lacuna batch` and `lacuna sweep` on 2-worker Dask clusters, with the bundled demo at a coarse grid.

The figures of every row are checked against the JSON that the panel's own `lacuna optimize` run wrote in its
folder, and a refused panel's message against the paragraph `lacuna optimize` prints for the same drawing.
"""

from __future__ import annotations

import csv
import io
import json
import os
import shutil
import subprocess
import sys
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest
from click.testing import CliRunner

from toolkit import CAUTION
from toolkit.api import demo_files
from toolkit.cli import main
from toolkit.sweep import dominated_by, knee_index
from toolkit.write.tradeoff_plot import tradeoff_svg

ROOT = Path(__file__).resolve().parent.parent
BAD = ROOT / "fixtures" / "bad"
SVG = "{http://www.w3.org/2000/svg}"


def _coarse_job(volume_fraction: float) -> str:
    """The demo's job at 40 mm elements (about 2,100 elements: a few seconds a job)."""
    text = demo_files()[1].read_text()
    assert "element_size = 20" in text and "volume_fraction = 0.55" in text
    return text.replace("element_size = 20", "element_size = 40").replace(
        "volume_fraction = 0.55", f"volume_fraction = {volume_fraction}")


def _lacuna(*args: str, cwd: Path) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "toolkit.cli", *args], capture_output=True, text=True, cwd=cwd,
                          timeout=600)


@pytest.fixture(scope="module")
def batch_run(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("batch")
    drawings = tmp / "drawings"
    drawings.mkdir()
    for name, vf in (("lintel-a", 0.55), ("lintel-b", 0.7)):
        shutil.copy(demo_files()[0], drawings / f"{name}.dxf")
        (drawings / f"{name}.toml").write_text(_coarse_job(vf))   # the per-drawing job beside it
    for suffix in (".dxf", ".toml"):
        shutil.copy(BAD / f"open-outline{suffix}", drawings / f"open-outline{suffix}")
    before = {p.name: p.read_bytes() for p in drawings.iterdir()}
    args = ["drawings/lintel-a.dxf", "drawings/open-outline.dxf", "drawings/lintel-b.dxf"]
    done = _lacuna("batch", *args, "--out", "out", "--workers", "2", "--json", cwd=tmp)
    alone = _lacuna("optimize", "drawings/open-outline.dxf", "--job", "drawings/open-outline.toml", "--out", "alone",
                    cwd=tmp)
    return tmp, done, alone, before


def test_batch_exit_1_and_one_json_object(batch_run):
    tmp, done, alone, _ = batch_run
    assert done.returncode == 1, done.stderr   # one panel refused: CONTRACT.md, exit 1
    summary = json.loads(done.stdout)          # exactly one JSON object on stdout
    assert summary["command"] == "batch" and summary["panels"] == 3
    assert summary["counts"]["done"] == 2 and summary["counts"]["refused"] == 1
    assert summary["caution"] == CAUTION


def test_batch_refused_panel_has_its_own_paragraph(batch_run):
    tmp, done, alone, _ = batch_run
    assert alone.returncode == 2
    paragraph = alone.stderr.strip().removeprefix("lacuna: ")
    assert "open" in paragraph  # fixtures/bad/expected.toml: "open-outline" = "open"
    row = json.loads(done.stdout)["rows"][1]
    assert row["panel"] == "open-outline" and row["status"] == "refused" and row["exit_code"] == 2
    assert row["message"] == paragraph
    assert row["mass_removed_percent"] is None
    assert not (tmp / "out" / "open-outline").exists()   # a refused panel writes nothing


def test_batch_rows_carry_each_panels_own_figures(batch_run):
    tmp, done, _, _ = batch_run
    rows = json.loads(done.stdout)["rows"]
    for row, stem in ((rows[0], "lintel-a"), (rows[2], "lintel-b")):
        own = json.loads((tmp / "out" / stem / f"{stem}-optimize.json").read_text())
        assert row["status"] == "done" and row["exit_code"] == 0 and row["message"] == ""
        assert row["drawing"] == f"drawings/{stem}.dxf" and row["job"] == f"drawings/{stem}.toml"
        assert row["mass_removed_percent"] == own["mass_removed_percent"]
        assert row["capture_percent"] == own["capture_percent"]
        assert row["capture_ceiling_percent"] == own["capture_ceiling_percent"]
        # stiffness lost: the compliance rise of the panel to make against the solid one
        rise = 100.0 * (own["compliance_rationalized_Nmm"] / own["solid"]["compliance_Nmm"] - 1.0)
        assert row["stiffness_loss_percent"] == pytest.approx(rise, rel=1e-12)
        assert row["violations"] == len(own["rules"]["violations"]) == 0 and row["rules"] == "kept"
        assert own["volume_fraction_target"] == (0.55 if stem == "lintel-a" else 0.7)
        # the same files `lacuna optimize` writes, all there
        assert own["outputs"] and all(Path(p).is_file() for p in own["outputs"])
        assert {Path(p).name for p in own["outputs"]} >= {f"{stem}-lacuna.dxf", f"{stem}-result.svg",
                                                          f"{stem}-schedule.csv", f"{stem}-report.md"}
    # the two jobs differ in volume fraction, so their figures do
    assert rows[0]["mass_removed_percent"] != rows[2]["mass_removed_percent"]


def test_batch_summary_tables(batch_run):
    tmp, done, _, _ = batch_run
    rows = json.loads(done.stdout)["rows"]
    table = list(csv.DictReader(io.StringIO((tmp / "out" / "batch-summary.csv").read_text())))
    assert [r["panel"] for r in table] == ["lintel-a", "open-outline", "lintel-b"]
    assert [r["status"] for r in table] == ["done", "refused", "done"]
    assert [r["exit_code"] for r in table] == ["0", "2", "0"]
    for line, row in zip(table, rows):
        for key in ("mass_removed_percent", "stiffness_loss_percent", "capture_percent", "capture_ceiling_percent"):
            if row[key] is None:
                assert line[key] == ""
            else:
                assert float(line[key]) == pytest.approx(row[key], rel=1e-5)   # six significant digits
    assert table[1]["message"] == rows[1]["message"]
    md = (tmp / "out" / "batch-summary.md").read_text()
    lines = md.splitlines()
    a = next(x for x in lines if x.startswith("| lintel-a |"))
    assert f"| {rows[0]['mass_removed_percent']:.1f} |" in a and "| done |" in a and "kept" in a
    assert any(x.startswith("| open-outline | refused |") for x in lines)
    assert rows[1]["message"] in md
    assert " ".join(CAUTION.split()) in " ".join(md.split())
    saved = json.loads((tmp / "out" / "batch-summary.json").read_text())
    assert saved["rows"] == rows


def test_batch_progress_on_stderr_and_inputs_untouched(batch_run):
    tmp, done, _, before = batch_run
    progress = [x for x in done.stderr.splitlines() if x.startswith("[")]
    assert sorted(x[:5] for x in progress) == ["[1/3]", "[2/3]", "[3/3]"]
    assert {p.name: p.read_bytes() for p in (tmp / "drawings").iterdir()} == before
    assert not list((tmp / "out").rglob("*.part"))


def test_batch_that_cannot_start_exits_2_and_writes_nothing(tmp_path):
    runner = CliRunner()
    result = runner.invoke(main, ["batch", str(tmp_path / "none.dxf"), "--out", str(tmp_path / "out")])
    assert result.exit_code == 2 and "does not exist" in result.output
    assert not (tmp_path / "out").exists()
    (tmp_path / "a-file").write_text("x")
    shutil.copy(demo_files()[0], tmp_path / "p.dxf")
    result = runner.invoke(main, ["batch", str(tmp_path / "p.dxf"), "--out", str(tmp_path / "a-file")])
    assert result.exit_code == 2 and "is a file" in result.output
    result = runner.invoke(main, ["batch", str(tmp_path / "p.dxf"), "--job", str(BAD / "unknown-key.toml"),
                                  "--out", str(tmp_path / "out")])
    assert result.exit_code == 2 and 'did you mean "thickness"' in result.output  # fixtures/bad/expected.toml
    result = runner.invoke(main, ["batch", str(tmp_path / "p.dxf"), "--job", str(BAD / "optimize-unknown-profile.toml"),
                                  "--out", str(tmp_path / "out")])
    assert result.exit_code == 2 and "timber-bored" in result.output            # fixtures/bad/expected.toml
    assert not (tmp_path / "out").exists()


# --- sweep -------------------------------------------------------------------------------------------------


@pytest.fixture(scope="module")
def cluster():
    """An existing cluster, as `--scheduler ADDRESS` names one: two workers of one thread."""
    from distributed import LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=":0") as running:
        yield running


@pytest.fixture(scope="module")
def sweep_run(tmp_path_factory, cluster):
    from toolkit.sweep import sweep_file

    tmp = tmp_path_factory.mktemp("sweep")
    shutil.copy(demo_files()[0], tmp / "lintel.dxf")
    (tmp / "lintel.toml").write_text(_coarse_job(0.55))
    seen = []
    result = sweep_file(tmp / "lintel.dxf", tmp / "lintel.toml", volumes="0.45:0.75:3", out_dir=tmp / "out",
                        scheduler=cluster.scheduler_address, on_done=lambda row, d, t: seen.append((d, t)))
    return tmp, result, seen


def test_a_job_that_does_not_come_back_is_a_failed_row_and_the_others_finish(cluster, tmp_path):
    from distributed import Client

    from toolkit.batch import FAILED, REFUSED, optimize_task, run_tasks

    tasks = [{"drawing": str(tmp_path / "none.dxf"), "job": None, "out_dir": str(tmp_path / "a")},
             # a keyword the task does not take: it raises in the worker before its own error handling
             {"drawing": str(tmp_path / "none.dxf"), "job": None, "out_dir": str(tmp_path / "b"), "bogus": 1}]
    with Client(cluster.scheduler_address) as client:
        rows = run_tasks(client, optimize_task, tasks)
    assert rows[0]["status"] == REFUSED and "none.dxf" in rows[0]["message"]
    assert rows[1]["status"] == FAILED and "bogus" in rows[1]["message"]
    assert rows[1]["folder"] == str(tmp_path / "b")


def _below_chord(points, k) -> float:
    """How far point k lies below the straight line through the first and last points (by mass), in y."""
    (x0, y0), (x1, y1) = min(points), max(points)
    x, y = points[k]
    return y0 + (y1 - y0) * (x - x0) / (x1 - x0) - y


def test_sweep_rows_csv_and_knee(sweep_run):
    tmp, result, seen = sweep_run
    assert sorted(seen) == [(1, 3), (2, 3), (3, 3)]
    rows = result.rows
    assert [r["volume_fraction"] for r in rows] == [0.45, 0.6, 0.75]
    assert all(r["status"] == "done" for r in rows), [r["message"] for r in rows]
    table = list(csv.DictReader(io.StringIO((tmp / "out" / "lintel-sweep.csv").read_text())))
    assert [float(r["volume_fraction"]) for r in table] == [0.45, 0.6, 0.75]
    for line, row in zip(table, rows):
        own_file = Path(row["folder"]) / "lintel-optimize.json"
        own = json.loads(own_file.read_text())
        assert own["volume_fraction_target"] == row["volume_fraction"]      # each point a whole job of its own
        assert row["made_mass_percent"] == pytest.approx(100.0 - own["mass_removed_percent"], rel=1e-12)
        solid_kg = own["mass_removed_kg"] / (own["mass_removed_percent"] / 100.0)
        assert row["made_mass_kg"] == pytest.approx(solid_kg - own["mass_removed_kg"], rel=1e-9)
        assert row["compliance_Nmm"] == own["compliance_rationalized_Nmm"]
        assert row["max_deflection_mm"] == own["max_deflection_rationalized_mm"]
        assert row["capture_ceiling_percent"] == own["capture_ceiling_percent"]
        assert float(line["made_mass_kg"]) == pytest.approx(row["made_mass_kg"], rel=1e-5)
        assert line["knee"] == ("yes" if row["knee"] else "no")
    # Direction: the volume fraction is the share of the design region KEPT, so a larger one removes less. The
    # optimiser's own (freeform) removal falls strictly as it rises; the voids to make need not follow point by
    # point (their fitting keeps a different share of each freeform layout: capture_percent).
    freeform = [r["mass_removed_freeform_percent"] for r in rows]
    assert freeform[0] > freeform[1] > freeform[2]
    # The knee: at most one, one of the points; it lies below the chord and is the farthest below it (with the
    # axes scaled the order of distances is the same on this three-point curve: one inner point).
    points = [(r["made_mass_percent"], r["compliance_Nmm"]) for r in rows]
    knees = [k for k, r in enumerate(rows) if r["knee"]]
    inner = sorted(range(3), key=lambda k: points[k])[1]
    if _below_chord(points, inner) > 0:
        assert knees == [inner]
    else:
        assert knees == []


def test_sweep_plot(sweep_run):
    tmp, result, _ = sweep_run
    root = ET.parse(tmp / "out" / "lintel-sweep.svg").getroot()
    texts = " ".join("".join(t.itertext()) for t in root.iter(f"{SVG}text"))
    assert "compliance, 10³ N mm" in texts or "compliance, N mm" in texts   # axes labelled with units
    assert "largest deflection, mm" in texts and "made mass, kg" in texts
    assert "qualified engineer" in texts
    groups = {g.get("id"): g for g in root.iter(f"{SVG}g")}
    line = groups["compliance-1"]
    points = line.find(f"{SVG}polyline").get("points").split()
    assert len(points) == 3
    marked = sorted(float(m.get("data-volume-fraction")) for m in line
                    if m.get("data-volume-fraction") and not m.get("id"))   # the point markers, not knee rings
    assert marked == [0.45, 0.6, 0.75]
    rings = [c for c in root.iter(f"{SVG}circle") if (c.get("id") or "").startswith("compliance-knee")]
    knees = [r["volume_fraction"] for r in result.rows if r["knee"]]
    assert [float(c.get("data-volume-fraction")) for c in rings] == knees


@pytest.mark.parametrize("volume, fragment", [
    ("0.9:0.4:0", "at least 2 points"),
    ("0:0.5:3", "strictly between 0 and 1"),
    ("0.4:1.2:3", "strictly between 0 and 1"),
    ("0.5:0.5:3", "repeat one point"),
    ("0.9-0.4-6", "START:STOP:COUNT"),
])
def test_sweep_bad_volume_exit_2_nothing_written(tmp_path, volume, fragment):
    shutil.copy(demo_files()[0], tmp_path / "p.dxf")
    result = CliRunner().invoke(main, ["sweep", str(tmp_path / "p.dxf"), "--job", str(demo_files()[1]),
                                       "--volume", volume, "--out", str(tmp_path / "out")])
    assert result.exit_code == 2, result.output
    assert result.output.startswith("lacuna: --volume: ") and fragment in result.output
    assert len(result.output.strip().splitlines()) == 1
    assert not (tmp_path / "out").exists()


def test_sweep_unknown_profile_exit_2_nothing_written(tmp_path):
    shutil.copy(demo_files()[0], tmp_path / "p.dxf")
    result = CliRunner().invoke(main, ["sweep", str(tmp_path / "p.dxf"), "--job", str(demo_files()[1]),
                                       "--volume", "0.8:0.5:3", "--profile", "timber-bored,no-such-profile",
                                       "--out", str(tmp_path / "out")])
    assert result.exit_code == 2 and result.output.startswith("lacuna: --profile: ")
    assert "no-such-profile" in result.output
    assert not (tmp_path / "out").exists()


def test_sweep_on_a_job_naming_an_unknown_profile_exit_2_nothing_written(tmp_path):
    result = CliRunner().invoke(main, ["sweep", str(BAD / "optimize-unknown-profile.dxf"), "--job",
                                       str(BAD / "optimize-unknown-profile.toml"), "--volume", "0.8:0.5:3",
                                       "--out", str(tmp_path / "out")])
    assert result.exit_code == 2 and "timber-bored" in result.output   # fixtures/bad/expected.toml
    assert not (tmp_path / "out").exists()


# --- the knee on curves whose knee is known ------------------------------------------------------------------


def test_knee_of_a_hyperbola_is_where_its_tangent_parallels_the_chord():
    # y = 1/x on [1, 16]: scaling both axes keeps "tangent parallel to the chord" (mean value theorem), and
    # -1/x^2 = (1/16 - 1)/(16 - 1) gives x = sqrt(1 * 16) = 4 (calculus, no source needed).
    x = list(range(1, 17))
    assert x[knee_index(x, [1.0 / v for v in x])] == 4


def test_knee_of_an_l_shape_is_its_corner_in_any_order():
    x, y = [0.0, 1.0, 2.0, 10.0], [10.0, 1.0, 0.5, 0.0]
    assert knee_index(x, y) == 1
    order = [3, 1, 0, 2]
    assert [x[i] for i in order][knee_index([x[i] for i in order], [y[i] for i in order])] == 1.0


def test_no_knee_on_a_line_a_bend_the_other_way_or_two_points():
    assert knee_index([1, 2, 3, 4], [8, 6, 4, 2]) is None
    assert knee_index([1, 2, 3], [10, 9.9, 0]) is None       # inner point above the chord
    assert knee_index([1, 2], [2, 1]) is None
    assert knee_index([1, 2, 3], [5, 5, 5]) is None
    assert knee_index([1, 2, 3], [10, 1, 0]) == 1


def test_the_local_cluster_runs_each_job_on_one_thread():
    # A job's checks take a second thread where they may (toolkit/overlap.py); on the local cluster every core
    # already runs a panel of its own, so the workers are started with LACUNA_THREADS=1.
    from toolkit.batch import dask_client
    from toolkit.overlap import THREADS_ENV, side_threads

    with dask_client(workers=1) as client:
        seen = client.run(lambda: (os.environ.get(THREADS_ENV), side_threads()))
    assert list(seen.values()) == [("1", 1)]


def test_sweep_plot_labels_its_points_to_three_figures():
    # A sweep 0.9:0.4:4 runs at 0.9, 0.7333..., 0.5666..., 0.4: the labels read as the printed table does (0.733,
    # 0.567), the markers keep the exact fraction for a script to read. Figures of our own.
    from toolkit.write.tradeoff_plot import tradeoff_svg

    rows = [{"profile": "timber-bored", "volume_fraction": v, "made_mass_kg": m, "compliance_Nmm": c,
             "max_deflection_mm": d, "knee": False}
            for v, m, c, d in ((0.9, 53.5, 10643.0, 0.36), (0.9 - 0.5 / 3, 50.0, 11063.0, 0.38),
                               (0.9 - 1.0 / 3, 48.3, 12186.0, 0.42), (0.4, 48.0, 12280.0, 0.43))]
    root = ET.fromstring(tradeoff_svg(rows, title="our own sweep"))
    labels = {"".join(t.itertext()) for g in root.iter(f"{SVG}g") if (g.get("id") or "") == "compliance-1"
              for t in g.iter(f"{SVG}text")}
    assert labels == {"0.9", "0.733", "0.567", "0.4"}
    marked = sorted(float(m.get("data-volume-fraction")) for g in root.iter(f"{SVG}g")
                    if g.get("id") == "compliance-1" for m in g if m.get("data-volume-fraction"))
    assert marked == pytest.approx([0.4, 0.9 - 1.0 / 3, 0.9 - 0.5 / 3, 0.9], rel=1e-5)


# A sweep of the shipped leaf under its own weight (fixtures/examples/leaf-under-its-own-weight, 2026-12-04): made mass
# kg and compliance N mm at volume fractions 0.9 ... 0.4. Down to 0.7 it gets stiffer as it gets lighter (its weight
# goes too), so 0.9 and 0.8 are heavier and softer than 0.7.
LEAF_SWEEP = [(0.9, 519.1, 11810.6), (0.8, 473.9, 11670.1), (0.7, 447.5, 11627.7), (0.6, 394.8, 12508.5),
              (0.5, 362.5, 13373.2), (0.4, 313.9, 15982.3)]


def test_points_beaten_on_both_counts_are_named_and_left_out_of_the_knee():
    mass = [m for _, m, _ in LEAF_SWEEP]
    compliance = [c for _, _, c in LEAF_SWEEP]
    assert dominated_by(mass, compliance) == [2, 2, None, None, None, None]
    # the knee among the rest (0.7 ... 0.4): the cost of a kilogram in compliance runs 16.7, 26.8, 53.7 N mm from
    # 0.7 down, so the knee is 0.5; over all six points it would be 0.6, a point chosen against two nobody would take
    front = [2, 3, 4, 5]
    assert front[knee_index([mass[i] for i in front], [compliance[i] for i in front])] == 4
    assert knee_index(mass, compliance) == 3
    # ties: an equal point beats nothing; a lighter one of equal compliance does
    assert dominated_by([1.0, 1.0, 2.0], [5.0, 5.0, 5.0]) == [None, None, 0]


def test_the_plot_draws_points_beaten_on_both_counts_hollow():
    rows = [{"profile": "custom", "volume_fraction": v, "made_mass_kg": m, "compliance_Nmm": c,
             "max_deflection_mm": 0.8, "knee": v == 0.5, "dominated_by": 0.7 if v > 0.7 else None}
            for v, m, c in LEAF_SWEEP]
    root = ET.fromstring(tradeoff_svg(rows, title="leaf"))
    line = {g.get("id"): g for g in root.iter(f"{SVG}g")}["compliance-1"]
    fills = {float(m.get("data-volume-fraction")): m.get("fill") for m in line
             if m.get("data-volume-fraction") and not m.get("id")}
    assert {v for v, f in fills.items() if f == "white"} == {0.9, 0.8}
    assert "heavier and of more compliance than another point" in " ".join("".join(t.itertext()) for t in root.iter(f"{SVG}text"))
