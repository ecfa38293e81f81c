"""One simulated campaign's settings and trace, and the policies every campaign follows.

The engine (:func:`workbench.engine.batch.run` for one campaign, ``run_batch`` for many) runs
an initial design, then proposes and evaluates until the budget is spent. Policies stated here,
each a public helper of this module:

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
- **acquisition search** of a model-based strategy: candidates (:func:`candidate_sets`):
  ``SOBOL_CANDIDATES`` Sobol points (one fixed scrambled set per dimension, randomly rotated
  each step), ``BELIEF_CANDIDATES`` draws from the belief, and ``LOCAL_CANDIDATES`` Gaussian
  perturbations (sd ``LOCAL_SD`` of the range) around each of the ``INCUMBENTS`` best
  observations, discrete coordinates snapped to their bins; the ``POLISHES`` best polished by
  L-BFGS-B (at most ``POLISH_ITERATIONS`` iterations and as many evaluations); the best point
  that repeats no observation proposed (:func:`workbench.engine.strategies.base.first_new`;
  a uniform draw if every candidate repeats one).
"""

from __future__ import annotations

import warnings
from collections.abc import Callable
from dataclasses import dataclass
from functools import cache

import numpy as np
from scipy.stats import qmc

from ..world.reference import Belief
from ..world.space import Space
from .strategies.base import DEFAULT_EXPLORATION, DEFAULT_QUANTILE, Step

__all__ = [
    "BELIEF_CANDIDATES",
    "FD_STEP",
    "INCUMBENTS",
    "LOCAL_CANDIDATES",
    "LOCAL_SD",
    "POLISHES",
    "POLISH_ITERATIONS",
    "SOBOL_CANDIDATES",
    "Campaign",
    "Trace",
    "candidate_sets",
    "design",
    "evaluate",
    "mode_point",
    "model_targets",
]

SOBOL_CANDIDATES = 128
BELIEF_CANDIDATES = 32
LOCAL_CANDIDATES = 16
INCUMBENTS = 3
LOCAL_SD = 0.05
POLISHES = 2
POLISH_ITERATIONS = 6
# The forward-difference step of the belief term's gradient in the polish.
FD_STEP = 1e-6


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
    quantile: float = DEFAULT_QUANTILE
    exploration: float = DEFAULT_EXPLORATION
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


def design(kind: str, n: int, space: Space, belief, rng: np.random.Generator) -> np.ndarray:
    """``n`` initial points of ``kind`` (belief, lhs or sobol), snapped."""
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


def mode_point(space: Space, belief) -> np.ndarray:
    """The belief's mode as one snapped cube point ``(1, d)``."""
    return space.snap(np.atleast_1d(np.asarray(belief.mode(), dtype=float))[None, :])


def evaluate(placement, U: np.ndarray) -> np.ndarray:
    """The landscape's values at ``U``; NaN where an evaluation fails (see above)."""
    try:
        with np.errstate(all="ignore"):
            v = np.asarray(placement.value(U), dtype=float).reshape(len(U))
    except Exception:  # any failure of the landscape is a failed evaluation
        return np.full(len(U), np.nan)
    return np.where(np.isfinite(v), v, np.nan)


def model_targets(observed: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Rows the model sees and their values: failed rows at the worst value observed so far."""
    valid = np.isfinite(observed)
    if not valid.any():
        return np.zeros(0, dtype=int), np.zeros(0)
    y = np.where(valid, observed, observed[valid].max())
    return np.arange(len(observed)), y


@cache
def _sobol(dim: int) -> np.ndarray:
    return qmc.Sobol(dim, scramble=True, seed=12345).random(SOBOL_CANDIDATES)


def candidate_sets(steps: list[Step], rngs: list[np.random.Generator]) -> list[np.ndarray]:
    """The candidates of every step (see the acquisition search above), each drawn from its own
    stream in a fixed order: rotation, belief draws, perturbations.

    The random draws are taken step by step; the belief transforms of steps that hold the same
    belief object (the settings of one grid cell) are one call, which changes no value: each
    point depends on its own draws only.
    """
    draws = []
    groups: dict[int, list[int]] = {}  # steps whose belief draws wait for a shared transform
    for i, (step, rng) in enumerate(zip(steps, rngs, strict=True)):
        d = step.space.dim
        rotated = (_sobol(d) + rng.random(d)) % 1.0
        belief = step.belief
        if belief.by_inverse_cdf:
            drawn = belief.uniforms(BELIEF_CANDIDATES, rng)
            groups.setdefault(id(belief), []).append(i)
        else:
            drawn = np.atleast_2d(belief.sample(BELIEF_CANDIDATES, rng)).reshape(-1, d)
        local = None
        if len(step.y):
            best = step.X[np.argsort(step.y, kind="stable")[:INCUMBENTS]]
            noise = LOCAL_SD * rng.standard_normal((len(best), LOCAL_CANDIDATES, d))
            local = np.clip(best[:, None, :] + noise, 0.0, 1.0).reshape(-1, d)
        draws.append([rotated, drawn, local])
    for members in groups.values():
        points = steps[members[0]].belief.from_uniforms(np.stack([draws[i][1] for i in members]))
        for i, p in zip(members, points, strict=True):
            draws[i][1] = p
    return [
        step.space.snap(np.vstack([part for part in parts if part is not None]))
        for step, parts in zip(steps, draws, strict=True)
    ]
