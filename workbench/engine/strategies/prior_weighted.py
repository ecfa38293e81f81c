"""Prior-weighted acquisition: expected improvement multiplied by the belief to a power λ(t).

score(x) = log EI(x) + λ(t) · log π(x), i.e. EI(x) · π(x)^λ(t) in log space; with λ(t) = β/t
this is the prior-weighted acquisition of Hvarfner et al. (2022). log EI is computed stably
(:func:`workbench.engine.acquisition.log_expected_improvement`).
"""

from __future__ import annotations

import numpy as np

from ..acquisition import log_expected_improvement
from .base import Step, maximise

name = "prior-weighted"


def score(mean, sd, log_belief, weight: float, best: float):
    return log_expected_improvement(mean, sd, best) + weight * log_belief


class PriorWeighted:
    name = name
    uses_model = True

    def propose(self, step: Step, rng: np.random.Generator) -> tuple[np.ndarray, float]:
        best = float(np.min(step.y))

        def objective(U):
            mean, sd = step.predict(U)
            if step.weight == 0:
                return log_expected_improvement(mean, sd, best)
            return score(mean, sd, step.log_belief(U), step.weight, best)

        return maximise(objective, step, rng), float("nan")
