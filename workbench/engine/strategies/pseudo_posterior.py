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

from ..acquisition import log_odds_good_grad
from .base import Strategy

PROBABILITY_FLOOR = 1e-12


def belief_log_odds(log_belief: np.ndarray, log_belief_max) -> np.ndarray:
    """log(P_g/P_b) with P_g = π(x)/π(mode) clipped to [floor, 1 − floor]."""
    p_good = np.clip(np.exp(log_belief - log_belief_max), PROBABILITY_FLOOR, 1 - PROBABILITY_FLOOR)
    return np.log(p_good) - np.log1p(-p_good)


class PseudoPosterior(Strategy):
    name = "pseudo-posterior"
    description = (
        "combines the model's and the belief's odds that a point is good (better than the "
        "threshold quantile γ of the values seen so far); the belief's weight is λ(t)"
    )
    uses_quantile = True

    def model_term(self, mean, sd, reference):
        """log(M_g/M_b) against f_γ, and its derivatives in μ and σ."""
        return log_odds_good_grad(mean, sd, reference)

    def belief_term(self, log_belief, log_belief_max):
        return belief_log_odds(log_belief, log_belief_max)

    def reference(self, y: np.ndarray, quantile: np.ndarray) -> np.ndarray:
        """f_γ: the γ-quantile of the values seen, one call per level of γ (row by row)."""
        out = np.empty(y.shape[:-1])
        quantile = np.broadcast_to(quantile, out.shape)
        for q in np.unique(quantile):
            rows = quantile == q
            out[rows] = np.quantile(y[rows], q, axis=-1)
        return out
