"""How far the share of the saving the made voids keep moves when the panel is drawn a hair wider.

Runs the whole job in memory on the scenarios of benchmarks/scenarios.py (our own panels), each on ``--copies``
copies of its panel drawn 0, 1, 2, ... ``--step`` mm wider (default one micrometre: far below any drawing's
precision), and prints per panel the freeform layout's and the made layout's removed share, the share of the saving
kept (least, mean, most), whether every made layout stayed no softer than its freeform one, and the void stage's
mean seconds. A change that moves layouts can then be judged against the spread copies this close already show,
rather than against one run: with ``--json PATH`` the rows are written for ``--against PATH`` (the same run on
another tree) to print the two means side by side. Prints figures; asserts nothing. One core, as bench_voids.py.

    python benchmarks/bench_spread.py                          # every scenario, 6 copies each
    python benchmarks/bench_spread.py plate --copies 8 --json /tmp/a.json
    python benchmarks/bench_spread.py plate --copies 8 --against /tmp/a.json
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "benchmarks"))


def main() -> None:
    from threadpoolctl import threadpool_limits

    from scenarios import SCENARIOS
    from toolkit.pipeline import optimize_panel

    ap = argparse.ArgumentParser()
    ap.add_argument("only", nargs="?", default="", help="run the scenarios whose name holds this text")
    ap.add_argument("--copies", type=int, default=6, help="copies of each panel, each drawn one step wider")
    ap.add_argument("--step", type=float, default=0.001, help="how much wider each copy is drawn, mm")
    ap.add_argument("--json", help="write the rows to this file")
    ap.add_argument("--against", help="rows written by another run (--json): their means printed beside these")
    args = ap.parse_args()
    rows: dict[str, list[dict]] = {}
    with threadpool_limits(1):  # one core, as the targets are stated
        for name, make in SCENARIOS.items():
            if args.only not in name:
                continue
            rows[name] = []
            print(f"\n{name}")
            for k in range(args.copies):
                panel, job = make()
                panel = dataclasses.replace(panel, width_mm=panel.width_mm + k * args.step)
                t0 = time.perf_counter()
                run = optimize_panel(panel, job)
                row = dict(wider_mm=k * args.step, freeform_percent=run.freeform_removed_percent,
                           made_percent=run.mass_removed_percent, kept_percent=run.capture_percent or 0.0,
                           voids=len(run.voids), whole_s=time.perf_counter() - t0,
                           voids_s=run.timings_s.get("voids", 0.0),
                           no_softer=run.final.compliance_Nmm <= run.freeform_analysis.compliance_Nmm)
                rows[name].append(row)
                print(f"  {row['wider_mm']:g} mm wider: freeform {row['freeform_percent']:.2f} %, made "
                      f"{row['made_percent']:.2f} % ({row['voids']} voids), kept {row['kept_percent']:.1f} %, "
                      f"void stage {row['voids_s']:.2f} s", flush=True)
    other = json.loads(Path(args.against).read_text()) if args.against else {}
    print(f"\n| panel | freeform removed | made removed | kept of the saving: least, mean, most | no softer than "
          f"freeform | void stage s (mean) |" + (" against: kept mean | void stage s |" if other else ""))
    print("|---|---:|---:|---:|---|---:|" + ("---:|---:|" if other else ""))
    for name, rs in rows.items():
        kept = [r["kept_percent"] for r in rs]
        line = (f"| {name} | {min(r['freeform_percent'] for r in rs):.1f}-{max(r['freeform_percent'] for r in rs):.1f} % "
                f"| {min(r['made_percent'] for r in rs):.1f}-{max(r['made_percent'] for r in rs):.1f} % "
                f"| {min(kept):.1f}, {statistics.mean(kept):.1f}, {max(kept):.1f} % "
                f"| {'all' if all(r['no_softer'] for r in rs) else 'not all'} "
                f"| {statistics.mean(r['voids_s'] for r in rs):.2f} |")
        if name in other:
            line += (f" {statistics.mean(r['kept_percent'] for r in other[name]):.1f} % "
                     f"| {statistics.mean(r['voids_s'] for r in other[name]):.2f} |")
        print(line)
    if args.json:
        Path(args.json).write_text(json.dumps(rows, indent=1))


if __name__ == "__main__":
    main()
