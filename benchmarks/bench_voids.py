"""How much of the optimiser's saving the made voids keep, what it costs, and how long each stage takes.

Runs the whole job in memory on the scenarios of benchmarks/scenarios.py (our own panels) and prints, per panel:
material removed by the freeform layout and by the voids to make, the share kept, the rules' ceiling
(toolkit/voids/ceiling.py), compliance solid / freeform / made, the shape optimisation's compliance at the first
fit and at the same material after it, the rule that held the layout back, and the seconds of each stage. With
--ref PATH (the plain numpy/scipy BESO port kept beside the project, ../shared/ref_beso.py), the plate's whole job
is timed against that port's BESO alone at the same iteration count, in the same run. With --split, the void
stage's seconds are split by step (``VOID_STEPS``: each step's own seconds, the steps it calls taken out), the FE
analyses of the shape optimisation and the weighing counted apart. Prints figures; asserts nothing.

    python benchmarks/bench_voids.py                     # every scenario
    python benchmarks/bench_voids.py plate --ref ../shared/ref_beso.py
    python benchmarks/bench_voids.py --helper            # with the second process the lacuna commands use
    python benchmarks/bench_voids.py plate --split       # where the void stage's seconds go
"""

from __future__ import annotations

import argparse
import contextlib
import functools
import importlib
import subprocess
import sys
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))


# The void stage's steps timed by --split: (module, attribute, what the table calls it). Each is looked up by name
# where it is called, so wrapping the module's attribute times every call; a step's seconds are its own, those of
# the steps it calls taken out.
VOID_STEPS = (
    ("toolkit.voids.layout", "candidates", "fitting each freeform void's layouts"),
    ("toolkit.voids.layout", "place", "placing (moves and smaller sizes)"),
    ("toolkit.voids.layout", "largest_first", "largest-first fit"),
    ("toolkit.voids.layout", "honeycomb_at", "honeycombs over the region"),
    ("toolkit.voids.layout", "_fill", "fill of the room left"),
    ("toolkit.voids.shape", "optimise", "shape optimisation (its rules and geometry)"),
    ("toolkit.voids.shape", "Evaluator.shapes", "FE analyses (assembly, refactor, solve)"),
    ("toolkit.voids.layout", "standardise_sizes", "standard sizes"),
    ("toolkit.voids.layout", "snap_centres", "snapping"),
    ("toolkit.rules.check", "check_layout", "proof of the rules"),
    ("toolkit.voids.layout", "result_or", "waiting for the helper's answers (--helper)"),
)


@contextlib.contextmanager
def split_seconds(totals: dict[str, list]):
    """Wrap ``VOID_STEPS`` for the duration: ``totals[name]`` becomes [own seconds, calls], counted in the thread
    that runs the void stage (``pipeline._to_voids``) while it runs (the limiting rule's refits in the checks call
    some of the same steps)."""
    stack: list[list[float]] = []  # per open call: seconds of the wrapped calls inside it
    stage = {"thread": None}
    undo = []

    def counted() -> bool:
        return stage["thread"] == threading.get_ident()

    def timer(fn, name):
        @functools.wraps(fn)
        def timed(*args, **kwargs):
            if not counted():
                return fn(*args, **kwargs)
            stack.append([0.0])
            start = time.perf_counter()
            try:
                return fn(*args, **kwargs)
            finally:
                spent = time.perf_counter() - start
                inner = stack.pop()[0]
                if stack:
                    stack[-1][0] += spent
                row = totals.setdefault(name, [0.0, 0])
                row[0] += spent - inner
                row[1] += 1
        return timed

    def gate(fn):
        @functools.wraps(fn)
        def gated(*args, **kwargs):
            stage["thread"] = threading.get_ident()
            try:
                return fn(*args, **kwargs)
            finally:
                stage["thread"] = None
        return gated

    wraps = [(module, attr, lambda fn, name=name: timer(fn, name)) for module, attr, name in VOID_STEPS]
    for module, attr, wrap in wraps + [("toolkit.pipeline", "_to_voids", gate)]:
        owner = importlib.import_module(module)
        *path, last = attr.split(".")
        for part in path:
            owner = getattr(owner, part)
        fn = getattr(owner, last)
        undo.append((owner, last, fn))
        setattr(owner, last, wrap(fn))
    try:
        yield totals
    finally:
        for owner, last, fn in reversed(undo):
            setattr(owner, last, fn)


def main() -> None:
    from threadpoolctl import threadpool_limits

    from scenarios import SCENARIOS
    from toolkit.pipeline import optimize_panel

    ap = argparse.ArgumentParser()
    ap.add_argument("only", nargs="?", default="", help="run the scenarios whose name holds this text")
    ap.add_argument("--ref", help="path of the plain BESO port to time against (plate scenario)")
    ap.add_argument("--helper", action="store_true",
                    help="with the helper process the lacuna commands start (toolkit/helper.py); default one core")
    ap.add_argument("--split", action="store_true",
                    help="split the void stage's seconds by step (with --helper: this process's steps and its wait "
                         "for the helper; the helper's own work is not seen)")
    args = ap.parse_args()
    rows = []
    with threadpool_limits(1):  # one core, as the targets are stated
        for name, make in SCENARIOS.items():
            if args.only not in name:
                continue
            panel, job = make()
            steps: dict[str, list] = {}
            with split_seconds(steps) if args.split else contextlib.nullcontext():
                t0 = time.perf_counter()
                run = optimize_panel(panel, job, helper=args.helper)
                total = time.perf_counter() - t0
            shape = run.rationalised.shape
            rows.append((name, run, total, shape))
            free, made = run.freeform_removed_percent, run.mass_removed_percent
            print(f"\n{name}")
            print(f"  removed: freeform {free:.1f} %, made {made:.1f} % ({len(run.voids)} voids); "
                  f"kept of the saving {run.capture_percent or 0:.0f} %; the rules' ceiling "
                  + (f"{100 * run.ceiling.share:.0f} % ({run.ceiling.why})" if run.ceiling else "none"))
            print(f"  compliance N mm: solid {run.solid.compliance_Nmm:.6g}, freeform "
                  f"{run.freeform_analysis.compliance_Nmm:.6g}, made {run.final.compliance_Nmm:.6g}")
            if shape is not None:
                c, a = shape.compliance_Nmm, shape.area_mm2
                area = float(panel.solid.area)
                print(f"  shape optimisation: first fit {c[0]:.6g} N mm at {100 * a[0] / area:.1f} %, same material "
                      f"{c[1]:.6g} N mm at {100 * a[1] / area:.1f} %, grown {c[2]:.6g} N mm at "
                      f"{100 * a[2] / area:.1f} % ({shape.analyses} analyses)")
            if run.limit:
                print(f"  limit: {run.limit}")
            print("  seconds: " + ", ".join(f"{k} {v:.2f}" for k, v in run.timings_s.items())
                  + f"; whole job {total:.2f} ({run.beso.iterations} BESO iterations)")
            if args.split:
                voids = run.timings_s.get("voids", 0.0)
                named = {name for _, _, name in VOID_STEPS}
                print(f"  void stage {voids:.2f} s by step (own seconds, calls):")
                for name in [n for _, _, n in VOID_STEPS if n in steps]:
                    own, calls = steps[name]
                    print(f"    {name:45s} {own:6.2f} s  {calls:5d}")
                rest = voids - sum(v[0] for k, v in steps.items() if k in named)
                print(f"    {'the rest of the stage':45s} {rest:6.2f} s")
    print("\n| panel | freeform removed | made removed | kept of the saving | the rules' ceiling | "
          "C made <= C freeform | stiffer than first fit | voids s |")
    print("|---|---:|---:|---:|---:|---|---|---:|")
    for name, run, total, shape in rows:
        stiffer = "n/a" if shape is None else ("yes" if shape.compliance_Nmm[1] <= shape.compliance_Nmm[0] else "no")
        print(f"| {name} | {run.freeform_removed_percent:.1f} % | {run.mass_removed_percent:.1f} % | "
              f"{run.capture_percent or 0:.0f} % | "
              f"{f'{100 * run.ceiling.share:.0f} %' if run.ceiling else 'none'} | "
              f"{'yes' if run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm else 'no'} | {stiffer} | "
              f"{run.timings_s.get('voids', 0):.1f} |")
    if args.ref:
        plate = [r for r in rows if "1000 plate" in r[0]]
        if plate:
            name, run, total, _ = plate[0]
            done = subprocess.run([sys.executable, args.ref, "300", "100", "0.5", "--mbb", "--iters",
                                   str(run.beso.iterations)], capture_output=True, text=True, check=True)
            print(f"\nplain port ({args.ref}), 300 x 100, {run.beso.iterations} iterations: {done.stdout.strip()}")
            spi = float(done.stdout.split("s_per_iter")[1])
            print(f"lacuna whole job on the plate {total:.1f} s against the port's BESO alone "
                  f"{spi * run.beso.iterations:.1f} s: ratio {spi * run.beso.iterations / total:.2f}")


if __name__ == "__main__":
    main()
