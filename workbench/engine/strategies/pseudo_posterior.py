"""Pseudo-posterior: the belief's and the model's odds of a point being good, combined.

Observations are split at the γ-quantile f_γ of the observed values. The model's probability
of good is M_g(x) = Φ((f_γ − μ(x))/σ(x)), M_b = 1 − M_g. The belief's probability of good is
its density scaled to a maximum of 1, P_g(x) = π(x)/π(mode), P_b = 1 − P_g, both clipped to
[1e-12, 1 − 1e-12] so that nothing divides by zero. The score is

    log(M_g/M_b) + λ(t) · log(P_g/P_b).

With λ(t) = β/t this ranks candidates exactly as the published pseudo-posterior ratio g/b with
g ∝ P_g · M_g^(t/β) and b ∝ P_b · M_b^(t/β): log(g/b) = (t/β) · [log(M_g/M_b) + (β/t) ·
log(P_g/P_b)] + const, and multiplying by the positive t/β does not change the order.
The model term is computed in log space (log Φ), exact without a floor.
"""

from __future__ import annotations

import numpy as np

from ..acquisition import log_odds_good
from .base import Step, maximise

name = "pseudo-posterior"
PROBABILITY_FLOOR = 1e-12


def belief_log_odds(log_belief: np.ndarray, log_belief_max: float) -> np.ndarray:
    """log(P_g/P_b) with P_g = π(x)/π(mode) clipped to [floor, 1 − floor]."""
    p_good = np.clip(np.exp(log_belief - log_belief_max), PROBABILITY_FLOOR, 1 - PROBABILITY_FLOOR)
    return np.log(p_good) - np.log1p(-p_good)


def score(mean, sd, log_belief, log_belief_max: float, weight: float, threshold: float):
    """log(M_g/M_b) + λ · log(P_g/P_b) over candidates."""
    return log_odds_good(mean, sd, threshold) + weight * belief_log_odds(log_belief, log_belief_max)


class PseudoPosterior:
    name = name
    uses_model = True

    def threshold(self, step: Step) -> float:
        return float(np.quantile(step.y, step.quantile))

    def propose(self, step: Step, rng: np.random.Generator) -> tuple[np.ndarray, float]:
        f_gamma = self.threshold(step)

        def objective(U):
            mean, sd = step.predict(U)
            return score(mean, sd, step.log_belief(U), step.log_belief_max, step.weight, f_gamma)

        return maximise(objective, step, rng), f_gamma
