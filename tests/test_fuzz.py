"""Fuzzing the whole pipeline through the command line (issue 6, item 5).

Random valid panels (tests/strategies.py) must analyse and optimise: exit 0, figures that obey statics, voids
that keep the job's rules when measured on the written drawing. Random damaged drawings must be read or refused
in words: exit 0 or 2 for ``analyze`` and ``optimize`` (0, 1 or 2 for ``check`` and ``convert``), never 3 (an
internal error) and never a traceback; a refusal writes nothing and names the file, layer, handle or job key;
no input changes by a byte. This is the short run of the default tests; benchmarks/fuzz_long.py runs the same
checks on many more examples. The last tests keep the faults the fuzzing found, one fixed example each.
"""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
import tempfile
from contextlib import contextmanager
from pathlib import Path

import ezdxf
import numpy as np
import pytest
import shapely
from click.testing import CliRunner
from ezdxf import path as ezpath
from hypothesis import HealthCheck, Phase, given, settings

from strategies import damaged_drawings, valid_panels
from toolkit.cli import main
from toolkit.units import MM_PER_UNIT

# No shrinking in the short run: one example costs a second or more, and the failing case prints whole anyway.
SHORT = settings(max_examples=12, deadline=None, phases=[Phase.explicit, Phase.generate],
                 suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
SHORT_DAMAGED = settings(SHORT, max_examples=80)

VOID_LAYERS = ("LACUNA-VOID-POLYGON", "LACUNA-VOID-SLOT", "LACUNA-VOID-BORE")  # CONTRACT.md, output layers
# Lengths the rules are measured to: the rule checker's own tolerance (toolkit/rules/check.py, TOLERANCE_MM)
# plus the flattening of arcs below (chords inside an arc make a void look at most this much smaller).
RULE_TOL_MM = 0.01 + 0.01


# --- running the command line -------------------------------------------------------------------------------


def invoke(*args):
    """Run ``lacuna``; on an internal error (exit 3) run again with --debug so the failure shows the traceback."""
    args = [str(a) for a in args]
    result = CliRunner().invoke(main, args)
    if result.exit_code == 3:
        again = CliRunner().invoke(main, ["--debug", *args])
        pytest.fail(f"lacuna {' '.join(args)} ended in an internal error:\n{again.stderr}")
    return result


def digest(*paths: Path) -> dict[str, str]:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in paths}


@contextmanager
def folder():
    # hypothesis runs many examples per test: one fresh folder per example, not pytest's one per test.
    with tempfile.TemporaryDirectory(prefix="lacuna-fuzz-") as name:
        yield Path(name)


def assert_refusal_in_words(result, *named: Path) -> None:
    """Exit 2 speaks one paragraph naming the file, a layer, a handle or a job key (CONTRACT.md, exit codes)."""
    text = result.stderr
    assert "Traceback" not in result.output
    # progress (BESO's line, the later stages' "... " lines) aside
    said = [line for line in text.splitlines() if line.strip() and not line.startswith(("BESO [", "... "))]
    assert len(said) == 1 and said[0].startswith("lacuna: "), text
    message = said[0]
    assert any(p.name in message for p in named) or "[" in message, message


def assert_no_fault(result, allowed, *inputs: Path, out: Path) -> None:
    assert result.exit_code in allowed, (result.exit_code, result.output)
    assert "Traceback" not in result.output
    assert "internal error" not in result.output
    if result.exit_code == 2:
        assert_refusal_in_words(result, *inputs)
        assert not out.exists(), f"a refused run left {out} behind"


# --- what a valid panel must give ---------------------------------------------------------------------------


def expected_unit(case) -> str:
    return "mm" if case.unitless else case.placement.unit


def void_shapes_local(case, drawing: Path) -> list:
    """The voids written on the LACUNA-VOID-* layers, as shapely polygons in the panel's local frame (mm)."""
    doc = ezdxf.readfile(drawing)
    shapes = []
    for e in doc.modelspace():
        if e.dxf.layer not in VOID_LAYERS or e.dxftype() not in ("CIRCLE", "LWPOLYLINE"):
            continue
        points = np.array([(v.x, v.y) for v in ezpath.make_path(e).flattening(0.001 / case.placement.mm_per_unit)])
        shapes.append(shapely.Polygon(case.to_local(points)).buffer(0))
    return shapes


def assert_voids_keep_rules(case, shapes) -> None:
    """Edge cover to the outline, webs to the openings and between voids: the job's own values (job file)."""
    envelope = shapely.box(0.0, 0.0, case.width_mm, case.height_mm)
    cover, web = case.rules_mm["edge_cover"], case.rules_mm["min_web"]
    for k, void in enumerate(shapes):
        assert envelope.contains(void), f"void {k} reaches out of the panel"
        assert void.distance(envelope.exterior) >= cover - RULE_TOL_MM, f"void {k}: edge cover"
        for hole in case.holes:
            assert void.distance(hole.shape()) >= web - RULE_TOL_MM, f"void {k}: web to an opening"
        for j in range(k):
            assert void.distance(shapes[j]) >= web - RULE_TOL_MM, f"voids {j} and {k}: web"


def check_valid_panel(case, tmp: Path) -> dict[str, int]:
    """Every check on one valid panel; returns each command's exit code (benchmarks/fuzz_long.py counts them)."""
    dxf, job = case.write(tmp)
    before = digest(dxf, job)

    analysed = invoke("analyze", dxf, "--job", job, "--out", tmp / "a", "--json")
    assert analysed.exit_code == 0, analysed.output
    s = json.loads(analysed.stdout)
    assert s["units"] == expected_unit(case)
    # The envelope the reader found is the rectangle drawn (the generator's own numbers); its local x runs
    # along our bottom edge or along our left edge, whichever lies nearer the drawing's x axis.
    size = (case.width_mm, case.height_mm)
    if round(case.placement.angle_deg / 90.0) % 2:
        size = size[::-1]
    assert s["envelope_mm"] == pytest.approx(size, rel=1e-9)
    # Statics: the loads sum to the vector sum of the forces drawn (point forces, intensity x length), and
    # the reactions balance them (equilibrium of the whole panel).
    load = np.asarray(s["load_sum_kN"])
    scale = max(np.hypot(*case.load_sum_kN()), 1e-3)
    assert load == pytest.approx(case.load_sum_kN(), abs=1e-9 * scale)
    assert np.asarray(s["reaction_sum_kN"]) == pytest.approx(-load, abs=1e-6 * scale)
    assert all(Path(p).is_file() for p in s["outputs"])

    optimised = invoke("optimize", dxf, "--job", job, "--out", tmp / "o", "--json")
    assert optimised.exit_code == 0, optimised.output
    o = json.loads(optimised.stdout)
    assert o["rules"]["violations"] == []
    mm = MM_PER_UNIT[o["units"]]
    assert o["rules"]["edge_cover"] * mm == pytest.approx(case.rules_mm["edge_cover"], rel=1e-9)  # job file
    assert o["rules"]["min_web"] * mm == pytest.approx(case.rules_mm["min_web"], rel=1e-9)        # job file
    for p in o["outputs"]:
        assert Path(p).is_file()
    copy = next(Path(p) for p in o["outputs"] if p.endswith("-lacuna.dxf"))
    shapes = void_shapes_local(case, copy)
    assert len(shapes) == len(o["voids"])
    assert_voids_keep_rules(case, shapes)
    # Every entity of the input drawing is kept (CONTRACT.md, output layers): its handles are all there.
    kept = {e.dxf.handle for e in ezdxf.readfile(copy).modelspace()}
    assert {e.dxf.handle for e in ezdxf.readfile(dxf).modelspace()} <= kept

    assert digest(dxf, job) == before
    return {"analyze": analysed.exit_code, "optimize": optimised.exit_code}


@SHORT
@given(valid_panels())
def test_valid_panels_analyse_and_optimise(case):
    with folder() as tmp:
        check_valid_panel(case, tmp)


# --- what a damaged drawing may give ------------------------------------------------------------------------


def check_damaged(case, tmp: Path) -> dict[str, int]:
    """Every check on one damaged drawing; returns each command's exit code."""
    dxf, job = case.write(tmp)
    before = digest(dxf, job)
    codes = {}
    for command in ("analyze", "optimize"):
        out = tmp / command
        result = invoke(command, dxf, "--job", job, "--out", out, "--json")
        assert_no_fault(result, (0, 2), dxf, job, out=out)
        if result.exit_code == 0 and command == "optimize":
            assert json.loads(result.stdout)["rules"]["violations"] == []
        codes[command] = result.exit_code
    out = tmp / "check"
    result = invoke("check", dxf, "--job", job, "--out", out)
    assert_no_fault(result, (0, 1, 2), dxf, job, out=out)
    codes["check"] = result.exit_code
    for target, extra in (("copy.svg", ()), ("copy.dxf", ("--units", "m"))):
        out = tmp / target
        result = invoke("convert", dxf, out, *extra)
        assert_no_fault(result, (0, 2), dxf, out=out)
        codes[f"convert to {out.suffix}"] = result.exit_code
    assert digest(dxf, job) == before
    return codes


@SHORT_DAMAGED
@given(damaged_drawings())
def test_damaged_drawings_are_read_or_refused_in_words(case):
    with folder() as tmp:
        check_damaged(case, tmp)


# --- the faults fuzzing found, kept as fixed examples ----------------------------------------------------------

# One small valid panel (a scenario of our own): 2000 x 500 mm, a 160 mm round opening, drawn in mm.
PANEL_JOB = """units = "mm"
[panel]
thickness = 100
element_size = 50
[material]
E_MPa = 11000
nu = 0.3
[[support]]
from = [0, 0]
to = [100, 0]
[[support]]
from = [1900, 0]
to = [2000, 0]
[[load]]
at = [1000, 500]
fy_kN = -10
"""


def panel_doc():
    doc = ezdxf.new("R2013")
    doc.header["$INSUNITS"] = 4
    msp = doc.modelspace()
    msp.add_lwpolyline([(0, 0), (2000, 0), (2000, 500), (0, 500)], close=True, dxfattribs={"layer": "PANEL"})
    msp.add_circle((600, 250), 80, dxfattribs={"layer": "OPENING"})
    return doc


def _ascii(doc) -> str:
    import io

    stream = io.StringIO()
    doc.write(stream)
    return stream.getvalue()


def _binary(doc) -> bytes:
    import io

    stream = io.BytesIO()
    doc.write(stream, fmt="bin")
    return stream.getvalue()


def _with_nan_circle() -> bytes:
    doc = panel_doc()
    doc.modelspace().add_circle((1400, 250), 60, dxfattribs={"layer": "OPENING"})
    text = _ascii(doc)
    head, tail = text.rsplit("\n 40\n60.0\n", 1)  # the new circle's radius (group code 40)
    return (head + "\n 40\nnan\n" + tail).encode()


def _with_nameless_insert() -> bytes:
    doc = panel_doc()
    doc.blocks.new("MARK").add_point((0, 0))
    doc.modelspace().add_blockref("MARK", (50, 50), dxfattribs={"layer": "NOTES"})
    text = _ascii(doc)
    return text.replace("\n  2\nMARK\n 10\n", "\n 10\n", 1).encode()  # the INSERT's block name deleted


def _with_vertex_without_location() -> bytes:
    doc = panel_doc()
    doc.modelspace().add_polyline2d([(1300, 200), (1500, 200), (1500, 300)], close=True,
                                    dxfattribs={"layer": "OPENING"})
    text = _ascii(doc)
    at = text.index("VERTEX")
    head, tail = text[:at], text[at:]
    x = tail.index("\n 10\n")
    end = tail.index("\n 30\n", x)
    end = tail.index("\n", end + 5)
    return (head + tail[:x] + tail[end:]).encode()  # the first vertex loses its x, y and z


def _with_unknown_record() -> bytes:
    text = _ascii(panel_doc())
    at = text.index("\n  0\nENDSEC\n", text.index("ENTITIES"))
    return (text[:at] + "\n  0\nLACUNA-NONSENSE\n  8\nPANEL" + text[at:]).encode()


def _with_huge_line() -> bytes:
    doc = panel_doc()
    doc.modelspace().add_line((1300, 200), (1500, 200), dxfattribs={"layer": "OPENING"})
    text = _ascii(doc)
    head, tail = text.rsplit("\n 11\n1500.0\n", 1)  # the new line's end x (group code 11)
    return (head + "\n 11\n1e300\n" + tail).encode()


def _with_nan_support_marker() -> bytes:
    doc = panel_doc()
    doc.modelspace().add_line((0, 0), (100, 0), dxfattribs={"layer": "SUPPORT"})
    doc.modelspace().add_line((1900, 0), (2077, 0), dxfattribs={"layer": "SUPPORT"})
    text = _ascii(doc)
    head, tail = text.rsplit("\n 11\n2077.0\n", 1)  # the second marker's end x (group code 11)
    return (head + "\n 11\nnan\n" + tail).encode()


def _with_repaired_number_and_unknown_unit() -> bytes:
    doc = panel_doc()
    doc.header["$INSUNITS"] = 14  # refused: not a unit lacuna reads
    text = _ascii(doc).replace("\n 40\n80.0\n", "\n 40\n8O.0\n", 1)  # the opening's radius, a letter O for 0
    return text.encode()


def _with_form_feed_in_a_group_code() -> bytes:
    text = _ascii(panel_doc())
    return text.replace("\n  9\n$ACADVER\n", "\na\x0cX\n$ACADVER\n", 1).encode()


def _with_undecodable_section_name() -> bytes:
    # Bytes that are no UTF-8 where the first SECTION should be: the recovered file's audit quotes them.
    data = _ascii(panel_doc()).encode()
    at = data.index(b"SECTION")
    return data[:at + 3] + b"\x8cW\xb3V" + data[at + 7:]


def _with_header_pairs_deleted() -> bytes:
    # The fourth and fifth group-code pairs of the file gone: the header's version reads as a number.
    from group_codes import pairs

    kept = pairs(_ascii(panel_doc()).encode())
    del kept[3:5]
    return "".join(f"{code:>3}\n{value}\n" for code, value in kept).encode()


def _without_plot_style() -> bytes:
    # The plot style every new layer refers to, lost from its dictionary (a damaged file read in recovery mode
    # may lose it); ezdxf then cannot add a layer.
    text = _ascii(panel_doc())
    text = text.replace("\n  3\nNormal\n350\n13\n100\nAcDbDictionaryWithDefault\n340\n13\n", "\n", 1)
    return text.replace("\n  0\nACDBDICTIONARYWDFLT\n", "\n  0\nDICTIONARY\n", 1).encode()


def _empty() -> bytes:
    doc = ezdxf.new("R2013")
    return _ascii(doc).encode()


REGRESSIONS = {
    # name: (drawing bytes, the commands that crashed on it, the fragment of the refusal or None if it reads)
    # Cut inside a binary value (struct.error) and inside the header (IndexError) on the first reading.
    "binary-dxf-cut-in-a-value": (lambda: _binary(panel_doc())[:36], ("analyze", "check", "convert"), None),
    "binary-dxf-cut-in-header": (lambda: _binary(panel_doc())[:52], ("analyze", "check", "convert"), None),
    "ascii-cut-in-header": (lambda: _ascii(panel_doc())[:130].encode(), ("analyze", "check", "convert"), None),
    "nan-radius": (_with_nan_circle, ("analyze", "check", "convert"), "not a finite number"),
    "nameless-insert": (_with_nameless_insert, ("analyze", "check"), None),
    "vertex-without-location": (_with_vertex_without_location, ("analyze", "check", "convert-units"),
                                "cannot be read"),
    "unknown-record": (_with_unknown_record, ("analyze", "check"), None),
    "huge-coordinate": (_with_huge_line, ("analyze", "check", "convert"), "not a finite number"),
    "empty-model-space": (_empty, ("analyze", "check", "convert"), "empty"),
    # Read as a support on no outline; shapely's warning about the NaN broke the one-paragraph refusal.
    "nan-support-marker": (_with_nan_support_marker, ("analyze", "check"), "not a finite number"),
    "header-pairs-deleted": (_with_header_pairs_deleted, ("analyze", "check", "convert"), "too damaged"),
    # The refusal quoted a form feed from the file, which split the paragraph in two.
    "form-feed-in-message": (_with_form_feed_in_a_group_code, ("analyze", "convert"), "\\x0c"),
    "no-plot-style": (_without_plot_style, ("optimize",), None),
    # Its audit messages hold undecodable bytes, and writing the report with them failed.
    "undecodable-bytes": (_with_undecodable_section_name, ("optimize",), None),
}
# The job of the cases whose supports are drawn as markers: the panel job without its [[support]] tables.
MARKER_JOB = PANEL_JOB.split("[[support]]")[0] + PANEL_JOB[PANEL_JOB.index("[[load]]"):]
USES_MARKERS = {"nan-support-marker"}


@pytest.mark.parametrize("name", sorted(REGRESSIONS))
def test_faults_found_by_fuzzing_stay_fixed(name, tmp_path):
    make, commands, fragment = REGRESSIONS[name]
    dxf, job = tmp_path / f"{name}.dxf", tmp_path / "job.toml"
    dxf.write_bytes(make())
    job.write_text(MARKER_JOB if name in USES_MARKERS else PANEL_JOB)
    before = digest(dxf, job)
    for command in commands:
        out = tmp_path / f"out-{command}"
        if command == "convert":
            result = invoke("convert", dxf, out.with_suffix(".svg"))
            assert_no_fault(result, (0, 2), dxf, out=out.with_suffix(".svg"))
        elif command == "convert-units":
            result = invoke("convert", dxf, out.with_suffix(".dxf"), "--units", "m")
            assert_no_fault(result, (0, 2), dxf, out=out.with_suffix(".dxf"))
        elif command == "optimize":
            job.write_text(PANEL_JOB + "[optimize]\nmax_iterations = 2\n")
            before = digest(dxf, job)
            result = invoke(command, dxf, "--job", job, "--out", out)
            assert_no_fault(result, (0, 2), dxf, job, out=out)
        else:
            result = invoke(command, dxf, "--job", job, "--out", out)
            assert_no_fault(result, (0, 1, 2) if command == "check" else (0, 2), dxf, job, out=out)
        if fragment is not None and command == "analyze":
            assert result.exit_code == 2 and fragment in result.stderr, result.output
    assert digest(dxf, job) == before


def test_a_refusal_is_one_paragraph_in_a_real_process(tmp_path):
    # ezdxf logged its repair of the radius straight to stderr ahead of the refusal. Under pytest its logging
    # plugin catches such records, so this runs the command in a process of its own, as a drafter would.
    dxf, job = tmp_path / "repaired.dxf", tmp_path / "job.toml"
    dxf.write_bytes(_with_repaired_number_and_unknown_unit())
    job.write_text(PANEL_JOB)
    done = subprocess.run([sys.executable, "-m", "toolkit.cli", "analyze", str(dxf), "--job", str(job), "--out",
                           str(tmp_path / "out")], capture_output=True, text=True, timeout=120,
                          cwd=Path(__file__).resolve().parents[1])
    assert done.returncode == 2, done.stderr
    lines = [line for line in done.stderr.splitlines() if line.strip()]
    assert len(lines) == 1 and lines[0].startswith("lacuna: ") and "$INSUNITS = 14" in lines[0], done.stderr
