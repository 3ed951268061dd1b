"""`lacuna optimize` and `toolkit.optimize_document` end to end on a small panel of our own."""

from __future__ import annotations

import json
from pathlib import Path

import ezdxf
import pytest
from click.testing import CliRunner

import toolkit
from toolkit.cli import main
from toolkit.rules.profiles import load_profile

from drawings import GLULAM_BEAM_JOB

JOB = GLULAM_BEAM_JOB


def _drawing(path: Path) -> Path:
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 4
    msp = doc.modelspace()
    msp.add_lwpolyline([(0, 0), (3000, 0), (3000, 600), (0, 600)], close=True, dxfattribs={"layer": "PANEL"})
    msp.add_circle((1500, 300), 60, dxfattribs={"layer": "OPENING"})
    msp.add_text("BEAM B7", dxfattribs={"layer": "NOTES", "height": 40})
    doc.saveas(path)
    return path


@pytest.fixture(scope="module")
def optimized(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("opt")
    dxf = _drawing(tmp / "beam.dxf")
    job = tmp / "beam.toml"
    job.write_text(JOB)
    result = CliRunner().invoke(main, ["optimize", str(dxf), "--job", str(job), "--out", str(tmp / "out"),
                                       "--json"])
    assert result.exit_code == 0, result.output
    return dxf, json.loads(result.stdout), result.stderr


def test_progress_names_each_stage_after_the_optimiser_on_stderr_only(optimized):
    # BESO's line stands still once it ends; the voids and the checks can take minutes on a large grid, so each
    # later stage says what it does, on stderr (stdout holds the JSON alone: json.loads above read all of it).
    _, s, err = optimized
    stages = [line for line in err.splitlines() if line.startswith("... ")]
    assert len(stages) == 3, err
    assert stages[0].startswith("... fitting bores to ") and "freeform void" in stages[0]
    assert stages[0].endswith("under the timber-bored rules")
    assert stages[1].startswith(f"... checking the {len(s['voids'])} void")
    assert stages[2].startswith("... writing ")
    assert err.index("BESO [") < err.index(stages[0])


def test_contract_keys(optimized):
    _, s, _ = optimized
    for key in ("solid", "iterations", "converged", "volume_fraction_target", "volume_fraction_final",
                "compliance_freeform_Nmm", "compliance_rationalized_Nmm", "mass_removed_percent", "voids",
                "rules", "outputs"):  # CONTRACT.md, optimize
        assert key in s
    for key in ("profile", "min_web", "edge_cover", "violations"):
        assert key in s["rules"]
    for void in s["voids"]:
        assert {"id", "family", "centre", "sides", "size", "area"} <= set(void)
    assert all(Path(p).is_file() for p in s["outputs"])


def test_voids_are_stock_bores_and_the_rules_hold(optimized):
    _, s, _ = optimized
    assert s["voids"], "a half-volume target on a lightly loaded beam leaves room for bores"
    # The job names no bore list, so the profile's stock sizes rule (toolkit/rules/profiles/timber-bored.toml).
    stock = set(load_profile("timber-bored").value("bore_diameters"))
    assert set(s["rules"]["bore_diameters"]) == stock
    assert all(v["family"] == "bore" and v["size"] in stock for v in s["voids"])
    assert s["rules"]["violations"] == []


def test_removing_material_never_stiffens(optimized):
    # Energy theorem (common knowledge of linear elasticity, no source needed beyond any FE text): for fixed
    # loads, removing material cannot lower the compliance. Self-weight is off in this job.
    _, s, _ = optimized
    assert s["compliance_rationalized_Nmm"] >= s["solid"]["compliance_Nmm"] * (1 - 1e-12)
    assert 0 < s["mass_removed_percent"] < 50


def test_drawing_copy_keeps_the_input(optimized):
    dxf, s, _ = optimized
    original = ezdxf.readfile(dxf)
    copy = ezdxf.readfile(next(p for p in s["outputs"] if p.endswith(".dxf")))
    before = {e.dxf.handle: e.dxftype() for e in original.modelspace()}
    after = {e.dxf.handle: e.dxftype() for e in copy.modelspace()}
    assert all(after.get(h) == t for h, t in before.items())
    bores = copy.modelspace().query('CIRCLE[layer=="LACUNA-VOID-BORE"]')
    assert len(bores) == len(s["voids"])
    radii = sorted(round(c.dxf.radius * 2, 6) for c in bores)
    assert radii == sorted(v["size"] for v in s["voids"])


def test_optimize_document_in_place(tmp_path):
    dxf = _drawing(tmp_path / "beam.dxf")
    doc = ezdxf.readfile(dxf)
    count = len(doc.modelspace())
    result = toolkit.optimize_document(doc, JOB)
    assert len(result.handles["LACUNA-VOID-BORE"]) == len(result.run.voids)
    assert len(doc.modelspace()) > count
    with pytest.raises(toolkit.errors.LacunaError, match="LACUNA"):
        toolkit.optimize_document(doc, JOB)  # a second run must be asked for (replace=True)


def test_a_second_run_on_a_result_drawing_needs_replace(optimized, tmp_path):
    dxf, s, _ = optimized
    result_dxf = next(p for p in s["outputs"] if p.endswith("-lacuna.dxf"))
    job = dxf.with_suffix(".toml")
    refused = CliRunner().invoke(main, ["optimize", result_dxf, "--job", str(job), "--out", str(tmp_path / "a")])
    assert refused.exit_code == 2 and "--replace" in refused.output
    assert not (tmp_path / "a").exists()
    again = CliRunner().invoke(main, ["optimize", result_dxf, "--job", str(job), "--out", str(tmp_path / "b"),
                                      "--replace", "--json"])
    assert again.exit_code == 0, again.output
    copy = ezdxf.readfile(next(p for p in json.loads(again.stdout)["outputs"] if p.endswith(".dxf")))
    # Replaced, not doubled: one set of bores, as many as the new run made.
    assert len(copy.modelspace().query('CIRCLE[layer=="LACUNA-VOID-BORE"]')) == len(json.loads(again.stdout)["voids"])


def test_office_drawing_through_optimize_keeps_everything(tmp_path):
    # The office drawing of tests/test_dxf_out.py (text, dimension, block with attributes, hatch, paper-space
    # sheet, turned 30 degrees 6,000 km out); its markers carry the supports and loads.
    from test_dxf_out import office_drawing

    dxf = office_drawing(tmp_path)
    job = tmp_path / "job.toml"
    job.write_text('units = "mm"\n[panel]\nthickness = 100\nelement_size = 50\n[material]\nE_MPa = 11000\n'
                   'nu = 0.3\n[optimize]\nvolume_fraction = 0.6\nmax_iterations = 40\n[voids]\nfamily = "bore"\n')
    result = CliRunner().invoke(main, ["optimize", str(dxf), "--job", str(job), "--out", str(tmp_path / "o"),
                                       "--json"])
    assert result.exit_code == 0, result.output
    s = json.loads(result.stdout)
    before = ezdxf.readfile(dxf)
    after = ezdxf.readfile(next(p for p in s["outputs"] if p.endswith(".dxf")))
    for layout in before.layouts_and_blocks():
        for entity in layout:
            twin = after.entitydb.get(entity.dxf.handle)
            assert twin is not None and twin.dxftype() == entity.dxftype()
            assert dict(twin.dxfattribs()) == dict(entity.dxfattribs())
    auditor = after.audit()
    assert not auditor.has_errors
    assert len(after.modelspace().query('CIRCLE[layer=="LACUNA-VOID-BORE"]')) == len(s["voids"])


@pytest.mark.parametrize("blocker", ["existing output", "folder is a file"])
def test_outputs_that_cannot_be_written_are_refused_before_the_optimiser_runs(tmp_path, blocker):
    # An output already there (without --force) or an --out that cannot be a folder is refused before the long
    # run, not after it: no optimiser iteration is reported.
    from toolkit.api import demo_files, optimize_file
    from toolkit.errors import LacunaError

    dxf, toml = demo_files()
    out = tmp_path / "out"
    if blocker == "existing output":
        out.mkdir()
        (out / f"{Path(dxf).stem}-report.md").write_text("an earlier report\n")
    else:
        out.write_text("not a folder\n")
    iterations = []
    with pytest.raises(LacunaError, match="already exists" if blocker == "existing output" else "is a file"):
        optimize_file(dxf, toml, out_dir=out, on_iteration=lambda *a: iterations.append(a))
    assert iterations == []
    if blocker == "existing output":
        assert (out / f"{Path(dxf).stem}-report.md").read_text() == "an earlier report\n"


def test_checking_a_result_drawing_writes_beside_it_not_into_a_doubled_folder(tmp_path):
    # CONTRACT.md: outputs go by default to <stem>-lacuna beside the input; a drawing lacuna wrote is already
    # named <stem>-lacuna, so its own results go into the folder it is in.
    from toolkit.write.files import default_out_dir

    assert default_out_dir(tmp_path / "beam.dxf") == tmp_path / "beam-lacuna"
    assert default_out_dir(tmp_path / "beam-lacuna" / "beam-lacuna.dxf") == tmp_path / "beam-lacuna"
    from toolkit.api import demo_files, optimize_file

    dxf, toml = demo_files()
    src = tmp_path / Path(dxf).name
    src.write_bytes(Path(dxf).read_bytes())
    optimize_file(src, toml)  # the default folder: <stem>-lacuna beside the copy
    result = tmp_path / f"{src.stem}-lacuna" / f"{src.stem}-lacuna.dxf"
    assert result.exists()
    runner = CliRunner()
    done = runner.invoke(main, ["check", str(result), "--job", str(toml)])
    assert done.exit_code in (0, 1), done.output
    assert not (result.parent / f"{src.stem}-lacuna-lacuna").exists()
    assert (result.parent / f"{src.stem}-lacuna-check.json").exists()


def _optimize_in_metres(folder, stem: str, width: float, depth: float, job: str, *options: str):
    """``lacuna optimize`` on a rectangle ``width`` x ``depth`` drawn in metres on PANEL, with the job text ``job``;
    the outputs in ``folder``/out."""
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 6
    doc.modelspace().add_lwpolyline([(0, 0), (width, 0), (width, depth), (0, depth)], close=True,
                                    dxfattribs={"layer": "PANEL"})
    doc.saveas(folder / f"{stem}.dxf")
    (folder / f"{stem}.toml").write_text(job)
    return CliRunner().invoke(main, ["optimize", str(folder / f"{stem}.dxf"), "--job", str(folder / f"{stem}.toml"),
                                     "--out", str(folder / "out"), *options])


def test_a_schedule_in_metres_keeps_its_unit_and_its_digits(tmp_path):
    # A beam of our own drawn and described in metres: every length of the schedule in metres to a thousandth of
    # a millimetre (six decimals), areas without an exponent, and the tool words' lengths in metres too.
    import csv
    import io
    import re

    result = _optimize_in_metres(
        tmp_path, "beam", 4.8, 0.6,
        'units = "m"\n[panel]\nthickness = 0.09\nelement_size = 0.04\n[material]\nE_MPa = 11500\nnu = 0.3\n'
        'density_kg_m3 = 450\n[[support]]\nfrom = [0, 0]\nto = [0.1, 0]\n[[support]]\nfrom = [4.7, 0]\n'
        'to = [4.8, 0]\nfix = "y"\n[[load]]\nfrom = [0, 0.6]\nto = [4.8, 0.6]\nwy_kN_m = -8\n[optimize]\n'
        'volume_fraction = 0.6\n[voids]\nfamily = "polygon"\nsides = 6\n[rules]\nprofile = "timber-bored"\n')
    assert result.exit_code == 0, result.output
    rows = list(csv.DictReader(io.StringIO((tmp_path / "out" / "beam-schedule.csv").read_text())))
    assert rows
    for row in rows:
        for key in ("centre_x_m", "centre_y_m", "size_m"):
            assert re.fullmatch(r"\d+\.\d{6}", row[key]), (key, row[key])
        assert "e" not in row["area_m2"] and float(row["area_m2"]) > 0.001   # a void of some 0.01-0.1 m2
        assert " mm" not in row["tool"] and re.search(r"\d m\b", row["tool"]), row["tool"]
    # The drawing copy's schedule notes say the same, in the same unit.
    notes = [e.dxf.text for e in ezdxf.readfile(tmp_path / "out" / "beam-lacuna.dxf").modelspace()
             if e.dxftype() == "TEXT" and e.dxf.layer == "LACUNA-NOTE"]
    tools = [t for t in notes if "overall" in t]  # the n-gons' tool words: "... routed ..., 0.253 m overall"
    assert tools and not any(re.search(r"\d mm\b", t) for t in tools), tools
    # The sentences beside the figures too: the rule that held the layout back, the changes and drops, the
    # notes, and where each rule comes closest.
    s = json.loads((tmp_path / "out" / "beam-optimize.json").read_text())
    words = [s["limit"]] + s["changes"] + s["dropped"] + s["notes"] + [m["where"] for m in s["rules"]["margins"]]
    assert s["changes"] and any(re.search(r"\d m\b", w) for w in words), words
    assert not any(re.search(r"\d mm\b", w) for w in words), [w for w in words if re.search(r"\d mm\b", w)]
    assert not any(re.search(r"\d mm2\b", w) for w in words), [w for w in words if re.search(r"\d mm2\b", w)]
    # The report's void table gives the centres to a tenth of a millimetre (four decimals of a metre), as the
    # schedule's own figures round to.
    report = (tmp_path / "out" / "beam-report.md").read_text()
    table = [line.split("|") for line in report.splitlines() if re.match(r"\| V\d+ \| (polygon|slot|bore) \|", line)]
    assert table and len(table) == len(rows)
    for cells, row in zip(table, rows):
        x, y = cells[3].strip(), cells[4].strip()
        assert re.fullmatch(r"\d+\.\d{4}", x) and re.fullmatch(r"\d+\.\d{4}", y), cells
        assert abs(float(x) - float(row["centre_x_m"])) <= 5e-5 and abs(float(y) - float(row["centre_y_m"])) <= 5e-5


def test_a_sheet_in_metres_states_its_lengths_in_metres(tmp_path):
    # The same beam in metres: the sheet's subtitle, scale bar and title block all in metres.
    import re

    test_a_schedule_in_metres_keeps_its_unit_and_its_digits(tmp_path)
    svg = (tmp_path / "out" / "beam-result.svg").read_text()
    assert "lengths in m;" in svg
    assert re.search(r'data-length="[\d.]+ m"', svg)
    assert "thickness 0.09 m" in svg and "4.8 \u00d7 0.6 m" in svg


def test_a_grid_too_coarse_for_any_void_says_which_element_size_would_do(tmp_path):
    # A beam of our own 2.4 m long and 0.3 m deep, drawn in metres, meshed at 0.1 m: three elements deep. The
    # optimiser empties elements one wide, which outline no void; the run says why nothing was made and which
    # element size would give voids room to take shape (the depth over 20), in the drawing's unit.
    result = _optimize_in_metres(
        tmp_path, "coarse", 2.4, 0.3,
        'units = "m"\n[panel]\nthickness = 0.02\nelement_size = 0.1\n[material]\nE_MPa = 30000\nnu = 0.2\n'
        '[[support]]\nfrom = [0, 0]\nto = [0.1, 0]\n[[support]]\nfrom = [2.3, 0]\nto = [2.4, 0]\nfix = "y"\n'
        '[[load]]\nfrom = [0, 0.3]\nto = [2.4, 0.3]\nwy_kN_m = -20\n[optimize]\nvolume_fraction = 0.7\n'
        '[voids]\nfamily = "polygon"\n[rules]\nprofile = "timber-bored"\n', "--json")
    assert result.exit_code == 0, result.output
    s = json.loads(result.stdout)
    assert s["freeform_voids"] == 0 and not s["voids"]
    said = [w for w in s["warnings"] if "left no void wider than the grid resolves" in w]
    assert said and "3 elements across the panel's 0.3 m" in said[0], s["warnings"]
    assert "element_size to at most 0.015 m (20 elements across it)" in said[0]


def test_a_drawing_in_inches_gets_its_deflections_in_inches_too(tmp_path):
    # A 60 x 15 in header of our own, drawn in inches: the report's table and the command's lines give the largest
    # deflections in inches beside the millimetres (1 in = 25.4 mm exactly: the international inch of 1959, from
    # memory); the JSON keys stay in mm (CONTRACT.md). A drawing in mm gets no inch row (the demo's report:
    # tests/same_outputs.py).
    from toolkit.api import _optimize_lines, optimize_file

    doc = ezdxf.new("R2010")
    doc.header["$INSUNITS"] = 1
    doc.layers.add("PANEL")
    doc.modelspace().add_lwpolyline([(0, 0), (60, 0), (60, 15), (0, 15)], close=True, dxfattribs={"layer": "PANEL"})
    doc.saveas(tmp_path / "header.dxf")
    (tmp_path / "job.toml").write_text('units = "in"\n[panel]\nthickness = 3.5\nelement_size = 1\n[material]\n'
                                       'E_MPa = 13800\nnu = 0.3\n[[support]]\nat = [0, 0]\n[[support]]\nat = [60, 0]\n'
                                       'fix = "y"\n[[load]]\nat = [30, 15]\nfy_kN = -10\n[rules]\n'
                                       'profile = "timber-bored"\n')
    outcome = optimize_file(tmp_path / "header.dxf", tmp_path / "job.toml", out_dir=tmp_path / "out")
    s = outcome.summary
    assert s["units"] == "in"
    inches = [s[k] / 25.4 for k in ("max_deflection_freeform_mm", "max_deflection_rationalized_mm")]
    (report,) = [p for p in s["outputs"] if p.endswith("-report.md")]
    (row,) = [line for line in Path(report).read_text().splitlines() if line.startswith("| largest deflection, in")]
    # to 1e-3: the report and the lines print four significant figures (house tolerance, no source)
    cells = [float(c) for c in row.strip("|").split("|")[1:]]
    assert cells == pytest.approx([s["solid"]["max_deflection_mm"] / 25.4] + inches, rel=1e-3)
    (line,) = [t for t in _optimize_lines(s) if "largest deflection, in" in t]
    assert [float(v) for v in line.split()[3:]] == pytest.approx([s["solid"]["max_deflection_mm"] / 25.4] + inches,
                                                                 rel=1e-3)
