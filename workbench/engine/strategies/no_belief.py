"""No-belief: expected improvement alone, the plain GP baseline.

It is prior-weighted acquisition that ignores the belief (score = log EI): the engine gives it
a uniform belief, λ = 0 and a belief-free initial design, so its candidates hold no belief
draws either.
"""

from __future__ import annotations

from .prior_weighted import PriorWeighted


class NoBelief(PriorWeighted):
    name = "no-belief"
    description = "a Gaussian-process model with expected improvement and no belief at all"
    is_baseline = True
    uses_belief = False
    is_reference = True
