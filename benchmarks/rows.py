"""Rows benchmark: `check`, `audit` and `run` on a study whose data file has many rows.

Writes, into a temporary folder, an invented bakery log of ROWS earlier bakes (the demo's
invented crumb score, ``studies/bakery_truth.py``, plus noise) and a small study with a fitted
and a drawn-like-data landscape reading it (one setting of each of two strategies, 2
replicates, budget 8), then times ``workbench check``, ``workbench audit`` and ``workbench
run`` on it in fresh interpreters. The baseline of the same run is the same study on the first
25 rows of the log (the demo's data file has 25). Prints the wall times and their ratios; the
goal is at most 30 s for each command on 10,000 rows on a 2-core machine.

    python benchmarks/rows.py [--rows N] [--commands check,audit,run]
"""

from __future__ import annotations

import argparse
import importlib.util
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
BASELINE_ROWS = 25
GOAL_SECONDS = 30.0

HEAD = """title = "A bakery's long log of bakes (invented)"
budget = 8
replicates = 2
seed = 7
baselines = ["random"]

[initial]
design = "belief"
size = 3

"""
LANDSCAPES = """[[landscape]]
data = "{data}"
response = "crumb_score"
goal = "maximise"
label = "history"

[[landscape]]
drawn_like = "{data}"
response = "crumb_score"
goal = "maximise"
label = "like-history"

[strategy.pseudo-posterior]
decay = ["hyperbolic:6"]
quantile = [0.25]
"""


def study_text(data: str) -> str:
    """The benchmark study reading ``data``: the demo's space and belief (the tables of
    ``studies/demo.toml`` from the first ``[space.`` to its first landscape, as written there)
    between this study's own settings and landscapes."""
    demo = (ROOT / "studies/demo.toml").read_text(encoding="utf-8")
    start = demo.index("[space.")
    return HEAD + demo[start : demo.index("[[landscape]]", start)] + LANDSCAPES.format(data=data)


def crumb_score():
    """The demo's invented truth, ``studies/bakery_truth.py:crumb_score``."""
    spec = importlib.util.spec_from_file_location("bakery_truth", ROOT / "studies/bakery_truth.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.crumb_score


def write_log(path: Path, rows: int, seed: int = 0) -> None:
    """``rows`` invented bakes: uniform temperature, log-uniform proving, the score plus noise
    of sd 0.3 (a taster's spread, invented)."""
    rng = np.random.default_rng(seed)
    score = crumb_score()
    temperature = rng.uniform(180, 260, rows)
    proving = np.exp(rng.uniform(np.log(20), np.log(240), rows))
    lines = ["temperature,proving,crumb_score"]
    for t, p in zip(temperature, proving, strict=True):
        lines.append(f"{t:.2f},{p:.2f},{score(t, p) + rng.normal(0, 0.3):.3f}")
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


def wall_time(args: list[str], cwd: Path) -> tuple[float, int]:
    """Seconds from start to exit of ``workbench ARGS`` in ``cwd``, and its exit code."""
    start = time.perf_counter()
    done = subprocess.run(
        [sys.executable, "-m", "workbench.cli", *args],
        cwd=cwd,
        capture_output=True,
        text=True,
        check=False,
        env=None,
    )
    if done.returncode != 0:
        print(done.stderr.strip().splitlines()[-1:], file=sys.stderr)
    return time.perf_counter() - start, done.returncode


def commands(study: Path, data: Path, out: Path) -> dict[str, list[str]]:
    return {
        "check": ["check", str(study), "--jobs", "1"],
        "audit": ["audit", str(study), "--data", str(data), "--out", f"{out}-audit"],
        "run": ["run", str(study), "--jobs", "1", "--quiet", "--out", str(out)],
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=10_000)
    parser.add_argument("--commands", default="check,audit,run")
    options = parser.parse_args()
    chosen = options.commands.split(",")
    times: dict[tuple[str, int], float] = {}
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        big = folder / "bakes.csv"
        write_log(big, options.rows)
        small = folder / "bakes-25.csv"
        small.write_text(
            "\n".join(big.read_text().splitlines()[: BASELINE_ROWS + 1]) + "\n", encoding="utf-8"
        )
        sys.path.insert(0, str(ROOT))
        for rows, data in ((BASELINE_ROWS, small), (options.rows, big)):
            study = folder / f"rows-{rows}.toml"
            study.write_text(study_text(data.name), encoding="utf-8")
            for name, args in commands(study, data, folder / f"out-{rows}").items():
                if name in chosen:
                    seconds, code = wall_time(args, ROOT)
                    times[name, rows] = seconds if code == 0 else float("nan")
    print(f"wall seconds of each command on {BASELINE_ROWS} and {options.rows} rows")
    print(f"{'command':<8} {BASELINE_ROWS:>9} {options.rows:>9} {'ratio':>7} {'goal':>6}")
    for name in chosen:
        base, many = times[name, BASELINE_ROWS], times[name, options.rows]
        verdict = "ok" if many <= GOAL_SECONDS else "over"
        print(f"{name:<8} {base:>9.1f} {many:>9.1f} {many / base:>7.1f} {verdict:>6}")


if __name__ == "__main__":
    main()
