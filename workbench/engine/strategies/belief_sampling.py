"""Belief sampling: every evaluation is a fresh draw from the belief; no model."""

from __future__ import annotations

import numpy as np

from .base import Step, Strategy, first_new


class BeliefSampling(Strategy):
    name = "belief-sampling"
    description = "every evaluation a fresh draw from the belief, with no model"
    is_baseline = True
    uses_model = False
    design = "belief"

    def propose(self, step: Step, rng: np.random.Generator) -> np.ndarray:
        draws = np.atleast_2d(step.belief.sample(8, rng)).reshape(8, -1)
        return first_new(step.space.snap(draws), step, rng)
