"""What every strategy is: the base class, the step a model-free strategy sees, the defaults.

A strategy is one subclass of :class:`Strategy` that declares what it uses and fills small
hooks; the engine (:func:`workbench.engine.batch.run_batch`) owns the search and calls the
hooks over a stack of campaigns. This module imports numpy only, so the registry
(:mod:`workbench.engine.strategies`) stays light for the stages above the engine.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, ClassVar

import numpy as np

__all__ = [
    "DEFAULT_EXPLORATION",
    "DEFAULT_QUANTILE",
    "LOG_BELIEF_FLOOR",
    "SAME_POINT",
    "Derivatives",
    "Step",
    "Strategy",
    "first_new",
]

if TYPE_CHECKING:
    from ...world.reference import Belief

# The threshold quantile γ and the exploration rate ε when a study or command names none.
DEFAULT_QUANTILE = 0.25
DEFAULT_EXPLORATION = 0.0
# A belief density of zero would make a log score −inf everywhere it vanishes; it is floored at
# this log value (about 1e-300) so that the model still ranks such points.
LOG_BELIEF_FLOOR = -690.0
# Two points closer than this in every cube coordinate are the same evaluation.
SAME_POINT = 1e-9


@dataclass(frozen=True)
class Step:
    """What a model-free strategy sees before proposing evaluation ``t + 1``: the space, the
    evaluated cube points ``X``, the values the model would see ``y`` (failed evaluations
    imputed, see :mod:`workbench.engine.campaign`), the belief and λ(t) (``weight``)."""

    space: object
    X: np.ndarray
    y: np.ndarray
    belief: Belief
    weight: float = 0.0

    @property
    def t(self) -> int:
        return len(self.X)


@dataclass(frozen=True)
class Derivatives:
    """What the gradient of a score in the candidate points ``U`` needs (leading batch
    dimensions ``...`` as the score's): ``mean`` and ``sd`` are ∂μ/∂F and ∂σ/∂F
    ``(..., m, p)`` in the model's inputs F, ``inputs`` is ∂F/∂U ``(..., p, d)``;
    ``log_belief`` is log π at the probes U + h_j e_j ``(..., m, d)``, ``step`` the signed h_j
    (the belief term is differentiated by forward differences: a belief offers its density,
    not its gradient)."""

    mean: np.ndarray
    sd: np.ndarray
    inputs: np.ndarray
    log_belief: np.ndarray
    step: np.ndarray


class Strategy:
    """A rule that proposes the next evaluation.

    Subclass contract. Declare, as class attributes:

    - ``name``: the strategy's name in study files; ``description``: one phrase for reports;
    - ``is_baseline``: True for a baseline (listed under ``baselines`` in a study, no factors),
      False for a belief-guided strategy (a ``[strategy.<name>]`` table with a decay);
    - ``uses_model``: a GP is fitted and the hooks below score candidates;
    - ``uses_belief``: False gives the strategy a uniform belief, λ = 0, a belief-free initial
      design, and in a grid one run per landscape and replicate (the exact distortion's);
    - ``uses_quantile``: the threshold quantile γ is one of its factors (and the reference it
      scores against is recorded as the trace's threshold f_γ);
    - ``uses_multiple``: each evaluation stands for the best of the study's ``random_multiple``
      draws;
    - ``design``: the initial design it always takes (None: the study's);
    - ``is_reference``: the baseline that speedups and belief costs are measured against.

    A model-based strategy fills ``model_term`` and, when it differs from the defaults,
    ``belief_term`` and ``reference``; the base class's :meth:`score` combines them for any
    leading batch dimensions. A model-free strategy fills ``propose``. Register the class with
    :func:`workbench.engine.strategies.register`; nothing else in the package names it.
    """

    name: ClassVar[str]
    description: ClassVar[str]
    is_baseline: ClassVar[bool] = False
    uses_model: ClassVar[bool] = True
    uses_belief: ClassVar[bool] = True
    uses_quantile: ClassVar[bool] = False
    uses_multiple: ClassVar[bool] = False
    design: ClassVar[str | None] = None
    is_reference: ClassVar[bool] = False

    # ------------------------------------------------------------- hooks (model-based)

    def model_term(self, mean, sd, reference):
        """The model's term of the score at ``mean``, ``sd`` ``(..., m)`` against
        ``reference`` ``(..., 1)``, and its derivatives in the mean and the sd."""
        raise NotImplementedError(f"{type(self).__name__} has no model term")

    def belief_term(self, log_belief, log_belief_max):
        """The belief's term given log π (floored at ``LOG_BELIEF_FLOOR``) and log π at the
        mode (broadcastable); by default log π itself."""
        return log_belief

    def reference(self, y: np.ndarray, quantile: np.ndarray) -> np.ndarray:
        """What the model term compares against, per campaign: by default the best value seen,
        ``min y`` over the last axis. ``quantile`` holds each campaign's γ."""
        return y.min(axis=-1)

    # ------------------------------------------------------------- hook (model-free)

    def propose(self, step: Step, rng: np.random.Generator) -> np.ndarray:
        """The next cube point of a model-free strategy (snapped to the space's bins)."""
        raise NotImplementedError(f"{type(self).__name__} proposes through its score")

    # ------------------------------------------------------------- the public score

    def score(
        self,
        mean: np.ndarray,
        sd: np.ndarray,
        reference: np.ndarray,
        weight: np.ndarray,
        log_belief: np.ndarray,
        log_belief_max: np.ndarray,
        derivatives: Derivatives | None = None,
    ):
        """Scores ``(..., m)`` of m candidates per campaign, higher is better:

            s(U) = model_term(μ(U), σ(U), reference) + λ · belief_term(log π(U), log π(mode))

        ``reference``, ``weight`` (λ) and ``log_belief_max`` have the leading shape ``...``;
        ``log_belief`` ``(..., m)`` is read only where λ ≠ 0 (elsewhere the belief term is
        left out). With ``derivatives``, also the gradient ``(..., m, d)`` in the candidate
        points: the chain rule through μ and σ for the model term, forward differences for the
        belief term.
        """
        value, d_mean, d_sd = self.model_term(mean, sd, np.asarray(reference)[..., None])
        grad = None
        if derivatives is not None:
            dF = d_mean[..., None] * derivatives.mean + d_sd[..., None] * derivatives.sd
            grad = np.matmul(dF, derivatives.inputs)
        weight = np.asarray(weight, dtype=float)
        w = weight != 0
        if not w.any():
            return value if grad is None else (value, grad)
        lam = weight[w][:, None]
        top = np.asarray(log_belief_max, dtype=float)[w][:, None]
        b = lam * self.belief_term(np.maximum(log_belief[w], LOG_BELIEF_FLOOR), top)
        value[w] += b
        if grad is None:
            return value
        probes = np.maximum(derivatives.log_belief[w], LOG_BELIEF_FLOOR)
        b1 = lam[:, :, None] * self.belief_term(probes, top[:, :, None])
        grad[w] += (b1 - b[:, :, None]) / derivatives.step[w]
        return value, grad


def first_new(ranked: np.ndarray, step: Step, rng: np.random.Generator) -> np.ndarray:
    """The first row of ``ranked`` that repeats no evaluated point; else a uniform draw."""
    if len(step.X) == 0:
        return ranked[0]
    # Look at the best few first: almost always one of them is new.
    for rows in (ranked[:8], ranked[8:]):
        gaps = np.abs(rows[:, None, :] - step.X[None, :, :]).max(axis=2).min(axis=1)
        fresh = np.flatnonzero(gaps > SAME_POINT)
        if fresh.size:
            return rows[fresh[0]]
    return step.space.snap(rng.random((1, step.space.dim)))[0]
