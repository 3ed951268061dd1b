"""The whole job as a user runs it, at growing sizes, beside the plain BESO port: seconds and peak memory.

For each size a drawing and a job file are written to a temporary folder (a steel plate of our own, half-MBB
loading: the load at the top-left corner, the left edge held across as the mirror line of the whole beam, a
roller at the bottom-right corner; 10 mm elements, volume 0.5, hexagons, steel-cut) and one fresh Python process
imports lacuna and runs ``toolkit.api.optimize_file`` on them, writing every output, as ``lacuna optimize``
does (with its helper process for the fitting, toolkit/helper.py). Printed per size: import seconds, whole-job
seconds, the pipeline's stages, peak resident memory (of the job's process, not its helper), the iterations. With --ref PATH (../shared/ref_beso.py, the plain numpy/scipy port kept beside the project) the
port's BESO alone runs at the same size and iteration count in the same run, and the ratio is printed.
Prints figures; asserts nothing.

    python benchmarks/bench_whole.py --ref ../shared/ref_beso.py              # 300 x 100 and 600 x 200
    python benchmarks/bench_whole.py --sizes 2000x500                         # a million elements (long)
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
ELEMENT_MM = 10.0

JOB = """units = "mm"
[panel]
name = "bench plate {nx} x {ny}"
thickness = 10
element_size = {element}
[material]
E_MPa = 210000
nu = 0.3
density_kg_m3 = 7850
[[support]]
from = [0, 0]
to = [0, {h}]
fix = "x"
[[support]]
from = [{w_less}, 0]
to = [{w}, 0]
fix = "y"
[[load]]
at = [0, {h}]
fy_kN = -50
[optimize]
volume_fraction = 0.5
max_iterations = 120
[voids]
family = "polygon"
sides = 6
[rules]
profile = "steel-cut"
"""

CHILD = r"""
import json, resource, sys, time
t0 = time.perf_counter()
import toolkit.api as api
import toolkit.pipeline as pipeline
imported = time.perf_counter() - t0
runs = []
real = pipeline.optimize_panel
def spy(*a, **k):
    run = real(*a, **k)
    runs.append(run)
    return run
pipeline.optimize_panel = spy
if hasattr(api, "optimize_panel"):
    api.optimize_panel = spy
t1 = time.perf_counter()
api.optimize_file(sys.argv[1], sys.argv[2], out_dir=sys.argv[3], force=True, helper=True)
whole = time.perf_counter() - t1
run = runs[-1] if runs else None
print(json.dumps({"import_s": imported, "whole_s": whole,
                  "iterations": run.beso.iterations if run else None,
                  "stages_s": run.timings_s if run else {},
                  "removed_percent": run.mass_removed_percent if run else None,
                  "peak_GB": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1e6}))
"""


def write_case(folder: Path, nx: int, ny: int) -> tuple[Path, Path]:
    import ezdxf

    w, h = nx * ELEMENT_MM, ny * ELEMENT_MM
    doc = ezdxf.new("R2018", units=4)
    doc.layers.add("PANEL")
    doc.modelspace().add_lwpolyline([(0, 0), (w, 0), (w, h), (0, h)], close=True, dxfattribs={"layer": "PANEL"})
    dxf = folder / f"plate-{nx}x{ny}.dxf"
    doc.saveas(dxf)
    job = folder / f"plate-{nx}x{ny}.toml"
    job.write_text(JOB.format(nx=nx, ny=ny, element=ELEMENT_MM, w=w, h=h, w_less=w - 5 * ELEMENT_MM))
    return dxf, job


def run_size(nx: int, ny: int) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        dxf, job = write_case(folder, nx, ny)
        done = subprocess.run([sys.executable, "-c", CHILD, str(dxf), str(job), str(folder / "out")],
                              capture_output=True, text=True, cwd=ROOT)
    if done.returncode != 0:
        raise SystemExit(f"{nx} x {ny}: the job failed:\n{done.stderr[-2000:]}")
    # peak_GB: the job's own process's largest resident set (ru_maxrss, kB on Linux), taken inside it, so an
    # earlier, larger child (the plain port) does not hide it
    return json.loads(done.stdout.strip().splitlines()[-1])


def run_ref(ref: str, nx: int, ny: int, iterations: int) -> float | None:
    t = time.perf_counter()
    done = subprocess.run([sys.executable, ref, str(nx), str(ny), "0.5", "--mbb", "--iters", str(iterations)],
                          capture_output=True, text=True)
    wall = time.perf_counter() - t
    if done.returncode != 0:
        print(f"  plain port failed: {done.stderr.strip()[-300:]}")
        return None
    print(f"  plain port ({ref}), {iterations} iterations: {done.stdout.strip()} [{wall:.1f} s wall]")
    return wall


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="300x100,600x200", help="comma-separated NXxNY element counts")
    ap.add_argument("--ref", help="path of the plain BESO port to time against")
    args = ap.parse_args()
    for size in args.sizes.split(","):
        nx, ny = (int(v) for v in size.lower().split("x"))
        print(f"\n{nx} x {ny} elements ({nx * ny:,}), whole job (lacuna optimize through the API, outputs written)")
        row = run_size(nx, ny)
        stages = ", ".join(f"{k} {v:.1f}" for k, v in row["stages_s"].items())
        peak = f"{row['peak_GB']:.2f} GB" if row["peak_GB"] else "n/a"
        print(f"  import {row['import_s']:.2f} s, whole job {row['whole_s']:.1f} s, {row['iterations']} iterations, "
              f"peak {peak}, removed {row['removed_percent']:.1f} %")
        print(f"  stages (s): {stages}")
        if args.ref:
            ref = run_ref(args.ref, nx, ny, row["iterations"])
            if ref:
                total = row["import_s"] + row["whole_s"]
                print(f"  plain port's BESO alone / lacuna's whole job: {ref / total:.2f}x")


if __name__ == "__main__":
    main()
