"""Every output of a few whole runs, as digests: the demo's `optimize` and `analyze`, an `optimize` in metres with
slots, a `check`, three conversions and a trade-off plot.

Used by tests/test_same_outputs.py (the rounded digests), and run as a script:

    python tests/same_outputs.py --record      # writes tests/same_outputs.json
    python tests/same_outputs.py --compare     # names every output that differs, to the byte or rounded

Record only from code whose outputs are known good (the fixture pins them: a change of any byte fails the test).

Each file is read back and made comparable before it is digested:

- what changes on every run by design is masked: today's date (result sheet, analysis figure, report), the
  folder the run wrote into (the JSON lists its outputs by path), and the stamps a DXF writer puts on every
  save or every new drawing ($TDCREATE, $TDUCREATE, $TDUPDATE, $TDUUPDATE, $VERSIONGUID, $FINGERPRINTGUID:
  DXF reference, "HEADER Section Group Codes", from memory; and ezdxf's CREATED_BY_EZDXF and WRITTEN_BY_EZDXF
  values, ezdxf documentation, "ezdxf Metadata"); the CLASS records of a DXF are put in sorted order (ezdxf
  writes them in an order that changes with each process's string-hash seed);
- "exact": the masked bytes, digested as they are;
- "rounded": the masked text with every decimal number rounded to 9 significant figures;
- "skeleton" and "numbers" (what tests/test_same_outputs.py compares): the masked text with its decimal numbers
  taken out, digested, and those numbers to 7 significant figures, each compared within ``CLOSE`` of its size,
  so that a difference in the last bits of a float (another BLAS, another processor's fused multiply-add), or
  the little a few figures grow it to, does not count.
"""

from __future__ import annotations

import datetime as _dt
import hashlib
import json
import platform
import re
import shutil
import sys
from importlib import metadata
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
FIXTURE = HERE / "same_outputs.json"
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))
if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))

# The libraries whose own output (DXF header, SVG serialisation, float formatting) lands in the files.
LIBRARIES = ("numpy", "scipy", "shapely", "ezdxf", "svgwrite")

# A sample panel in metres (tests/drawings.py, "m": exploded lines and arcs, shifted off the origin), made with
# slots under the steel profile: the other families, another unit and another profile than the demo's.
METRES_JOB = """units = "mm"
[panel]
name = "metres panel"
thickness = 20
element_size = 50
[material]
E_MPa = 210000
nu = 0.3
density_kg_m3 = 7850
[optimize]
volume_fraction = 0.6
filter_radius = 150
max_iterations = 30
[voids]
family = "slot"
[rules]
profile = "steel-cut"
"""

# Rows of a sweep as toolkit.sweep makes them (two profiles, a knee each, one refused point): our own figures.
TRADEOFF_ROWS = [
    {"profile": "timber-bored", "volume_fraction": 0.5, "made_mass_kg": 61.2, "compliance_Nmm": 41870.0,
     "max_deflection_mm": 1.92, "knee": False},
    {"profile": "timber-bored", "volume_fraction": 0.6, "made_mass_kg": 70.4, "compliance_Nmm": 36010.0,
     "max_deflection_mm": 1.61, "knee": True},
    {"profile": "timber-bored", "volume_fraction": 0.7, "made_mass_kg": 80.9, "compliance_Nmm": 34420.0,
     "max_deflection_mm": 1.52, "knee": False},
    {"profile": "steel-cut", "volume_fraction": 0.5, "made_mass_kg": 58.0, "compliance_Nmm": 44100.0,
     "max_deflection_mm": 2.05, "knee": True},
    {"profile": "steel-cut", "volume_fraction": 0.6, "made_mass_kg": None, "compliance_Nmm": None,
     "max_deflection_mm": None, "knee": False},
]

MASKED_DXF_VARS = ("$TDCREATE", "$TDUCREATE", "$TDUPDATE", "$TDUUPDATE", "$VERSIONGUID", "$FINGERPRINTGUID")
# ezdxf's CREATED_BY_EZDXF and WRITTEN_BY_EZDXF values: "<its version> @ <ISO date and time>".
_EZDXF_STAMP = re.compile(r"^\d+\.\d+\S* @ \S+T\S+$")
_DECIMAL = re.compile(r"-?\d+\.\d+(?:[eE][-+]?\d+)?|-?\d+[eE][-+]?\d+")


def run_all(workdir: Path) -> dict[str, Path]:
    """Run every scenario into ``workdir``; return output name -> path (names relative to ``workdir``)."""
    from drawings import sample_drawing
    from toolkit import api
    from toolkit.write.tradeoff_plot import tradeoff_svg

    workdir = Path(workdir)
    demo_dxf, demo_job = api.demo_files()
    inputs = workdir / "inputs"
    inputs.mkdir(parents=True)
    dxf = Path(shutil.copy(demo_dxf, inputs / demo_dxf.name))
    job = Path(shutil.copy(demo_job, inputs / demo_job.name))

    api.optimize_file(dxf, job, out_dir=workdir / "demo", frames=20)
    api.analyze_file(dxf, job, out_dir=workdir / "demo")

    metres = sample_drawing(inputs, "m")
    metres_job = inputs / "metres.toml"
    metres_job.write_text(METRES_JOB)
    api.optimize_file(metres, metres_job, out_dir=workdir / "metres")

    check_dir = ROOT / "fixtures" / "check"
    planted = Path(shutil.copy(check_dir / "planted-turned.dxf", inputs / "planted-turned.dxf"))
    api.check_file(planted, check_dir / "check.toml", out_dir=workdir / "check")

    converted = workdir / "convert"
    converted.mkdir()
    api.convert_file(dxf, converted / "demo-drawing.svg")
    api.convert_file(workdir / "demo" / "loft-lintel-result.svg", converted / "demo-result.dxf")
    api.convert_file(dxf, converted / "demo-in-metres.dxf", units="m")

    plots = workdir / "plots"
    plots.mkdir()
    (plots / "tradeoff.svg").write_text(tradeoff_svg(TRADEOFF_ROWS, title="Sweep of our own: trade-off"))
    return {str(p.relative_to(workdir)): p for p in sorted(workdir.rglob("*"))
            if p.is_file() and not p.is_relative_to(inputs)}


def mask_dxf(text: str) -> str:
    """Mask the values of the per-save header variables and ezdxf's save stamp in ASCII DXF text."""
    lines = text.split("\n")
    out = list(lines)
    var = None
    for k in range(0, len(lines) - 1, 2):
        code, value = lines[k].strip(), lines[k + 1]
        if code == "9":
            var = value.strip()
            continue
        if code == "0":
            var = None
        if var in MASKED_DXF_VARS or (code == "1" and _EZDXF_STAMP.match(value.strip())):
            out[k + 1] = "*"
    return _sorted_classes("\n".join(out))


def _sorted_classes(text: str) -> str:
    """The CLASS records of the CLASSES section in sorted order. ezdxf writes them in the order of a set of names,
    which changes with the string-hash seed of each process (PYTHONHASHSEED); a reader looks them up by name, so
    the order carries nothing (DXF reference, "CLASSES Section", from memory)."""
    start = text.find("\n  2\nCLASSES\n")
    if start < 0:
        return text
    end = text.find("\n  0\nENDSEC", start)
    body = text[start + len("\n  2\nCLASSES"):end]
    records = ["  0\nCLASS" + r for r in body.split("\n  0\nCLASS") if r.strip()]
    return text[:start + len("\n  2\nCLASSES")] + "\n" + "\n".join(sorted(records)) + text[end:]


def normalised(path: Path, workdir: Path, dates: set[str]) -> str:
    """The file's text with the per-run values masked."""
    text = path.read_bytes().decode("utf-8", errors="surrogateescape")
    for folder in {str(workdir), str(Path(workdir).resolve())}:
        text = text.replace(folder, "<run>")
    for date in dates:
        text = text.replace(date, "YYYY-MM-DD")
    if path.suffix.lower() == ".dxf":
        text = mask_dxf(text)
    return text


def rounded(text: str) -> str:
    """Every decimal number to 9 significant figures."""
    return _DECIMAL.sub(lambda m: f"{float(m.group(0)):.9g}", text)


def digest(text: str) -> str:
    return hashlib.sha256(text.encode("utf-8", errors="surrogateescape")).hexdigest()


# Two figures agree when they differ by no more than this share of the larger (with a floor of a thousandth, so
# that a figure near zero is measured against a thousandth, not against itself).
CLOSE = 1e-6


def skeleton(text: str) -> tuple[str, str]:
    """The text with every decimal number replaced by "#", and the numbers, each to 7 significant figures, one
    space between them."""
    numbers = " ".join(f"{float(m.group(0)):.7g}" for m in _DECIMAL.finditer(text))
    return _DECIMAL.sub("#", text), numbers


def close(found: str, expected: str) -> bool:
    """The same count of numbers, each within ``CLOSE`` of the other (see there)."""
    found, expected = found.split(), expected.split()
    if len(found) != len(expected):
        return False
    a = np.array([float(x) for x in found])
    b = np.array([float(x) for x in expected])
    return bool(np.all(np.abs(a - b) <= CLOSE * np.maximum(np.maximum(np.abs(a), np.abs(b)), 1e-3)))


def digests(workdir: Path) -> dict[str, dict]:
    """name -> {"exact": ..., "rounded": ..., "skeleton": ..., "numbers": [...]} for every output of
    :func:`run_all`: the digests of the masked text as it is and rounded, the digest of the masked text with its
    numbers taken out, and those numbers (7 significant figures)."""
    before = _dt.date.today().isoformat()
    files = run_all(workdir)
    dates = {before, _dt.date.today().isoformat()}
    out = {}
    for name, path in files.items():
        text = normalised(path, workdir, dates)
        frame, numbers = skeleton(text)
        out[name] = {"exact": digest(text), "rounded": digest(rounded(text)), "skeleton": digest(frame),
                     "numbers": numbers}
    return out


def environment() -> dict[str, str]:
    """What the exact digests depend on besides our code."""
    env = {"python": platform.python_version(), "machine": platform.machine()}
    env.update({name: metadata.version(name) for name in LIBRARIES})
    return env


def compare(found: dict[str, dict[str, str]], expected: dict) -> list[str]:
    """One line per output that differs from the fixture: missing, extra, or its exact or rounded digest."""
    lines = []
    for name in sorted(set(found) | set(expected["files"])):
        if name not in found or name not in expected["files"]:
            lines.append(f"{name}: {'not written' if name not in found else 'not in the fixture'}")
            continue
        want = expected["files"][name]
        kinds = [k for k in ("exact", "rounded") if found[name][k] != want[k]]
        if found[name]["skeleton"] != want["skeleton"]:
            kinds.append("in its text")
        elif not close(found[name]["numbers"], want["numbers"]):
            kinds.append(f"in its figures (by more than {CLOSE:g} of the larger)")
        if kinds:
            lines.append(f"{name}: differs {' and '.join(kinds)}")
    return lines


def main(argv: list[str]) -> int:
    import tempfile

    if argv not in (["--record"], ["--compare"]):
        print(__doc__)
        return 2
    with tempfile.TemporaryDirectory() as tmp:
        found = digests(Path(tmp) / "run")
    if argv == ["--compare"]:
        expected = json.loads(FIXTURE.read_text())
        if expected["environment"] != environment():
            print(f"recorded on {expected['environment']}, running on {environment()}: exact digests may differ")
        lines = compare(found, expected)
        print("\n".join(lines) if lines else f"all {len(found)} outputs the same to the byte")
        return 1 if lines else 0
    FIXTURE.write_text(json.dumps({"environment": environment(), "files": found}, indent=2, sort_keys=True) + "\n")
    print(f"recorded {len(found)} outputs in {FIXTURE}")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
