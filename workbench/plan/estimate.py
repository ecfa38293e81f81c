"""From the pilot to numbers: the replicates a study needs and why, and its compute and disk."""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, replace

import numpy as np

from ..analysis.edges import Edge, study_edges
from ..analysis.edges import edge_lines as _edge_lines
from ..engine.strategies import reference, uses_quantile
from ..seeding import derive
from ..study.cost import Estimate, cell_counts, duration, grid_bytes
from ..study.grid import chunks, settings
from ..study.spec import Study
from . import sample_size
from .options import PlanOptions, parallel_processes
from .pilot import Pilot, PilotDesign, run_pilot


@dataclass(frozen=True)
class Replicates:
    """The replicate count and its two reasons.

    (a) recovery interval: ``p`` planned for (``worst_case``: ½ because the pilot cannot tell),
    ``normal`` = z² p(1 − p)/h² before rounding, ``campaigns`` after the Wilson check,
    ``wilson`` the Wilson half-width there, ``per_replicate`` campaigns each replicate adds to
    an interval (the landscapes), ``interval`` the replicates; (b) ``search`` of the power
    (None when the pilot has no two settings to compare), ``comparisons`` it pooled, at
    ``difference`` evaluations (``difference_words``: where it comes from).
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
    difference: float = 5.0
    difference_words: str = "given"
    recovery_words: str = ""

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
    deciding = _deciding_cell(study, pilot, k, n, options.confidence)
    normal_n, campaigns = sample_size.campaigns_for_interval(
        p, options.half_width, options.confidence
    )
    interval = math.ceil(campaigns / landscapes)
    wilson = float(sample_size.wilson_half_width(p, interval * landscapes, options.confidence))
    # (b) power: paired differences between pilot settings, per landscape.
    pairs = _comparisons(pilot.design)
    search = None
    if options.difference is not None:
        difference, difference_words = options.difference, "given by --difference"
    else:
        difference, difference_words = pilot_difference(study, pilot)
    if pairs:
        diffs = np.stack([pilot.evaluations[i] - pilot.evaluations[j] for i, j, _ in pairs])
        resid = sample_size.centred(diffs, axis=-1)
        strata = [resid[:, li].ravel() for li in range(landscapes)]
        search = sample_size.replicates_for_power(
            strata,
            difference,
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
        difference=difference,
        difference_words=difference_words,
        recovery_words=deciding,
    )


def _deciding_cell(study: Study, pilot: Pilot, k: np.ndarray, n: np.ndarray, confidence: float):
    """The pilot cell (setting × distortion) whose recovery interval decides p: the one whose
    Wilson interval (Wilson 1927) reaches nearest 0.5, in words with its successes."""
    from ..analysis import wilson_interval

    keep = n > 0
    if not keep.any():
        return "the pilot has no campaigns to estimate recovery from"
    low, high = wilson_interval(np.where(keep, k, 0), np.where(keep, n, 1), confidence)
    toward = np.where(low > 0.5, low, np.where(high < 0.5, high, 0.5))
    gap = np.where(keep, np.abs(toward - 0.5), np.inf)
    i, d = np.unravel_index(int(np.argmin(gap)), gap.shape)
    setting = pilot.design.settings[i].label
    return (
        f"pilot recovery {int(k[i, d])}/{int(n[i, d])} for {setting} at distortion "
        f"{study.distortions[d].name}, Wilson {confidence:.0%} interval "
        f"{float(low[i, d]):.2f} to {float(high[i, d]):.2f}, whose end toward 0.5 is "
        f"{float(toward[i, d]):.3g}"
    )


def _distortion_weights(study: Study) -> np.ndarray:
    """The study's decision weights over its distortions, summing to 1 (none: equal)."""
    given = study.decision.weights
    w = np.array([float(given.get(d.name, 0.0)) for d in study.distortions])
    if not given or w.sum() <= 0:
        w = np.ones(len(study.distortions))
    return w / w.sum()


def pilot_means(study: Study, pilot: Pilot) -> np.ndarray:
    """Each pilot belief-guided setting's mean evaluations to target (censored at the budget)
    over landscapes and replicates, weighted over distortions by the study's decision weights:
    the expected rule's score on the pilot."""
    ett = pilot.evaluations[: len(pilot.design.guided)]
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        by_distortion = np.nanmean(ett, axis=(1, 3))
    return by_distortion @ _distortion_weights(study)


def pilot_difference(study: Study, pilot: Pilot) -> tuple[float, str]:
    """The difference the power is planned for, from the pilot: the gap between the pilot's
    two best belief-guided settings (:func:`pilot_means`), the smallest difference between
    the top settings that would change the decision, at least 1 evaluation (the step of
    evaluations to target) and at most budget − 1. Returns it and its words."""
    means = pilot_means(study, pilot)
    finite = np.sort(means[np.isfinite(means)])
    high = study.budget - 1
    if finite.size < 2:
        return float(min(5.0, high)), "5 evaluations: the pilot has no two settings to compare"
    gap = float(finite[1] - finite[0])
    chosen = float(min(max(gap, 1.0), high))
    order = np.argsort(means)
    best, second = (pilot.design.guided[i].label for i in order[:2])
    floor = " (raised to 1, the step of evaluations to target)" if gap < 1.0 else ""
    return chosen, (
        f"the gap between the pilot's two best settings, {best} ({finite[0]:.2f}) and {second} "
        f"({finite[1]:.2f}), in mean evaluations to target under the study's distortion "
        f"weights: {gap:.2f}{floor}; a smaller true difference could change the decision"
    )


def pilot_edges(study: Study, pilot: Pilot) -> tuple[Edge, ...]:
    """The edge of what the study covers, from its pilot: the pilot's best belief-guided
    setting (:func:`~workbench.plan.estimate.pilot_means`) at the lowest or highest level
    of a factor (:func:`workbench.analysis.study_edges`, the report's own rule)."""
    means = pilot_means(study, pilot)
    if not np.isfinite(means).any():
        return ()
    guided, _ = settings(study)

    def factors(s) -> dict:
        return {
            "strategy": s.strategy,
            "decay": str(s.decay),
            "quantile": s.quantile if uses_quantile(s.strategy) else None,
            "exploration": s.exploration,
        }

    best = pilot.design.guided[int(np.nanargmin(means))]
    return study_edges([factors(s) for s in guided], factors(best))


# --------------------------------------------------------------------------- compute

# Resamples of the pilot's replicates behind the time estimate's range, and its level.
TIME_RESAMPLES = 200
TIME_LEVEL = 0.9


@dataclass(frozen=True)
class Compute:
    """The study's cost at a replicate count: counts and seconds per campaign (an
    :class:`~workbench.study.cost.Estimate`), chunks, the longest chunk, the start-up time the
    pilot measured, wall time here (``local``, with ``local_interval``: the
    :data:`TIME_LEVEL` range of the same estimate over the pilot's cells resampled) and
    on ``workers`` Dask workers, and bytes."""

    def time_words(self) -> str:
        """Wall time here with its range, as ``check`` and ``plan`` both print it."""
        lo, hi = self.local_interval
        return (
            f"about {duration(self.local)} ({duration(lo)} to {duration(hi)}, "
            f"{TIME_LEVEL:.0%} range over the pilot's cells resampled) on "
            f"{self.estimate.jobs} process(es)"
        )

    estimate: Estimate
    replicates: int
    chunks: int
    longest: float
    startup: float
    local: float
    local_interval: tuple[float, float]
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


def _mean_seconds(names: list[str], seconds: np.ndarray) -> dict:
    """Seconds per campaign from the pilot's ``seconds`` (setting, landscape, distortion,
    replicate), by (strategy, landscape, distortion), with fall-backs by (strategy, landscape)
    and strategy; ``names`` are the settings' strategies."""
    out: dict = {}
    for strategy in dict.fromkeys(names):
        rows = seconds[[i for i, n in enumerate(names) if n == strategy]]
        with np.errstate(invalid="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)  # a cell no resample kept
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


def _chunk_seconds(
    every, names: list[str], seconds: np.ndarray, overhead: np.ndarray, fallback=None
):
    """Each chunk's seconds: per replicate, its cell's overhead plus the pilot's mean seconds
    per campaign of each of its settings' strategies there (``fallback``: a table of
    :func:`_mean_seconds` for what ``seconds`` leaves NaN)."""
    per = {**(fallback or {})}
    per.update((k, v) for k, v in _mean_seconds(names, seconds).items() if np.isfinite(v))
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        cell = np.nan_to_num(np.nanmean(overhead, axis=-1), nan=0.0)
    return np.array(
        [
            len(c.replicates)
            * (
                cell[c.landscape, c.distortion]
                + sum(_lookup(per, s.strategy, c.landscape, c.distortion) for s in c.settings)
            )
            for c in every
        ]
    )


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
    names = [s.strategy for s in pilot.design.settings]
    chunk_seconds = _chunk_seconds(every, names, pilot.seconds, pilot.overhead)
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
    # Uncertainty: the same estimate from the pilot's cells resampled with replacement (its
    # distortions within each landscape, and its replicates): a chunk's campaigns share one
    # batch's time, so the replicates alone hardly vary; the cells do.
    rng = np.random.default_rng(derive(study.seed, "plan-time"))
    n_d, k = pilot.seconds.shape[-2:]
    table = _mean_seconds(names, pilot.seconds)
    again = []
    for _ in range(TIME_RESAMPLES):
        d, r = rng.integers(0, n_d, size=n_d), rng.integers(0, k, size=k)
        secs = _chunk_seconds(
            every,
            names,
            pilot.seconds[..., d, :][..., r],
            pilot.overhead[..., d, :][..., r],
            fallback=table,
        )
        again.append(max(float(secs.sum()) / parallel, float(secs.max())) + startup)
    alpha = (1 - TIME_LEVEL) / 2
    low, high = (float(v) for v in np.quantile(again, [alpha, 1 - alpha]))
    guided_cells, baseline_cells = cell_counts(study)
    estimate = Estimate(
        cells=guided_cells + baseline_cells,
        campaigns=campaigns,
        evaluations=campaigns * study.budget,
        probe_campaigns=pilot.campaigns,
        per_campaign=cpu / max(campaigns, 1),
        jobs=parallel,
        guided_cells=guided_cells,
        baseline_cells=baseline_cells,
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
        local_interval=(min(low, local), max(high, local)),
        workers=workers,
        cluster=cluster,
        chunk_bytes=int(chunk_bytes),
        grid_bytes=grid_bytes(full),
    )


def check_lines(study: Study, jobs: int | None = None) -> list[str]:
    """What ``check`` prints of a study's cost: its counts, and the wall time from the plan's
    own pilot (default options) through :func:`compute_estimate`, so that ``check`` and
    ``plan`` agree. A smaller pilot (2 replicates, so batches a quarter of the study's) put the
    demo at 1.9 min against a measured 67 to 73 s: a batch's cost per campaign falls as it
    grows, so the pilot's replicates matter."""
    pilot = run_pilot(study, PlanOptions(jobs=jobs))
    c = compute_estimate(study, pilot, study.replicates, jobs=jobs)
    return [
        *c.estimate.count_lines(study.replicates),
        f"estimated wall time: {c.time_words()} (pilot: {pilot.campaigns} campaigns, "
        f"{c.estimate.per_campaign:.3f} s each on average; `workbench plan` runs the same pilot)",
    ]


def edge_lines(plan) -> list[str]:
    """The pilot's best setting at the edge of the levels studied (``plan.edges``), as the
    command line prints it."""
    return [
        line.replace("edge of the study:", "edge of the study (pilot's best):", 1)
        for line in _edge_lines(plan.edges, indent="")
    ]
