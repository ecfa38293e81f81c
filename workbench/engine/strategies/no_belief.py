"""No-belief: expected improvement alone, the plain GP baseline.

It is prior-weighted acquisition with the belief's weight held at zero (score = log EI); the
campaign gives it a uniform belief, so its candidates hold no belief draws either.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from .base import Step
from .prior_weighted import PriorWeighted

name = "no-belief"


class NoBelief(PriorWeighted):
    name = name

    def propose(self, step: Step, rng: np.random.Generator) -> tuple[np.ndarray, float]:
        return super().propose(replace(step, weight=0.0), rng)
