"""The plan's pilot: a few replicates of every cell, run for real through
:func:`workbench.study.runner.execute`, timed and kept for the sample sizes.
"""

from __future__ import annotations

import io
import time
from dataclasses import dataclass, replace

import numpy as np

from ..analysis.metrics import evaluations_to_target
from ..engine.strategies import uses_belief
from ..study.grid import TRACE_ARRAYS, Chunk, Setting, chunks, settings, split
from ..study.spec import Study
from .options import PlanOptions, parallel_processes

# The per-setting arrays of a chunk (the rest are one value per chunk), as run_chunk stacks them.
_PER_CAMPAIGN = (*TRACE_ARRAYS, "user_points")


# --------------------------------------------------------------------------- the pilot


@dataclass(frozen=True)
class PilotDesign:
    """The pilot's subset: every landscape × every distortion × replicates 0 … k − 1, at the
    first, middle and last belief-guided settings (and the first of any strategy they miss)
    plus every baseline, so that every strategy of the study is timed."""

    replicates: int
    guided: tuple[Setting, ...]
    baselines: tuple[Setting, ...]

    @property
    def settings(self) -> tuple[Setting, ...]:
        return self.guided + self.baselines

    def describe(self, study: Study) -> str:
        n_l, n_d = len(study.landscapes), len(study.distortions)
        guided = "; ".join(s.label for s in self.guided) or "none"
        base = ", ".join(s.strategy for s in self.baselines) or "none"
        return (
            f"every landscape × every distortion ({n_l} × {n_d} cells), replicates 0 to "
            f"{self.replicates - 1} ({self.replicates} per cell), at the first, middle and last "
            f"belief-guided settings of the study ({guided}) and every baseline ({base})"
        )


def pilot_design(study: Study, replicates: int) -> PilotDesign:
    """The pilot's settings (see :class:`PilotDesign`)."""
    guided, baseline = settings(study)
    picks = sorted({0, len(guided) // 2, len(guided) - 1}) if guided else []
    chosen = [guided[i] for i in picks]
    for s in guided:
        if all(c.strategy != s.strategy for c in chosen):
            chosen.append(s)
    return PilotDesign(replicates, tuple(chosen), tuple(baseline))


def pilot_chunks(study: Study, design: PilotDesign) -> tuple[Study, list[Chunk]]:
    """The pilot as a study with fewer replicates, and its chunks with the pilot's settings
    only. Seeds are the study's own: the pilot's campaigns are the study's first replicates."""
    pilot = replace(study, replicates=design.replicates)
    keep = {s.label for s in design.settings}
    out = []
    for c in chunks(pilot):
        picked = tuple(s for s in c.settings if s.label in keep)
        if picked:
            out.append(Chunk(c.landscape, c.distortion, c.replicates, picked))
    return pilot, out


@dataclass(frozen=True, eq=False)
class Pilot:
    """What the pilot measured, over (setting, landscape, distortion, replicate).

    ``evaluations`` to target (censored at the budget) and ``reached``: the belief-free
    baselines run in the exact distortion only and are repeated across distortions, as in the
    grid. ``seconds`` per campaign (NaN where a campaign did not run); ``overhead`` per replicate
    of a chunk (its seconds beyond its campaigns', shared out over its replicates) over
    (landscape, distortion, replicate); ``wall`` the
    pilot's wall time on ``jobs`` processes; ``campaign_bytes`` per campaign in a chunk file,
    per landscape, and ``chunk_bytes`` the rest of a chunk file.
    """

    design: PilotDesign
    evaluations: np.ndarray
    reached: np.ndarray
    seconds: np.ndarray
    overhead: np.ndarray
    wall: float
    jobs: int
    campaign_bytes: np.ndarray
    chunk_bytes: float

    @property
    def campaigns(self) -> int:
        return int(np.isfinite(self.seconds).sum())

    @property
    def cpu(self) -> float:
        return float(np.nansum(self.seconds) + np.nansum(self.overhead))


def run_pilot(study: Study, options: PlanOptions) -> Pilot:
    """Run the pilot for real (through the runner's process pool) and time it."""
    from ..study.runner import execute

    options.check(study)
    design = pilot_design(study, options.pilot_replicates)
    pilot, todo = pilot_chunks(study, design)
    jobs = parallel_processes(options.jobs)
    start = time.perf_counter()
    results = [(c, arrays, seconds) for c, arrays, seconds in execute(pilot, todo, jobs=jobs)]
    wall = time.perf_counter() - start
    return _collect(study, design, results, wall, jobs)


def _collect(study: Study, design: PilotDesign, results, wall: float, jobs: int) -> Pilot:
    """The pilot's arrays from the runner's (chunk, arrays, seconds) results."""
    labels = [s.label for s in design.settings]
    shape = (len(labels), len(study.landscapes), len(study.distortions), design.replicates)
    ett = np.full(shape, np.nan)
    reached = np.zeros(shape, bool)
    secs = np.full(shape, np.nan)
    overhead = np.full(shape[1:], np.nan)
    sizes: dict[int, list[float]] = {}
    fixed = []
    for chunk, arrays, seconds in results:
        ran = 0.0
        for r, part in split(chunk, arrays):
            at = (chunk.landscape, chunk.distortion, r)
            t, hit = evaluations_to_target(part["normalized_regret"], study.target)
            spent = part["seconds"].sum(axis=-1)
            for k, s in enumerate(chunk.settings):
                i = labels.index(s.label)
                ett[(i, *at)], reached[(i, *at)], secs[(i, *at)] = t[k], hit[k], spent[k]
            ran += float(spent.sum())
        # The chunk's seconds beyond its campaigns', shared out over its replicates.
        overhead[chunk.landscape, chunk.distortion, list(chunk.replicates)] = max(
            seconds - ran, 0.0
        ) / len(chunk.replicates)
        total, payload = _npz_bytes(arrays)
        sizes.setdefault(chunk.landscape, []).append(payload / chunk.campaigns)
        fixed.append(total - payload)
    exact = next(i for i, d in enumerate(study.distortions) if d.is_exact)
    for i, s in enumerate(design.settings):
        if not uses_belief(s.strategy):
            ett[i] = ett[i, :, exact : exact + 1]
            reached[i] = reached[i, :, exact : exact + 1]
    per_landscape = np.array(
        [np.mean(sizes.get(li, [np.nan])) for li in range(len(study.landscapes))]
    )
    return Pilot(
        design, ett, reached, secs, overhead, wall, jobs, per_landscape, float(np.mean(fixed))
    )


def _npz_bytes(arrays: dict) -> tuple[int, int]:
    """Bytes of the chunk file the runner would write (np.savez, in memory) and of its
    per-campaign arrays."""
    buffer = io.BytesIO()
    np.savez(buffer, **arrays)
    payload = sum(arrays[k].nbytes for k in _PER_CAMPAIGN if k in arrays)
    return buffer.getbuffer().nbytes, payload
