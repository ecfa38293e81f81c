"""Time-estimate benchmark: does the estimate that ``check`` and ``plan`` print match a run?

For the demo study at one and at two replicates (216 and 432 campaigns), runs a
2-replicate pilot, takes its estimate (``compute_estimate``, the numbers
both commands print), then runs the study for real (each in a fresh interpreter, as `check`
and `run` are), REPEATS times back to back. Prints each
run's estimate, real seconds and their ratio, and the median ratio. The goal (issue 25): the
estimate within a factor of 1.5 of the real run, as a median over runs, since one run on this
machine varies by a third.

    PYTHONPATH=. python benchmarks/estimate.py [--repeats N] [--jobs J]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

# Each side runs in a fresh interpreter, as `check` and `run` do: a run in the pilot's own
# process would find the pilot's surfaces and placements cached in its workers.
CHILD = """
import dataclasses, sys, tempfile, time
from pathlib import Path
from workbench import plan as pl
from workbench.study.runner import run_study
from workbench.study.spec import load
what, replicates, jobs = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
study = dataclasses.replace(load(sys.argv[4]), replicates=replicates)
if what == "estimate":
    pilot = pl.run_pilot(study, pl.PlanOptions(pilot_replicates=2, jobs=jobs))
    print(pl.compute_estimate(study, pilot, replicates, jobs=jobs).local)
else:
    with tempfile.TemporaryDirectory() as folder:
        print(run_study(study, Path(folder) / "run", jobs=jobs).seconds)
"""


def _child(what: str, replicates: int, jobs: int) -> float:
    argv = [sys.executable, "-c", CHILD, what, str(replicates), str(jobs)]
    argv.append(str(ROOT / "studies" / "demo.toml"))
    done = subprocess.run(argv, cwd=ROOT, capture_output=True, text=True, check=True)
    return float(done.stdout.strip().splitlines()[-1])


def one(replicates: int, jobs: int) -> tuple[float, float]:
    """The estimate for the demo at ``replicates`` from a fresh 2-replicate pilot, and the
    real run's seconds."""
    return _child("estimate", replicates, jobs), _child("run", replicates, jobs)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--jobs", type=int, default=1)
    args = parser.parse_args()
    for replicates in (1, 2):
        name = f"demo, {replicates} replicate(s)"
        ratios = []
        for i in range(args.repeats):
            estimated, real = one(replicates, args.jobs)
            ratios.append(estimated / real)
            print(
                f"{name}: run {i + 1}: estimate {estimated:.2f} s, real {real:.2f} s, "
                f"ratio {ratios[-1]:.2f}"
            )
        print(
            f"{name}: median ratio estimate / real {statistics.median(ratios):.2f} "
            f"(goal 0.67 to 1.5)"
        )


if __name__ == "__main__":
    main()
