"""Random: uniform draws over the cube. With ``multiple`` k, each evaluation stands for the best
of k draws (the literature's random search with k times the evaluations)."""

from __future__ import annotations

import numpy as np

from .base import Step

name = "random"


class RandomSearch:
    name = name
    uses_model = False

    def propose(self, step: Step, rng: np.random.Generator) -> tuple[np.ndarray, float]:
        return step.space.snap(rng.random((1, step.space.dim)))[0], float("nan")
