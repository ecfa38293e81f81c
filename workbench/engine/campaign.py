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

import time
import warnings
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
from scipy.stats import qmc
from threadpoolctl import threadpool_limits

from .. import gp
from ..world.beliefs import Product, Uniform
from ..world.space import Space
from .strategies import Step, get

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
    belief: object
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
    """Run ``campaign`` with the named streams of :func:`workbench.seeding.campaign_streams`.

    BLAS runs single-threaded inside: at these matrix sizes threads cost far more than they
    save (measured here: 80× slower GP predictions with two threads on two busy cores).
    """
    with threadpool_limits(limits=1, user_api="blas"):
        return _run(campaign, streams)


def _run(campaign: Campaign, streams: dict[str, np.random.Generator]) -> Trace:
    c = campaign
    space, placement, budget = c.space, c.placement, c.budget
    d = space.dim
    strategy = get(c.strategy)
    uses_belief = c.strategy in BELIEF_USERS
    belief = c.belief if uses_belief else Product(tuple(Uniform() for _ in range(d)))
    design = c.design
    if c.strategy == "belief-sampling":
        design = "belief"
    elif not uses_belief and design == "belief":
        design = "sobol"
    n0 = min(c.n_initial, budget)
    design_rng, rng, noise_rng = streams["design"], streams["strategy"], streams["noise"]

    points = np.full((budget, d), np.nan)
    observed = np.full(budget, np.nan)
    value = np.full(budget, np.nan)
    weight = np.full(budget, np.nan)
    threshold = np.full(budget, np.nan)
    seconds = np.zeros(budget)
    # The expert's single best guess is the mode of the belief given, whatever the strategy.
    mode_value = float(_evaluate(placement, _mode_point(space, c.belief))[0])
    log_belief_max = float(belief.logpdf(_mode_point(space, belief))[0]) if uses_belief else 0.0

    def evaluate(rows: slice, U: np.ndarray) -> None:
        # Random search with k× evaluations: each row keeps the best of k draws, U among them.
        k, m = max(1, c.multiple), len(U)
        U = np.vstack([U, space.snap(rng.random((m * (k - 1), d)))]).reshape(k, m, d)
        true = _evaluate(placement, U.reshape(k * m, d)).reshape(k, m)
        noisy = true + c.noise_sd * noise_rng.standard_normal((k, m))
        pick = np.argmin(np.where(np.isfinite(noisy), noisy, np.inf), axis=0)
        cols = np.arange(m)
        points[rows], value[rows], observed[rows] = (
            U[pick, cols],
            true[pick, cols],
            noisy[pick, cols],
        )

    start = time.perf_counter()
    evaluate(slice(0, n0), _design(design, n0, space, belief, design_rng))
    seconds[:n0] = (time.perf_counter() - start) / max(n0, 1)

    fitted, last_fit = None, 0
    for t in range(n0, budget):
        start = time.perf_counter()
        lam = float(c.decay(t)) if (c.decay is not None and uses_belief) else 0.0
        explore = rng.random() < c.exploration
        rows, y = _model_targets(observed[:t])
        model = None
        if strategy.uses_model and not explore and len(rows) >= 2:
            F = space.features(points[rows])
            if fitted is None or gp.refit_due(len(rows), last_fit):
                previous = None if fitted is None else fitted.hyperparameters
                fitted = gp.fit(F, y, previous=previous, rng=rng, restarts=1, maxiter=16)
                last_fit = len(rows)
            else:
                fitted = gp.condition(fitted, F, y)
            model = fitted
        if explore or (strategy.uses_model and model is None):
            u, f_gamma = space.snap(rng.random((1, d)))[0], np.nan
        else:
            step = Step(space, points[rows], y, belief, log_belief_max, lam, c.quantile, model)
            u, f_gamma = strategy.propose(step, rng)
        evaluate(slice(t, t + 1), u[None, :])
        if c.decay is not None and uses_belief:
            weight[t] = lam
        threshold[t] = f_gamma
        seconds[t] = time.perf_counter() - start

    failed = ~np.isfinite(value)
    best = np.minimum.accumulate(np.where(failed, np.inf, value))
    best = np.where(np.isfinite(best), best, np.nan)
    regret = best - placement.minimum
    return Trace(
        points=points,
        observed=observed,
        value=value,
        failed=failed,
        best=best,
        regret=regret,
        normalized_regret=placement.normalized_regret(best),
        weight=weight,
        threshold=threshold,
        mode_value=mode_value,
        seconds=seconds,
    )
