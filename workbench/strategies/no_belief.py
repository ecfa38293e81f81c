"""No-belief: expected improvement alone, the plain GP baseline (its candidates still include
belief draws only when a belief is given; the campaign gives it a uniform one)."""

from __future__ import annotations

import numpy as np

from ..acquisition import log_expected_improvement
from .base import Step, maximise

name = "no-belief"


class NoBelief:
    name = name
    uses_model = True

    def propose(self, step: Step, rng: np.random.Generator) -> tuple[np.ndarray, float]:
        best = float(np.min(step.y))

        def objective(U):
            mean, sd = step.predict(U)
            return log_expected_improvement(mean, sd, best)

        return maximise(objective, step, rng), float("nan")
