"""Peak memory of a whole optimisation against the number of load cases (travelling-load stops).

    python benchmarks/bench_cases.py [NX NY] [STOPS...]

Each run is a fresh process (peak resident memory is per process): a beam of NX x NY elements (default 300 x 100)
under a point load travelling along its top edge with STOPS stops (default 1, 21, 81), BESO cut short at 10
iterations (the peak comes from the analyses kept side by side, not from the iteration count). Prints the peak
per element and the extra per element per case against the first count: the figure toolkit.limits'
PER_EXTRA_CASE_KB must stay above.
"""

from __future__ import annotations

import json
import subprocess
import sys

CHILD = r"""
import json, resource, sys
from toolkit.model import Material, Panel, Support
from toolkit.jobfile import parse_job
from toolkit.inputs import build_panel
from toolkit.model import Drawing, Frame
from toolkit.pipeline import optimize_panel

nx, ny, stops = (int(v) for v in sys.argv[1:4])
W, H = 10.0 * nx, 10.0 * ny
drawing = Drawing(path="bench.dxf", unit="mm", frame=Frame(), width_mm=W, height_mm=H)
job = parse_job(f'''units = "mm"
[panel]
thickness = 40
element_size = 10
[material]
E_MPa = 11500
nu = 0.3
[[support]]
at = [0, 0]
[[support]]
at = [{W}, 0]
[[moving_load]]
from = [0, {H}]
to = [{W}, {H}]
''' + (f"positions = {stops}\n" if stops > 1 else f"positions = 2\n") + '''fy_kN = -10
[optimize]
volume_fraction = 0.5
max_iterations = 10
[rules]
edge_cover = 10
bearing_clearance = 20
min_web = 10
''')
panel = build_panel(drawing, job)
run = optimize_panel(panel, job)
print(json.dumps({"peak_kB": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, "cases": len(panel.cases)}))
"""


def main(argv: list[str]) -> None:
    nums = [int(a) for a in argv]
    nx, ny = (nums[0], nums[1]) if len(nums) >= 2 else (300, 100)
    counts = nums[2:] or [2, 21, 81]
    ne = nx * ny
    rows = []
    for stops in counts:
        out = subprocess.run([sys.executable, "-c", CHILD, str(nx), str(ny), str(stops)], capture_output=True,
                             text=True, check=True)
        rows.append(json.loads(out.stdout.strip().splitlines()[-1]))
    base = rows[0]
    for row in rows:
        extra = (row["peak_kB"] - base["peak_kB"]) / ne / max(row["cases"] - base["cases"], 1)
        print(f"{nx} x {ny}, {row['cases']:4d} cases: peak {row['peak_kB'] / 1024:8.1f} MB, "
              f"{row['peak_kB'] / ne:6.2f} kB per element; extra per element per case {extra:.3f} kB")


if __name__ == "__main__":
    main(sys.argv[1:])
