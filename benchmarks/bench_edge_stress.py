"""Seconds and figures of the local models at voids (toolkit/edge_stress.py).

    python benchmarks/bench_edge_stress.py [--refine 1,2] [--skip-demo]

1. The bundled demo (loft lintel): the whole job up to the made layout's analysis, then the local model of each
   made void at every ``refine`` (element sizes divided by it): seconds, elements, peak, nominal, Kt per void,
   and the pipeline's own ``timings_s["edge stresses"]``.
2. The verification cases of tests/test_edge_stress.py at refine 0.5 / 1 / 2 / 4: measured Kt beside the
   published value (docs/edge-stress.md carries the table).
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))


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
    args = ap.parse_args()
    if not args.skip_demo:
        demo([float(r) for r in args.refine.split(",")])
    verification()


if __name__ == "__main__":
    main()
