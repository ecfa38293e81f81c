"""One simulated campaign: initial design, then propose and evaluate until the budget is spent.

Policies stated here:

- **initial design**: ``size`` points (default: dimension + 1) from the belief, a scrambled
  Sobol set or a Latin hypercube; they count towards the budget. Strategies that do not use the
  belief (no-belief, random) take a Sobol design when the study says ``belief``; belief
  sampling draws every point from the belief.
- **exploration**: before every proposal one uniform number is drawn from the strategy stream;
  below ε the proposal is a uniform point of the cube instead (the same draw is made whatever ε,
  so settings share their streams).
- **failed evaluations**: a landscape value that is NaN or infinite, or an evaluation that
  raises, is recorded as failed (``failed`` true, values NaN) and the campaign goes on. The
  model sees a failed point at the worst value observed so far (common practice: impute the
  worst), and best-so-far ignores it.
- **regret** is measured on the noise-free value: best noise-free value so far minus the
  landscape's minimum; normalized regret divides it by the landscape's reference gap.
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.stats import qmc

from ..world.reference import Belief
from ..world.space import Space

__all__ = ["BELIEF_USERS", "Campaign", "Trace", "run"]

# Strategies that use the belief (the others get a uniform one and a belief-free design).
BELIEF_USERS = ("pseudo-posterior", "prior-weighted", "belief-sampling")


@dataclass(frozen=True)
class Campaign:
    """One campaign's settings. ``belief`` is the (possibly distorted) belief the strategy uses;
    ``noise_sd`` is the observation noise in landscape units."""

    strategy: str
    placement: object
    space: Space
    belief: Belief
    budget: int
    design: str = "sobol"
    design_size: int | None = None
    decay: Callable[[int], float] | None = None
    quantile: float = 0.25
    exploration: float = 0.0
    noise_sd: float = 0.0
    multiple: int = 1

    @property
    def n_initial(self) -> int:
        return self.design_size if self.design_size is not None else self.space.dim + 1


@dataclass(frozen=True)
class Trace:
    """Everything one campaign did, one row per evaluation (``budget`` rows)."""

    points: np.ndarray  # (budget, d) cube coordinates, discrete ones at bin centres
    observed: np.ndarray  # what the strategy saw (noise included); NaN where failed
    value: np.ndarray  # noise-free landscape value; NaN where failed
    failed: np.ndarray  # bool
    best: np.ndarray  # best noise-free value so far
    regret: np.ndarray
    normalized_regret: np.ndarray
    weight: np.ndarray  # λ(t) used for the proposal; NaN in the design and for baselines
    threshold: np.ndarray  # f_γ(t) used for the proposal; NaN where none
    mode_value: float  # the landscape's value at the belief's mode: the expert's best guess
    seconds: np.ndarray  # wall time of each step

    def user_points(self, space: Space) -> np.ndarray:
        """Points in user units (categorical columns hold choice indices)."""
        return space.to_user_array(self.points)


def _design(kind: str, n: int, space: Space, belief, rng: np.random.Generator) -> np.ndarray:
    d = space.dim
    if kind == "belief":
        U = np.atleast_2d(belief.sample(n, rng)).reshape(n, d)
    elif kind == "lhs":
        U = qmc.LatinHypercube(d, seed=rng).random(n)
    else:
        with warnings.catch_warnings():
            # Sobol balance properties want powers of 2; a short design is still well spread.
            warnings.simplefilter("ignore", UserWarning)
            U = qmc.Sobol(d, scramble=True, seed=rng).random(n)
    return space.snap(U)


def _mode_point(space: Space, belief) -> np.ndarray:
    return space.snap(np.atleast_1d(np.asarray(belief.mode(), dtype=float))[None, :])


def _evaluate(placement, U: np.ndarray) -> np.ndarray:
    try:
        with np.errstate(all="ignore"):
            v = np.asarray(placement.value(U), dtype=float).reshape(len(U))
    except Exception:  # any failure of the landscape is a failed evaluation
        return np.full(len(U), np.nan)
    return np.where(np.isfinite(v), v, np.nan)


def _model_targets(observed: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows the model sees and their values: failed rows at the worst value observed so far."""
    valid = np.isfinite(observed)
    if not valid.any():
        return np.zeros(0, dtype=int), np.zeros(0)
    y = np.where(valid, observed, observed[valid].max())
    return np.arange(len(observed)), y


def run(campaign: Campaign, streams: dict[str, np.random.Generator]) -> Trace:
    """Run ``campaign`` with the named streams of :func:`workbench.seeding.campaign_streams`:
    a batch of one (:func:`workbench.engine.batch.run_batch`)."""
    # Imported here: the batch engine builds on this module's settings and helpers.
    from .batch import run_batch

    return run_batch([campaign], [streams])[0]
