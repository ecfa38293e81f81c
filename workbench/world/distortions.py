"""Distortions: how a simulated belief is deliberately wrong.

Starting from a belief whose mode sits on the landscape's global minimiser:

- **misplace** puts the mode on the landscape's worst point or on a decoy local optimum
  (the searches are stated in :mod:`workbench.world.placement`);
- **shift** moves the mode by a distance (Euclidean, cube units, i.e. fractions of the range)
  along a direction that is given or drawn from the distortion stream;
- **scale** multiplies the spread (below 1: narrower, overconfident; above 1: wider).

They compose in that order: misplace, then shift, then scale.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .reference import Belief, BeliefReference

__all__ = ["EXACT", "MISPLACE", "Distortion", "Severity", "severity"]

MISPLACE = ("worst", "decoy")

# A drawn direction is redrawn up to this many times to keep the shifted mode inside the cube;
# if every draw leaves it, the last one is clipped into the cube (severity reports the truth).
_DIRECTION_DRAWS = 100


@dataclass(frozen=True)
class Distortion:
    """One named level of the ``distortion`` factor."""

    name: str
    shift: float = 0.0
    scale: float = 1.0
    misplace: str | None = None
    direction: tuple[float, ...] | None = None

    def __post_init__(self):
        # The study parser checks every value under its key; these are the constructor's own.
        if not isinstance(self.name, str) or not self.name:
            raise ValueError(f"a distortion needs a name; got {self.name!r}")
        if not 0.0 <= self.shift < math.inf:
            raise ValueError(f"shift must be a non-negative number; got {self.shift!r}")
        if not 0.0 < self.scale < math.inf:
            raise ValueError(f"scale must be a positive number; got {self.scale!r}")
        if self.misplace is not None and self.misplace not in MISPLACE:
            raise ValueError(
                f"misplace must be one of {', '.join(MISPLACE)}; got {self.misplace!r}"
            )
        if self.direction is not None:
            d = np.asarray(self.direction, dtype=float)
            if d.ndim != 1 or not np.all(np.isfinite(d)) or np.linalg.norm(d) == 0:
                raise ValueError(f"direction must be a non-zero vector; got {self.direction!r}")

    @property
    def is_exact(self) -> bool:
        return self.shift == 0 and self.scale == 1 and self.misplace is None

    def apply(self, belief: Belief, placement, rng: np.random.Generator) -> Belief:
        """The distorted belief; ``placement`` is the landscape on the cube (for misplace)."""
        if self.misplace == "worst":
            belief = belief.centred(placement.worst()[0])
        elif self.misplace == "decoy":
            belief = belief.centred(placement.decoy()[0])
        if self.shift > 0:
            mode = np.atleast_1d(np.asarray(belief.mode(), dtype=float))
            belief = belief.centred(_shifted(mode, self.shift, self.direction, rng))
        if self.scale != 1:
            belief = belief.scaled(self.scale)
        return belief


EXACT = Distortion("exact")


def _shifted(mode: np.ndarray, distance: float, direction, rng: np.random.Generator) -> np.ndarray:
    if direction is not None:
        d = np.asarray(direction, dtype=float)
        if d.shape != mode.shape:
            raise ValueError(f"direction needs {mode.size} component(s); got {direction!r}")
        return np.clip(mode + distance * d / np.linalg.norm(d), 0.0, 1.0)
    for _ in range(_DIRECTION_DRAWS):
        d = rng.standard_normal(mode.size)
        d /= np.linalg.norm(d)
        moved = mode + distance * d
        if np.all((moved >= 0) & (moved <= 1)):
            return moved
    return np.clip(moved, 0.0, 1.0)


@dataclass(frozen=True)
class Severity:
    """How wrong a belief is: its mode's distance to the nearest global minimiser (cube units),
    and the belief's mass within ``radius`` of that minimiser."""

    distance: float
    mass_within: float
    radius: float


def severity(belief: Belief | BeliefReference, placement, *, radius: float = 0.1) -> Severity:
    """Severity of ``belief`` on ``placement``; the mass is read from the belief's fixed sample
    (:class:`~workbench.world.reference.BeliefReference`), so the same belief always reports the
    same number."""
    ref = BeliefReference.of(belief)
    distance = float(placement.nearest_minimiser_distance(ref.mode))
    return Severity(distance, ref.mass_within(placement.minimisers, radius), radius)
