"""How much a landscape resembles the user's problem: measures against earlier evaluations.

The earlier evaluations are cube points ``X`` (n, d) with values ``y`` to minimise. Each
measure says how well one landscape explains them; larger is better for every measure.

- :func:`rank_agreement` (textbook and drawn landscapes): the Spearman rank correlation between
  the landscape's values at the data's configurations and the measured responses, one per
  replicate placement, their median, and a bootstrap percentile interval over the data rows.
- :func:`likelihood_agreement` (textbook and drawn landscapes): the log marginal likelihood per
  point of the standardised data under a GP whose hyper-parameters were fitted to the
  landscape's own values at a space-filling design.
- :func:`loo_agreement` (fitted landscapes, which are trained on the data): leave-one-out
  predictions in closed form (:func:`loo_predictive`), never a point the model saw; their
  Spearman correlation with the responses and their log predictive density per point.

Each returns :class:`Resemblance` records, one row of a table of landscapes and measures.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .. import gp
from ..lazy import LazyModule
from ..seeding import generator
from .history import fit_to_rows

lapack = LazyModule("scipy.linalg.lapack")
stats = LazyModule("scipy.stats")
qmc = LazyModule("scipy.stats.qmc")

__all__ = [
    "DESIGN_SIZE",
    "MEASURES",
    "Resemblance",
    "design",
    "likelihood_agreement",
    "loo_agreement",
    "loo_predictive",
    "rank_agreement",
    "spearman",
]

# Measure names, as the table shows them.
MEASURES = {
    "rank_agreement": "rank agreement (Spearman)",
    "likelihood": "log marginal likelihood per point",
    "loo_rank_agreement": "leave-one-out rank agreement (Spearman)",
    "loo_log_density": "leave-one-out log predictive density per point",
}
# Points of the space-filling design a landscape's GP is fitted to (a power of two: Sobol).
DESIGN_SIZE = 128
_LOG_2PI = math.log(2.0 * math.pi)


@dataclass(frozen=True)
class Resemblance:
    """One landscape's score on one measure: ``estimate`` with its interval ``(low, high)``
    at ``level``, from ``n`` earlier evaluations; ``replicates`` holds the value of each
    replicate placement where the measure has one (empty otherwise)."""

    landscape: str
    kind: str
    measure: str
    estimate: float
    low: float
    high: float
    n: int
    level: float = 0.95
    replicates: tuple[float, ...] = ()

    def row(self) -> dict:
        """The record as a table row (plain values; the measure in words)."""
        return {
            "landscape": self.landscape,
            "kind": self.kind,
            "measure": MEASURES.get(self.measure, self.measure),
            "estimate": self.estimate,
            "low": self.low,
            "high": self.high,
            "n": self.n,
        }


def _fail(key: str, expected: str, got: object) -> ValueError:
    return ValueError(f"'{key}' must be {expected}; got {got!r}")


def _data(X: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    if X.ndim != 2 or y.shape != (X.shape[0],) or X.shape[0] < 3:
        raise _fail("X, y", "(n, d) and (n,) arrays with n >= 3", (X.shape, y.shape))
    if not (np.isfinite(X).all() and np.isfinite(y).all()):
        raise _fail("X, y", "finite", "non-finite values")
    return X, y


def _percentiles(draws: np.ndarray, level: float) -> tuple[float, float]:
    """The (1 ∓ level)/2 percentiles, NaN draws left out (NaN if all are)."""
    draws = draws[np.isfinite(draws)]
    if draws.size == 0:
        return math.nan, math.nan
    alpha = (1.0 - level) / 2.0
    low, high = np.percentile(draws, [100 * alpha, 100 * (1 - alpha)])
    return float(low), float(high)


# --------------------------------------------------------------------------- rank agreement


def spearman(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Spearman's rank correlation along the last axis (broadcast): the Pearson correlation of
    the average ranks, ``Σ (r_a − r̄_a)(r_b − r̄_b) / sqrt(Σ (r_a − r̄_a)² Σ (r_b − r̄_b)²)``.

    NaN where either side is constant (no ranking to agree with).
    """
    a, b = np.broadcast_arrays(np.asarray(a, dtype=float), np.asarray(b, dtype=float))
    ra = stats.rankdata(a, axis=-1)
    rb = stats.rankdata(b, axis=-1)
    ra -= ra.mean(axis=-1, keepdims=True)
    rb -= rb.mean(axis=-1, keepdims=True)
    num = (ra * rb).sum(axis=-1)
    den = np.sqrt((ra * ra).sum(axis=-1) * (rb * rb).sum(axis=-1))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / np.where(den > 0, den, 1.0), np.nan)


# Elements of one block of resampled landscape values (replicates x draws x rows).
_BLOCK_ELEMENTS = 2_000_000


def rank_agreement(
    values: np.ndarray,
    y: np.ndarray,
    *,
    landscape: str = "",
    kind: str = "",
    draws: int = 1000,
    level: float = 0.95,
    seed: int | np.random.Generator = 0,
) -> Resemblance:
    """Spearman correlation between a landscape's values and the measured responses.

    ``values`` (R, n) holds the landscape's values at the data's configurations, one row per
    replicate placement (a single row may be given as (n,)); ``y`` (n,) the responses, in the
    same orientation (both minimised). Per replicate ``ρ_r = spearman(values_r, y)``; the
    estimate is their median. The interval is the percentile bootstrap over the data rows
    (Efron & Tibshirani 1993): each draw resamples the n rows with replacement, applies the
    same rows to every replicate and to ``y``, and recomputes the median of ``ρ_r``.
    1 means the landscape orders the configurations as the data do, −1 the reverse, 0 no
    relation. A replicate whose values are constant has no ``ρ_r`` (NaN, left out).
    """
    values = np.atleast_2d(np.asarray(values, dtype=float))
    y = np.asarray(y, dtype=float)
    if values.ndim != 2 or y.ndim != 1 or values.shape[1] != y.size or y.size < 3:
        raise _fail("values, y", "(R, n) and (n,) arrays with n >= 3", (values.shape, y.shape))
    if not (np.isfinite(values).all() and np.isfinite(y).all()):
        raise _fail("values, y", "finite", "non-finite values")
    per_replicate = spearman(values, y)
    finite = per_replicate[np.isfinite(per_replicate)]
    estimate = float(np.median(finite)) if finite.size else math.nan

    index = generator(seed).integers(0, y.size, size=(draws, y.size))
    medians = np.full(draws, np.nan)
    block = max(1, _BLOCK_ELEMENTS // values.size)
    for start in range(0, draws, block):
        rows = index[start : start + block]
        # (R, block, n) against (block, n): one ρ per replicate and draw.
        rho = spearman(values[:, rows], y[rows])
        ok = np.isfinite(rho).any(axis=0)
        medians[start : start + block][ok] = np.nanmedian(rho[:, ok], axis=0)
    low, high = _percentiles(medians, level)
    return Resemblance(
        landscape=landscape,
        kind=kind,
        measure="rank_agreement",
        estimate=estimate,
        low=low,
        high=high,
        n=int(y.size),
        level=level,
        replicates=tuple(float(v) for v in per_replicate),
    )


# --------------------------------------------------------------------------- likelihood


def design(dim: int, size: int = DESIGN_SIZE, seed: int = 0) -> np.ndarray:
    """A space-filling design of the unit cube: the first ``size`` points of a scrambled Sobol
    sequence (``size`` rounded up to a power of two), shape (size, dim)."""
    log2 = max(1, math.ceil(math.log2(max(2, int(size)))))
    return qmc.Sobol(int(dim), scramble=True, seed=seed).random_base2(log2)


def _standardised(y: np.ndarray) -> np.ndarray:
    scale = float(np.std(y)) or 1.0
    return (y - float(np.mean(y))) / scale


def likelihood_agreement(
    points: np.ndarray,
    design_values: np.ndarray,
    X: np.ndarray,
    y: np.ndarray,
    *,
    noise_variance: float | None = None,
    landscape: str = "",
    kind: str = "",
    level: float = 0.95,
) -> Resemblance:
    """Log marginal likelihood per point of the data under a GP shaped by the landscape.

    For each replicate placement r: fit :func:`workbench.gp.fit` to the landscape's values
    ``design_values[r]`` at the design ``points`` (m, d) (for instance :func:`design`, 64-128
    points), which gives length scales ``l_r`` and signal variance ``s²_r`` in the landscape's
    standardised units (the GP's mean and scale are the design values' mean and sd). The data
    are standardised by their own mean and sd, ``z = (y − ȳ) / sd(y)`` (the landscape's units
    and the response's have nothing in common), and scored as

        L_r = log p(z | X; l_r, s²_r, σ²) / n
            = (−½ zᵀ(K + σ²I)⁻¹z − ½ log|K + σ²I| − (n/2) log 2π) / n

    (Rasmussen & Williams 2006, Algorithm 2.1). The noise variance σ² is the larger of the
    landscape's fitted one and the data's: ``noise_variance`` in the data's standardised
    units, or, if None, the one :func:`.history.fit_to_rows` estimates from the data. A landscape
    is noise-free; without the data's noise a wiggly landscape would score well only because
    it can chase the noise. The estimate is the median of ``L_r`` over replicates; the interval
    is the central ``level`` range of ``L_r`` over the replicates (how much the placement
    matters, not a sampling interval; a single placement gives low = high = estimate).
    Higher is better; the generator of the data scores highest in expectation.
    """
    X, y = _data(X, y)
    points = np.asarray(points, dtype=float)
    design_values = np.atleast_2d(np.asarray(design_values, dtype=float))
    if points.ndim != 2 or points.shape[1] != X.shape[1]:
        raise _fail("points", f"an (m, {X.shape[1]}) array", points.shape)
    if design_values.shape[1] != points.shape[0]:
        raise _fail("design_values", f"an (R, {points.shape[0]}) array", design_values.shape)
    z = _standardised(y)
    if noise_variance is None:
        noise_variance = fit_to_rows(X, y, rng=np.random.default_rng(0)).hyperparameters
        noise_variance = noise_variance.noise_variance
    per_replicate = []
    for values in design_values:
        h = gp.fit(points, values, rng=np.random.default_rng(0)).hyperparameters
        noise = max(h.noise_variance, float(noise_variance))
        theta = gp.Hyperparameters(h.lengthscales, h.signal_variance, noise).to_log()
        per_replicate.append(gp.log_marginal_likelihood(theta, X, z)[0] / y.size)
    values = np.array(per_replicate)
    estimate = float(np.median(values))
    low, high = _percentiles(values, level)
    return Resemblance(
        landscape=landscape,
        kind=kind,
        measure="likelihood",
        estimate=estimate,
        low=low,
        high=high,
        n=int(y.size),
        level=level,
        replicates=tuple(float(v) for v in values),
    )


# --------------------------------------------------------------------------- leave-one-out


def loo_predictive(model: gp.GP) -> tuple[np.ndarray, np.ndarray]:
    """Leave-one-out predictive mean and variance of every observation of a fitted GP, with
    its hyper-parameters, in closed form, in the original units.

    With ``K`` the model's covariance of the data (noise and jitter included) and ``α = K⁻¹y``
    in standardised units: ``μ₋ᵢ = yᵢ − αᵢ / [K⁻¹]ᵢᵢ`` and ``σ²₋ᵢ = 1 / [K⁻¹]ᵢᵢ``
    (Rasmussen & Williams 2006, eqs. 5.10-5.12), the prediction of ``yᵢ`` (noise included) by
    the GP conditioned on the other points; both scaled back by the model's mean and scale.
    The hyper-parameters are those fitted to all points (as in eq. 5.10).
    """
    n = model.n
    Kinv, info = lapack.dpotrs(model.cholesky, np.eye(n), lower=1)
    if info != 0:
        raise np.linalg.LinAlgError(f"LAPACK potrs failed (info={info})")
    d = np.diag(Kinv).copy()
    ys = (model.y - model.y_mean) / model.y_scale
    mean = ys - model.alpha / d
    var = 1.0 / d
    return mean * model.y_scale + model.y_mean, var * model.y_scale**2


def loo_agreement(
    model: gp.GP,
    *,
    landscape: str = "",
    kind: str = "fitted",
    draws: int = 1000,
    level: float = 0.95,
    seed: int | np.random.Generator = 0,
) -> tuple[Resemblance, Resemblance]:
    """Out-of-sample resemblance of a GP fitted to the data (the fitted landscapes' model).

    From :func:`loo_predictive`: the Spearman correlation between ``μ₋ᵢ`` and ``yᵢ``
    (``loo_rank_agreement``) and the mean log predictive density in the data's standardised
    units, ``(1/n) Σ log N(zᵢ; (μ₋ᵢ − ȳ)/sd, σ²₋ᵢ/sd²)`` (``loo_log_density``, comparable with
    the likelihood measure's per-point value). Both intervals are percentile bootstraps over
    the data rows (Efron & Tibshirani 1993) with the leave-one-out predictions held fixed.
    """
    y = model.y
    n = y.size
    if n < 3:
        raise _fail("model", "a GP fitted to at least 3 points", n)
    mean, var = loo_predictive(model)
    sd = float(np.std(y)) or 1.0
    z = (y - float(np.mean(y))) / sd
    mz = (mean - float(np.mean(y))) / sd
    vz = var / sd**2
    density = -0.5 * (_LOG_2PI + np.log(vz) + (z - mz) ** 2 / vz)
    rho = float(spearman(mean, y))
    index = generator(seed).integers(0, n, size=(draws, n))
    rho_low, rho_high = _percentiles(spearman(mean[index], y[index]), level)
    lpd_low, lpd_high = _percentiles(density[index].mean(axis=1), level)
    common = dict(landscape=landscape, kind=kind, n=int(n), level=level)
    return (
        Resemblance(
            measure="loo_rank_agreement", estimate=rho, low=rho_low, high=rho_high, **common
        ),
        Resemblance(
            measure="loo_log_density",
            estimate=float(density.mean()),
            low=lpd_low,
            high=lpd_high,
            **common,
        ),
    )
