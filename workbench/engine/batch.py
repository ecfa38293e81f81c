"""Campaigns in lock-step: R campaigns of one dimension, budget and design size advance
together, their GP algebra and acquisition search stacked into batched numpy calls.

Each campaign keeps its own streams and draws from them in the order a lone campaign would
(exploration, fit starts, candidates, fallbacks), and every stacked operation acts campaign by
campaign, so a campaign's trace does not depend on the others in its batch.

Per step, for the campaigns that use a model:

1. refit (:func:`workbench.gp.refit_due`) by the stacked fit of
   :mod:`workbench.engine.stacked_gp` (one vectorised L-BFGS-B over every start), or condition
   the last hyper-parameters on the new data;
2. candidates as :func:`workbench.engine.strategies.base.candidates`, scored over ``(R, m)``
   with each campaign's belief weight λ, threshold f_γ and best value;
3. the ``POLISHES`` best candidates of every campaign polished by scipy's L-BFGS-B driver
   per campaign (``POLISH_ITERATIONS`` iterations and evaluations), all requests answered at
   once, with the analytic gradient of the model term (log EI or the log odds of good) and a
   forward-difference gradient of the belief term (each campaign's belief on its own rows),
   keeping the best point seen;
4. the first new point (no repeated evaluation), checked for all campaigns at once.

Strategies without a model (random, belief sampling) and model-based strategies without a
stacked score propose one campaign at a time through their ``propose``.
The wall time of a step is shared equally by the campaigns of the batch.
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
from .acquisition import log_expected_improvement_grad, log_odds_good_grad
from .campaign import (
    BELIEF_USERS,
    Campaign,
    Trace,
    _design,
    _evaluate,
    _mode_point,
    _model_targets,
)
from .lbfgsb import minimise_driven
from .strategies import Step, get
from .strategies.base import (
    _FD_STEP,
    _SAME_POINT,
    LOG_BELIEF_FLOOR,
    POLISH_ITERATIONS,
    POLISHES,
    candidate_sets,
)
from .strategies.pseudo_posterior import belief_log_odds

__all__ = ["run_batch"]

# Stacked scores: log EI (prior-weighted; no-belief is it at weight 0) or the model's log odds
# of good (pseudo-posterior), each plus λ times its belief term.
_EI, _GOOD = "ei", "good"
_KINDS = {"prior-weighted": _EI, "no-belief": _EI, "pseudo-posterior": _GOOD}
# How many of the best-ranked points the first-new rule checks before looking at the rest.
_FIRST_LOOK = 8


class _Campaign:
    """One campaign's running state inside a batch."""

    def __init__(self, c: Campaign, streams: dict[str, np.random.Generator]):
        self.c = c
        self.space = c.space
        self.d = c.space.dim
        self.strategy = get(c.strategy)
        self.kind = _KINDS.get(c.strategy)
        self.uses_belief = c.strategy in BELIEF_USERS
        self.belief = (
            c.belief if self.uses_belief else Product(tuple(Uniform() for _ in range(self.d)))
        )
        design = c.design
        if c.strategy == "belief-sampling":
            design = "belief"
        elif not self.uses_belief and design == "belief":
            design = "sobol"
        self.design = design
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
        self.mode_value = float(_evaluate(c.placement, _mode_point(c.space, c.belief))[0])
        self.log_belief_max = (
            float(self.belief.logpdf(_mode_point(c.space, self.belief))[0])
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
        true = _evaluate(c.placement, U.reshape(k * m, d)).reshape(k, m)
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
        s.evaluate(slice(0, n0), _design(s.design, n0, s.space, s.belief, s.design_rng))
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
            rows, y = _model_targets(s.observed[:t])
            data[i] = (rows, y)
            if s.strategy.uses_model and not explore and len(rows) >= 2:
                modelled.append(i)
            elif explore or s.strategy.uses_model:
                s.threshold[t] = np.nan
                s.evaluate(slice(t, t + 1), s.uniform()[None, :])
            else:
                step = Step(s.space, s.points[rows], y, s.belief, s.log_belief_max, lams[i], 0.0)
                u, f_gamma = s.strategy.propose(step, s.rng)
                s.threshold[t] = f_gamma
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


def _scores(states, kinds, refs, lams, stack, U, gradient=False):
    """Scores ``(R, m)`` of cube points ``U`` ``(R, m, d)``, and with ``gradient`` their
    derivatives in ``U`` (model term analytic, belief term by forward differences)."""
    if all(s.space._continuous for s in states):
        # Features of a continuous space are the clipped points: one call for the batch.
        F = np.clip(U, 0.0, 1.0)
    else:
        F = np.stack([s.space.features(u) for s, u in zip(states, U, strict=True)])
    out = stack.predict(F, gradient=gradient)
    mean, sd = out[0], out[1]
    ref = refs[:, None]
    ei, good = kinds == _EI, kinds == _GOOD
    value = np.empty_like(mean)
    dm, ds = np.empty_like(mean), np.empty_like(mean)
    for mask, fn in ((ei, log_expected_improvement_grad), (good, log_odds_good_grad)):
        if mask.any():
            v, a, b = fn(mean[mask], sd[mask], ref[mask])
            value[mask], dm[mask], ds[mask] = v, a, b
    grad = None
    if gradient:
        dF = dm[:, :, None] * out[2] + ds[:, :, None] * out[3]
        jac = np.stack([s.jacobian for s in states])
        grad = np.matmul(dF, jac)
    weighted = [i for i in range(len(states)) if lams[i] != 0]
    if not weighted:
        return (value, grad) if gradient else value
    m, d = U.shape[1], U.shape[2]
    if gradient:
        # Forward differences of the belief term (backwards where a step would leave the cube).
        sign = np.where(U[weighted] + _FD_STEP > 1.0, -1.0, 1.0)
        probes = U[weighted][:, :, None, :] + sign[:, :, None, :] * (_FD_STEP * np.eye(d))
        rows = np.concatenate([U[weighted], probes.reshape(len(weighted), m * d, d)], axis=1)
    else:
        rows = U[weighted]
    # λ · log π (floored) for log EI; λ · log(P_g/P_b) for the log odds of good.
    log_belief = np.maximum(_log_beliefs([states[i] for i in weighted], rows), LOG_BELIEF_FLOOR)
    good = kinds[weighted] == _GOOD
    if good.any():
        lbm = np.array([states[i].log_belief_max for i in weighted])[good]
        log_belief[good] = belief_log_odds(log_belief[good], lbm[:, None])
    b = lams[weighted][:, None] * log_belief
    value[weighted] += b[:, :m]
    if gradient:
        grad[weighted] += (b[:, m:].reshape(-1, m, d) - b[:, :m, None]) / (sign * _FD_STEP)
    return (value, grad) if gradient else value


def _propose(states: list[_Campaign], data: list, lams: np.ndarray, stack: sg.Stack, t: int):
    """Propose and evaluate the next point of every modelled campaign."""
    stacked = [i for i, s in enumerate(states) if s.kind is not None]
    for i, s in enumerate(states):
        if s.kind is None:
            # A model-based strategy without a stacked score: its own propose on a GP object.
            rows, y = data[i]
            model = gp.posterior(
                s.space.features(s.points[rows]), y, gp.Hyperparameters.from_log(s.theta)
            )
            step = Step(
                s.space, s.points[rows], y, s.belief, s.log_belief_max, lams[i], s.c.quantile, model
            )
            u, f_gamma = s.strategy.propose(step, s.rng)
            s.threshold[t] = f_gamma
            s.evaluate(slice(t, t + 1), u[None, :])
    if not stacked:
        return
    states = [states[i] for i in stacked]
    data = [data[i] for i in stacked]
    lams = lams[stacked]
    stack = stack.take(np.array(stacked))
    R = len(states)
    kinds = np.array([s.kind for s in states])
    # f_γ of the pseudo-posterior's campaigns, one call per quantile level (row by row, as
    # alone); the best value seen for the others.
    Y = np.stack([y for _, y in data])
    refs = Y.min(axis=1)
    quantiles = np.array([s.c.quantile if s.kind == _GOOD else np.nan for s in states])
    for q in np.unique(quantiles[kinds == _GOOD]):
        rows = np.flatnonzero(quantiles == q)
        refs[rows] = np.quantile(Y[rows], q, axis=1)
    for i, s in enumerate(states):
        s.threshold[t] = refs[i] if s.kind == _GOOD else np.nan

    # 1. candidates (each from its own stream) and their scores.
    C = np.stack(
        candidate_sets(
            [
                Step(s.space, s.points[rows], y, s.belief, s.log_belief_max, lam, 0.0)
                for s, (rows, y), lam in zip(states, data, lams, strict=True)
            ],
            [s.rng for s in states],
        )
    )
    score = _scores(states, kinds, refs, lams, stack, C)
    score = np.where(np.isfinite(score), score, -np.inf)
    order = np.argsort(-score, axis=1, kind="stable")
    C = np.take_along_axis(C, order[:, :, None], axis=1)
    score = np.take_along_axis(score, order, axis=1)

    # 2. polish the best few of every campaign at once, each start its own problem.
    k = POLISHES
    d = C.shape[2]
    # As the lone engine: one L-BFGS-B problem per campaign over its k starts (their scores
    # add up, so each start moves independently), keeping the best point seen for each start.
    # Every evaluation scores all R·k current points as one (R, k) block, so a campaign's
    # arithmetic is the same whatever its batch; rows not asked for are ignored.
    current = C[:, :k].copy()
    best_points = current.copy()
    best_scores = np.full((R, k), -np.inf)

    def negative(X, idx):
        current[idx] = X.reshape(len(idx), k, d)
        v, g = _scores(states, kinds, refs, lams, stack, current, True)
        v, g = v[idx], g[idx]
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
            kinds[idx],
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
    fresh = gaps > _SAME_POINT
    for i, s in enumerate(states):
        if fresh[i].any():
            u = head[i, np.argmax(fresh[i])]
        else:
            rest = ranked[i, _FIRST_LOOK:]
            g = np.abs(rest[:, None, :] - X[i][None, :, :]).max(axis=2).min(axis=1)
            new = np.flatnonzero(g > _SAME_POINT)
            u = rest[new[0]] if new.size else s.uniform()
        s.evaluate(slice(t, t + 1), u[None, :])
