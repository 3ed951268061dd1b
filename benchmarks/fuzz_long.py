"""The long fuzzing run: the checks of tests/test_fuzz.py on many more random panels and damaged drawings.

Each example runs the command line as the short test does (valid panels: ``analyze`` and ``optimize`` with
statics and the rules measured on the written drawing; damaged drawings: ``analyze``, ``optimize``, ``check``,
``convert`` with exit codes, one-paragraph refusals, nothing written on refusal, inputs unchanged). Unlike the
test it does not stop at the first failure and does not shrink: it prints every failing example whole, the
count of each exit code per command, and the slowest examples. Examples are drawn afresh each run unless
``--seed`` is given. Asserts nothing itself; the exit status is 1 when any example failed. Usage:

    python benchmarks/fuzz_long.py                          # 200 valid panels, 2000 damaged drawings
    python benchmarks/fuzz_long.py --valid 50 --damaged 500 --seed 7
    python benchmarks/fuzz_long.py --any-unit               # damage drawings in every unit (grids may grow huge)
    python benchmarks/fuzz_long.py --keep /tmp/failed       # keep each failing example's drawing and job
"""

from __future__ import annotations

import argparse
import sys
import time
import traceback
from collections import Counter
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(ROOT / "tests"))

import pytest  # noqa: E402  (pytest.approx and pytest.fail are what the shared checks use)
from hypothesis import HealthCheck, Phase, given, seed, settings  # noqa: E402

import strategies  # noqa: E402
import test_fuzz  # noqa: E402


def run(kind: str, strategy, check, n: int, rng_seed: int | None, keep: Path | None) -> tuple[Counter, list, list]:
    """Run ``check`` on ``n`` examples of ``strategy``; exit-code counts, failures, (seconds, example) pairs."""
    codes: Counter = Counter()
    failures: list[tuple[str, str]] = []
    times: list[tuple[float, str]] = []

    @settings(max_examples=n, deadline=None, database=None, derandomize=False, phases=[Phase.generate],
              suppress_health_check=list(HealthCheck))
    @given(strategy)
    def each(case):
        start = time.perf_counter()
        with test_fuzz.folder() as tmp:
            try:
                for command, code in check(case, tmp).items():
                    codes[command, code] += 1
            except (AssertionError, pytest.fail.Exception) as error:
                where = traceback.extract_tb(error.__traceback__)[-1]
                said = f"{where.line} ({Path(where.filename).name} line {where.lineno})\n{error}"
                failures.append((repr(case), said))
                kept = ""
                if keep is not None:
                    folder = keep / f"{kind.split()[0]}-{len(failures):03d}"
                    folder.mkdir(parents=True, exist_ok=True)
                    case.write(folder)
                    kept = f"\n    files kept in {folder}"
                # The tail of the message holds the traceback's last frames and the error itself.
                print(f"  {kind}: FAILED\n    {repr(case)[:2000]}\n    {said[:300]} ... {said[-1500:]}{kept}",
                      flush=True)
        times.append((time.perf_counter() - start, repr(case)[:300]))
        if len(times) % 50 == 0:
            print(f"  {kind}: {len(times)} examples, {len(failures)} failed", flush=True)

    if rng_seed is not None:
        each = seed(rng_seed)(each)
    each()
    return codes, failures, times


def report(kind: str, codes: Counter, failures: list, times: list) -> None:
    total = sum(t for t, _ in times)
    print(f"\n{kind}: {len(times)} examples in {total:.1f} s ({total / max(len(times), 1):.2f} s each), "
          f"{len(failures)} failed")
    for command in sorted({c for c, _ in codes}):
        counts = ", ".join(f"exit {code}: {codes[command, code]}" for code in sorted(k for c, k in codes
                                                                                      if c == command))
        print(f"  {command:18s} {counts}")
    for seconds, case in sorted(times, reverse=True)[:3]:
        print(f"  slowest {seconds:6.1f} s  {case}")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--valid", type=int, default=200, help="valid panels to run (default 200)")
    parser.add_argument("--damaged", type=int, default=2000, help="damaged drawings to run (default 2000)")
    parser.add_argument("--seed", type=int, default=None, help="draw the same examples as an earlier run")
    parser.add_argument("--keep", type=Path, default=None, help="write each failing example's files here")
    parser.add_argument("--any-unit", action="store_true",
                        help="damage drawings drawn in every unit, not only metres and feet")
    args = parser.parse_args()

    damaged = strategies.damaged_drawings(
        base=strategies.valid_panels(max_holes=2, elements=(100, 200)) if args.any_unit else None)
    failed = 0
    for kind, strategy, check, n in (
        ("valid panels", strategies.valid_panels(), test_fuzz.check_valid_panel, args.valid),
        ("damaged drawings", damaged, test_fuzz.check_damaged, args.damaged),
    ):
        if n <= 0:
            continue
        print(f"{kind}: running {n} examples", flush=True)
        codes, failures, times = run(kind, strategy, check, n, args.seed, args.keep)
        report(kind, codes, failures, times)
        failed += len(failures)
    print(f"\n{failed} failing examples in all.")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
