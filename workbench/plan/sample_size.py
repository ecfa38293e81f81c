"""Sample sizes for a study plan, as pure functions over arrays.

Two questions set the number of replicates:

- how many campaigns give a recovery-probability interval of half-width h: the normal
  approximation n = z² p(1 − p) / h², checked against the Wilson score interval;
- how many replicates give a stated power to tell apart two settings whose evaluations to
  target differ by Δ, paired by replicate (common random numbers): estimated by resampling a
  pilot's centred paired differences and applying the Wilcoxon signed-rank test.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from ..seeding import generator

__all__ = [
    "PowerSearch",
    "campaigns_for_interval",
    "centred",
    "interval_campaigns",
    "paired_power",
    "recovery_guess",
    "replicates_for_power",
    "wilson_half_width",
    "z_value",
]

# Above this many replicates the power search stops and reports that it did not get there.
POWER_LIMIT = 4096
# The signed-rank test's handling of zero differences: split their ranks between the signs,
# which keeps the sample size fixed (Pratt and Wilcox variants drop or shrink it).
ZERO_METHOD = "zsplit"


def z_value(confidence: float) -> float:
    """The two-sided normal quantile z = Φ⁻¹((1 + confidence) / 2)."""
    from scipy.stats import norm

    return float(norm.ppf(0.5 + confidence / 2))


def interval_campaigns(p: float, half_width: float, confidence: float) -> float:
    """n = z² p(1 − p) / h², the campaigns for a proportion's interval of half-width h
    (normal approximation), before rounding up."""
    z = z_value(confidence)
    return z**2 * p * (1 - p) / half_width**2


def wilson_half_width(p, n, confidence: float) -> np.ndarray:
    """Half the width of the Wilson score interval at observed share ``p`` of ``n`` campaigns:
    z/(1 + z²/n) · √(p(1 − p)/n + z²/4n²) (the interval never reaches past 0 or 1 for p in
    [0, 1], so this is also (high − low)/2)."""
    from ..analysis import wilson_interval

    p = np.asarray(p, dtype=float)
    n = np.asarray(n, dtype=float)
    low, high = wilson_interval(p * n, n, confidence)
    return (high - low) / 2


def campaigns_for_interval(p: float, half_width: float, confidence: float) -> tuple[int, int]:
    """The campaigns for a recovery interval of half-width h: the normal-approximation count
    ⌈z² p(1 − p)/h²⌉, and the smallest count at or above it whose Wilson interval's half-width
    is at most h (the two agree except near p = 0 or 1, where the Wilson interval is wider)."""
    normal = max(1, math.ceil(interval_campaigns(p, half_width, confidence) - 1e-9))

    def wide(n: int) -> bool:
        return float(wilson_half_width(p, n, confidence)) > half_width

    if not wide(normal):
        return normal, normal
    low, high = normal, 2 * normal
    while wide(high):
        low, high = high, 2 * high
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (mid, high) if wide(mid) else (low, mid)
    return normal, high


def recovery_guess(successes, campaigns, confidence: float) -> tuple[float, bool]:
    """The recovery probability to plan for, from a pilot's successes of campaigns per cell.

    If any cell's Wilson interval contains ½ the pilot cannot tell the probability away from
    the worst case, and ½ is used; otherwise the end of any cell's interval nearest ½ (the
    cell whose interval will be widest). Returns (p, whether p is the worst case ½).
    """
    from ..analysis import wilson_interval

    k = np.atleast_1d(np.asarray(successes, dtype=float))
    n = np.atleast_1d(np.asarray(campaigns, dtype=float))
    keep = n > 0
    if not keep.any():
        return 0.5, True
    low, high = wilson_interval(k[keep], n[keep], confidence)
    if np.any((low <= 0.5) & (high >= 0.5)):
        return 0.5, True
    nearest = np.where(high < 0.5, high, low)
    return float(nearest[np.argmin(np.abs(nearest - 0.5))]), False


def centred(differences, axis: int = -1) -> np.ndarray:
    """Paired differences centred on their median along ``axis`` (one group per position on
    the other axes) and scaled by √(k/(k − 1)), k the group size, the usual correction for
    the spread lost by centring a small sample; NaN values are left out of the medians."""
    d = np.asarray(differences, dtype=float)
    k = np.sum(np.isfinite(d), axis=axis, keepdims=True)
    scale = np.sqrt(k / np.maximum(k - 1, 1))
    with warnings.catch_warnings():
        # A group without any finite difference stays NaN; its median warns needlessly.
        warnings.simplefilter("ignore", RuntimeWarning)
        median = np.nanmedian(d, axis=axis, keepdims=True)
    return (d - median) * scale


def _strata(strata: Sequence[np.ndarray] | np.ndarray) -> list[np.ndarray]:
    out = []
    for s in strata:
        s = np.asarray(s, dtype=float).ravel()
        s = s[np.isfinite(s)]
        if s.size:
            out.append(s)
    if not out:
        raise ValueError("no finite paired differences to resample")
    return out


def paired_power(
    strata: Sequence[np.ndarray] | np.ndarray,
    difference: float,
    replicates: int,
    *,
    alpha: float,
    resamples: int = 1000,
    seed: int | np.random.SeedSequence = 0,
) -> float:
    """Power of the two-sided Wilcoxon signed-rank test at level ``alpha`` to detect a paired
    shift of ``difference``, with ``replicates`` replicates.

    ``strata`` holds centred paired differences, one array per stratum (a landscape); every
    replicate contributes one difference per stratum, drawn with replacement from that
    stratum's array, plus ``difference``. Power is the share of ``resamples`` resampled
    studies whose test rejects "no difference".
    """
    from scipy.stats import wilcoxon

    pools = _strata(strata)
    rng = generator(seed)
    draws = np.concatenate(
        [rng.choice(pool, size=(resamples, replicates), replace=True) for pool in pools], axis=1
    )
    draws = draws + difference
    with np.errstate(invalid="ignore", divide="ignore"):
        p = wilcoxon(draws, axis=1, zero_method=ZERO_METHOD, method="approx").pvalue
    return float(np.mean(np.nan_to_num(p, nan=1.0) < alpha))


@dataclass(frozen=True)
class PowerSearch:
    """The smallest replicate count reaching the power (``reached`` False: not even at
    ``replicates``, the search's limit), the power achieved there, and the search's settings."""

    replicates: int
    achieved: float
    reached: bool
    resamples: int
    pairs_per_replicate: int


def replicates_for_power(
    strata: Sequence[np.ndarray] | np.ndarray,
    difference: float,
    *,
    power: float,
    alpha: float,
    resamples: int = 1000,
    seed: int | np.random.SeedSequence = 0,
    limit: int = POWER_LIMIT,
) -> PowerSearch:
    """The smallest replicate count whose :func:`paired_power` reaches ``power``.

    Doubling from 1 until the power is reached (or ``limit``), then bisecting; every count
    is resampled with the same seed, so the power curve is smooth enough to bisect.
    """
    pools = _strata(strata)

    def at(n: int) -> float:
        return paired_power(
            pools, difference, n, alpha=alpha, resamples=resamples, seed=_copy(seed)
        )

    low, high = 0, 1
    achieved = at(high)
    while achieved < power:
        if high >= limit:
            return PowerSearch(limit, achieved, False, resamples, len(pools))
        low, high = high, min(2 * high, limit)
        achieved = at(high)
    while high - low > 1:
        mid = (low + high) // 2
        value = at(mid)
        if value >= power:
            high, achieved = mid, value
        else:
            low = mid
    return PowerSearch(high, achieved, True, resamples, len(pools))


def _copy(seed):
    """A fresh copy of a seed, so that every count draws from the same stream."""
    if isinstance(seed, np.random.SeedSequence):
        return np.random.SeedSequence(entropy=seed.entropy, spawn_key=seed.spawn_key)
    return seed
