"""A grid cell's world: its space, landscape placement, exact and distorted belief, severity
and the value at the belief's mode, from the study alone. Pure and engine-free: the report
draws the beliefs from here without running a campaign.

Seeding (common random numbers). Every cell's streams derive from the study's root seed:

- the landscape placement from (root, landscape, "placement", replicate), shared by every
  distortion and setting of that replicate;
- the distortion direction, initial design, strategy and noise streams from
  (root, landscape, distortion, replicate), shared by every strategy setting.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property, lru_cache

import numpy as np

from ..seeding import campaign_streams, derive, generator
from ..validation import InputError
from ..world import landscapes as ls
from ..world.beliefs import gaussian_at
from ..world.distortions import severity
from ..world.reference import Belief, BeliefReference
from ..world.space import Continuous, Space
from .spec import SIMULATION_OPTIONS, LandscapeEntry, Study

__all__ = ["PLACEMENT_MARGIN", "SEVERITY_RADIUS", "Cell"]

# Random placement keeps the minimiser this far from the cube's faces.
PLACEMENT_MARGIN = 0.1
# Severity: the belief's mass within this radius (cube units) of the nearest global minimiser.
SEVERITY_RADIUS = 0.1


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
        land = ls.get(self.entry.name, self.entry.dim) if self.entry.kind == "textbook" else None
        if land is None:
            return Space.unit_cube(self.entry.dim)
        return Space(
            tuple(
                Continuous(f"x{j + 1}", lo, hi)
                for j, (lo, hi) in enumerate(zip(land.lower, land.upper, strict=True))
            )
        )

    @property
    def land(self) -> ls.Landscape:
        """This replicate's landscape: a textbook function, or one built by its kind (a new
        drawn or fitted surface per replicate; the user's function is the same in all). A
        drawn surface comes cut so that its minimum sits where the placement puts it."""
        e = self.entry
        if e.kind == "textbook":
            return ls.get(e.name, e.dim)
        return _built(*self._built_key)

    @property
    def _built_key(self) -> tuple:
        """What a built landscape (drawn, fitted, table, function) of this cell depends on."""
        e = self.entry
        replicate = 0 if e.kind == "function" else self.replicate
        at = self._at if e.placed_at_belief else None
        return e.spec, e.label, e.dim, self.study.seed, replicate, at

    @cached_property
    def _at(self) -> tuple[float, ...] | None:
        """Where the placement puts the minimiser (cube point), None for the native domain."""
        s = self.study
        if s.space is not None:
            # The user's belief stays put; the truth is placed at its mode.
            mode = self.space.snap(np.atleast_2d(np.asarray(s.belief.mode(), dtype=float)))[0]
            return tuple(np.clip(mode, 0.0, 1.0).tolist())
        if s.placement == "native":
            return None
        rng = generator(derive(s.seed, self.entry.label, "placement", self.replicate))
        return tuple(rng.uniform(PLACEMENT_MARGIN, 1 - PLACEMENT_MARGIN, self.entry.dim).tolist())

    @cached_property
    def placement(self):
        if self.entry.kind != "textbook":
            # Fitted, table and function: the truth is where the data or function put it; a
            # drawn surface already comes cut around its placement.
            return _built_placed(*self._built_key)
        return _placed(self.entry.name, self.entry.dim, self._at)

    @cached_property
    def exact_belief(self) -> Belief:
        if self.study.space is not None:
            return self.study.belief
        at = self.placement.at if self.placement.at is not None else self.placement.minimisers[0]
        return gaussian_at(np.asarray(at), self.study.spread)

    @cached_property
    def belief(self) -> Belief:
        """The distorted belief (its direction drawn from this cell's distortion stream).

        A decoy misplacement on a landscape without a decoy is the study's error: an
        :class:`InputError` naming the distortion's key (the option for ``simulate``)."""
        d = self.study.distortions[self.distortion]
        if d.misplace == "decoy" and not self.placement.has_decoy:
            key = f"distortion.{d.name}.misplace"
            if self.study.path == "command line":
                key = SIMULATION_OPTIONS.get(key, key)
            raise InputError(
                key,
                "a landscape with a local optimum apart from its global ones (use 'worst' instead)",
                self.placement.landscape.name,
                self.study.path,
            )
        return d.apply(self.exact_belief, self.placement, self.streams()["distortion"])

    @cached_property
    def reference(self) -> BeliefReference:
        """The distorted belief's fixed sample, read by severity, audit and monitor."""
        return BeliefReference.of(self.belief)

    @cached_property
    def severity(self):
        return severity(self.reference, self.placement, radius=SEVERITY_RADIUS)

    @cached_property
    def mode_value(self) -> float:
        """The landscape's value at the distorted belief's mode: the expert's best guess."""
        mode = np.atleast_2d(np.asarray(self.belief.mode(), dtype=float))
        return float(self.placement.value(self.space.snap(mode))[0])

    @property
    def noise_sd(self) -> float:
        return self.entry.noise * self.placement.gap


@lru_cache(maxsize=256)
def _placed(name: str, dim: int, at: tuple[float, ...] | None) -> ls.Placement:
    """A textbook landscape placed at ``at`` (cached: every distortion of a replicate shares
    its placement, so its optimum search and reference gap are computed once per process)."""
    return ls.get(name, dim).placed(at=at)


@lru_cache(maxsize=64)
def _built_placed(spec, label: str, dim: int, seed: int, replicate: int, at) -> ls.Placement:
    """A built landscape on its own domain (cached as :func:`_built` is: every distortion of a
    replicate shares its reference set and optimum search)."""
    return _built(spec, label, dim, seed, replicate, at).placed()


@lru_cache(maxsize=64)
def _built(spec, label: str, dim: int, seed: int, replicate: int, at) -> ls.Landscape:
    """The landscape of a drawn, fitted or function entry for one replicate (cached: every
    distortion of a replicate shares it), from its own stream."""
    rng = generator(derive(seed, label, "surface", replicate))
    if at is not None:
        return spec.landscape(label, dim, rng, at=at)
    return spec.landscape(label, dim, rng)
