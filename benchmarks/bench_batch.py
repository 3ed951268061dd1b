"""`lacuna batch` against a serial loop: 16 copies of the bundled demo, each the whole optimize job.

    python benchmarks/bench_batch.py [--copies 16] [--workers N]

The serial loop runs toolkit.api.optimize_file on each copy in this process, one after the other (the imports
paid once, before the clock starts); the batch runs toolkit.batch.batch_files on a LocalCluster of N workers
(default: one per core), one thread each, the cluster's start and the summary tables included. Prints both wall
times, the speed-up and the issue's target (0.6 x cores). Figures only, no pass or fail.
"""

from __future__ import annotations

import argparse
import os
import shutil
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from toolkit import api  # noqa: E402
from toolkit.batch import batch_files  # noqa: E402


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--copies", type=int, default=16, help="copies of the demo (default 16)")
    parser.add_argument("--workers", type=int, default=None, help="workers of the local cluster (default: cores)")
    args = parser.parse_args()
    cores = os.cpu_count() or 1
    workers = args.workers or cores
    dxf, job = api.demo_files()
    with tempfile.TemporaryDirectory(prefix="lacuna-bench-batch-") as tmp:
        tmp = Path(tmp)
        (tmp / "drawings").mkdir()
        drawings = []
        for i in range(args.copies):
            d = tmp / "drawings" / f"lintel-{i + 1:02d}.dxf"
            shutil.copy(dxf, d)
            shutil.copy(job, d.with_suffix(".toml"))   # the per-drawing job beside it
            drawings.append(d)

        t0, c0 = time.perf_counter(), time.process_time()
        for d in drawings:
            api.optimize_file(d, d.with_suffix(".toml"), out_dir=tmp / "serial" / d.stem)
        serial, serial_cpu = time.perf_counter() - t0, time.process_time() - c0

        t0 = time.perf_counter()
        result = batch_files(drawings, out_dir=tmp / "batch", workers=workers)
        parallel = time.perf_counter() - t0

    done = sum(r["status"] == "done" for r in result.rows)
    speedup = serial / parallel
    print(f"{args.copies} copies of the demo ({dxf.name}), {cores} cores, {workers} workers of one thread")
    print(f"  serial loop (one process)      {serial:8.1f} s   {serial / args.copies:6.2f} s per panel"
          f"   (CPU {serial_cpu:.1f} s: {serial_cpu / serial:.2f} cores busy)")
    print(f"  lacuna batch (LocalCluster)    {parallel:8.1f} s   {parallel / args.copies:6.2f} s per panel"
          f"   ({done}/{len(result.rows)} done)")
    timed = [r for r in result.rows if r.get("seconds") is not None]
    if timed:
        print(f"  inside the workers: {sum(r['seconds'] for r in timed) / len(timed):.2f} s per panel's job "
              f"(CPU {sum(r['cpu_seconds'] for r in timed) / len(timed):.2f} s; the serial loop's CPU per panel "
              f"{serial_cpu / args.copies:.2f} s)")
    print(f"  speed-up {speedup:.2f} x   (target >= 0.6 x cores = {0.6 * cores:.1f} x)")
    if hasattr(os, "getloadavg"):
        print(f"  load average now {os.getloadavg()[0]:.2f} (other work on the machine slows both runs alike)")


if __name__ == "__main__":
    main()
