"""Start-up benchmark: how long the command line takes before its first line of work.

Runs ``workbench --help``, ``workbench landscapes``, an argument error (``workbench run`` with
no study) and a missing file for each command that reads one (``check``, ``plan``,
``transfer``, ``audit``, ``monitor``, ``report``, ``decide``), each REPEATS times in a
fresh interpreter, and ``python -c pass`` the same way as the baseline of this run and this
machine. Prints the median wall time of each in seconds and as a ratio to the baseline.

    python benchmarks/startup.py [--repeats N]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
# The command that picks a setting of a grid (renamed from recommend to decide, issue 25).
DECIDE = "decide"

COMMANDS = {
    "python -c pass (baseline)": ["-c", "pass"],
    "workbench --help": ["-m", "workbench.cli", "--help"],
    "workbench landscapes": ["-m", "workbench.cli", "landscapes"],
    "workbench run (no study)": ["-m", "workbench.cli", "run"],
    "workbench check missing.toml": ["-m", "workbench.cli", "check", "missing.toml"],
    "workbench plan missing.toml": ["-m", "workbench.cli", "plan", "missing.toml"],
    "workbench transfer missing.toml": ["-m", "workbench.cli", "transfer", "missing.toml"],
    "workbench audit (no data file)": [
        *("-m", "workbench.cli", "audit", "studies/demo.toml", "--data", "missing.csv"),
    ],
    "workbench monitor (no grid)": [
        *("-m", "workbench.cli", "monitor", "studies/demo.toml"),
        *("--observations", "missing.csv", "--grid", "nowhere"),
    ],
    "workbench report nowhere": ["-m", "workbench.cli", "report", "nowhere"],
    f"workbench {DECIDE} nowhere": ["-m", "workbench.cli", DECIDE, "nowhere"],
}


def wall_time(args: list[str]) -> float:
    """Seconds from start to exit of ``python ARGS`` run from the repository root."""
    start = time.perf_counter()
    subprocess.run([sys.executable, *args], cwd=ROOT, capture_output=True, check=False)
    return time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=5)
    repeats = parser.parse_args().repeats
    medians = {}
    for _ in range(repeats):  # interleaved, so a busy moment hits every command alike
        for name, args in COMMANDS.items():
            medians.setdefault(name, []).append(wall_time(args))
    medians = {name: statistics.median(times) for name, times in medians.items()}
    baseline = medians["python -c pass (baseline)"]
    print(f"median of {repeats} wall times, python {sys.version.split()[0]}")
    print(f"{'command':<36} {'seconds':>8} {'x baseline':>11}")
    for name, seconds in medians.items():
        print(f"{name:<36} {seconds:>8.3f} {seconds / baseline:>11.1f}")


if __name__ == "__main__":
    main()
