"""Cluster benchmark: a share of studies/reference.toml on a Dask LocalCluster with 1 and with 2
single-threaded worker processes.

The share is the first ``--replicates`` replicates (default 8: one block, so its 16 chunks, 4
landscapes of 2 to 6 dimensions × 4 distortions, are the full study's lock-step batches, of
unequal size). Each measurement runs in a fresh process; the cluster is started before the clock
starts. Prints both wall times, their ratio (the goal is 1.8 with 2 workers), and the ratio
the runner's cost model predicts for its largest-first order (the sum of the chunk costs over
the longest worker's share when each task goes to the first free worker). On a machine whose
cores other work shares, the measured ratio stays below the prediction: a second worker only
helps as far as a second core is free.

    python benchmarks/cluster.py [--replicates 8]
"""

from __future__ import annotations

import argparse
import dataclasses
import heapq
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
STUDY = ROOT / "studies" / "reference.toml"
GOAL = 1.8


def child(replicates: int, workers: int, out: str) -> None:
    from dask.distributed import LocalCluster

    from workbench.study.runner import run_study
    from workbench.study.spec import load

    study = dataclasses.replace(load(STUDY), replicates=replicates)
    with LocalCluster(
        n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None
    ) as cluster:
        start = time.perf_counter()
        summary = run_study(study, out, scheduler=cluster.scheduler_address)
        seconds = time.perf_counter() - start
    print(json.dumps({"campaigns": summary.campaigns, "seconds": seconds}))


def measure(replicates: int, workers: int) -> dict:
    with tempfile.TemporaryDirectory() as out:
        cmd = [sys.executable, __file__, "--child", str(workers), "--replicates", str(replicates)]
        done = subprocess.run([*cmd, "--out", out], capture_output=True, text=True, check=True)
    return json.loads(done.stdout.strip().splitlines()[-1])


def predicted(replicates: int, workers: int) -> float:
    """The cost model's speed-up on ``workers`` for the runner's task order: total cost over
    the finishing time when each task goes to the first free worker."""
    from workbench.study import runner
    from workbench.study.cost import chunk_cost
    from workbench.study.grid import chunks
    from workbench.study.spec import load

    study = dataclasses.replace(load(STUDY), replicates=replicates)
    costs = [sum(chunk_cost(study, c) for c in g) for g in runner._groups(study, chunks(study))]
    free = [0.0] * workers
    for cost in costs:
        heapq.heappush(free, heapq.heappop(free) + cost)
    return sum(costs) / max(free)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=8)
    parser.add_argument("--child", type=int, default=None, help=argparse.SUPPRESS)
    parser.add_argument("--out", default=None, help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.replicates, args.child, args.out)
        return
    one, two = measure(args.replicates, 1), measure(args.replicates, 2)
    ratio = one["seconds"] / two["seconds"]
    print(
        f"reference study, replicates 0-{args.replicates - 1}: {one['campaigns']} campaigns "
        f"in 16 chunks"
    )
    print(f"Dask LocalCluster, 1 worker process:  {one['seconds']:.1f} s")
    print(f"Dask LocalCluster, 2 worker processes: {two['seconds']:.1f} s")
    print(
        f"speed-up {ratio:.2f} (goal {GOAL}); the cost model predicts "
        f"{predicted(args.replicates, 2):.2f} for the largest-first order"
    )


if __name__ == "__main__":
    main()
