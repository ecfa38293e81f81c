"""Reference statistics and the bootstrap: Wilson intervals, Kaplan–Meier, recovery, and
intervals by resampling replicates.

Replicate k of every setting, baseline and distortion shares its landscape placement and
random streams (common random numbers), so each bootstrap draw resamples the replicate index
once and applies it to everything alike: differences between settings are paired.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
import xarray as xr

from ..seeding import MAX_SEED, generator
from ..validation import check_number, check_size
from .dataset import HALF_TOLERANCE, POOLED
from .grid_metrics import evaluations_to_target


def wilson_interval(successes, n, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Wilson score interval of a proportion k/n:
    (p + z²/2n ± z √(p(1−p)/n + z²/4n²)) / (1 + z²/n), z the normal (1+level)/2 quantile."""
    from scipy.stats import norm

    k = np.asarray(successes, dtype=float)
    n = np.asarray(n, dtype=float)
    z = norm.ppf(0.5 + level / 2)
    with np.errstate(invalid="ignore", divide="ignore"):
        p = k / n
        denom = 1 + z**2 / n
        centre = (p + z**2 / (2 * n)) / denom
        half = z / denom * np.sqrt(p * (1 - p) / n + z**2 / (4 * n**2))
    return np.clip(centre - half, 0, 1), np.clip(centre + half, 0, 1)


def kaplan_meier(times, reached) -> tuple[np.ndarray, np.ndarray]:
    """Kaplan–Meier survival S(t) = Π over event times u ≤ t of (1 − d_u / n_u), with d_u the
    events at u and n_u those still at risk (time ≥ u); returns (event times, S)."""
    t = np.asarray(times, dtype=float).ravel()
    e = np.asarray(reached, dtype=bool).ravel()
    u = np.unique(t[e])
    at_risk = (t[None, :] >= u[:, None]).sum(axis=1)
    events = ((t[None, :] == u[:, None]) & e[None, :]).sum(axis=1)
    return u, np.cumprod(1.0 - events / at_risk)


def kaplan_meier_median(times, reached) -> float:
    """Smallest event time with S(t) ≤ ½; infinite when survival stays above ½ (the median
    lies beyond the budget)."""
    u, s = kaplan_meier(times, reached)
    below = np.flatnonzero(s <= 0.5 + HALF_TOLERANCE)
    return float(u[below[0]]) if below.size else math.inf


def _km_median(times: np.ndarray, reached: np.ndarray, budget: int) -> np.ndarray:
    """Kaplan–Meier median over the last axis for whole-number times 1 … budget, vectorised."""
    grid = np.arange(1, budget + 1, dtype=float)
    at_risk = (times[..., None, :] >= grid[:, None]).sum(axis=-1)
    events = ((times[..., None, :] == grid[:, None]) & reached[..., None, :]).sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        factor = np.where(at_risk > 0, 1.0 - events / at_risk, 1.0)
    survival = np.cumprod(factor, axis=-1)
    below = survival <= 0.5 + HALF_TOLERANCE
    return np.where(below.any(axis=-1), below.argmax(axis=-1) + 1.0, np.inf)


def median_evaluations_to_target(
    ds: xr.Dataset, over: Sequence[str] = POOLED, resampling: Resampling | None = None
) -> xr.Dataset:
    """Kaplan–Meier median of evaluations to target, pooling ``over``, with bootstrap interval
    (infinite: the median lies beyond the budget)."""
    ett = evaluations_to_target(ds)
    budget = ett.attrs["budget"]

    def reduce(d):
        return xr.apply_ufunc(
            lambda t, r: _km_median(
                t.reshape(*t.shape[: -len(over)], -1),
                r.reshape(*r.shape[: -len(over)], -1).astype(bool),
                budget,
            ),
            d["evaluations"],
            d["reached"],
            input_core_dims=[list(over), list(over)],
        )

    return bootstrap(ett, reduce, resampling=resampling)


def recovery(ds: xr.Dataset, level: float = 0.95, over: Sequence[str] = POOLED) -> xr.Dataset:
    """Share of campaigns that reached the target within the budget, with Wilson intervals;
    variables ``probability``, ``low``, ``high``, ``successes``, ``campaigns``."""
    reached = evaluations_to_target(ds)["reached"]
    k = reached.sum(list(over))
    n = reached.count(list(over))
    low, high = wilson_interval(k.values, n.values, level)
    return xr.Dataset(
        {
            "probability": k / n,
            "low": k.copy(data=low),
            "high": k.copy(data=high),
            "successes": k,
            "campaigns": n,
        },
        attrs={"level": level},
    )


# --------------------------------------------------------------------------- bootstrap


# Bootstrap draws: every statistic holds (draws, replicates) arrays.
MAX_DRAWS = 100_000


@dataclass(frozen=True)
class Resampling:
    """The bootstrap over replicates: number of draws, interval level and fixed seed."""

    draws: int = 1000
    level: float = 0.95
    seed: int = 0

    def __post_init__(self):
        check_size(self.draws, "--draws", low=1, high=MAX_DRAWS, limit="the limit on draws")
        check_number(self.level, "--confidence", low=0.0, high=1.0, closed="neither")
        check_size(self.seed, "--seed", low=0, high=MAX_SEED, limit="the seeding helper's range")

    def indices(self, n: int) -> np.ndarray:
        """Replicate indices of every draw, shape (draws, n): one resample per draw."""
        return generator(self.seed).integers(0, n, size=(self.draws, n))


def bootstrap(
    data: xr.DataArray | xr.Dataset,
    reduce: Callable[[xr.DataArray | xr.Dataset], xr.DataArray],
    *,
    resampling: Resampling | None = None,
    keep: bool = False,
) -> xr.Dataset:
    """Percentile bootstrap of ``reduce(data)`` over the ``replicate`` dimension.

    Each draw resamples the replicate index once (with replacement) and applies it to every
    other coordinate alike (common random numbers: paired). Returns ``estimate`` (on the data
    as they are), ``low`` and ``high`` (the (1 ∓ level)/2 percentiles of the draws) and, if
    ``keep``, the draws themselves as ``distribution`` along ``draw``.
    """
    rs = resampling or Resampling()
    index = rs.indices(data.sizes["replicate"])
    estimate = reduce(data)
    size = int(np.prod([data.sizes[d] for d in data.dims])) or 1
    batch = max(1, int(2e7 // size))
    parts = []
    for start in range(0, rs.draws, batch):
        pick = xr.DataArray(index[start : start + batch], dims=("draw", "replicate"))
        parts.append(reduce(data.isel(replicate=pick)))
    dist = xr.concat(parts, "draw") if len(parts) > 1 else parts[0]
    alpha = (1 - rs.level) / 2
    # Infinite values (a median beyond the budget) would interpolate to NaN: bound them first.
    big = np.finfo(float).max / 4
    bounds = dist.clip(-big, big).quantile([alpha, 1 - alpha], dim="draw")
    bounds = bounds.where(np.abs(bounds) < big, np.sign(bounds) * np.inf)
    out = xr.Dataset(
        {
            "estimate": estimate,
            "low": bounds.isel(quantile=0, drop=True),
            "high": bounds.isel(quantile=1, drop=True),
        },
        attrs={"level": rs.level, "draws": rs.draws, "seed": rs.seed},
    )
    if keep:
        out["distribution"] = dist
    return out


def mean_of(values):
    return values.mean(list(POOLED))


def _geometric_mean(values):
    return np.exp(np.log(values).mean(list(POOLED)))


def summarise(
    values: xr.DataArray, resampling: Resampling | None = None, geometric: bool = False
) -> xr.Dataset:
    """Mean (geometric if ``geometric``) over landscapes and replicates of a per-campaign
    metric, with its paired bootstrap interval; over (setting, distortion)."""
    return bootstrap(values, _geometric_mean if geometric else mean_of, resampling=resampling)
