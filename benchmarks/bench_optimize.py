"""Speed of the BESO loop on the half MBB beam (Andreassen et al. 2011 set-up): seconds per iteration,
whole-run time and peak memory at 300 x 100 and 600 x 200 elements.

Each size and solver backend runs in a fresh process, so the peak resident memory (ru_maxrss) is its own.
Prints figures; asserts nothing. Usage:

    python benchmarks/bench_optimize.py                  # both sizes, the default solver ("auto")
    python benchmarks/bench_optimize.py --backend superlu --sizes 300x100
"""

from __future__ import annotations

import argparse
import json
import resource
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def run_one(nx: int, ny: int, backend: str, max_iterations: int) -> dict:
    import numpy as np

    sys.path.insert(0, str(ROOT))
    from toolkit.fe.element import q4_stiffness
    from toolkit.fe.grid import Grid
    from toolkit.optimize.beso import run_beso
    from toolkit.optimize.problem import Problem
    from toolkit.optimize.settings import OptimizeSettings

    g = Grid(nx, ny, 1.0, 1.0)
    left = np.arange(ny + 1) * (nx + 1)
    fixed = np.concatenate([2 * left, [2 * nx + 1]])
    F = np.zeros((g.n_dofs, 1))
    F[2 * (ny * (nx + 1)) + 1, 0] = -1.0
    problem = Problem(grid=g, ke=q4_stiffness(1.0, 1.0, 1.0, 0.3, 1.0), fractions=np.ones(g.n_elements),
                      fixed=fixed, loads=F, weights=np.ones(1), design=np.ones(g.n_elements, bool))
    settings = OptimizeSettings(volume_fraction=0.5, max_iterations=max_iterations)  # filter: 3 elements
    stamps: list[float] = []
    c0 = time.process_time()
    t0 = time.perf_counter()
    result = run_beso(problem, settings, on_iteration=lambda *_: stamps.append(time.perf_counter()),
                      backend=backend)
    total = time.perf_counter() - t0
    cpu = time.process_time() - c0
    steps = np.diff(np.array([t0] + stamps))
    return {
        "size": f"{nx}x{ny}",
        "backend": backend,
        "iterations": result.iterations,
        "converged": result.converged,
        "compliance": float(result.compliance_Nmm[-1]),
        "first_iteration_s": float(steps[0]),  # includes the one-off set-up (filter, orderings, maps)
        "per_iteration_s": float(np.median(steps[1:])) if steps.size > 1 else float(steps[0]),
        "total_s": total,
        # CPU seconds of the whole run: less moved than the wall clock by other work on a shared machine.
        "cpu_s": cpu,
        "peak_MB": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", default="300x100,600x200")
    parser.add_argument("--backend", default="auto", help='"auto", "multifrontal", "superlu" or "pardiso"')
    parser.add_argument("--max-iterations", type=int, default=200)
    parser.add_argument("--child", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        nx, ny = (int(v) for v in args.child.split("x"))
        print(json.dumps(run_one(nx, ny, args.backend, args.max_iterations)))
        return
    print(f"BESO, half MBB beam, volume 0.5, filter 3 elements, backend {args.backend}")
    print(f"{'size':>9} {'iters':>5} {'conv':>5} {'c':>9} {'1st it s':>9} {'s/iter':>8} {'total s':>8} {'cpu s':>7} "
          f"{'peak MB':>8}")
    for size in args.sizes.split(","):
        out = subprocess.run(
            [sys.executable, __file__, "--child", size, "--backend", args.backend,
             "--max-iterations", str(args.max_iterations)],
            capture_output=True, text=True,
        )
        if out.returncode != 0:
            print(f"{size:>9} failed: {out.stderr.strip().splitlines()[-1]}")
            continue
        r = json.loads(out.stdout.strip().splitlines()[-1])
        print(f"{r['size']:>9} {r['iterations']:>5} {str(r['converged']):>5} {r['compliance']:>9.2f} "
              f"{r['first_iteration_s']:>9.2f} {r['per_iteration_s']:>8.3f} {r['total_s']:>8.1f} {r['cpu_s']:>7.1f} "
              f"{r['peak_MB']:>8.0f}")


if __name__ == "__main__":
    main()
