"""Cost of a study: counts of cells, campaigns and evaluations, and a wall-time estimate from a
short timing probe run for real on this machine."""

from __future__ import annotations

import os
import time
from dataclasses import dataclass

from ..engine.strategies import uses_model
from .cells import Cell
from .spec import Study

__all__ = ["Estimate", "chunk_cost", "duration", "probe", "size"]

# A step's work that does not grow with the dimension, in units of one dimension's (chunk_cost).
_PER_STEP = 20


@dataclass(frozen=True)
class Estimate:
    cells: int
    campaigns: int
    evaluations: int
    probe_campaigns: int
    per_campaign: float
    jobs: int

    @property
    def seconds(self) -> float:
        """Estimated wall time: campaigns × seconds per campaign / workers."""
        return self.campaigns * self.per_campaign / self.jobs


def probe(study: Study, jobs: int | None = None) -> Estimate:
    """Time the study's first chunk for real (one lock-step batch: every setting of the first
    landscape and distortion over the first block of replicates) and take its seconds per
    campaign; the grid runs every chunk the same way."""
    from threadpoolctl import threadpool_limits

    from .grid import chunks, run_chunk, settings

    with threadpool_limits(limits=1, user_api="blas"):  # as the runner's workers
        return _probe(study, jobs, chunks, run_chunk, settings)


def _probe(study, jobs, chunks, run_chunk, settings) -> Estimate:
    every = chunks(study)
    guided, baseline = settings(study)
    campaigns = sum(c.campaigns for c in every)
    first = every[0]
    for r in first.replicates:
        # Placement work is shared by a chunk's distortions, so keep it out of the timing.
        cell = Cell(study, first.landscape, first.distortion, r)
        cell.placement  # noqa: B018
        cell.severity  # noqa: B018
    start = time.perf_counter()
    run_chunk(study, first)
    per = (time.perf_counter() - start) / max(first.campaigns, 1)
    n_cells = len(study.landscapes) * len(study.distortions) * (len(guided) + len(baseline))
    return Estimate(
        cells=n_cells,
        campaigns=campaigns,
        evaluations=campaigns * study.budget,
        probe_campaigns=first.campaigns,
        per_campaign=per,
        jobs=jobs or os.cpu_count() or 1,
    )


def chunk_cost(study: Study, chunk) -> float:
    """A chunk's compute relative to the others' (only ratios mean anything), by which the
    runner hands out the largest first.

    A model-based campaign refits and searches its GP at every evaluation; the step with n
    evaluations in d dimensions costs about n²·(d + 20): the parts that grow with d (distances
    and gradients over d length scales) are small beside those that do not (the acquisition
    over a few hundred candidates, the lock-step bookkeeping): on the reference study's
    one-replicate chunks the 6-D landscape took about 1.15 times the 2-D one (3 Dec 2026). A
    campaign of budget B then costs Σ n²(d + 20) ≈ B³(d + 20)/3; one without a model B·(d + 20).
    A chunk costs its replicates times the sum over its settings.
    """
    budget, work = study.budget, study.landscapes[chunk.landscape].dim + _PER_STEP
    per = [
        budget**3 * work / 3 if uses_model(s.strategy) else budget * work for s in chunk.settings
    ]
    return len(chunk.replicates) * float(sum(per))


def duration(seconds: float) -> str:
    """Seconds in words: s below 90 s, min below 90 min, else h."""
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.1f} min"
    return f"{seconds / 3600:.1f} h"


def size(n: float) -> str:
    """Bytes in words (powers of 1000)."""
    for unit, scale in (("GB", 1e9), ("MB", 1e6), ("kB", 1e3)):
        if n >= scale:
            return f"{n / scale:.1f} {unit}"
    return f"{n:.0f} B"
