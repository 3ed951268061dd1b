"""A run stopped part way leaves no partial file: Ctrl-C (SIGINT) and a hard kill (SIGKILL) at random moments.

Every output goes through toolkit.write.files.write_atomic: written whole to a hidden temporary ``.<name>.<random>.part``
beside the target, flushed to disk, then renamed. POSIX rename() replaces the target atomically: a reader sees
the old file or the new one, never a mixture (POSIX.1-2017, rename(): "If the link named by the new argument
exists, it shall be removed and old renamed to new. In this case, a link named new shall remain visible to other
threads throughout the renaming operation and refer either to the file referred to by new or old"). So:

- after SIGINT (Python raises KeyboardInterrupt) the temporary is removed and no ``*.part`` file remains;
- after SIGKILL nothing can clean up: a temporary may remain, hidden, and never under the final name;
- every file under a final name is complete: equal to the same file of an uninterrupted run (the runs are
  deterministic, tests/test_determinism.py), the DXF readable by ezdxf without recovery;
- the JSON summary is written last and lists every output, so where it exists, all the others do.

The moments are random (seeded, so a failure can be replayed): some while the optimiser computes, most in the
short stretch while the files are written, found by watching for the output folder to appear.
"""

from __future__ import annotations

import json
import os
import random
import re
import signal
import subprocess
import sys
import time
import xml.etree.ElementTree as ET
from pathlib import Path

import ezdxf
import pytest

from drawings import sample_drawing
from group_codes import pairs
from toolkit.write import files as outputs
from toolkit.api import optimize_file

ROOT = Path(__file__).resolve().parents[1]

# A coarse grid, capped iterations and bores (the quickest voids to fit) keep a run near a second and a half of
# CPU; --frames adds a dozen figure files,
# so the writing takes long enough to be hit.
JOB = """units = "mm"
[panel]
thickness = 90
element_size = 40
[material]
E_MPa = 11500
nu = 0.3
[optimize]
volume_fraction = 0.6
filter_radius = 120
max_iterations = 30
[voids]
family = "bore"
[rules]
profile = "timber-bored"
"""
FRAMES = 3
DATE = re.compile(rb"\d{4}-\d{2}-\d{2}")
TEMPORARY = re.compile(r"^\.(?P<final>.+)\.[^.]+\.part$")  # files.write_atomic: ".<name>.<random>.part"


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """The panel, its job, and every file of an uninterrupted run (name -> bytes)."""
    tmp = tmp_path_factory.mktemp("interrupt")
    dxf = sample_drawing(tmp, "mm")
    job = tmp / "job.toml"
    job.write_text(JOB)
    optimize_file(dxf, job, out_dir=tmp / "reference", frames=FRAMES)
    files = {p.name: p.read_bytes() for p in (tmp / "reference").iterdir()}
    assert len(files) > 10 and not any(name.endswith(".part") for name in files)
    return tmp, dxf, job, files


def _check_folder(out: Path, expected: dict[str, bytes], *, killed: bool) -> dict:
    """Assert what must hold of an output folder after an interruption; return what was found."""
    found = {"final": 0, "temporary": 0}
    if not out.exists():
        return found
    names = sorted(p.name for p in out.iterdir())
    for name in names:
        m = TEMPORARY.match(name)
        if m:
            assert killed, f"a temporary {name} remains after Ctrl-C"
            assert m.group("final") in expected, name
            assert m.group("final") not in names, f"{name} remains beside its finished file"
            found["temporary"] += 1
            continue
        assert name in expected, f"unexpected file {name}"
        data = (out / name).read_bytes()
        if name.endswith(".dxf"):
            ezdxf.readfile(out / name)  # strict reader: a truncated file raises
            assert len(pairs(data)) == len(pairs(expected[name])), name
        else:
            if name.endswith("-optimize.json"):
                summary = json.loads(data)
                missing = [p for p in summary["outputs"] if Path(p).name not in names]
                assert missing == [], "the summary is written last: every file it lists exists"
                whole = json.loads(expected[name])
                # The paths name each run's own folder; the files they name must be the same.
                for s in (summary, whole):
                    s["outputs"] = [Path(p).name for p in s["outputs"]]
                assert summary == whole
                found["final"] += 1
                continue
            if name.endswith(".svg"):
                ET.fromstring(data)
            assert DATE.sub(b"D", data) == DATE.sub(b"D", expected[name]), f"{name} differs from a whole run"
        found["final"] += 1
    return found


def _start(dxf: Path, job: Path, out: Path) -> subprocess.Popen:
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    return subprocess.Popen(
        [sys.executable, "-m", "toolkit.cli", "optimize", str(dxf), "--job", str(job), "--out", str(out),
         "--frames", str(FRAMES)],
        env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
    )


def test_runs_stopped_at_random_moments_leave_only_whole_files(reference):
    tmp, dxf, job, expected = reference
    rng = random.Random(6)
    # (signal, when): "compute" = a random moment in the first seconds, before anything is written;
    # "write" = a random moment after the output folder appears, while the files are being written.
    plan = [(signal.SIGINT, "compute"), (signal.SIGKILL, "compute")]
    plan += [(sig, "write") for sig in (signal.SIGINT, signal.SIGKILL, signal.SIGINT, signal.SIGKILL)]
    trials = []
    for k, (sig, when) in enumerate(plan):
        out = tmp / f"trial-{k}"
        delay = rng.uniform(0.2, 1.5) if when == "compute" else rng.uniform(0.0, 0.08)
        trials.append({"sig": sig, "when": when, "out": out, "delay": delay, "proc": _start(dxf, job, out),
                       "start": time.monotonic(), "armed": None, "sent": False})
    # One loop watches every run (two cores: the runs share them, which only spreads the moments further).
    deadline = time.monotonic() + 60
    while any(t["proc"].poll() is None for t in trials) and time.monotonic() < deadline:
        now = time.monotonic()
        for t in trials:
            if t["sent"] or t["proc"].poll() is not None:
                continue
            if t["when"] == "compute":
                due = t["start"] + t["delay"]
            else:
                if t["armed"] is None and t["out"].exists():
                    t["armed"] = now
                due = None if t["armed"] is None else t["armed"] + t["delay"]
            if due is not None and now >= due:
                t["proc"].send_signal(t["sig"])
                t["sent"] = True
        time.sleep(0.0005)
    report = []
    for t in trials:
        code = t["proc"].wait(timeout=30)
        killed = t["sig"] == signal.SIGKILL
        # A run that ended before its signal exits 0; Ctrl-C ends in click's "Aborted!" (1), or in -2 when it
        # comes while the modules are still being imported, before click is listening (since Python 3.8 an
        # uncaught KeyboardInterrupt ends the process by SIGINT: Python docs, "Exceptions", KeyboardInterrupt;
        # from memory); SIGKILL in -9.
        assert code in ((0, -signal.SIGKILL) if killed else (0, 1, -signal.SIGINT)), code
        found = _check_folder(t["out"], expected, killed=killed)
        report.append((t["sig"].name, t["when"], round(t["delay"], 3), code, found))
    # Printed for `pytest -s`: how far each run got (which moments were hit depends on the machine's load).
    print("\n" + "\n".join(map(str, report)))


def test_ctrl_c_between_two_files_removes_the_temporary(reference, tmp_path, monkeypatch):
    """The precise moment: the third file's bytes are written and flushed, the rename not yet done."""
    _, _, _, expected = reference
    calls = {"n": 0}
    real_replace = os.replace

    def interrupted_replace(src, dst):
        calls["n"] += 1
        if calls["n"] == 3:
            raise KeyboardInterrupt
        real_replace(src, dst)

    monkeypatch.setattr(outputs.os, "replace", interrupted_replace)
    names = sorted(expected)
    with pytest.raises(KeyboardInterrupt):
        outputs.write_outputs(tmp_path, {n: expected[n] for n in names}, inputs=[], force=False)
    monkeypatch.undo()
    assert sorted(p.name for p in tmp_path.iterdir()) == names[:2]
    assert all((tmp_path / n).read_bytes() == expected[n] for n in names[:2])


KILL_AT_THIRD_RENAME = """
import os, signal, sys
from pathlib import Path
from toolkit.write import files as outputs
calls = [0]
real = os.replace
def replace(src, dst):
    calls[0] += 1
    if calls[0] == 3:
        os.kill(os.getpid(), signal.SIGKILL)
    real(src, dst)
outputs.os.replace = replace
files = {f"f{k}.txt": (f"file {k}\\n" * 1000) for k in range(5)}
outputs.write_outputs(Path(sys.argv[1]), files, inputs=[], force=False)
"""


def test_a_kill_between_write_and_rename_leaves_a_hidden_temporary_only(tmp_path):
    out = tmp_path / "out"
    done = subprocess.run([sys.executable, "-c", KILL_AT_THIRD_RENAME, str(out)],
                          env=dict(os.environ, PYTHONPATH=str(ROOT)), timeout=60)
    assert done.returncode == -signal.SIGKILL
    names = sorted(p.name for p in out.iterdir())
    finals = [n for n in names if not n.startswith(".")]
    temporaries = [n for n in names if n.startswith(".")]
    assert finals == ["f0.txt", "f1.txt"]
    assert len(temporaries) == 1 and TEMPORARY.match(temporaries[0]).group("final") == "f2.txt"
    # Flushed before the rename: the temporary holds the whole file, only its name is not yet the final one.
    assert (out / temporaries[0]).read_text() == "file 2\n" * 1000
