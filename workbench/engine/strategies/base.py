"""What every strategy shares: the step it sees and the acquisition search.

A strategy proposes the next evaluation from a :class:`Step`. Model-based strategies only
define a score over candidate points (higher is better); :func:`maximise` finds its best point:

1. candidates: ``SOBOL_CANDIDATES`` Sobol points (one fixed scrambled set per dimension,
   randomly rotated each step), ``BELIEF_CANDIDATES`` draws from the belief, and
   ``LOCAL_CANDIDATES`` Gaussian perturbations (sd ``LOCAL_SD`` of the range) around each of
   the ``INCUMBENTS`` best observations, discrete coordinates snapped to their bins;
2. the ``POLISHES`` best candidates are polished together by one L-BFGS-B run (at most
   ``POLISH_ITERATIONS`` iterations and as many evaluations), with a forward-difference
   gradient computed in a single batched call, keeping the best point it saw;
3. the best point that does not repeat an observation is proposed (a uniform draw if every
   candidate repeats one).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cache
from typing import Protocol, cast

import numpy as np
from scipy import optimize
from scipy.stats import qmc

from ...world.reference import Belief, InverseCdfBelief
from ...world.space import Space

__all__ = ["LOG_BELIEF_FLOOR", "Step", "Strategy", "candidate_sets", "candidates", "maximise"]

SOBOL_CANDIDATES = 128
BELIEF_CANDIDATES = 32
LOCAL_CANDIDATES = 16
INCUMBENTS = 3
LOCAL_SD = 0.05
POLISHES = 2
POLISH_ITERATIONS = 6
_FD_STEP = 1e-6
_SAME_POINT = 1e-9

# A belief density of zero would make a log score −inf everywhere it vanishes; it is floored at
# this log value (about 1e-300) so that the model still ranks such points.
LOG_BELIEF_FLOOR = -690.0


@dataclass(frozen=True)
class Step:
    """What a strategy sees before proposing evaluation ``t + 1``.

    ``X`` are the evaluated cube points, ``y`` the values the model sees (failed evaluations
    imputed, see :mod:`workbench.engine.campaign`), ``weight`` is λ(t) with ``t = len(X)``
    evaluations spent, ``model`` the fitted surrogate (None for model-free strategies).
    """

    space: Space
    X: np.ndarray
    y: np.ndarray
    belief: Belief
    log_belief_max: float
    weight: float
    quantile: float
    model: object | None = None

    @property
    def t(self) -> int:
        return len(self.X)

    def log_belief(self, U: np.ndarray) -> np.ndarray:
        return np.maximum(self.belief.logpdf(U), LOG_BELIEF_FLOOR)

    def predict(self, U: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        return self.model.predict(self.space.features(U))


class Strategy(Protocol):
    """The one interface: ``propose`` returns a cube point and the threshold f_γ it used
    (NaN when it uses none)."""

    name: str
    uses_model: bool

    def propose(self, step: Step, rng: np.random.Generator) -> tuple[np.ndarray, float]: ...


@cache
def _sobol(dim: int) -> np.ndarray:
    return qmc.Sobol(dim, scramble=True, seed=12345).random(SOBOL_CANDIDATES)


def candidates(step: Step, rng: np.random.Generator) -> np.ndarray:
    """The candidate set of step 1 above (snapped)."""
    return candidate_sets([step], [rng])[0]


def candidate_sets(steps: list[Step], rngs: list[np.random.Generator]) -> list[np.ndarray]:
    """:func:`candidates` of every step, each drawn from its own stream in the same order.

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
            drawn = cast(InverseCdfBelief, belief).uniforms(BELIEF_CANDIDATES, rng)
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
        shared = cast(InverseCdfBelief, steps[members[0]].belief)
        points = shared.from_uniforms(np.stack([draws[i][1] for i in members]))
        for i, p in zip(members, points, strict=True):
            draws[i][1] = p
    return [
        step.space.snap(np.vstack([part for part in parts if part is not None]))
        for step, parts in zip(steps, draws, strict=True)
    ]


def _polish(score, starts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """One L-BFGS-B run over all starts at once (their scores add up, so each start moves
    independently); value and forward-difference gradient come from one batched call.

    Returns the best point seen for each start and its score, so nothing is scored twice.
    """
    k, d = starts.shape
    eye = _FD_STEP * np.eye(d)
    best_points = starts.copy()
    best_scores = np.full(k, -np.inf)

    def value_and_grad(flat):
        P = flat.reshape(k, d)
        # Step backwards where a forward step would leave the cube.
        sign = np.where(P + _FD_STEP > 1.0, -1.0, 1.0)
        probes = P[:, None, :] + sign[:, None, :] * eye[None, :, :]
        s = -score(np.vstack([P, probes.reshape(-1, d)]))
        s = np.where(np.isfinite(s), s, 1e300)
        f0, f1 = s[:k], s[k:].reshape(k, d)
        better = -f0 > best_scores
        best_points[better], best_scores[better] = P[better], -f0[better]
        grad = (f1 - f0[:, None]) / (sign * _FD_STEP)
        return float(f0.sum()), grad.ravel()

    # fmin_l_bfgs_b is the same L-BFGS-B as minimize(method="L-BFGS-B") with less set-up per
    # call, which matters at a few evaluations per polish.
    optimize.fmin_l_bfgs_b(
        value_and_grad,
        starts.ravel(),
        bounds=[(0.0, 1.0)] * (k * d),
        maxiter=POLISH_ITERATIONS,
        maxfun=POLISH_ITERATIONS,
    )
    return best_points, best_scores


def maximise(score, step: Step, rng: np.random.Generator) -> np.ndarray:
    """The point proposed for ``score`` (a function of cube points, higher is better)."""
    C = candidates(step, rng)
    s = score(C)
    order = np.argsort(-np.where(np.isfinite(s), s, -np.inf), kind="stable")
    polished, polished_scores = _polish(score, C[order[:POLISHES]])
    if step.space.is_discrete.any():
        # Snapping moves a polished point to its bins: score it where it will be evaluated.
        polished = step.space.snap(polished)
        polished_scores = score(polished)
    pool = np.vstack([polished, C[order]])
    pool_scores = np.concatenate([polished_scores, s[order]])
    ranked = pool[
        np.argsort(-np.where(np.isfinite(pool_scores), pool_scores, -np.inf), kind="stable")
    ]
    return first_new(ranked, step, rng)


def first_new(ranked: np.ndarray, step: Step, rng: np.random.Generator) -> np.ndarray:
    """The first row of ``ranked`` that repeats no evaluated point; else a uniform draw."""
    if len(step.X) == 0:
        return ranked[0]
    # Look at the best few first: almost always one of them is new.
    for rows in (ranked[:8], ranked[8:]):
        gaps = np.abs(rows[:, None, :] - step.X[None, :, :]).max(axis=2).min(axis=1)
        fresh = np.flatnonzero(gaps > _SAME_POINT)
        if fresh.size:
            return rows[fresh[0]]
    return step.space.snap(rng.random((1, step.space.dim)))[0]
