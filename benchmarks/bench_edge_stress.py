"""Seconds and figures of the local models at voids (toolkit/edge_stress.py).

    python benchmarks/bench_edge_stress.py [--refine 1,2] [--skip-demo] [--scenarios plate,spandrel]
                                           [--repeat 3] [--save DIR | --load DIR] [--against OLDER]
                                           [--skip-verification]

1. The bundled demo (loft lintel): the whole job up to the made layout's analysis, then the local model of each
   made void at every ``refine`` (element sizes divided by it): seconds, elements, peak, nominal, Kt per void,
   and the pipeline's own ``timings_s["edge stresses"]``.
2. The speed scenarios of benchmarks/scenarios.py (our own panels): the 3000 x 1000 steel plate (half-MBB,
   hexagons with rounded corners, 300 x 100 elements) and the 6000 x 1500 precast spandrel (chamfered n-gons).
   The whole job runs once; the local models of all its made voids are then timed ``--repeat`` times on one BLAS
   thread (the best run is printed: process seconds, total and per void, and wall seconds), with each void's
   elements, peak, nominal and Kt. ``--save DIR`` keeps each job's panel, voids and analyses (pickle) and
   ``--load DIR`` times those again; ``--against OLDER`` (a folder holding an older ``toolkit`` package, e.g.
   ``git archive 9a56650 toolkit | tar -x -C OLDER``) times the very same voids with it in a second process and
   prints both side by side. docs/edge-stress.md gives the figures before and after.
3. The verification cases of tests/test_edge_stress.py at refine 0.5 / 1 / 2 / 4: measured Kt beside the
   published value (docs/edge-stress.md carries the table); then the peak at sharp corners (plain and chamfered)
   as their elements shrink.
"""

from __future__ import annotations

import argparse
import math
import pickle
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))
sys.path.insert(0, str(ROOT / "benchmarks"))

TOTAL_TAG = "scenario-total"   # the line --against reads back from the older toolkit's run
SPEED_SCENARIOS = {"plate": "3000 x 1000 plate, steel-cut, hexagons",
                   "spandrel": "6000 x 1500 spandrel, precast-formed, n-gons"}


def demo(refines):
    from toolkit.api import demo_files
    from toolkit.inputs import load_panel
    from toolkit.pipeline import optimize_panel

    dxf, job = demo_files()
    panel, job, _ = load_panel(dxf, job)
    run = optimize_panel(panel, job)
    print(f"demo: {len(run.voids)} voids; pipeline timings_s['edge stresses'] = "
          f"{run.timings_s['edge stresses']:.3f} s")
    for refine in refines:
        print(f"\nrefine {refine:g}")
        print(f"{'void':6s}{'s':>8s}{'elements':>10s}{'edge el. mm':>13s}{'peak MPa':>10s}{'nominal':>10s}"
              f"{'Kt':>8s}  note")
        total = 0.0
        for i, v in enumerate(run.voids):
            t0 = time.perf_counter()
            r = _one(panel, run, i, refine)
            dt = time.perf_counter() - t0
            total += dt
            fig = lambda x, f="{:10.3f}": f.format(x) if x is not None else f"{'-':>10s}"  # noqa: E731
            print(f"{v.id:6s}{dt:8.3f}{r.elements:10d}{r.element_mm:13.2f}{fig(r.peak_MPa)}{fig(r.nominal_MPa)}"
                  f"{fig(r.kt, '{:8.2f}')}  {r.note[:60]}")
        print(f"total {total:.3f} s, {total / max(len(run.voids), 1):.3f} s per void")


def _one(panel, run, i, refine):
    from toolkit.edge_stress import void_edge_stress

    voids = tuple(run.voids)
    return void_edge_stress(panel, voids[i], voids[:i] + voids[i + 1:], run.final, run.solid, refine=refine)


def scenarios(names, repeat: int, save: str | None, load: str | None):
    from threadpoolctl import threadpool_limits

    from toolkit.edge_stress import void_edge_stress

    totals = {}
    for key in names:
        if load:
            with open(Path(load) / f"{key}.pickle", "rb") as f:
                panel, voids, final, solid, own = pickle.load(f)
        else:
            from scenarios import SCENARIOS
            from toolkit.pipeline import optimize_panel

            panel, job = SCENARIOS[SPEED_SCENARIOS[key]]()
            run = optimize_panel(panel, job)
            panel, voids, final, solid = panel, tuple(run.voids), run.final, run.solid
            own = run.timings_s["edge stresses"]
            if save:
                Path(save).mkdir(parents=True, exist_ok=True)
                with open(Path(save) / f"{key}.pickle", "wb") as f:
                    pickle.dump((panel, voids, final, solid, own), f)
        best, results = None, None
        with threadpool_limits(1):
            for _ in range(repeat):
                seconds, out = [], []
                wall = time.perf_counter()
                for i, v in enumerate(voids):
                    t0 = time.process_time()
                    out.append(void_edge_stress(panel, v, voids[:i] + voids[i + 1:], final, solid))
                    seconds.append(time.process_time() - t0)
                wall = time.perf_counter() - wall
                if best is None or sum(seconds) < sum(best[0]):
                    best, results = (seconds, wall), out
        seconds, wall = best
        print(f"\n{SPEED_SCENARIOS[key]}: {len(voids)} voids; timings_s['edge stresses'] of the job when it ran: "
              f"{own:.2f} s")
        print(f"{'void':6s}{'s':>8s}{'elements':>10s}{'peak MPa':>11s}{'nominal':>10s}{'Kt':>8s}  note")
        for v, dt, r in zip(voids, seconds, results):
            fig = lambda x, f="{:11.3f}": f.format(x) if x is not None else f"{'-':>11s}"  # noqa: E731
            print(f"{v.id:6s}{dt:8.3f}{r.elements:10d}{fig(r.peak_MPa)}{fig(r.nominal_MPa, '{:10.3f}')}"
                  f"{fig(r.kt, '{:8.2f}')}  {r.note[:40]}")
        total = sum(seconds)
        print(f"best of {repeat}: {total:.2f} s process time, {total / max(len(voids), 1) * 1e3:.0f} ms per void "
              f"({min(seconds) * 1e3:.0f} - {max(seconds) * 1e3:.0f} ms); wall {wall:.2f} s")
        print(f"{TOTAL_TAG} {key} {total:.6f} {len(voids)}")
        totals[key] = (total, len(voids))
    return totals


def against(older: str, names, repeat: int, jobs: str, totals) -> None:
    """Times the same jobs with the ``toolkit`` package found in ``older`` and prints both side by side."""
    import os
    import subprocess

    env = dict(os.environ, PYTHONPATH=os.pathsep.join([older, os.environ.get("PYTHONPATH", "")]).rstrip(os.pathsep))
    cmd = [sys.executable, __file__, "--skip-demo", "--skip-verification", "--scenarios", ",".join(names),
           "--repeat", str(repeat), "--load", jobs]
    print(f"\nthe same jobs with the toolkit in {older}:", flush=True)
    out = subprocess.run(cmd, env=env, capture_output=True, text=True, check=True).stdout
    before = {}
    for line in out.splitlines():
        if line.startswith(TOTAL_TAG):
            _, key, total, n = line.split()
            before[key] = (float(total), int(n))
        elif "best of" in line or "voids;" in line:
            print(line)
    print(f"\n{'job':10s}{'voids':>7s}{'older s':>10s}{'ms/void':>9s}{'this s':>9s}{'ms/void':>9s}{'ratio':>8s}")
    for key in names:
        (t0, n0), (t1, n1) = before[key], totals[key]
        print(f"{key:10s}{n1:7d}{t0:10.2f}{t0 / n0 * 1e3:9.0f}{t1:9.2f}{t1 / n1 * 1e3:9.0f}{t0 / t1:8.2f}")


def sharp_corners():
    """The peak at sharp corners against the corner elements' size: a plain square (90° corners) and chamfered
    ones (135°, 150°) in a wide plate under unit tension (no corner of these converges: docs/edge-stress.md)."""
    import test_edge_stress as T
    from toolkit.edge_stress import edge_snapper
    from toolkit.model import Void
    from toolkit.voids.outline import eased_outline, outline_polygon

    square = np.array([[-20, -20], [20, -20], [20, 20], [-20, 20]], float)
    turns = np.radians(np.arange(6) * 60.0)
    hexagon = 23.1 * np.column_stack([np.cos(turns), np.sin(turns)])
    shrinks = (1, 2, 4, 8, 16, 32)
    print("\nsharp corners: peak / remote stress with corner elements of the edge size / "
          + ", ".join(str(k) for k in shrinks))
    cases = (("square 40, plain (90°)", square, 0.0), ("square 40, 5 mm chamfers (135°)", square, 5.0),
             ("hexagon 46, 5 mm chamfers (150°)", hexagon, 5.0))
    for name, pts, chamfer in cases:
        ol = eased_outline(pts, "chamfer" if chamfer else "none", chamfer)
        v = Void(id="Q", family="polygon", centre=(0, 0), size_mm=56, shape=outline_polygon(ol), outline=ol)
        peaks = [T.plate_peak(v.shape, edge_snapper(v, 0.05), half=400.0, corner_shrink=k)[0] for k in shrinks]
        print(f"  {name:34s}" + "".join(f"{p:8.3f}" for p in peaks))


def verification():
    import test_edge_stress as T
    from toolkit.edge_stress import edge_snapper
    from toolkit.model import Void
    from toolkit.voids.outline import eased_outline, outline_polygon, stadium_outline

    rows = []
    hole = T.bore((0.0, 0.0), 20.0)
    rows.append(("circle, d/W = 0.025 (Kirsch 1898)", 3.0,
                 lambda r: T.plate_peak(hole.shape, edge_snapper(hole, 0.05), half=400.0, refine=r)[0]))
    for ratio in (0.2, 0.4):
        b = T.bore((0.0, 0.0), ratio * 200.0)
        rows.append((f"circle, d/W = {ratio} (Heywood, net)", 2.0 + (1.0 - ratio) ** 3,
                     lambda r, b=b, q=ratio: T.plate_peak(b.shape, edge_snapper(b, 0.05), half=400.0, width=200.0,
                                                          refine=r)[0] * (1.0 - q)))
    shape, snap = T.ellipse(10.0, 20.0)
    rows.append(("ellipse a/b = 2 (Inglis 1913)", 5.0, lambda r: T.plate_peak(shape, snap, half=400.0, refine=r)[0]))
    ol = stadium_outline((0.0, 0.0), 90.0, 20.0, 40.0)
    slot = Void(id="S", family="slot", centre=(0, 0), size_mm=20, shape=outline_polygon(ol), outline=ol)
    rows.append(("slot 40 x 20 across the load (ellipse estimate)", 1 + 2 * math.sqrt(2.0),
                 lambda r: T.plate_peak(slot.shape, edge_snapper(slot, 0.05), half=400.0, refine=r)[0]))
    for rc in (5.0, 10.0):
        ol = eased_outline([[-20, -20], [20, -20], [20, 20], [-20, 20]], "radius", rc)
        sq = Void(id="Q", family="polygon", centre=(0, 0), size_mm=56, shape=outline_polygon(ol), outline=ol)
        rows.append((f"square 40, corner radius {rc:g} (no value at hand)", None,
                     lambda r, sq=sq: T.plate_peak(sq.shape, edge_snapper(sq, 0.05), half=400.0, refine=r)[0]))
    print(f"\n{'case':50s}{'published':>10s}" + "".join(f"{f'refine {r:g}':>12s}" for r in (0.5, 1, 2, 4)))
    for name, ref, fn in rows:
        vals = [fn(r) for r in (0.5, 1.0, 2.0, 4.0)]
        print(f"{name:50s}{(f'{ref:.3f}' if ref else '-'):>10s}" + "".join(f"{v:12.3f}" for v in vals))
    print("\nwhole path (1200 x 400 strip, grid element 20 / 10 mm, then the local model):")
    for d in (40.0, 80.0, 160.0):
        for size in (20.0, 10.0):
            t0 = time.perf_counter()
            (r,) = T.whole_path(T.strip_panel(size), [T.bore((600.0, 200.0), d)])
            ktn = r.peak_MPa / (10.0 * 400.0 / (400.0 - d))
            print(f"  d = {d:5.0f}, grid {size:4.0f} mm: Kt gross {r.kt:.3f}, Ktn {ktn:.3f} (Heywood "
                  f"{2 + (1 - d / 400) ** 3:.3f}), {r.elements} elements, {time.perf_counter() - t0:.2f} s")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--refine", default="1,2")
    ap.add_argument("--skip-demo", action="store_true")
    ap.add_argument("--scenarios", default="plate,spandrel", help="of: plate, spandrel (empty: none)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--save", help="keep each scenario's job (panel, voids, analyses) in this folder")
    ap.add_argument("--load", help="time the jobs kept by --save in this folder instead of running them")
    ap.add_argument("--against", help="a folder holding an older toolkit package (git archive COMMIT toolkit | "
                                      "tar -x -C DIR): times the same jobs with it, side by side")
    ap.add_argument("--skip-verification", action="store_true")
    args = ap.parse_args()
    if not args.skip_demo:
        demo([float(r) for r in args.refine.split(",")])
    names = [n for n in args.scenarios.split(",") if n]
    for n in names:
        if n not in SPEED_SCENARIOS:
            ap.error(f"unknown scenario {n!r} (plate, spandrel)")
    jobs = args.load or args.save
    if args.against and not jobs:
        import tempfile

        jobs = args.save = tempfile.mkdtemp(prefix="lacuna-edge-jobs-")
    totals = scenarios(names, args.repeat, args.save, args.load)
    if args.against and names:
        against(args.against, names, args.repeat, jobs, totals)
    if not args.skip_verification:
        verification()
        sharp_corners()


if __name__ == "__main__":
    main()
