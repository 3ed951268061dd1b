"""Assembly plus solve of a 600 x 200-element cantilever panel, for each way of solving we know of.

    python benchmarks/bench_fe.py [--nx 600 --ny 200 --repeat 3] [--backends superlu-nd,superlu-mmd,...]

Backends: ours (toolkit.fe.solve.LinearSolver) with our multifrontal Cholesky over the grid's nested
dissection ("multifrontal"), SuperLU in the grid's nested-dissection order ("superlu-nd"), in SuperLU's own
minimum-degree order ("superlu-mmd"), or with the optional PARDISO backend ("pardiso-nd"); and, for
comparison, plain scipy
spsolve, MKL PARDISO (package pypardiso, symmetric positive definite mode, a fresh solver each time so that
no factorisation is reused between repeats), cholespy (CHOLMOD) and AMG-preconditioned CG (pyamg).

Each backend runs in a fresh process so that its peak memory (ru_maxrss) is its own. Prints seconds (best and
median of the repeats) for the pattern build, the assembly, the set-up plus factorisation plus solve, for ours
also a second factorisation plus solve of a new matrix (``refactor``: what each BESO iteration pays), and the
relative residual. Whether threadpoolctl is installed is printed too: with it the multifrontal backend holds
BLAS to one thread, which matters on a machine whose cores are busy. Backends needing a package that is not installed are reported and skipped.
"""

from __future__ import annotations

import argparse
import json
import resource
import statistics
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

BACKENDS = ["multifrontal", "pardiso-nd", "superlu-nd", "superlu-mmd", "spsolve", "pypardiso", "cholespy", "pyamg-cg"]


def problem(nx: int, ny: int):
    from toolkit.fe.assembly import Assembler
    from toolkit.fe.element import q4_stiffness
    from toolkit.fe.grid import Grid

    grid = Grid(nx, ny, 5.0, 5.0)
    t0 = time.perf_counter()
    assembler = Assembler(grid)
    t1 = time.perf_counter()
    # Soft-kill BESO contrast: half the elements at 1e-3 of the solid stiffness, as an optimiser would have.
    rng = np.random.default_rng(0)
    scale = np.where(rng.random(grid.n_elements) < 0.5, 1.0, 1e-3)
    K = assembler.matrix(q4_stiffness(5.0, 5.0, 11500.0, 0.3, 90.0), scale)
    t2 = time.perf_counter()
    root = np.arange(ny + 1) * (nx + 1)
    fixed = np.zeros(grid.n_dofs, bool)
    fixed[2 * root] = fixed[2 * root + 1] = True
    F = np.zeros((grid.n_dofs, 2))
    F[2 * nx + 1, 0] = -1000.0
    F[2 * ((ny + 1) * (nx + 1) - 1) + 1, 1] = -1000.0
    return grid, K, ~fixed, F, t1 - t0, t2 - t1


OURS = ("multifrontal", "superlu-nd", "superlu-mmd", "pardiso-nd")
REFACTOR: list[float] = []


def solve_with(name, grid, K, free, F):
    import scipy.sparse as sp
    import scipy.sparse.linalg as spla

    if name in OURS:
        from toolkit.fe.solve import LinearSolver

        backend = {"pardiso-nd": "pardiso", "multifrontal": "multifrontal"}.get(name, "superlu")
        solver = LinearSolver(K, free, grid=grid if name != "superlu-mmd" else None, backend=backend)
        U = solver.solve(F)
        # A matrix of the same pattern with other values, as the next BESO iteration brings.
        t = time.perf_counter()
        solver.refactor(K * 0.5)
        solver.solve(F)
        REFACTOR.append(time.perf_counter() - t)
        return U
    idx = np.flatnonzero(free)
    Kff = K[idx][:, idx].tocsc()
    U = np.zeros_like(F)
    if name == "spsolve":
        U[idx] = spla.spsolve(Kff, F[idx])
    elif name == "pypardiso":
        import pypardiso

        # A fresh solver: pypardiso.spsolve keeps its factorisation and would skip it for a repeated matrix.
        solver = pypardiso.PyPardisoSolver(mtype=2)
        U[idx] = solver.solve(sp.triu(Kff, format="csr"), np.ascontiguousarray(F[idx]))
    elif name == "cholespy":
        from cholespy import CholeskySolverD, MatrixType

        c = Kff.tocoo()
        solver = CholeskySolverD(Kff.shape[0], c.row.astype(np.int32), c.col.astype(np.int32), c.data,
                                 MatrixType.COO)
        for k in range(F.shape[1]):
            x = np.zeros(idx.size)
            solver.solve(np.ascontiguousarray(F[idx, k]), x)
            U[idx, k] = x
    elif name == "pyamg-cg":
        import pyamg

        xy = grid.node_xy
        modes = np.zeros((grid.n_dofs, 3))
        modes[0::2, 0] = modes[1::2, 1] = 1.0
        modes[0::2, 2], modes[1::2, 2] = -xy[:, 1], xy[:, 0]
        ml = pyamg.smoothed_aggregation_solver(Kff.tocsr(), B=modes[idx])
        for k in range(F.shape[1]):
            U[idx, k], _ = spla.cg(Kff, F[idx, k], rtol=1e-10, M=ml.aspreconditioner(), maxiter=2000)
    else:
        raise SystemExit(f"unknown backend {name}")
    return U


def run_one(name: str, nx: int, ny: int, repeat: int) -> dict:
    try:
        __import__({"pypardiso": "pypardiso", "pardiso-nd": "pypardiso", "cholespy": "cholespy", "pyamg-cg": "pyamg"}.get(name, "scipy"))
    except ImportError:
        return {"backend": name, "skipped": "package not installed"}
    pattern, assembly, solve, residual = [], [], [], 0.0
    for _ in range(repeat):
        grid, K, free, F, tp, ta = problem(nx, ny)
        t = time.perf_counter()
        U = solve_with(name, grid, K, free, F)
        solve.append(time.perf_counter() - t - sum(REFACTOR[len(solve):]))
        pattern.append(tp)
        assembly.append(ta)
        r = (K @ U - F)[free]
        residual = max(residual, float(np.abs(r).max() / np.abs(F).max()))
    peak_mib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return {"backend": name, "pattern_s": pattern, "assembly_s": assembly, "solve_s": solve,
            "refactor_s": REFACTOR, "residual": residual, "peak_MiB": peak_mib}


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nx", type=int, default=600)
    parser.add_argument("--ny", type=int, default=200)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--backends", default=",".join(BACKENDS))
    parser.add_argument("--one", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.one:
        print(json.dumps(run_one(args.one, args.nx, args.ny, args.repeat)))
        return
    try:
        import threadpoolctl  # noqa: F401
        blas = "threadpoolctl installed: BLAS on one thread in the multifrontal backend"
    except ImportError:
        blas = "threadpoolctl not installed: BLAS on its default threads"
    print(f"{args.nx} x {args.ny} elements, {2 * (args.nx + 1) * (args.ny + 1)} dofs, 2 load cases, "
          f"{args.repeat} repeats (best / median seconds); {blas}")
    print(f"{'backend':12s} {'pattern':>15s} {'assembly':>15s} {'factor+solve':>15s} {'refactor':>15s} "
          f"{'total best':>11s} {'residual':>9s} {'peak MiB':>9s}")
    for name in args.backends.split(","):
        out = subprocess.run([sys.executable, __file__, "--one", name, "--nx", str(args.nx), "--ny", str(args.ny),
                              "--repeat", str(args.repeat)], capture_output=True, text=True)
        if out.returncode != 0:
            print(f"{name:12s} failed: {out.stderr.strip().splitlines()[-1] if out.stderr else out.returncode}")
            continue
        r = json.loads(out.stdout.strip().splitlines()[-1])
        if "skipped" in r:
            print(f"{name:12s} skipped: {r['skipped']}")
            continue
        cell = lambda v: f"{min(v):6.2f} / {statistics.median(v):6.2f}"
        total = min(p + a + s for p, a, s in zip(r["pattern_s"], r["assembly_s"], r["solve_s"]))
        refactor = cell(r["refactor_s"]) if r["refactor_s"] else "-"
        print(f"{name:12s} {cell(r['pattern_s']):>15s} {cell(r['assembly_s']):>15s} {cell(r['solve_s']):>15s} "
              f"{refactor:>15s} {total:11.2f} {r['residual']:9.1e} {r['peak_MiB']:9.0f}")


if __name__ == "__main__":
    main()
