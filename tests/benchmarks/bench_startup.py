"""Start-up of the commands a labeller runs most, wall time of the whole process.

A plain script (not collected by pytest):  python tests/benchmarks/bench_startup.py [--runs 15]

Builds the orchard demo store in a temporary folder (`labelq demo`), then times, alternating,
`labelq --version`, `labelq next` on the demo store (current scores: the quick read path) and, as
a floor, `python -c pass` and `python -c "import typer, rich.console"`. Prints the median and the
spread (min-max) of each beside the goal of issue 12 (under 0.4 s for --version and next).
"""

from __future__ import annotations

import argparse
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

GOAL = 0.4


def timed(cmd, cwd) -> float:
    start = time.perf_counter()
    subprocess.run(cmd, cwd=cwd, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=15)
    args = parser.parse_args()
    labelq = shutil.which("labelq") or sys.exit("labelq is not on PATH (pip install -e .)")
    with tempfile.TemporaryDirectory() as tmp:
        subprocess.run([labelq, "demo", "--dir", tmp], stdout=subprocess.DEVNULL, check=True)
        store = str(Path(tmp) / "orchard.db")
        commands = {
            "python -c pass": [sys.executable, "-c", "pass"],
            "import typer, rich": [sys.executable, "-c", "import typer, rich.console"],
            "labelq --version": [labelq, "--version"],
            "labelq next": [labelq, "next", "--db", store],
        }
        times = {name: [] for name in commands}
        for _ in range(args.runs):
            for name, cmd in commands.items():
                times[name].append(timed(cmd, tmp))
    print(f"{'command':<20} {'median':>8} {'min':>7} {'max':>7}  goal")
    for name, values in times.items():
        goal = f"< {GOAL:.1f} s" if name.startswith("labelq") else "(floor)"
        print(f"{name:<20} {statistics.median(values):>7.3f}s {min(values):>6.3f}s "
              f"{max(values):>6.3f}s  {goal}")


if __name__ == "__main__":
    main()
