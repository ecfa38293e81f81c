"""The strategies: one subclass of :class:`~.base.Strategy` each, and the registry.

Every other module asks this registry what a strategy uses instead of testing its name.
Adding a strategy is one new module with a subclass (see the contract in
:class:`~.base.Strategy`) and one ``register`` line below. Importing this package loads numpy
and these modules only (scipy.special at the first score), so the stages above the engine and
the command line's start may ask it cheaply.
"""

from __future__ import annotations

from ...validation import check_choice
from .base import DEFAULT_EXPLORATION, DEFAULT_QUANTILE, Derivatives, Step, Strategy
from .belief_sampling import BeliefSampling
from .no_belief import NoBelief
from .prior_weighted import PriorWeighted
from .pseudo_posterior import PseudoPosterior
from .random_search import RandomSearch

__all__ = [
    "DEFAULT_EXPLORATION",
    "DEFAULT_QUANTILE",
    "STRATEGIES",
    "Derivatives",
    "Step",
    "Strategy",
    "baselines",
    "belief_strategies",
    "description",
    "get",
    "reference",
    "register",
    "uses_belief",
    "uses_model",
    "uses_multiple",
    "uses_quantile",
]

STRATEGIES: dict[str, type[Strategy]] = {}


def register(cls: type[Strategy]) -> type[Strategy]:
    """Add a strategy class to the registry under its ``name``; returns the class."""
    STRATEGIES[cls.name] = cls
    return cls


register(PseudoPosterior)
register(PriorWeighted)
register(NoBelief)
register(RandomSearch)
register(BeliefSampling)


def _class(name: str, key: str = "strategy") -> type[Strategy]:
    return STRATEGIES[check_choice(name, key, list(STRATEGIES))]


def get(name: str, key: str = "strategy") -> Strategy:
    """A strategy by name; an unknown name lists the valid ones."""
    return _class(name, key)()


def uses_quantile(name: str) -> bool:
    """Whether the threshold quantile γ is one of the strategy's factors."""
    return _class(name).uses_quantile


def uses_belief(name: str) -> bool:
    """Whether the strategy reads the belief (False: it runs the same under every distortion)."""
    return _class(name).uses_belief


def uses_model(name: str) -> bool:
    """Whether the strategy fits a GP at each step (False: its steps cost next to nothing)."""
    return _class(name).uses_model


def uses_multiple(name: str) -> bool:
    """Whether each evaluation stands for the best of the study's ``random_multiple`` draws."""
    return _class(name).uses_multiple


def description(name: str) -> str:
    """The strategy in one phrase, for reports."""
    return _class(name).description


def belief_strategies() -> tuple[str, ...]:
    """The belief-guided strategies, in registry order."""
    return tuple(n for n, c in STRATEGIES.items() if not c.is_baseline)


def baselines() -> tuple[str, ...]:
    """The baselines, in registry order."""
    return tuple(n for n, c in STRATEGIES.items() if c.is_baseline)


def reference() -> str:
    """The baseline that speedups and belief costs are measured against."""
    return next(n for n, c in STRATEGIES.items() if c.is_reference)
