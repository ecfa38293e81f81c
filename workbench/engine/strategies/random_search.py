"""Random: uniform draws over the cube. With ``multiple`` k, each evaluation stands for the best
of k draws (the literature's random search with k times the evaluations)."""

from __future__ import annotations

import numpy as np

from .base import Step, Strategy


class RandomSearch(Strategy):
    name = "random"
    description = "uniform random draws over the search space"
    is_baseline = True
    uses_model = False
    uses_belief = False
    uses_multiple = True

    def propose(self, step: Step, rng: np.random.Generator) -> np.ndarray:
        return step.space.snap(rng.random((1, step.space.dim)))[0]
