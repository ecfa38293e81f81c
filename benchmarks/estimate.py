"""Time-estimate benchmark: does the estimate that ``check`` and ``plan`` print match a run?

For the demo study at one and at two replicates (216 and 432 campaigns), runs a
2-replicate pilot, takes its estimate (``compute_estimate``, the numbers
both commands print), then runs the study for real, REPEATS times back to back. Prints each
run's estimate, real seconds and their ratio, and the median ratio. The goal (issue 25): the
estimate within a factor of 1.5 of the real run, as a median over runs, since one run on this
machine varies by a third.

    PYTHONPATH=. python benchmarks/estimate.py [--repeats N] [--jobs J]
"""

from __future__ import annotations

import argparse
import dataclasses
import statistics
import tempfile
from pathlib import Path

from workbench import plan as pl
from workbench.study.runner import run_study
from workbench.study.spec import load

ROOT = Path(__file__).resolve().parents[1]


def studies():
    demo = load(ROOT / "studies" / "demo.toml")
    for replicates in (1, 2):
        yield f"demo, {replicates} replicate(s)", dataclasses.replace(demo, replicates=replicates)


def one(study, jobs: int) -> tuple[float, float]:
    """The estimate for ``study`` from a fresh 2-replicate pilot, and the real run's seconds."""
    pilot = pl.run_pilot(study, pl.PlanOptions(pilot_replicates=2, jobs=jobs))
    estimate = pl.compute_estimate(study, pilot, study.replicates, jobs=jobs)
    with tempfile.TemporaryDirectory() as folder:
        summary = run_study(study, Path(folder) / "run", jobs=jobs)
    return estimate.local, summary.seconds


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--jobs", type=int, default=1)
    args = parser.parse_args()
    for name, study in studies():
        ratios = []
        for i in range(args.repeats):
            estimated, real = one(study, args.jobs)
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
