"""Start-up: `lacuna --help`, each command's `--help` and `--version` load only click and the light top of the package.

The numerics and the drawing and geometry libraries are imported by the command that uses them (see "Heavy imports
where used" in docs/architecture.md). Each test runs the command line in a fresh interpreter and reads which
modules it imported; nothing is timed (benchmarks/bench_startup.py prints the seconds).
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from toolkit import CAUTION

# Each of these takes 0.05 to 0.3 s to import (python -X importtime); none is needed to print help.
HEAVY = ("numpy", "scipy", "ezdxf", "shapely", "svgwrite")

# The commands whose help carries the engineering caution, as the group's own help does.
CAUTIONED = ("analyze", "optimize", "check", "demo", "batch", "sweep")

# The cluster libraries of `lacuna batch` and `lacuna sweep` (about a second to import) come in with those
# commands only, not with the API.
CLUSTER = ("dask", "distributed")

# Runs in a fresh interpreter: every help the command line offers, through click's standalone mode (the path the
# `lacuna` script takes, exit code included), then reports the outputs and every module imported by then.
_PROBE = """
import contextlib, io, json, sys
import toolkit.cli
from toolkit.cli import main

runs = [["--help"], ["--version"]] + [[name, "--help"] for name in sorted(main.commands)]
results = []
for args in runs:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        try:
            main.main(args, prog_name="lacuna", standalone_mode=True)
            code = 0
        except SystemExit as stop:
            code = stop.code
    results.append({"args": args, "exit": code, "output": out.getvalue()})
for name in sys.argv[1:]:
    __import__(name)
print(json.dumps({"runs": results, "modules": sorted(sys.modules)}))
"""


def _probe(*then_import: str) -> dict:
    done = subprocess.run([sys.executable, "-c", _PROBE, *then_import], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    return json.loads(done.stdout)


@pytest.fixture(scope="module")
def probe() -> dict:
    return _probe()


def _heavy(modules: list[str]) -> list[str]:
    return sorted(m for m in modules if m.split(".")[0] in HEAVY)


def _words(text: str) -> str:
    return " ".join(text.split())


def test_help_and_version_import_no_heavy_module(probe):
    heavy = _heavy(probe["modules"])
    assert not heavy, (
        "printing the command line's help imported " + ", ".join(sorted({m.split('.')[0] for m in heavy}))
        + "; import these inside the command that uses them (docs/architecture.md, 'Heavy imports where used')"
    )
    assert "toolkit.api" not in probe["modules"]
    cluster = sorted({m.split(".")[0] for m in probe["modules"]} & set(CLUSTER))
    assert not cluster, f"printing the command line's help imported {', '.join(cluster)}"


def test_the_probe_sees_a_heavy_import():
    # The guard above is only worth something if the probe notices an import: the API and the drawing copy it
    # writes bring every heavy library (the drawing library comes with the copy, or with reading a drawing).
    modules = _probe("toolkit.api", "toolkit.write.dxf_copy")["modules"]
    assert {m.split(".")[0] for m in _heavy(modules)} == set(HEAVY)


def test_every_help_exits_0_and_the_commands_of_the_contract_are_there(probe):
    runs = {" ".join(r["args"]): r for r in probe["runs"]}
    # The command names the interface contract promises; more may come, none may go.
    for name in ("demo", "analyze", "optimize", "check", "convert", "profiles", "init", "batch", "sweep"):
        assert f"{name} --help" in runs
    for args, run in runs.items():
        assert run["exit"] == 0, (args, run["output"])
        if args != "--version":
            assert run["output"].startswith("Usage: lacuna"), (args, run["output"])
    assert runs["--version"]["output"].startswith("lacuna, version ")


@pytest.mark.parametrize("command", ("",) + CAUTIONED)
def test_help_shows_the_caution(probe, command):
    run = next(r for r in probe["runs"] if r["args"] == ([command, "--help"] if command else ["--help"]))
    assert _words(CAUTION) in _words(run["output"])
