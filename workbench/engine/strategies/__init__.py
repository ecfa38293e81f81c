"""Strategies: one module each, one interface (:class:`~workbench.strategies.base.Strategy`).

Adding a strategy is one new module with a class offering ``name``, ``uses_model`` and
``propose(step, rng)``, and one line in ``STRATEGIES``.
"""

from __future__ import annotations

from ...validation import check_choice
from .base import Step, Strategy
from .belief_sampling import BeliefSampling
from .no_belief import NoBelief
from .prior_weighted import PriorWeighted
from .pseudo_posterior import PseudoPosterior
from .random_search import RandomSearch

__all__ = ["STRATEGIES", "Step", "Strategy", "get"]

STRATEGIES = {
    s.name: s for s in (PseudoPosterior, PriorWeighted, NoBelief, RandomSearch, BeliefSampling)
}


def get(name: str, key: str = "strategy") -> Strategy:
    """A strategy by name; an unknown name lists the valid ones."""
    return STRATEGIES[check_choice(name, key, list(STRATEGIES))]()
