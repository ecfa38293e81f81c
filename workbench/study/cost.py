"""Cost of a study: counts of cells, campaigns and evaluations; the time comes from the plan's
pilot (:mod:`workbench.plan.estimate`), the one estimate ``check`` and ``plan`` print."""

from __future__ import annotations

from dataclasses import dataclass

from ..engine.strategies import uses_model
from ..validation import InputError, raw
from .spec import Study

__all__ = [
    "MAX_GRID_BYTES",
    "Estimate",
    "cell_counts",
    "check_grid_size",
    "chunk_cost",
    "duration",
    "grid_bytes",
    "size",
]

# A step's work that does not grow with the dimension, in units of one dimension's (chunk_cost).
_PER_STEP = 20
# The grid file's per-evaluation series (gridfile._SERIES): seven 8-byte ones and 'failed' (1).
_GRID_SERIES_BYTES = 7 * 8 + 1
# The grid file's per-cell and per-placement variables, and a margin for its header.
_GRID_CELL_VALUES = 3
_GRID_PLACEMENT_VALUES = 2
_GRID_HEADER_BYTES = 64 * 1024
# `decide`, `report`, `audit` and `monitor` load grid.nc whole into memory (analysis.open_grid):
# a study whose grid would be larger is refused before anything runs.
MAX_GRID_BYTES = 4 * 10**9


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


def grid_bytes(study: Study) -> int:
    """Bytes of grid.nc: its dense arrays as :mod:`workbench.study.gridfile` lays them out."""
    from .grid import settings

    guided, baseline = settings(study)
    coords = study.space.dim if study.space is not None else max(e.dim for e in study.landscapes)
    per_campaign = study.budget * (_GRID_SERIES_BYTES + 2 * coords * 8)
    n_l, n_d, n_r = len(study.landscapes), len(study.distortions), study.replicates
    positions = 0
    if guided:
        positions = (
            len({s.strategy for s in guided})
            * len(study.decay_levels)
            * len(study.quantile_levels)
            * len(study.exploration_levels)
            * len(study.initial)
        )
    positions = (positions + len(baseline)) * n_l * n_d * n_r
    cells = (_GRID_CELL_VALUES * n_d + _GRID_PLACEMENT_VALUES) * n_l * n_r * 8
    return int(positions * per_campaign + cells + _GRID_HEADER_BYTES)


def check_grid_size(study: Study) -> int:
    """The grid file's estimated bytes (:func:`grid_bytes`); above :data:`MAX_GRID_BYTES` an
    :class:`InputError` naming the replicates that would fit (the grid grows with them), or the
    budget when not even one replicate fits."""
    n = grid_bytes(study)
    if n <= MAX_GRID_BYTES:
        return n
    limit = (
        f"a grid.nc of at most {size(MAX_GRID_BYTES)} (the limit on a grid, which decide and "
        "report load into memory)"
    )
    per_replicate = (n - _GRID_HEADER_BYTES) / study.replicates
    fit = int((MAX_GRID_BYTES - _GRID_HEADER_BYTES) // per_replicate)
    if fit >= 1:
        got = raw(f"{study.replicates:,}, a grid of about {size(n)}")
        raise InputError("replicates", f"at most {fit:,} for {limit}", got, study.path)
    got = raw(f"{study.budget:,}, a grid of about {size(n)} at one replicate")
    raise InputError("budget", f"smaller for {limit}", got, study.path)
