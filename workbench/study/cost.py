"""Cost of a study: counts of cells, campaigns and evaluations; the time comes from the plan's
pilot (:mod:`workbench.plan.estimate`), the one estimate ``check`` and ``plan`` print."""

from __future__ import annotations

from dataclasses import dataclass

from ..engine.strategies import uses_model
from .spec import Study

__all__ = ["Estimate", "cell_counts", "chunk_cost", "duration", "size"]

# A step's work that does not grow with the dimension, in units of one dimension's (chunk_cost).
_PER_STEP = 20


@dataclass(frozen=True)
class Estimate:
    """A study's counts and its time at ``per_campaign`` seconds per campaign (the pilot's
    measurement, :func:`workbench.plan.compute_estimate`, the one estimate that ``check`` and
    ``plan`` print). ``cells`` = ``guided_cells`` + ``baseline_cells``, and
    ``campaigns`` = ``cells`` × replicates."""

    cells: int
    campaigns: int
    evaluations: int
    probe_campaigns: int
    per_campaign: float
    jobs: int
    guided_cells: int = 0
    baseline_cells: int = 0

    @property
    def seconds(self) -> float:
        """CPU seconds spread over the workers: campaigns × seconds per campaign / workers."""
        return self.campaigns * self.per_campaign / self.jobs

    def count_lines(self, replicates: int) -> list[str]:
        """The counts as ``check`` prints them, each adding up to the next."""
        return [
            f"grid cells: {self.cells} ({self.guided_cells} belief-guided: landscapes x "
            f"distortions x settings; {self.baseline_cells} baseline: a baseline that ignores "
            "the belief runs in the exact distortion only)",
            f"campaigns: {self.campaigns} ({self.cells} cells x {replicates} replicates)",
            f"evaluations in total: {self.evaluations} ({self.campaigns} campaigns x "
            f"{self.evaluations // max(self.campaigns, 1)} evaluations)",
        ]


def cell_counts(study: Study) -> tuple[int, int]:
    """(belief-guided cells, baseline cells) the study runs: a cell is a landscape, a
    distortion and a setting; baselines that ignore the belief run in the exact distortion
    only (:func:`workbench.study.grid.chunks`)."""
    from .grid import chunks, settings

    guided, _ = settings(study)
    labels = {s.label for s in guided}
    cells = {
        (c.landscape, c.distortion, s.label, s.label in labels)
        for c in chunks(study)
        for s in c.settings
    }
    n_guided = sum(1 for *_, g in cells if g)
    return n_guided, len(cells) - n_guided


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
