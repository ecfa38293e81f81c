"""Runner benchmark: throughput, flat memory, and Dask workers, on studies/reference.toml.

The reference study has about 10,000 campaigns (budget 50, 2-D to 6-D landscapes). This script
runs a share of its replicates (``--share``, default 8 of 36: one block of replicates, so its
chunks are the lock-step batches of the full study, 2,240 campaigns) and projects the whole;
``--share 1`` runs the whole study. Each measurement runs in a fresh process, so the peak memory it
reports (largest resident set of the runner and of any worker) belongs to that run alone.

It prints, in one run:
- campaigns per second and the projected wall time of the full study with joblib on 2 cores;
- peak memory for the share and for twice the share: their ratio shows memory stays flat as
  the grid grows (chunks go to disk, not into a list);
- the same share on a Dask LocalCluster with 1 and with 2 workers: their time ratio shows the
  work divides by the number of workers.

    python benchmarks/grid.py [--share 0.222] [--no-dask]
"""

from __future__ import annotations

import argparse
import dataclasses
import json
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
STUDY = ROOT / "studies" / "reference.toml"


def child(replicates: int, mode: str, out: str) -> None:
    from workbench.study.runner import run_study
    from workbench.study.spec import load

    study = dataclasses.replace(load(STUDY), replicates=replicates)
    start = time.perf_counter()
    if mode == "joblib":
        summary = run_study(study, out, jobs=2)
    else:
        from dask.distributed import LocalCluster

        workers = int(mode[-1])
        with LocalCluster(
            n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None
        ) as cluster:
            start = time.perf_counter()
            summary = run_study(study, out, scheduler=cluster.scheduler_address)
    seconds = time.perf_counter() - start
    rss = max(
        resource.getrusage(resource.RUSAGE_SELF).ru_maxrss,
        resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss,
    )
    print(json.dumps({"campaigns": summary.campaigns, "seconds": seconds, "peak_kib": rss}))


def measure(replicates: int, mode: str) -> dict:
    with tempfile.TemporaryDirectory() as out:
        cmd = [
            sys.executable,
            __file__,
            "--child",
            mode,
            "--replicates",
            str(replicates),
            "--out",
            out,
        ]
        done = subprocess.run(cmd, capture_output=True, text=True, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--share", type=float, default=8 / 36)
    parser.add_argument("--no-dask", action="store_true")
    parser.add_argument("--child", default=None, help=argparse.SUPPRESS)
    parser.add_argument("--replicates", type=int, default=None, help=argparse.SUPPRESS)
    parser.add_argument("--out", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.replicates, args.child, args.out)
        return

    from workbench.study.spec import load

    full = load(STUDY)
    reps = max(1, round(full.replicates * args.share))
    small = measure(reps, "joblib")
    rate = small["campaigns"] / small["seconds"]
    full_campaigns = small["campaigns"] * full.replicates / reps
    print(
        f"reference study: {full_campaigns:.0f} campaigns; measured {small['campaigns']} "
        f"({reps} of {full.replicates} replicates)"
    )
    print(
        f"joblib, 2 workers: {rate:.2f} campaigns/s; projected full study "
        f"{full_campaigns / rate / 60:.1f} min (goal: 5 min)"
    )
    large = measure(2 * reps, "joblib")
    print(
        f"peak memory: {small['peak_kib'] / 1024:.0f} MiB at {small['campaigns']} campaigns, "
        f"{large['peak_kib'] / 1024:.0f} MiB at {large['campaigns']}; "
        f"ratio {large['peak_kib'] / small['peak_kib']:.2f} for twice the grid"
    )
    if not args.no_dask:
        one, two = measure(reps, "dask1"), measure(reps, "dask2")
        print(
            f"Dask LocalCluster: 1 worker {one['seconds']:.1f} s, 2 workers {two['seconds']:.1f} s;"
            f" speed-up {one['seconds'] / two['seconds']:.2f} with 2 workers"
        )


if __name__ == "__main__":
    main()
