"""Belief sampling: every evaluation is a fresh draw from the belief; no model."""

from __future__ import annotations

import numpy as np

from .base import Step, first_new

name = "belief-sampling"


class BeliefSampling:
    name = name
    uses_model = False

    def propose(self, step: Step, rng: np.random.Generator) -> tuple[np.ndarray, float]:
        draws = np.atleast_2d(step.belief.sample(8, rng)).reshape(8, -1)
        return first_new(step.space.snap(draws), step, rng), float("nan")
