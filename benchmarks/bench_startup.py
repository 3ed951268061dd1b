"""Start-up: how long the command line takes to print its help, and how long the API takes to import.

    python benchmarks/bench_startup.py [--repeat 7]

Each figure is the wall time of a fresh process, median (and best) of the repeats, with a bare interpreter's
start for reference. The `lacuna` script beside this Python is used where installed, else `python -m
toolkit.cli`. `python -X importtime -c "import toolkit.cli"` shows where the time goes when a figure grows.
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path


def lacuna_command() -> list[str]:
    script = Path(sys.executable).with_name("lacuna")
    return [str(script)] if script.exists() else [sys.executable, "-m", "toolkit.cli"]


def wall_times(argv: list[str], repeat: int) -> list[float]:
    subprocess.run(argv, check=True, capture_output=True)  # a first run to warm the file cache, not counted
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run(argv, check=True, capture_output=True)
        times.append(time.perf_counter() - t0)
    return times


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=7, help="runs of each command (default 7)")
    args = parser.parse_args()
    lacuna = lacuna_command()
    cases = [
        ("python -c pass (the floor)", [sys.executable, "-c", "pass"]),
        ("lacuna --help", lacuna + ["--help"]),
        ("lacuna optimize --help", lacuna + ["optimize", "--help"]),
        ("python -c 'import toolkit.api'", [sys.executable, "-c", "import toolkit.api"]),
    ]
    print(f"{' '.join(lacuna)}; {args.repeat} runs each, seconds")
    print(f"{'':34s}{'median':>8s}{'best':>8s}")
    for label, argv in cases:
        times = wall_times(argv, args.repeat)
        print(f"{label:34s}{statistics.median(times):8.3f}{min(times):8.3f}")


if __name__ == "__main__":
    main()
