"""From a study to campaigns: the grid's settings and chunks, and running them. No I/O.

Each cell's world (space, placement, belief) and seeds come from :mod:`.cells`, so replicate
k of two settings differs only by the setting: paired comparisons. The baselines that ignore
the belief (no-belief, random) run once per landscape and replicate, with the streams of the
``exact`` distortion; the grid repeats them across distortions.

A **chunk** is every campaign of one (landscape, distortion, replicate): the unit of parallel
work and of storage, and one lock-step batch of the engine (:func:`~workbench.engine.batch.
run_batch`). Its campaigns share dimension, budget and design size, and a campaign's trace does
not depend on its batch, so results are the same whatever the number of workers.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..engine.batch import run_batch
from ..engine.campaign import Campaign, Trace, run
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
# Baselines that ignore the belief run only in the exact distortion's chunk.
BELIEF_FREE = ("no-belief", "random")


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
        if self.strategy == "pseudo-posterior":
            parts.append(f"quantile {self.quantile:g}")
        if self.exploration:
            parts.append(f"exploration {self.exploration:g}")
        parts.append(f"initial {self.initial}")
        return ", ".join(parts)


def settings(study: Study) -> tuple[list[Setting], list[Setting]]:
    """The belief-guided settings and the baseline settings of a study."""
    guided = [Setting(s, d, q, e, i) for s, d, q, e, i in study.settings()]
    baseline = [
        Setting(b, initial=study.initial[0], multiple=study.random_multiple if b == "random" else 1)
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
    return cell.streams(exact=setting.strategy in BELIEF_FREE)


def run_setting(cell: Cell, setting: Setting) -> Trace:
    """Run the campaign of ``setting`` in ``cell`` alone (a batch of one)."""
    return run(campaign_of(cell, setting), streams_of(cell, setting))


@dataclass(frozen=True)
class Chunk:
    """One unit of work: a cell and the settings it runs."""

    landscape: int
    distortion: int
    replicate: int
    settings: tuple[Setting, ...]

    @property
    def key(self) -> str:
        return f"L{self.landscape:03d}-D{self.distortion:03d}-R{self.replicate:04d}"


def chunks(study: Study) -> list[Chunk]:
    """Every chunk of the study, in a fixed order."""
    guided, baseline = settings(study)
    out = []
    for li in range(len(study.landscapes)):
        for di, dist in enumerate(study.distortions):
            extra = [b for b in baseline if dist.is_exact or b.strategy not in BELIEF_FREE]
            for r in range(study.replicates):
                out.append(Chunk(li, di, r, tuple(guided + extra)))
    return out


class CampaignError(RuntimeError):
    """A campaign raised; the message names its cell and setting."""


def run_chunk(study: Study, chunk: Chunk) -> dict[str, np.ndarray]:
    """Run every campaign of ``chunk``; arrays stacked over its settings, plus the cell's
    context (minimum, gap, severity, value at the belief's mode)."""
    cell = Cell(study, chunk.landscape, chunk.distortion, chunk.replicate)
    campaigns = [campaign_of(cell, s) for s in chunk.settings]
    try:
        traces = run_batch(campaigns, [streams_of(cell, s) for s in chunk.settings])
    except Exception as err:
        # Find the campaign that raised: alone, each does exactly what it does in the batch.
        for setting in chunk.settings:
            try:
                run_setting(cell, setting)
            except Exception as alone:
                raise CampaignError(
                    f"campaign failed at {cell.label}, {setting.label}: {alone}"
                ) from alone
        raise CampaignError(f"campaigns failed together at {cell.label}: {err}") from err
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
