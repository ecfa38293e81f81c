"""From the pilot to numbers: the replicates a study needs and why, and its compute and disk."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from ..engine.strategies import reference
from ..seeding import derive
from ..study.cost import Estimate
from ..study.grid import chunks, settings
from ..study.spec import Study
from . import sample_size
from .options import PlanOptions, parallel_processes
from .pilot import Pilot, PilotDesign


@dataclass(frozen=True)
class Replicates:
    """The replicate count and its two reasons.

    (a) recovery interval: ``p`` planned for (``worst_case``: ½ because the pilot cannot tell),
    ``normal`` = z² p(1 − p)/h² before rounding, ``campaigns`` after the Wilson check,
    ``wilson`` the Wilson half-width there, ``per_replicate`` campaigns each replicate adds to
    an interval (the landscapes), ``interval`` the replicates; (b) ``search`` of the power
    (None when the pilot has no two settings to compare), ``comparisons`` it pooled.
    """

    p: float
    worst_case: bool
    z: float
    normal: float
    normal_campaigns: int
    campaigns: int
    wilson: float
    per_replicate: int
    interval: int
    search: sample_size.PowerSearch | None
    comparisons: tuple[str, ...]
    needed: int
    chosen: int
    cap: int

    @property
    def power(self) -> int | None:
        return None if self.search is None else self.search.replicates

    @property
    def capped(self) -> bool:
        return self.needed > self.cap

    @property
    def driver(self) -> str:
        if self.search is None or self.interval >= self.search.replicates:
            return "the recovery interval"
        return "the power"


def _comparisons(design: PilotDesign) -> list[tuple[int, int, str]]:
    """Pairs of pilot settings to difference: every two guided ones, and each against
    no-belief when the study has it."""
    guided = list(range(len(design.guided)))
    out = [
        (i, j, f"{design.guided[i].label} vs {design.guided[j].label}")
        for a, i in enumerate(guided)
        for j in guided[a + 1 :]
    ]
    labels = [s.strategy for s in design.settings]
    if reference() in labels:
        nb = labels.index(reference())
        out += [(i, nb, f"{design.guided[i].label} vs {reference()}") for i in guided]
    return out


def replicates_needed(study: Study, pilot: Pilot, options: PlanOptions) -> Replicates:
    """The replicates for (a) the recovery interval and (b) the power, the larger of the two,
    and that capped at ``options.cap``."""
    landscapes = len(study.landscapes)
    # (a) recovery: one interval per setting and distortion, pooled as the report pools it.
    k = pilot.reached.sum(axis=(1, 3))
    n = np.isfinite(pilot.evaluations).sum(axis=(1, 3))
    p, worst = sample_size.recovery_guess(k.ravel(), n.ravel(), options.confidence)
    normal_n, campaigns = sample_size.campaigns_for_interval(
        p, options.half_width, options.confidence
    )
    interval = math.ceil(campaigns / landscapes)
    wilson = float(sample_size.wilson_half_width(p, interval * landscapes, options.confidence))
    # (b) power: paired differences between pilot settings, per landscape.
    pairs = _comparisons(pilot.design)
    search = None
    if pairs:
        diffs = np.stack([pilot.evaluations[i] - pilot.evaluations[j] for i, j, _ in pairs])
        resid = sample_size.centred(diffs, axis=-1)
        strata = [resid[:, li].ravel() for li in range(landscapes)]
        search = sample_size.replicates_for_power(
            strata,
            options.difference,
            power=options.power,
            alpha=options.alpha,
            resamples=options.resamples,
            seed=derive(study.seed, "plan"),
        )
    needed = max(interval, search.replicates if search is not None else 1)
    return Replicates(
        p=p,
        worst_case=worst,
        z=sample_size.z_value(options.confidence),
        normal=sample_size.interval_campaigns(p, options.half_width, options.confidence),
        normal_campaigns=normal_n,
        campaigns=campaigns,
        wilson=wilson,
        per_replicate=landscapes,
        interval=interval,
        search=search,
        comparisons=tuple(label for _, _, label in pairs),
        needed=needed,
        chosen=min(needed, options.cap),
        cap=options.cap,
    )


# --------------------------------------------------------------------------- compute

# The grid file's per-evaluation series (gridfile._SERIES): seven 8-byte ones and 'failed' (1).
_GRID_SERIES_BYTES = 7 * 8 + 1
# The grid file's per-cell and per-placement variables, and a margin for its header.
_GRID_CELL_VALUES = 3
_GRID_PLACEMENT_VALUES = 2
_GRID_HEADER_BYTES = 64 * 1024


@dataclass(frozen=True)
class Compute:
    """The study's cost at a replicate count: counts and seconds per campaign (an
    :class:`~workbench.estimate.Estimate`), chunks, the longest chunk, the start-up time the
    pilot measured, wall time here (``local``) and on ``workers`` Dask workers, and bytes."""

    estimate: Estimate
    replicates: int
    chunks: int
    longest: float
    startup: float
    local: float
    workers: int
    cluster: float
    chunk_bytes: int
    grid_bytes: int

    @property
    def cpu(self) -> float:
        return self.estimate.campaigns * self.estimate.per_campaign

    @property
    def disk_bytes(self) -> int:
        return self.chunk_bytes + self.grid_bytes


def _mean_seconds(pilot: Pilot) -> dict:
    """Seconds per campaign from the pilot, by (strategy, landscape, distortion), with
    fall-backs by (strategy, landscape) and strategy."""
    names = [s.strategy for s in pilot.design.settings]
    out: dict = {}
    for strategy in dict.fromkeys(names):
        rows = pilot.seconds[[i for i, n in enumerate(names) if n == strategy]]
        with np.errstate(invalid="ignore"):
            out[strategy] = float(np.nanmean(rows))
            for li in range(rows.shape[1]):
                by_l = rows[:, li]
                if np.isfinite(by_l).any():
                    out[strategy, li] = float(np.nanmean(by_l))
                for di in range(rows.shape[2]):
                    cell = by_l[:, di]
                    if np.isfinite(cell).any():
                        out[strategy, li, di] = float(np.nanmean(cell))
    return out


def _lookup(table: dict, strategy: str, li: int, di: int) -> float:
    for key in ((strategy, li, di), (strategy, li), strategy):
        if key in table:
            return table[key]
    return float(np.nanmean([v for k, v in table.items() if isinstance(k, str)]))


def compute_estimate(
    study: Study,
    pilot: Pilot,
    replicates: int,
    *,
    jobs: int | None = None,
    workers: int = 4,
    cores: int | None = None,
) -> Compute:
    """The cost of ``study`` at ``replicates`` replicates, from the pilot's timings.

    Each chunk takes, for each of its replicates, the cell's overhead plus, for each of its
    settings, the pilot's mean seconds per campaign of that strategy in that landscape and
    distortion. Wall time is
    max(Σ chunk seconds / processes, longest chunk) plus the pilot's start-up time (its wall
    time beyond that same bound). Dask workers are taken as fast as one core here, without
    the start-up. Disk: the chunk files as the pilot's arrays measured, plus grid.nc as its
    dense arrays (repeats and unrun combinations included): values × 8 bytes.
    """
    full = replace(study, replicates=replicates)
    every = chunks(full)
    guided, baseline = settings(full)
    per = _mean_seconds(pilot)
    with np.errstate(invalid="ignore"):
        overhead = np.nan_to_num(np.nanmean(pilot.overhead, axis=-1), nan=0.0)
    chunk_seconds = np.array(
        [
            len(c.replicates)
            * (
                overhead[c.landscape, c.distortion]
                + sum(_lookup(per, s.strategy, c.landscape, c.distortion) for s in c.settings)
            )
            for c in every
        ]
    )
    campaigns = sum(c.campaigns for c in every)
    cpu = float(chunk_seconds.sum())
    longest = float(chunk_seconds.max()) if every else 0.0
    parallel = parallel_processes(jobs, cores)
    # The pilot's chunks: its replicates' seconds summed block by block, as chunks() cuts them.
    per_replicate = np.nansum(pilot.seconds, axis=0) + np.nan_to_num(pilot.overhead)
    pilot_longest = max(
        float(per_replicate[..., r : r + study.block].sum(axis=-1).max())
        for r in range(0, per_replicate.shape[-1], study.block)
    )
    pilot_bound = max(pilot.cpu / pilot.jobs, pilot_longest)
    startup = max(pilot.wall - pilot_bound, 0.0)
    local = max(cpu / parallel, longest) + startup
    cluster = max(cpu / workers, longest)
    estimate = Estimate(
        cells=len(study.landscapes) * len(study.distortions) * (len(guided) + len(baseline)),
        campaigns=campaigns,
        evaluations=campaigns * study.budget,
        probe_campaigns=pilot.campaigns,
        per_campaign=cpu / max(campaigns, 1),
        jobs=parallel,
    )
    chunk_bytes = sum(
        pilot.chunk_bytes + c.campaigns * float(pilot.campaign_bytes[c.landscape]) for c in every
    )
    return Compute(
        estimate=estimate,
        replicates=replicates,
        chunks=len(every),
        longest=longest,
        startup=startup,
        local=local,
        workers=workers,
        cluster=cluster,
        chunk_bytes=int(chunk_bytes),
        grid_bytes=grid_bytes(full),
    )


def grid_bytes(study: Study) -> int:
    """Bytes of grid.nc: its dense arrays as :mod:`workbench.study.gridfile` lays them out."""
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
