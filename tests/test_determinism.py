"""The same input through `lacuna optimize` twice gives the same numbers, the same DXF and the same figures.

The two runs are separate processes with different string-hash seeds (PYTHONHASHSEED: the order of sets and of
dicts built from sets changes with it), different BLAS thread counts, and the checks after the voids run in
sequence in one and side by side on two threads in the other (toolkit/overlap.py), so an answer that leans on any
of these shows here. What is allowed to differ is what a drawing program stamps on every save, and nothing else:

- DXF header $TDCREATE and $TDUPDATE (creation and update dates, Julian days) and $VERSIONGUID (a new GUID on
  every save): DXF reference, "HEADER Section Group Codes" (from memory: $TDCREATE "local date/time of drawing
  creation", $TDUPDATE "local date/time of last drawing update", $VERSIONGUID "uniquely identifies a particular
  version of a drawing; updated when the drawing is modified"). ezdxf, our writer, sets $TDCREATE when it loads
  or creates a document, $TDUPDATE and $VERSIONGUID on every save (ezdxf/document.py, Drawing._setup_metadata
  and Drawing._update_metadata, ezdxf 1.4), and stamps its version and the save time in the WRITTEN_BY_EZDXF
  variable of its EZDXF_META dictionary (ezdxf documentation, "ezdxf Metadata").
- The date printed on the result figure and in the report (write.result_sheet.result_svg, write.report.report_markdown).

Everything else, header included, is compared byte for byte after those values are masked.
"""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

from drawings import sample_drawing
from group_codes import pairs

ROOT = Path(__file__).resolve().parents[1]

# Written in the job's own units (mm). The sample panel carries its supports and loads as drawing markers, two
# load cases ("main" and "wind"); the job adds material and rules. A coarse grid keeps each run to a second.
JOB = """units = "mm"
[panel]
name = "determinism panel"
thickness = 90
element_size = 50
[material]
E_MPa = 11500
nu = 0.3
density_kg_m3 = 420
[optimize]
volume_fraction = 0.6
filter_radius = 150
max_iterations = 40
[voids]
family = "bore"
[rules]
profile = "timber-bored"
"""

STAMPED_HEADER_VARS = ("$TDCREATE", "$TDUPDATE", "$VERSIONGUID")
DATE = re.compile(rb"\d{4}-\d{2}-\d{2}")


def _run(workdir: Path, dxf: Path, job: Path, env_extra: dict) -> tuple[dict, Path]:
    workdir.mkdir()
    env = dict(os.environ, PYTHONPATH=str(ROOT), **env_extra)
    done = subprocess.run(
        [sys.executable, "-m", "toolkit.cli", "optimize", str(dxf), "--job", str(job), "--out", "out", "--json"],
        cwd=workdir, env=env, capture_output=True, timeout=120,
    )
    assert done.returncode == 0, done.stderr.decode()
    return json.loads(done.stdout), workdir / "out"


def _masked_dxf(data: bytes) -> tuple[list[tuple[int, str]], dict[str, str]]:
    """The file's (code, value) pairs with the per-save stamps replaced by "*", and the stamps themselves."""
    tags = pairs(data)
    stamps: dict[str, str] = {}
    # The handle of the WRITTEN_BY_EZDXF variable: in its dictionary, code 3 names an entry, 350/360 its handle.
    written = None
    for (c1, v1), (c2, v2) in zip(tags, tags[1:]):
        if c1 == 3 and v1 == "WRITTEN_BY_EZDXF" and c2 in (350, 360):
            written = v2
    out = []
    current_var = None
    record_handle = None
    record_kind = None
    for code, value in tags:
        if code == 9:
            current_var = value
        elif code == 0:
            current_var, record_kind, record_handle = None, value, None
        elif code == 5:
            record_handle = value
        if current_var in STAMPED_HEADER_VARS and code != 9:
            stamps[current_var] = value
            value = "*"
        elif record_kind == "DICTIONARYVAR" and record_handle == written and code == 1:
            stamps["WRITTEN_BY_EZDXF"] = value
            value = "*"
        out.append((code, value))
    return out, stamps


@pytest.fixture(scope="module")
def two_runs(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("determinism")
    dxf = sample_drawing(tmp, "far")  # turned 30 degrees, 6,000 km from the origin: the frame is exercised too
    job = tmp / "job.toml"
    job.write_text(JOB)
    a = _run(tmp / "a", dxf, job, {"PYTHONHASHSEED": "1", "OPENBLAS_NUM_THREADS": "1", "OMP_NUM_THREADS": "1",
                                 "LACUNA_THREADS": "1"})
    b = _run(tmp / "b", dxf, job, {"PYTHONHASHSEED": "4242", "OPENBLAS_NUM_THREADS": "2", "OMP_NUM_THREADS": "2",
                                    "LACUNA_THREADS": "2"})
    return a, b


def test_the_runs_write_the_same_files_and_print_the_same_json(two_runs):
    (summary_a, out_a), (summary_b, out_b) = two_runs
    names = sorted(p.name for p in out_a.iterdir())
    assert names == sorted(p.name for p in out_b.iterdir())
    assert {Path(p).name for p in summary_a["outputs"]} == set(names)
    assert summary_a["voids"], "a layout with voids, so the comparison covers the fitting too"
    # Exact equality of every number: json.loads gives back the very floats that were printed (repr round trip).
    assert summary_a == summary_b
    json_name = next(n for n in names if n.endswith("-optimize.json"))
    assert json.loads((out_a / json_name).read_text()) == json.loads((out_b / json_name).read_text())


def test_the_drawings_differ_only_in_the_save_stamps(two_runs):
    (_, out_a), (_, out_b) = two_runs
    name = next(p.name for p in out_a.iterdir() if p.suffix == ".dxf")
    tags_a, stamps_a = _masked_dxf((out_a / name).read_bytes())
    tags_b, stamps_b = _masked_dxf((out_b / name).read_bytes())
    assert set(stamps_a) == set(STAMPED_HEADER_VARS) | {"WRITTEN_BY_EZDXF"}
    # The stamps really are per save (else the masking would hide nothing and prove nothing about them).
    assert stamps_a["$VERSIONGUID"] != stamps_b["$VERSIONGUID"]
    assert len(tags_a) == len(tags_b)
    differing = [(i, a, b) for i, (a, b) in enumerate(zip(tags_a, tags_b)) if a != b]
    assert differing == []


@pytest.mark.parametrize("suffix", ["-result.svg", "-convergence.svg", "-report.md", "-schedule.csv",
                                    "-schedule.json"])
def test_figures_schedule_and_report_are_the_same_but_for_the_date(two_runs, suffix):
    (_, out_a), (_, out_b) = two_runs
    name = next(p.name for p in out_a.iterdir() if p.name.endswith(suffix))
    a, b = (out_a / name).read_bytes(), (out_b / name).read_bytes()
    assert DATE.sub(b"YYYY-MM-DD", a) == DATE.sub(b"YYYY-MM-DD", b)
