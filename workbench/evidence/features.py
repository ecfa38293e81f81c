"""The monitor's features: what a campaign's first t evaluations say about its belief.

Every feature is a function of a :class:`Window` (the first t evaluations of some campaigns
that share a belief), listed by name in :data:`FEATURE_FUNCTIONS`; :data:`FEATURES` and the
columns of :func:`campaign_features` both come from that one mapping, in its order.

The *level* of a point is the share of the belief's mass that is denser than the point (0 at
the mode, 1 far outside), and *distance* is the root mean square of (u − mode) / sd over
coordinates, both read from the belief's fixed sample
(:class:`~workbench.world.reference.BeliefReference`); the *good* observations are the
⌈quantile · n⌉ lowest of the n finite values (at least one; failed evaluations rank last):

=========================  =====================================================================
``best_level``             level of the best point so far
``best_distance``          distance of the best point from the belief's mode
``good_share_hdr50``       share of the good observations inside the 50 % highest-density region
``good_share_hdr90``       share of the good observations inside the 90 % highest-density region
``good_level``             mean level of the good observations
``good_centroid_level``    level of the centroid of the good points
``good_centroid_distance`` distance of that centroid from the belief's mode
``all_level``              mean level of every evaluated point (how closely the campaign follows
                           the belief, against which the good points' levels are read)
``value_index_spearman``   Spearman correlation of value with evaluation index (below 0: values
                           keep falling)
``late_improvement``       share of the evaluations after the first third that improved the best
``failed_share``           share of failed evaluations
=========================  =====================================================================

Every feature is rank- or belief-based, so landscapes of different scales read alike.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import cached_property
from types import MappingProxyType

import numpy as np
from scipy import stats

from ..engine.strategies import DEFAULT_QUANTILE
from ..validation import InputError, check_number, raw
from ..world.reference import Belief, BeliefReference

__all__ = ["FEATURES", "FEATURE_FUNCTIONS", "Window", "campaign_features"]


@dataclass(frozen=True, eq=False)
class Window:
    """The first ``t`` evaluations of n campaigns that share a belief.

    ``points`` (n, t, d) cube points, ``values`` (n, t) with +inf where an evaluation failed,
    ``levels`` (n, t) the points' levels under ``ref``; what several features share is computed
    once, on first use.
    """

    ref: BeliefReference
    points: np.ndarray
    values: np.ndarray
    levels: np.ndarray
    quantile: float

    @property
    def t(self) -> int:
        return self.values.shape[1]

    @cached_property
    def finite(self) -> np.ndarray:
        return np.isfinite(self.values)

    @cached_property
    def _best(self) -> tuple[np.ndarray, np.ndarray]:
        """Campaign rows and the index of each one's best evaluation."""
        best = np.argmin(self.values, axis=1)
        return np.arange(len(best)), best

    @property
    def best_point(self) -> np.ndarray:
        return self.points[self._best]

    @property
    def best_level(self) -> np.ndarray:
        return self.levels[self._best]

    @cached_property
    def good_weight(self) -> np.ndarray:
        """1/k on each of the k good observations of a campaign, 0 elsewhere (n, t)."""
        k = np.maximum(1, np.ceil(self.quantile * self.finite.sum(axis=1)).astype(int))
        # Ties go to the earlier evaluation, so exactly k points are good.
        order = np.argsort(self.values, axis=1, kind="stable")
        rank = np.argsort(order, axis=1, kind="stable")
        return (rank < k[:, None]) / k[:, None]

    def good_mean(self, x: np.ndarray) -> np.ndarray:
        """Mean of ``x`` (n, t) over each campaign's good observations."""
        return (self.good_weight * x).sum(axis=1)

    @cached_property
    def centroid(self) -> np.ndarray:
        """The centroid of each campaign's good points (n, d)."""
        return np.einsum("nt,ntd->nd", self.good_weight, self.points)


def _spearman_with_index(w: Window) -> np.ndarray:
    """Pearson correlation of the ranked values with 1 … t (0 where either is constant)."""
    ranked = stats.rankdata(w.values, axis=1)
    index = np.arange(1, w.t + 1, dtype=float)
    a = ranked - ranked.mean(axis=-1, keepdims=True)
    b = index - index.mean()
    den = np.sqrt((a**2).sum(axis=-1) * (b**2).sum())
    with np.errstate(invalid="ignore", divide="ignore"):
        r = (a * b).sum(axis=-1) / den
    return np.where(den > 0, r, 0.0)


def _late_improvement(w: Window) -> np.ndarray:
    """Share of the evaluations after the first ⌈t/3⌉ that set a new best."""
    t, n = w.t, w.values.shape[0]
    start = max(1, math.ceil(t / 3))
    if t == 1 or start >= t:
        return np.zeros(n)
    running = np.minimum.accumulate(w.values, axis=1)
    improved = w.values[:, 1:] < running[:, :-1]
    return improved[:, start - 1 :].mean(axis=1)


FEATURE_FUNCTIONS: Mapping[str, Callable[[Window], np.ndarray]] = MappingProxyType(
    {
        "best_level": lambda w: w.best_level,
        "best_distance": lambda w: w.ref.distance(w.best_point),
        "good_share_hdr50": lambda w: w.good_mean(w.levels <= 0.5),
        "good_share_hdr90": lambda w: w.good_mean(w.levels <= 0.9),
        "good_level": lambda w: w.good_mean(w.levels),
        "good_centroid_level": lambda w: w.ref.level(w.centroid),
        "good_centroid_distance": lambda w: w.ref.distance(w.centroid),
        "all_level": lambda w: w.levels.mean(axis=1),
        "value_index_spearman": _spearman_with_index,
        "late_improvement": _late_improvement,
        "failed_share": lambda w: 1.0 - w.finite.sum(axis=1) / w.t,
    }
)
FEATURES: tuple[str, ...] = tuple(FEATURE_FUNCTIONS)


def campaign_features(
    points, values, belief: Belief | BeliefReference, t, quantile: float = DEFAULT_QUANTILE
) -> np.ndarray:
    """The :data:`FEATURES` of campaigns after their first t evaluations.

    ``points`` are cube points (..., T, d) in evaluation order, ``values`` the values to
    minimise (..., T), NaN where an evaluation failed; leading axes are campaigns that share
    ``belief`` (a belief or its :class:`BeliefReference`, reused across calls). ``t`` is one
    number of evaluations (result (..., F)) or a sequence of them (result (..., len(t), F)).
    """
    ref = BeliefReference.of(belief)
    points = np.asarray(points, dtype=float)
    values = np.asarray(values, dtype=float)
    if points.ndim < 2 or points.shape[-1] != ref.dim or points.shape[:-1] != values.shape:
        raise InputError(
            "points",
            f"cube points (..., T, {ref.dim}) matching values (..., T)",
            raw(f"points {points.shape} and values {values.shape}"),
        )
    check_number(quantile, "quantile", low=0.0, high=1.0, closed="right")
    budget = values.shape[-1]
    steps = [t] if np.ndim(t) == 0 else list(t)
    steps = [check_number(s, "t", low=1, high=budget, integer=True) for s in steps]
    lead = values.shape[:-1]
    P = points.reshape(-1, budget, ref.dim)
    v = values.reshape(-1, budget)
    v = np.where(np.isfinite(v), v, np.inf)
    levels = ref.level(P)
    windows = [Window(ref, P[:, :s], v[:, :s], levels[:, :s], quantile) for s in steps]
    out = np.stack(
        [np.column_stack([f(w) for f in FEATURE_FUNCTIONS.values()]) for w in windows], axis=1
    )
    out = out.reshape(*lead, len(steps), len(FEATURES))
    return out[..., 0, :] if np.ndim(t) == 0 else out
