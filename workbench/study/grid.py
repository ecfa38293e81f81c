"""From a study to campaigns: the grid's cells, settings, seeds and chunks. Pure: no I/O.

Seeding (common random numbers). Every campaign's streams derive from the study's root seed:

- the landscape placement from (root, landscape, "placement", replicate), shared by every
  distortion and setting of that replicate;
- the distortion direction, initial design, strategy and noise streams from
  (root, landscape, distortion, replicate), shared by every strategy setting.

So replicate k of two settings differs only by the setting: paired comparisons. The baselines
that ignore the belief (no-belief, random) run once per landscape and replicate, with the
streams of the ``exact`` distortion; the grid repeats them across distortions.

A **chunk** is every campaign of one (landscape, distortion, replicate): the unit of parallel
work and of storage.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np

from ..engine.campaign import Campaign, Trace, run
from ..seeding import campaign_streams, derive, generator
from ..world import landscapes as ls
from ..world.beliefs import gaussian_at
from ..world.distortions import severity
from ..world.space import Continuous, Space
from .decay import Schedule
from .spec import LandscapeEntry, Study

__all__ = ["Cell", "Chunk", "Setting", "chunks", "run_chunk", "settings"]

# Random placement keeps the minimiser this far from the cube's faces.
PLACEMENT_MARGIN = 0.1
# Severity: the belief's mass within this radius (cube units) of the nearest global minimiser.
SEVERITY_RADIUS = 0.1
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


@dataclass(frozen=True)
class Cell:
    """The context one chunk shares: a landscape, a distortion and a replicate."""

    study: Study
    landscape: int
    distortion: int
    replicate: int

    @property
    def entry(self) -> LandscapeEntry:
        return self.study.landscapes[self.landscape]

    @property
    def label(self) -> str:
        name = self.study.distortions[self.distortion].name
        return f"landscape {self.entry.label}, distortion {name}, replicate {self.replicate}"

    @cached_property
    def _streams(self):
        s = self.study
        name = s.distortions[self.distortion].name
        return derive(s.seed, self.entry.label, name, self.replicate)

    def streams(self, exact: bool = False) -> dict[str, np.random.Generator]:
        """Fresh named streams of this cell (of its exact-distortion sibling if ``exact``)."""
        if exact:
            return campaign_streams(
                derive(self.study.seed, self.entry.label, "exact", self.replicate)
            )
        return campaign_streams(self._streams)

    @cached_property
    def space(self) -> Space:
        if self.study.space is not None:
            return self.study.space
        land = ls.get(self.entry.name, self.entry.dim)
        return Space(
            tuple(
                Continuous(f"x{j + 1}", lo, hi)
                for j, (lo, hi) in enumerate(zip(land.lower, land.upper, strict=True))
            )
        )

    @cached_property
    def placement(self):
        s, land = self.study, ls.get(self.entry.name, self.entry.dim)
        if s.space is not None:
            # The user's belief stays put; the truth is placed at its mode.
            at = self.space.snap(np.atleast_2d(np.asarray(s.belief.mode(), dtype=float)))[0]
            return land.placed(at=np.clip(at, 0.0, 1.0))
        if s.placement == "native":
            return land.placed()
        rng = generator(derive(s.seed, self.entry.label, "placement", self.replicate))
        return land.placed(at=rng.uniform(PLACEMENT_MARGIN, 1 - PLACEMENT_MARGIN, land.dim))

    @cached_property
    def exact_belief(self):
        if self.study.space is not None:
            return self.study.belief
        at = self.placement.at if self.placement.at is not None else self.placement.minimisers[0]
        return gaussian_at(np.asarray(at), self.study.spread)

    @cached_property
    def belief(self):
        """The distorted belief (its direction drawn from this cell's distortion stream)."""
        d = self.study.distortions[self.distortion]
        return d.apply(self.exact_belief, self.placement, self.streams()["distortion"])

    @cached_property
    def severity(self):
        return severity(self.belief, self.placement, radius=SEVERITY_RADIUS)

    @cached_property
    def mode_value(self) -> float:
        """The landscape's value at the distorted belief's mode: the expert's best guess."""
        mode = np.atleast_2d(np.asarray(self.belief.mode(), dtype=float))
        return float(self.placement.value(self.space.snap(mode))[0])

    @property
    def noise_sd(self) -> float:
        return self.entry.noise * self.placement.gap

    def campaign(self, setting: Setting) -> Campaign:
        return Campaign(
            strategy=setting.strategy,
            placement=self.placement,
            space=self.space,
            belief=self.belief,
            budget=self.study.budget,
            design=setting.initial,
            design_size=self.study.design_size(self.space.dim),
            decay=setting.decay,
            quantile=setting.quantile,
            exploration=setting.exploration,
            noise_sd=self.noise_sd,
            multiple=setting.multiple,
        )

    def run(self, setting: Setting) -> Trace:
        exact = setting.strategy in BELIEF_FREE
        return run(self.campaign(setting), self.streams(exact=exact))


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
    traces = []
    for setting in chunk.settings:
        try:
            traces.append(cell.run(setting))
        except Exception as err:
            raise CampaignError(f"campaign failed at {cell.label}, {setting.label}: {err}") from err
    stack = {name: np.stack([getattr(t, name) for t in traces]) for name in TRACE_ARRAYS}
    stack["user_points"] = np.stack([t.user_points(cell.space) for t in traces])
    stack["mode_value"] = np.array([cell.mode_value])
    stack["minimum"] = np.array([cell.placement.minimum])
    stack["gap"] = np.array([cell.placement.gap])
    stack["severity_distance"] = np.array([cell.severity.distance])
    stack["severity_mass"] = np.array([cell.severity.mass_within])
    return stack
