"""How fast the monitor keeps up with a live campaign: its first call (training) against its
next one (one more observation, classifiers read from the cache beside the grid).

    python benchmarks/monitor.py STUDY.toml DIR OBSERVATIONS.csv [--setting S] [--response R]
                                 [--goal G] [--repeats 3]

for example, after ``make demo``:

    python benchmarks/monitor.py studies/demo.toml results/demo studies/bakery-campaign.csv

Each call is ``workbench monitor`` in a fresh process, timed by wall clock, as a user meets
it (start-up, reading the grid and writing the pages included). The first call reads all but
the last observation, with the cache ``DIR/monitor-cache`` emptied first (it is only a
cache); the second reads them all and is repeated ``--repeats`` times (median). Prints both
and their ratio.
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

ROOT = Path(__file__).resolve().parents[1]


def _call(argv: list[str]) -> float:
    start = time.perf_counter()
    done = subprocess.run(
        [sys.executable, "-m", "workbench.cli", "monitor", *argv],
        cwd=ROOT,
        capture_output=True,
        text=True,
    )
    seconds = time.perf_counter() - start
    if done.returncode != 0:
        sys.exit(f"monitor failed ({done.returncode}): {done.stderr.strip()}")
    return seconds


def _head(path: Path, out: Path, drop: int) -> Path:
    """The observations file without its last ``drop`` data rows (comments kept)."""
    lines = path.read_text(encoding="utf-8").splitlines()
    data = [i for i, line in enumerate(lines) if line.strip() and not line.startswith("#")]
    keep = set(range(len(lines))) - set(data[len(data) - drop :])
    out.write_text("\n".join(lines[i] for i in sorted(keep)) + "\n", encoding="utf-8")
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("study")
    parser.add_argument("grid", help="the study's results folder (holding grid.nc)")
    parser.add_argument("observations", help="CSV of the live campaign's evaluations")
    parser.add_argument("--setting", default=None)
    parser.add_argument("--response", default=None)
    parser.add_argument("--goal", default=None)
    parser.add_argument("--repeats", type=int, default=3, help="second calls timed (median)")
    args = parser.parse_args()

    shutil.rmtree(Path(args.grid) / "monitor-cache", ignore_errors=True)
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        common = ["--grid", args.grid, "--out", str(tmp / "pages")]
        for option in ("setting", "response", "goal"):
            if getattr(args, option) is not None:
                common += [f"--{option}", getattr(args, option)]
        earlier = _head(Path(args.observations), tmp / "earlier.csv", drop=1)
        first = _call([args.study, "--observations", str(earlier), *common])
        later = [
            _call([args.study, "--observations", args.observations, *common])
            for _ in range(args.repeats)
        ]
    second = statistics.median(later)
    print(f"grid: {args.grid}")
    print(f"first call (trains, fills the cache): {first:.1f} s")
    print(
        f"second call (one more observation, from the cache), median of {args.repeats}: "
        f"{second:.1f} s ({', '.join(f'{s:.1f}' for s in later)})"
    )
    print(f"first / second: {first / second:.1f}")


if __name__ == "__main__":
    main()
