"""From a study to campaigns: the grid's settings and chunks, and running them. No I/O.

Each cell's world (space, placement, belief) and seeds come from :mod:`.cells`, so replicate
k of two settings differs only by the setting: paired comparisons. The baselines that ignore
the belief (no-belief, random) run once per landscape and replicate, with the streams of the
``exact`` distortion; the grid repeats them across distortions.

A **chunk** is every campaign of one landscape and distortion over a block of consecutive
replicates (the study's ``block``, 8 unless set): the unit of parallel work and of storage, and one
lock-step batch of the engine (:func:`~workbench.engine.batch.run_batch`). Its campaigns share
dimension, budget and design size. The blocks are fixed by the study alone, and a campaign's
trace does not depend on its batch, so results are the same whatever the number of workers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from threadpoolctl import threadpool_limits

from ..engine import strategies as st
from ..engine.batch import run, run_batch
from ..engine.campaign import Campaign, Trace
from ..validation import InputError
from .cells import Cell
from .decay import Schedule
from .spec import Study

__all__ = [
    "Cell",
    "Chunk",
    "Setting",
    "campaign_of",
    "chunks",
    "run_chunk",
    "run_setting",
    "settings",
    "split",
    "streams_of",
]

# The per-evaluation arrays of a trace that a chunk file stacks over its settings
# (``user_points`` is added beside them).
TRACE_ARRAYS = (
    "points",
    "observed",
    "value",
    "failed",
    "best",
    "regret",
    "normalized_regret",
    "weight",
    "threshold",
    "seconds",
)


@dataclass(frozen=True)
class Setting:
    """One strategy setting: what differs between campaigns of the same cell."""

    strategy: str
    decay: Schedule | None = None
    quantile: float = float("nan")
    exploration: float = 0.0
    initial: str = "sobol"
    multiple: int = 1

    @property
    def label(self) -> str:
        parts = [self.strategy]
        if self.decay is not None:
            parts.append(f"decay {self.decay}")
        if st.uses_quantile(self.strategy):
            parts.append(f"quantile {self.quantile:g}")
        if self.exploration:
            parts.append(f"exploration {self.exploration:g}")
        parts.append(f"initial {self.initial}")
        return ", ".join(parts)


def settings(study: Study) -> tuple[list[Setting], list[Setting]]:
    """The belief-guided settings and the baseline settings of a study."""
    guided = [Setting(s, d, q, e, i) for s, d, q, e, i in study.settings()]
    baseline = [
        Setting(
            b,
            initial=study.initial[0],
            multiple=study.random_multiple if st.uses_multiple(b) else 1,
        )
        for b in study.baselines
    ]
    return guided, baseline


def campaign_of(cell: Cell, setting: Setting) -> Campaign:
    """The campaign of ``setting`` in ``cell``."""
    return Campaign(
        strategy=setting.strategy,
        placement=cell.placement,
        space=cell.space,
        belief=cell.belief,
        budget=cell.study.budget,
        design=setting.initial,
        design_size=cell.study.design_size(cell.space.dim),
        decay=setting.decay,
        quantile=setting.quantile,
        exploration=setting.exploration,
        noise_sd=cell.noise_sd,
        multiple=setting.multiple,
    )


def streams_of(cell: Cell, setting: Setting) -> dict[str, np.random.Generator]:
    """Fresh streams of ``setting`` in ``cell``: the cell's, or for the baselines that ignore
    the belief those of the cell's exact-distortion sibling."""
    return cell.streams(exact=not st.uses_belief(setting.strategy))


def run_setting(cell: Cell, setting: Setting) -> Trace:
    """Run the campaign of ``setting`` in ``cell`` alone (a batch of one)."""
    return run(campaign_of(cell, setting), streams_of(cell, setting))


@dataclass(frozen=True)
class Chunk:
    """One unit of work: the settings of one landscape and distortion over a block of
    replicates."""

    landscape: int
    distortion: int
    replicates: tuple[int, ...]
    settings: tuple[Setting, ...]

    @property
    def key(self) -> str:
        first, last = self.replicates[0], self.replicates[-1]
        return f"L{self.landscape:03d}-D{self.distortion:03d}-R{first:04d}-{last:04d}"

    @property
    def campaigns(self) -> int:
        return len(self.replicates) * len(self.settings)


def chunks(study: Study) -> list[Chunk]:
    """Every chunk of the study, in a fixed order."""
    guided, baseline = settings(study)
    blocks = [
        tuple(range(r, min(r + study.block, study.replicates)))
        for r in range(0, study.replicates, study.block)
    ]
    out = []
    for li in range(len(study.landscapes)):
        for di, dist in enumerate(study.distortions):
            # Baselines that ignore the belief run only in the exact distortion's chunk.
            extra = [b for b in baseline if dist.is_exact or st.uses_belief(b.strategy)]
            for block in blocks:
                out.append(Chunk(li, di, block, tuple(guided + extra)))
    return out


def split(chunk: Chunk, arrays: dict[str, np.ndarray]) -> list[tuple[int, dict[str, np.ndarray]]]:
    """The arrays of ``chunk`` (as :func:`run_chunk` returns them) replicate by replicate:
    ``(replicate, arrays)`` with the per-setting arrays stacked over the chunk's settings."""
    return [(r, {k: v[i] for k, v in arrays.items()}) for i, r in enumerate(chunk.replicates)]


class CampaignError(RuntimeError):
    """A campaign raised; the message names its cell and setting."""


def run_chunk(study: Study, chunk: Chunk) -> dict[str, np.ndarray]:
    """Run every campaign of ``chunk`` in one batch. Arrays are stacked over (replicate,
    setting), and each replicate's cell context (minimum, gap, severity, value at the belief's
    mode) over replicate: :func:`split` takes them apart again."""
    # One BLAS thread for the whole chunk, placement searches included: their many tiny
    # L-BFGS-B steps ran 2-50x slower with OpenBLAS's threads waking on every call (measured
    # on the demo's drawn and fitted chunks, 2 cores), and the values do not change.
    with threadpool_limits(limits=1, user_api="blas"):
        return _run_chunk(study, chunk)


def _run_chunk(study: Study, chunk: Chunk) -> dict[str, np.ndarray]:
    cells = [Cell(study, chunk.landscape, chunk.distortion, r) for r in chunk.replicates]
    pairs = [(cell, s) for cell in cells for s in chunk.settings]
    try:
        traces = run_batch(
            [campaign_of(c, s) for c, s in pairs], [streams_of(c, s) for c, s in pairs]
        )
    except InputError:
        raise  # the user's input (a decoy that does not exist, a function failing everywhere)
    except Exception as err:
        # Find the campaign that raised: alone, each does exactly what it does in the batch.
        for cell, setting in pairs:
            try:
                run_setting(cell, setting)
            except Exception as alone:
                raise CampaignError(
                    f"campaign failed at {cell.label}, {setting.label}: {alone}"
                ) from alone
        where = cells[0].label + (f" to {cells[-1].replicate}" if len(cells) > 1 else "")
        raise CampaignError(f"campaigns failed together at {where}: {err}") from err
    m = len(chunk.settings)
    parts = [_replicate_arrays(cell, traces[i * m : (i + 1) * m]) for i, cell in enumerate(cells)]
    return {name: np.stack([p[name] for p in parts]) for name in parts[0]}


def _replicate_arrays(cell: Cell, traces: list[Trace]) -> dict[str, np.ndarray]:
    stack = {name: np.stack([getattr(t, name) for t in traces]) for name in TRACE_ARRAYS}
    stack["user_points"] = np.stack([t.user_points(cell.space) for t in traces])
    stack["mode_value"] = np.array([cell.mode_value])
    stack["minimum"] = np.array([cell.placement.minimum])
    optimum = np.asarray(cell.placement.minimisers[:1], dtype=float)
    stack["optimum_cube"] = optimum[0]
    stack["optimum"] = cell.space.to_user_array(optimum)[0]
    stack["gap"] = np.array([cell.placement.gap])
    stack["severity_distance"] = np.array([cell.severity.distance])
    stack["severity_mass"] = np.array([cell.severity.mass_within])
    return stack
