"""Campaigns in lock-step: R campaigns of one dimension, budget and design size advance
together, their GP algebra and acquisition search stacked into batched numpy calls.
:func:`run` is a batch of one: there is no second, single-campaign path.

Each campaign keeps its own streams and draws from them in the order a lone campaign would
(exploration, fit starts, candidates, fallbacks), and every stacked operation acts campaign by
campaign, so a campaign's trace does not depend on the others in its batch.

Per step, for the campaigns whose strategy uses a model:

1. refit (:func:`workbench.gp.refit_due`) by the stacked fit of
   :mod:`workbench.engine.stacked_gp` (one vectorised L-BFGS-B over every start), or condition
   the last hyper-parameters on the new data;
2. candidates (:func:`workbench.engine.campaign.candidate_sets`), scored over ``(R, m)`` by
   each strategy's :meth:`~workbench.engine.strategies.base.Strategy.score` on the rows of its
   campaigns, with each campaign's reference (best value or f_γ), belief weight λ and belief
   log density;
3. the ``POLISHES`` best candidates of every campaign polished by scipy's L-BFGS-B driver
   per campaign (``POLISH_ITERATIONS`` iterations and evaluations), all requests answered at
   once, with the score's gradient (model term by the chain rule through the GP's mean and sd,
   belief term by forward differences, each campaign's belief on its own rows), keeping the
   best point seen;
4. the first new point (no repeated evaluation), checked for all campaigns at once.

Strategies without a model (random, belief sampling) propose one campaign at a time through
their ``propose`` hook. The wall time of a step is shared equally by the campaigns of the batch.
"""

from __future__ import annotations

import time
from collections.abc import Sequence

import numpy as np
from threadpoolctl import threadpool_limits

from .. import gp
from ..world.beliefs import Product, Uniform
from ..world.space import Categorical
from . import stacked_gp as sg
from .campaign import (
    FD_STEP,
    POLISH_ITERATIONS,
    POLISHES,
    Campaign,
    Trace,
    candidate_sets,
    design,
    evaluate,
    mode_point,
    model_targets,
)
from .lbfgsb import minimise_driven
from .strategies import Derivatives, Step, get
from .strategies.base import SAME_POINT

__all__ = ["run", "run_batch"]

# How many of the best-ranked points the first-new rule checks before looking at the rest.
_FIRST_LOOK = 8


class _Campaign:
    """One campaign's running state inside a batch."""

    def __init__(self, c: Campaign, streams: dict[str, np.random.Generator]):
        self.c = c
        self.space = c.space
        self.d = c.space.dim
        self.strategy = get(c.strategy)
        self.uses_belief = self.strategy.uses_belief
        self.belief = (
            c.belief if self.uses_belief else Product(tuple(Uniform() for _ in range(self.d)))
        )
        kind = c.design
        if self.strategy.design is not None:
            kind = self.strategy.design
        elif not self.uses_belief and kind == "belief":
            kind = "sobol"
        self.design = kind
        self.design_rng, self.rng, self.noise_rng = (
            streams["design"],
            streams["strategy"],
            streams["noise"],
        )
        budget = c.budget
        self.points = np.full((budget, self.d), np.nan)
        self.observed = np.full(budget, np.nan)
        self.value = np.full(budget, np.nan)
        self.weight = np.full(budget, np.nan)
        self.threshold = np.full(budget, np.nan)
        self.seconds = np.zeros(budget)
        self.theta: np.ndarray | None = None
        self.last_fit = 0
        self.mode_value = float(evaluate(c.placement, mode_point(c.space, c.belief))[0])
        self.log_belief_max = (
            float(self.belief.logpdf(mode_point(c.space, self.belief))[0])
            if self.uses_belief
            else 0.0
        )
        # The linear map from cube points to the model's inputs on the continuous coordinates
        # (snapped and one-hot coordinates are flat almost everywhere: zero gradient).
        F = c.space.features(np.full((1, self.d), 0.5))
        self.jacobian = np.zeros((F.shape[1], self.d))
        col = 0
        for j, p in enumerate(c.space.parameters):
            width = p.levels if isinstance(p, Categorical) else 1
            if width == 1 and not c.space.is_discrete[j]:
                self.jacobian[col, j] = 1.0
            col += width

    def evaluate(self, rows: slice, U: np.ndarray) -> None:
        # Random search with k× evaluations: each row keeps the best of k draws, U among them.
        c, d = self.c, self.d
        k, m = max(1, c.multiple), len(U)
        U = np.vstack([U, self.space.snap(self.rng.random((m * (k - 1), d)))]).reshape(k, m, d)
        true = evaluate(c.placement, U.reshape(k * m, d)).reshape(k, m)
        noisy = true + c.noise_sd * self.noise_rng.standard_normal((k, m))
        pick = np.argmin(np.where(np.isfinite(noisy), noisy, np.inf), axis=0)
        cols = np.arange(m)
        self.points[rows] = U[pick, cols]
        self.value[rows] = true[pick, cols]
        self.observed[rows] = noisy[pick, cols]

    def uniform(self) -> np.ndarray:
        return self.space.snap(self.rng.random((1, self.d)))[0]

    def trace(self) -> Trace:
        placement = self.c.placement
        failed = ~np.isfinite(self.value)
        best = np.minimum.accumulate(np.where(failed, np.inf, self.value))
        best = np.where(np.isfinite(best), best, np.nan)
        return Trace(
            points=self.points,
            observed=self.observed,
            value=self.value,
            failed=failed,
            best=best,
            regret=best - placement.minimum,
            normalized_regret=placement.normalized_regret(best),
            weight=self.weight,
            threshold=self.threshold,
            mode_value=self.mode_value,
            seconds=self.seconds,
        )


def run(campaign: Campaign, streams: dict[str, np.random.Generator]) -> Trace:
    """Run ``campaign`` with the named streams of :func:`workbench.seeding.campaign_streams`:
    a batch of one."""
    return run_batch([campaign], [streams])[0]


def run_batch(
    campaigns: Sequence[Campaign], streams_list: Sequence[dict[str, np.random.Generator]]
) -> list[Trace]:
    """Run ``campaigns`` in lock-step, each with its own named streams
    (:func:`workbench.seeding.campaign_streams`); they must share dimension, budget and design
    size. Returns their traces in order.

    BLAS runs single-threaded inside: at these matrix sizes threads cost far more than they
    save.
    """
    if len(campaigns) != len(streams_list):
        raise ValueError(
            f"'streams_list' must have one entry per campaign ({len(campaigns)}); "
            f"got {len(streams_list)}"
        )
    if not campaigns:
        return []
    shapes = {(c.space.dim, c.budget, min(c.n_initial, c.budget)) for c in campaigns}
    if len(shapes) != 1:
        raise ValueError(
            "'campaigns' must share dimension, budget and design size; "
            f"got {sorted(shapes)!r} (dimension, budget, design size)"
        )
    with threadpool_limits(limits=1, user_api="blas"):
        return _run(campaigns, streams_list)


def _run(campaigns, streams_list) -> list[Trace]:
    states = [_Campaign(c, s) for c, s in zip(campaigns, streams_list, strict=True)]
    budget = campaigns[0].budget
    n0 = min(campaigns[0].n_initial, budget)
    R = len(states)

    start = time.perf_counter()
    for s in states:
        s.evaluate(slice(0, n0), design(s.design, n0, s.space, s.belief, s.design_rng))
    for s in states:
        s.seconds[:n0] = (time.perf_counter() - start) / max(n0, 1) / R

    for t in range(n0, budget):
        start = time.perf_counter()
        modelled, data = [], {}
        lams = np.zeros(R)
        for i, s in enumerate(states):
            c = s.c
            lams[i] = float(c.decay(t)) if (c.decay is not None and s.uses_belief) else 0.0
            explore = s.rng.random() < c.exploration
            rows, y = model_targets(s.observed[:t])
            data[i] = (rows, y)
            if s.strategy.uses_model and not explore and len(rows) >= 2:
                modelled.append(i)
            elif explore or s.strategy.uses_model:
                s.threshold[t] = np.nan
                s.evaluate(slice(t, t + 1), s.uniform()[None, :])
            else:
                u = s.strategy.propose(Step(s.space, s.points[rows], y, s.belief, lams[i]), s.rng)
                s.threshold[t] = np.nan
                s.evaluate(slice(t, t + 1), u[None, :])
        if modelled:
            stack = _models([states[i] for i in modelled], [data[i] for i in modelled])
            _propose(
                [states[i] for i in modelled], [data[i] for i in modelled], lams[modelled], stack, t
            )
        elapsed = (time.perf_counter() - start) / R
        for i, s in enumerate(states):
            if s.c.decay is not None and s.uses_belief:
                s.weight[t] = lams[i]
            s.seconds[t] = elapsed
    return [s.trace() for s in states]


def _models(states: list[_Campaign], data: list) -> sg.Stack:
    """Refit or condition every campaign's GP; one stack in the order of ``states``."""
    F = np.stack(
        [s.space.features(s.points[rows]) for s, (rows, _) in zip(states, data, strict=True)]
    )
    Y = np.stack([y for _, y in data])
    n = F.shape[1]
    refit = np.array([s.theta is None or gp.refit_due(n, s.last_fit) for s in states])
    parts, order = [], []
    if refit.any():
        idx = np.flatnonzero(refit)
        fitted = sg.fit(
            F[idx],
            Y[idx],
            [states[i].theta for i in idx],
            [states[i].rng for i in idx],
            restarts=1,
            maxiter=16,
        )
        for j, i in enumerate(idx):
            states[i].theta, states[i].last_fit = fitted.theta[j], n
        parts.append(fitted)
        order.append(idx)
    if (~refit).any():
        idx = np.flatnonzero(~refit)
        conditioned, ok = sg.build(F[idx], Y[idx], np.stack([states[i].theta for i in idx]))
        if not ok.all():
            raise np.linalg.LinAlgError(
                "covariance matrix is not positive definite even with jitter"
            )
        parts.append(conditioned)
        order.append(idx)
    if len(parts) == 1:
        return parts[0]
    whole = sg.Stack(
        *(np.concatenate([getattr(p, f) for p in parts]) for f in sg.Stack.__dataclass_fields__)
    )
    return whole.take(np.argsort(np.concatenate(order), kind="stable"))


def _log_beliefs(states: list[_Campaign], rows: np.ndarray) -> np.ndarray:
    """Each campaign's belief log density at its own rows ``(R, m, d)``; campaigns holding the
    same belief object (the settings of one grid cell) share one call. A density is a
    function of each row alone, so sharing the call changes no value."""
    R, m, d = rows.shape
    out = np.empty((R, m))
    groups: dict[int, list[int]] = {}
    for i, s in enumerate(states):
        groups.setdefault(id(s.belief), []).append(i)
    for members in groups.values():
        dens = states[members[0]].belief.logpdf(rows[members].reshape(-1, d))
        out[members] = np.asarray(dens, dtype=float).reshape(len(members), m)
    return out


def _groups(states: list[_Campaign]) -> list[tuple[object, np.ndarray]]:
    """The campaigns of each strategy: (strategy, their indices), in order of first use."""
    out: dict[str, list[int]] = {}
    for i, s in enumerate(states):
        out.setdefault(s.strategy.name, []).append(i)
    return [(states[idx[0]].strategy, np.array(idx)) for idx in out.values()]


def _scores(states, refs, lams, stack, U, gradient=False):
    """Scores ``(R, m)`` of cube points ``U`` ``(R, m, d)``, each strategy's score on the rows
    of its campaigns, and with ``gradient`` their derivatives in ``U``."""
    if all(s.space._continuous for s in states):
        # Features of a continuous space are the clipped points: one call for the batch.
        F = np.clip(U, 0.0, 1.0)
    else:
        F = np.stack([s.space.features(u) for s, u in zip(states, U, strict=True)])
    out = stack.predict(F, gradient=gradient)
    mean, sd = out[0], out[1]
    R, m, d = U.shape
    # Belief log densities, only for the campaigns whose λ is not zero (the others' rows are
    # never read); with ``gradient`` also at forward-difference probes (backwards where a step
    # would leave the cube).
    log_belief = np.zeros((R, m))
    probes = steps = None
    weighted = np.flatnonzero(lams != 0)
    if gradient:
        probes, steps = np.zeros((R, m, d)), np.ones((R, m, d))
    if weighted.size:
        rows = U[weighted]
        if gradient:
            sign = np.where(rows + FD_STEP > 1.0, -1.0, 1.0)
            steps[weighted] = sign * FD_STEP
            moved = rows[:, :, None, :] + sign[:, :, None, :] * (FD_STEP * np.eye(d))
            rows = np.concatenate([rows, moved.reshape(len(weighted), m * d, d)], axis=1)
        dens = _log_beliefs([states[i] for i in weighted], rows)
        log_belief[weighted] = dens[:, :m]
        if gradient:
            probes[weighted] = dens[:, m:].reshape(-1, m, d)
    top = np.array([s.log_belief_max for s in states])
    value = np.empty((R, m))
    grad = np.empty((R, m, d)) if gradient else None
    jac = np.stack([s.jacobian for s in states]) if gradient else None
    for strategy, idx in _groups(states):
        derivatives = None
        if gradient:
            derivatives = Derivatives(out[2][idx], out[3][idx], jac[idx], probes[idx], steps[idx])
        got = strategy.score(
            mean[idx], sd[idx], refs[idx], lams[idx], log_belief[idx], top[idx], derivatives
        )
        if gradient:
            value[idx], grad[idx] = got
        else:
            value[idx] = got
    return (value, grad) if gradient else value


def _propose(states: list[_Campaign], data: list, lams: np.ndarray, stack: sg.Stack, t: int):
    """Propose and evaluate the next point of every modelled campaign."""
    R = len(states)
    # Each strategy's reference per campaign: the best value seen, or f_γ (recorded as the
    # threshold) for a strategy that uses the quantile.
    Y = np.stack([y for _, y in data])
    refs = np.empty(R)
    for strategy, idx in _groups(states):
        refs[idx] = strategy.reference(Y[idx], np.array([states[i].c.quantile for i in idx]))
    for i, s in enumerate(states):
        s.threshold[t] = refs[i] if s.strategy.uses_quantile else np.nan

    # 1. candidates (each from its own stream) and their scores.
    C = np.stack(
        candidate_sets(
            [
                Step(s.space, s.points[rows], y, s.belief, lam)
                for s, (rows, y), lam in zip(states, data, lams, strict=True)
            ],
            [s.rng for s in states],
        )
    )
    score = _scores(states, refs, lams, stack, C)
    score = np.where(np.isfinite(score), score, -np.inf)
    order = np.argsort(-score, axis=1, kind="stable")
    C = np.take_along_axis(C, order[:, :, None], axis=1)
    score = np.take_along_axis(score, order, axis=1)

    # 2. polish the best few of every campaign at once, each start its own problem.
    k = POLISHES
    d = C.shape[2]
    # As the lone engine: one L-BFGS-B problem per campaign over its k starts (their scores
    # add up, so each start moves independently), keeping the best point seen for each start.
    # Each evaluation scores only the campaigns whose driver asks for one (about half of them,
    # on average, once the first have stopped): every step of the score works slice by slice
    # over campaigns, so a campaign's arithmetic is the same whatever its batch.
    current = C[:, :k].copy()
    best_points = current.copy()
    best_scores = np.full((R, k), -np.inf)
    subsets: dict[bytes, tuple] = {}

    def negative(X, idx):
        current[idx] = X.reshape(len(idx), k, d)
        key = idx.tobytes()
        if key not in subsets:  # the set asking shrinks and repeats: one sub-stack per set
            subsets[key] = ([states[i] for i in idx], stack.take(idx))
        members, sub = subsets[key]
        v, g = _scores(members, refs[idx], lams[idx], sub, current[idx], True)
        v = np.where(np.isfinite(v), v, -1e300)
        better = v > best_scores[idx]
        rows, cols = np.nonzero(better)
        best_points[idx[rows], cols] = current[idx[rows], cols]
        best_scores[idx[rows], cols] = v[rows, cols]
        g = np.where(np.isfinite(g), g, 0.0)
        return -v.sum(axis=1), -g.reshape(len(idx), k * d)

    minimise_driven(
        negative,
        C[:, :k].reshape(R, k * d),
        0.0,
        1.0,
        maxiter=POLISH_ITERATIONS,
        maxfun=POLISH_ITERATIONS,
    )
    polished = best_points
    polished_score = best_scores.copy()
    discrete = [i for i, s in enumerate(states) if s.space.is_discrete.any()]
    if discrete:
        # Snapping moves a polished point to its bins: score it where it will be evaluated.
        for i in discrete:
            polished[i] = states[i].space.snap(polished[i])
        idx = np.array(discrete)
        polished_score[idx] = _scores(
            [states[i] for i in idx],
            refs[idx],
            lams[idx],
            stack.take(idx),
            polished[idx],
        )
    polished_score = np.where(np.isfinite(polished_score), polished_score, -np.inf)
    pool = np.concatenate([polished, C], axis=1)
    pool_score = np.concatenate([polished_score, score], axis=1)
    ranked = np.take_along_axis(
        pool, np.argsort(-pool_score, axis=1, kind="stable")[:, :, None], axis=1
    )

    # 3. the first new point of every campaign.
    X = np.stack([s.points[:t] for s in states])
    head = ranked[:, :_FIRST_LOOK]
    gaps = np.abs(head[:, :, None, :] - X[:, None, :, :]).max(axis=3).min(axis=2)
    fresh = gaps > SAME_POINT
    for i, s in enumerate(states):
        if fresh[i].any():
            u = head[i, np.argmax(fresh[i])]
        else:
            rest = ranked[i, _FIRST_LOOK:]
            g = np.abs(rest[:, None, :] - X[i][None, :, :]).max(axis=2).min(axis=1)
            new = np.flatnonzero(g > SAME_POINT)
            u = rest[new[0]] if new.size else s.uniform()
        s.evaluate(slice(t, t + 1), u[None, :])
