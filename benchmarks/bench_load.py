"""Resource figures: reading a crowded drawing, and the peak memory of analysis and optimisation by grid size.

    python benchmarks/bench_load.py drawing [--entities 200000] [--keep FILE [--reuse]]
    python benchmarks/bench_load.py memory [--sizes 100x50,200x100,400x130,600x200,300x300,900x300]

``drawing``: writes a drawing holding a small panel (outline, one round opening) and ``--entities`` lines,
texts and circles on other layers (a site plan around a panel, a scenario of our own), then reads it with
``toolkit.dxf_in.read_drawing`` in a fresh process and prints the seconds spent opening the file (ezdxf's
parser) and in the rest of the reading, and the peak resident memory above the interpreter's own.

``memory``: for each grid size, in a fresh process each, the peak resident memory (ru_maxrss above the value
after the imports) of a solid analysis, and of an optimisation (solid analysis kept alive, then the BESO
problem and three BESO iterations: the solver's factors do not grow after the first). Fits the law
``bytes per element = a + b log2(ne)`` (fill of a nested-dissection factorisation grows like n log n) by least
squares, prints it and the envelope over every measured size (the fit scaled by its largest shortfall), and
compares each size with :func:`toolkit.limits.peak_memory_bytes` (envelope times a safety factor). The
coefficients in ``toolkit/limits.py`` are that envelope: run this again whenever toolkit/fe/solve.py changes.
Prints figures; asserts nothing.
"""

from __future__ import annotations

import argparse
import gc
import json
import math
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

# Layers of the surrounding drawing: our own invented names, none of them the panel's.
OTHER_LAYERS = ("SITE-GRID", "SITE-TEXT", "SITE-TREES")


def _rss_kB() -> int:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss  # kB on Linux


def write_crowded_drawing(path: Path, entities: int) -> None:
    """A 2400 x 600 mm panel with one round opening, among ``entities`` lines, texts and circles elsewhere."""
    import ezdxf

    doc = ezdxf.new("R2018")
    doc.header["$INSUNITS"] = 4
    for name in ("PANEL", "OPENING") + OTHER_LAYERS:
        doc.layers.add(name)
    msp = doc.modelspace()
    msp.add_lwpolyline([(0, 0), (2400, 0), (2400, 600), (0, 600)], close=True, dxfattribs={"layer": "PANEL"})
    msp.add_circle((1200, 300), 100, dxfattribs={"layer": "OPENING"})
    side = int(math.ceil(math.sqrt(entities / 3)))
    for k in range(entities):
        # Spread over a site of about 1 km square, away from the panel: a survey around the building.
        i, j = divmod(k // 3, side)
        x, y = 5000.0 + 300.0 * i, 5000.0 + 300.0 * j
        kind = k % 3
        if kind == 0:
            msp.add_line((x, y), (x + 250.0, y + 40.0), dxfattribs={"layer": OTHER_LAYERS[0]})
        elif kind == 1:
            msp.add_text(f"P{k}", height=50.0, dxfattribs={"layer": OTHER_LAYERS[1], "insert": (x, y + 100.0)})
        else:
            msp.add_circle((x + 150.0, y + 150.0), 60.0, dxfattribs={"layer": OTHER_LAYERS[2]})
    doc.saveas(path)


def _read_worker(path: str) -> dict:
    from toolkit.dxf_in import read_drawing
    from toolkit.dxf_in.source import open_document

    base = _rss_kB()
    # CPU seconds as well as wall seconds: on a shared machine the wall clock also counts other people's work.
    t0, c0 = time.perf_counter(), time.process_time()
    doc, _ = open_document(path)
    t1, c1 = time.perf_counter(), time.process_time()
    n = len(doc.modelspace())
    del doc
    gc.collect()  # a document is full of reference cycles: free it before the second reading is measured
    t2, c2 = time.perf_counter(), time.process_time()
    drawing = read_drawing(path)
    t3, c3 = time.perf_counter(), time.process_time()
    return {
        "modelspace_entities": n,
        "open_s": t1 - t0,
        "open_cpu_s": c1 - c0,
        "read_drawing_s": t3 - t2,
        "read_drawing_cpu_s": c3 - c2,
        "rest_cpu_s": (c3 - c2) - (c1 - c0),
        "peak_above_imports_MB": (_rss_kB() - base) / 1024.0,
        "panel_mm": [drawing.width_mm, drawing.height_mm],
        "openings": len(drawing.openings),
    }


def _memory_worker(nx: int, ny: int, stage: str, radius_elements: float, cases: int) -> dict:
    from shapely.geometry import Point

    from toolkit.analysis import analyze
    from toolkit.model import Material, Panel, PointLoad, Region, Support
    from toolkit.optimize import OptimizeSettings, ZoneSettings, build_problem, run_beso

    h = 10.0
    width, height = nx * h, ny * h
    loads = tuple(PointLoad((width, height), (0.0, -3000.0), case=f"c{k}") for k in range(cases))
    panel = Panel(
        width, height, 40.0, Material(11500.0, 0.3),
        openings=(Region(Point(0.5 * width, 0.5 * height).buffer(0.15 * height), "OPENING"),),
        supports=(Support(((0.0, 0.0), (0.0, height)), "xy"),), loads=loads, element_size_mm=h,
    )
    base = _rss_kB()
    t0 = time.perf_counter()
    solid = analyze(panel)
    if stage == "optimize":
        problem = build_problem(panel, ZoneSettings(edge_cover_mm=2 * h, bearing_clearance_mm=3 * h,
                                                    min_web_mm=2 * h))
        run_beso(problem, OptimizeSettings(max_iterations=3, filter_radius_mm=radius_elements * h))
    seconds = time.perf_counter() - t0
    assert solid.elements > 0
    return {"nx": nx, "ny": ny, "stage": stage, "radius_elements": radius_elements, "cases": cases,
            "peak_MB": (_rss_kB() - base) / 1024.0, "seconds": seconds}


def _in_fresh_process(*args: str) -> dict:
    out = subprocess.run([sys.executable, __file__, "_worker", *args], check=True, capture_output=True, text=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def bench_drawing(entities: int, keep: str | None, reuse: bool) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(keep) if keep else Path(tmp) / "crowded.dxf"
        if not (reuse and path.is_file()):
            t0 = time.perf_counter()
            write_crowded_drawing(path, entities)
            print(f"wrote {path.name}: {entities} entities on other layers in {time.perf_counter() - t0:.1f} s")
        print(f"{path.name}: {path.stat().st_size / 2**20:.1f} MB")
        r = _in_fresh_process("read", str(path))
    print(f"model space holds {r['modelspace_entities']} entities; panel {r['panel_mm']} mm, "
          f"{r['openings']} opening(s)")
    print(f"{'':36s}{'wall s':>8s}{'CPU s':>8s}")
    print(f"  opening the file (ezdxf parser)   {r['open_s']:8.2f}{r['open_cpu_s']:8.2f}")
    print(f"  read_drawing, whole               {r['read_drawing_s']:8.2f}{r['read_drawing_cpu_s']:8.2f}")
    print(f"  read_drawing, after the parser    {'':8s}{r['rest_cpu_s']:8.2f}")
    print(f"  peak memory above the imports     {r['peak_above_imports_MB']:7.0f} MB")


def bench_memory(sizes: list[tuple[int, int]], radius: float, cases: int) -> None:
    import numpy as np

    from toolkit.limits import peak_memory_bytes

    rows = []
    print(f"{'grid':>10s} {'elements':>9s} {'stage':>9s} {'peak MB':>8s} {'kB/elem':>8s} {'estimate MB':>11s} "
          f"{'est/peak':>8s} {'s':>6s}")
    for nx, ny in sizes:
        for stage in ("analysis", "optimize"):
            r = _in_fresh_process("memory", str(nx), str(ny), stage, str(radius), str(cases))
            ne = nx * ny
            est = peak_memory_bytes(nx, ny, 10.0, 10.0, stage=stage, cases=cases,
                                    filter_radius_mm=radius * 10.0) / 2**20
            rows.append((ne, stage, r["peak_MB"]))
            print(f"{nx:>4d}x{ny:<5d} {ne:9d} {stage:>9s} {r['peak_MB']:8.0f} {1024 * r['peak_MB'] / ne:8.2f} "
                  f"{est:11.0f} {est / r['peak_MB']:8.2f} {r['seconds']:6.1f}")
    from toolkit.fe import solve

    # The law is fitted where the default solver is the multifrontal one; smaller grids go to SuperLU and are
    # covered by limits.FIXED_BYTES instead.
    least = getattr(solve, "MULTIFRONTAL_MIN_DOFS", 0)
    for stage in ("analysis", "optimize"):
        big = [(n, mb) for (n, s, mb), (nx, ny) in zip(rows, [sz for sz in sizes for _ in (0, 1)])
               if s == stage and 2 * (nx + 1) * (ny + 1) >= least]
        if len(big) < 2:
            print(f"fit {stage}: fewer than two sizes at or above {least} dofs")
            continue
        ne = np.array([n for n, _ in big], dtype=float)
        per = np.array([1024.0 * mb for _, mb in big]) / ne  # kB per element
        A = np.column_stack([np.ones_like(ne), np.log2(ne)])
        (a, b), *_ = np.linalg.lstsq(A, per, rcond=None)
        worst = float(np.max(per / (A @ [a, b])))
        print(f"fit {stage:9s}: kB per element = {a:.3f} + {b:.4f} log2(ne); largest measured/fit {worst:.3f}; "
              f"envelope (fit x {worst:.3f}, every size at or under it): {a * worst:.3f} + {b * worst:.4f} log2(ne)")


def main() -> None:
    if len(sys.argv) > 1 and sys.argv[1] == "_worker":
        kind, *rest = sys.argv[2:]
        if kind == "read":
            result = _read_worker(rest[0])
        else:
            nx, ny, stage, radius, cases = rest
            result = _memory_worker(int(nx), int(ny), stage, float(radius), int(cases))
        print(json.dumps(result))
        return
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    sub = parser.add_subparsers(dest="what", required=True)
    d = sub.add_parser("drawing")
    d.add_argument("--entities", type=int, default=200_000)
    d.add_argument("--keep", default=None, help="write the drawing here and keep it")
    d.add_argument("--reuse", action="store_true", help="read the --keep file again if it exists")
    m = sub.add_parser("memory")
    m.add_argument("--sizes", default="100x50,200x100,400x130,600x200,300x300,900x300")
    m.add_argument("--radius", type=float, default=3.0, help="filter radius in element sizes")
    m.add_argument("--cases", type=int, default=1)
    args = parser.parse_args()
    if args.what == "drawing":
        bench_drawing(args.entities, args.keep, args.reuse)
    else:
        sizes = [tuple(int(v) for v in s.split("x")) for s in args.sizes.split(",")]
        bench_memory(sizes, args.radius, args.cases)


if __name__ == "__main__":
    main()
