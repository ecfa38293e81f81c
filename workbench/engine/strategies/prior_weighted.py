"""Prior-weighted acquisition: expected improvement multiplied by the belief to a power λ(t).

score(x) = log EI(x) + λ(t) · log π(x), i.e. EI(x) · π(x)^λ(t) in log space; with λ(t) = β/t
this is the prior-weighted acquisition of Hvarfner et al. (2022). log EI is computed stably
(:func:`workbench.engine.acquisition.log_expected_improvement`) against the best value seen.
"""

from __future__ import annotations

from ..acquisition import log_expected_improvement_grad
from .base import Strategy


class PriorWeighted(Strategy):
    name = "prior-weighted"
    description = "expected improvement multiplied by the belief raised to the power λ(t)"

    def model_term(self, mean, sd, reference):
        """log EI below the best value seen, and its derivatives in μ and σ."""
        return log_expected_improvement_grad(mean, sd, reference)
