"""Surfaces drawn like the user's data: hyper-parameters the data support, and their warp.

A ``likedata`` landscape is, per replicate, a new Gaussian-process prior surface whose
*character* comes from earlier evaluations (cube points ``X``, values to minimise ``y``), while
its optimum is free to sit where the placement puts it:

1. **Output warp.** The data are modelled as their normal scores ``z = Φ⁻¹((r − ½)/n)`` (r the
   mid-rank, ties sharing it; Hazen's plotting position). A drawn latent value is mapped back
   through the data's empirical quantile function (:class:`Warp`): piecewise-linear through
   ``(Φ⁻¹((i − ½)/n), y_(i))``, i = 1..n over the sorted values, so flat over the normal-score
   interval of a tied group: a saturated plateau of equal worst values in the data becomes a
   plateau of the surface. The map is non-decreasing, so the argmin of the latent surface is
   an argmin of the landscape.
2. **Hyper-parameters from their posterior** given the normal scores (standardised):
   θ = log(ℓ_1..ℓ_d, s², σ²) with the weakly-informative prior below, times the exact Matérn
   marginal likelihood (Rasmussen & Williams 2006, Algorithm 2.1; gradient eq. 5.9), for each
   smoothness ν ∈ {1/2, 3/2, 5/2}. ν gets the posterior weights of its Laplace evidence (uniform
   prior over the three): the mode θ̂_ν by L-BFGS-B, the Hessian of the log posterior by
   central differences of its analytic gradient,
       log p(y | ν) ≈ log p(y | θ̂, ν) + log p(θ̂) + (D/2) log 2π − ½ log det H.
   Given ν, θ is drawn by univariate slice sampling with stepping out and shrinkage, one
   coordinate at a time (Neal 2003, "Slice sampling", Annals of Statistics 31, §4 and Fig. 3–5),
   started at the mode. Slice sampling rather than a Laplace draw because length-scale
   posteriors are skewed and often bounded by the prior on one side (a flat axis has no upper
   evidence), which a Gaussian in θ misrepresents; it needs no tuning beyond an initial width.
3. **A prior surface** (:func:`.surfaces.draw_prior`, random Fourier features) with a drawn
   (ν, θ), in normal-score units, warped.

Prior (independent, each a normal on the log scale, truncated to ``gp.DEFAULT_BOUNDS``):
``log ℓ_k ~ N(log gp.default_lengthscale(d), 1)``, ``log s² ~ N(0, 1)``,
``log σ² ~ N(log 10⁻², 2²)`` (standardised units; σ² absorbs ties and measurement noise).

Discrete parameters: the study's space snaps integer and categorical coordinates to their bin
centres before any evaluation, and a likedata surface snaps them itself too (on the lattice of
bin centres extended beyond the cube, so a window cut anywhere sees the same steps): along such
an axis the landscape is a step function, and its minimum is searched over bin centres only. On
a categorical axis with k choices the drawn length scale is capped at ``1/(3k)``: adjacent
centres lie 1/k apart, a scaled distance of at least 3, where every Matérn correlation used
here is at most 0.05 (e^-3 for ν = 1/2), so choices are nearly independent.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cache

import numpy as np
from numpy.typing import ArrayLike, NDArray

from .. import gp
from ..lazy import LazyModule
from . import surfaces
from .history import fitting_fields, fitting_subset
from .landscapes import Landscape

lapack = LazyModule("scipy.linalg.lapack")
optimize = LazyModule("scipy.optimize")
stats = LazyModule("scipy.stats")

__all__ = [
    "MAX_ROWS",
    "PRIOR_LOG_SD",
    "HyperPosterior",
    "LikeData",
    "LikeSurface",
    "Warp",
    "hyper_posterior",
    "log_marginal_likelihood",
    "log_posterior",
    "log_prior",
    "normal_scores",
    "slice_sample",
]

# Rows used for the hyper-parameter posterior; beyond it those :func:`.history.fitting_subset`
# chooses (the warp uses every row). The posterior takes a few thousand n × n Cholesky
# factorisations: about 10 s of one core at n = 100 in 6-D, and over a minute at n = 200.
MAX_ROWS = 120

# Prior standard deviations of log ℓ, log s², log σ², and the centre of log σ².
PRIOR_LOG_SD = (1.0, 1.0, 2.0)
PRIOR_LOG_NOISE = math.log(1e-2)

# Slice sampling: initial bracket width (log units), stepping-out limit, burn-in and thinning.
SLICE_WIDTH = 1.0
SLICE_STEPS = 8
BURN_IN = 16
THIN = 2
# Posterior draws kept per smoothness; a replicate takes one at random.
DRAWS = 64

# Warp tails: beyond the data the inverse warp bends over from the end secant's slope and never
# leaves the data range by more than this fraction of it (or one normal-score unit of slope).
TAIL_FRACTION = 0.25
# The end secant spans max(1, ceil(n / 10)) ranks.
TAIL_RANKS = 0.1

# Largest scaled distance between adjacent choices of a categorical axis: ℓ <= 1 / (3k).
CATEGORICAL_SPACING = 3.0

_HALF_LOG_2PI = 0.5 * math.log(2.0 * math.pi)


# --------------------------------------------------------------------------- the warp


def normal_scores(y: ArrayLike) -> NDArray[np.float64]:
    """Φ⁻¹((r − ½)/n) with r the mid-rank of each value (ties share their mean rank)."""
    y = np.asarray(y, dtype=float)
    ranks = stats.rankdata(y, method="average")
    return stats.norm.ppf((ranks - 0.5) / len(y))


def _tail(slope: float, span: float) -> tuple[float, float]:
    """(slope, extent) of one tail: extent E = min(slope·1, TAIL_FRACTION·span); 0 is flat."""
    if slope <= 0.0 or span <= 0.0:
        return 0.0, 0.0
    return slope, min(slope, TAIL_FRACTION * span)


@dataclass(frozen=True, eq=False)
class Warp:
    """The data's empirical quantile function in normal-score units: z ↦ y, non-decreasing.

    Inside the data, linear interpolation through (z_i, y_(i)), z_i = Φ⁻¹((i − ½)/n); flat
    across a tied group. Beyond the last knot at either end::

        y = y_end ± E (1 − exp(−|z − z_end| · s / E))

    with s the secant slope over the outermost max(1, ⌈n/10⌉) ranks and E = min(s, ¼ range):
    the tail leaves with the data's own slope and stays within E of the data. An end value
    shared by two or more data is a saturation: that tail is flat (s = 0).
    """

    z: NDArray[np.float64] = field(repr=False)
    y: NDArray[np.float64] = field(repr=False)
    low: tuple[float, float] = (0.0, 0.0)
    high: tuple[float, float] = (0.0, 0.0)

    @classmethod
    def from_data(cls, y: ArrayLike) -> Warp:
        ys = np.sort(np.asarray(y, dtype=float).reshape(-1))
        n = len(ys)
        if n < 2 or not np.all(np.isfinite(ys)) or ys[0] == ys[-1]:
            raise ValueError("a warp needs at least two distinct finite values")
        z = stats.norm.ppf((np.arange(1, n + 1) - 0.5) / n)
        k = max(1, math.ceil(TAIL_RANKS * n))
        span = float(ys[-1] - ys[0])
        low = (ys[k] - ys[0]) / (z[k] - z[0]) if ys[1] > ys[0] else 0.0
        high = (ys[-1] - ys[-1 - k]) / (z[-1] - z[-1 - k]) if ys[-1] > ys[-2] else 0.0
        z.flags.writeable = False
        ys.flags.writeable = False
        return cls(z, ys, _tail(low, span), _tail(high, span))

    def __call__(self, z: ArrayLike) -> NDArray[np.float64]:
        """Response values at normal-score values z (any shape)."""
        shape = np.shape(z)
        z = np.asarray(z, dtype=float).reshape(-1)
        out = np.interp(z, self.z, self.y)
        for side, (slope, extent) in ((-1.0, self.low), (1.0, self.high)):
            if extent <= 0.0:
                continue
            end = self.z[0] if side < 0 else self.z[-1]
            beyond = side * (z - end)
            mask = beyond > 0
            value = self.y[0] if side < 0 else self.y[-1]
            out[mask] = value + side * extent * -np.expm1(-beyond[mask] * slope / extent)
        return out.reshape(shape)


# --------------------------------------------------------------------------- the posterior


def log_prior(theta: ArrayLike, dim: int, bounds: gp.Bounds = gp.DEFAULT_BOUNDS) -> float:
    """Log density (up to a constant) of the prior on θ = log(ℓ_1..ℓ_d, s², σ²); −inf
    outside the log box of ``bounds``."""
    theta = np.asarray(theta, dtype=float)
    box = bounds.log_box(dim)
    if np.any(theta < box[:, 0]) or np.any(theta > box[:, 1]):
        return -math.inf
    return float(-0.5 * np.sum(np.square((theta - _prior_centre(dim)) / _prior_sd(dim))))


def _prior_centre(dim: int) -> NDArray[np.float64]:
    return np.r_[np.full(dim, math.log(gp.default_lengthscale(dim))), 0.0, PRIOR_LOG_NOISE]


def _prior_sd(dim: int) -> NDArray[np.float64]:
    return np.r_[np.full(dim, PRIOR_LOG_SD[0]), PRIOR_LOG_SD[1], PRIOR_LOG_SD[2]]


def _sq_diffs(X: NDArray[np.float64]) -> NDArray[np.float64]:
    """Per-dimension squared differences (d, n, n)."""
    D = X.T[:, :, None] - X.T[:, None, :]
    return D * D


def _lml(
    theta: NDArray[np.float64],
    D: NDArray[np.float64],
    y: NDArray[np.float64],
    nu: float,
    gradient: bool = True,
) -> tuple[float, NDArray[np.float64] | None]:
    """Log marginal likelihood of y and its gradient in θ (None unless ``gradient``);
    (−inf, nan) if K is not numerically positive definite.

    K = s² k_ν(r) + σ² I, r² = Σ_k Δ_k²/ℓ_k²; value −½ yᵀα − Σ log L_ii − (n/2) log 2π;
    ∂/∂θ_j = ½ tr((ααᵀ − K⁻¹) ∂K/∂θ_j) (R&W 2006 Algorithm 2.1, eq. 5.9), with
    ∂K/∂log ℓ_k = −s² (k'(r)/r) Δ_k²/ℓ_k².
    """
    dim, n = D.shape[0], len(y)
    values = np.exp(theta)
    scaled = D / np.square(values[:dim])[:, None, None]
    r = np.sqrt(scaled.sum(axis=0))
    k = surfaces.matern(r, nu)
    K = values[dim] * k
    K[np.diag_indices(n)] += values[dim + 1]
    L, info = lapack.dpotrf(K, lower=1, clean=1, overwrite_a=1)
    if info != 0:
        return -math.inf, np.full(len(theta), np.nan)
    alpha, _ = lapack.dpotrs(L, y, lower=1)
    value = -0.5 * y @ alpha - np.log(L.diagonal()).sum() - n * _HALF_LOG_2PI
    if not math.isfinite(value):
        return -math.inf, np.full(len(theta), np.nan)
    if not gradient:
        return float(value), None
    W = np.outer(alpha, alpha) - lapack.dpotrs(L, np.eye(n), lower=1)[0]
    slope = surfaces.matern_slope_over_r(r, nu)
    grad = np.empty(len(theta))
    grad[:dim] = -0.5 * values[dim] * np.einsum("ij,kij->k", W * slope, scaled)
    grad[dim] = 0.5 * values[dim] * np.vdot(W, k)
    grad[dim + 1] = 0.5 * values[dim + 1] * np.trace(W)
    return float(value), grad


def log_marginal_likelihood(
    theta: ArrayLike, X: ArrayLike, y: ArrayLike, smoothness: float
) -> tuple[float, NDArray[np.float64]]:
    """Log marginal likelihood of y (taken as given, no standardising) under a zero-mean GP
    with ARD Matérn ν kernel, and its gradient in θ = log(ℓ_1..ℓ_d, s², σ²)."""
    X = np.atleast_2d(np.asarray(X, dtype=float))
    return _lml(np.asarray(theta, dtype=float), _sq_diffs(X), np.asarray(y, float), smoothness)


def log_posterior(theta: ArrayLike, X: ArrayLike, y: ArrayLike, smoothness: float) -> float:
    """log prior(θ) + log marginal likelihood(θ), up to a constant."""
    prior = log_prior(theta, np.shape(X)[1])
    if not math.isfinite(prior):
        return -math.inf
    X = np.atleast_2d(np.asarray(X, dtype=float))
    theta = np.asarray(theta, dtype=float)
    return prior + _lml(theta, _sq_diffs(X), np.asarray(y, float), smoothness, False)[0]


def slice_sample(
    logp,
    x0: ArrayLike,
    rng: np.random.Generator,
    iterations: int,
    width: float = SLICE_WIDTH,
    steps: int = SLICE_STEPS,
) -> NDArray[np.float64]:
    """Univariate slice sampling, one coordinate after the other (Neal 2003, §4).

    Each update draws a level log u = logp(x) − Exp(1), places a bracket of ``width`` at
    random around x_j, steps it out at most ``steps`` times each way until both ends lie
    below the level (Fig. 3), then draws uniformly in the bracket, shrinking it towards x_j
    on each rejection (Fig. 5). Returns the state after each pass over the coordinates,
    (iterations, D).
    """
    x = np.array(x0, dtype=float)
    current = logp(x)
    if not math.isfinite(current):
        raise ValueError("slice sampling must start where the density is positive")
    out = np.empty((iterations, len(x)))
    for it in range(iterations):
        for j in range(len(x)):
            level = current - rng.exponential()
            left = x[j] - width * rng.uniform()
            right = left + width
            budget = rng.integers(steps + 1)

            def at(v: float, j: int = j) -> float:
                trial_x = x.copy()
                trial_x[j] = v
                return logp(trial_x)

            for _ in range(budget):
                if at(left) <= level:
                    break
                left -= width
            for _ in range(steps - budget):
                if at(right) <= level:
                    break
                right += width
            origin = x[j]
            while True:
                v = rng.uniform(left, right)
                value = at(v)
                if value > level:
                    x[j], current = v, value
                    break
                if v < origin:
                    left = v
                else:
                    right = v
                if right - left < 1e-12:
                    break
        out[it] = x
    return out


@dataclass(frozen=True, eq=False)
class HyperPosterior:
    """Posterior draws of the hyper-parameters: ``weights`` of ν ∈ SMOOTHNESS_VALUES, and per
    ν a (draws, d + 2) array of θ = log(ℓ, s², σ²), in standardised normal-score units."""

    weights: NDArray[np.float64]
    draws: tuple[NDArray[np.float64], ...] = field(repr=False)
    log_evidence: NDArray[np.float64] = field(repr=False)
    modes: NDArray[np.float64] = field(repr=False)

    def draw(self, rng: np.random.Generator) -> tuple[float, NDArray[np.float64]]:
        """One (ν, θ): ν from its weights, θ one of that ν's draws."""
        i = int(rng.choice(len(self.weights), p=self.weights))
        chain = self.draws[i]
        return surfaces.SMOOTHNESS_VALUES[i], chain[rng.integers(len(chain))]

    def median_lengthscales(self) -> NDArray[np.float64]:
        """Posterior median of each length scale, pooled over ν with their weights."""
        dim = self.modes.shape[1] - 2
        pooled = np.vstack(self.draws)[:, :dim]
        w = np.concatenate(
            [np.full(len(c), p / len(c)) for c, p in zip(self.draws, self.weights, strict=True)]
        )
        order = np.argsort(pooled, axis=0)
        out = np.empty(dim)
        for k in range(dim):
            cw = np.cumsum(w[order[:, k]])
            out[k] = math.exp(pooled[order[np.searchsorted(cw, 0.5 * cw[-1]), k], k])
        return out


def _mode(D, y, nu, dim, rng) -> NDArray[np.float64]:
    """The posterior mode of θ for one ν: L-BFGS-B from the prior centre and 3 random starts."""
    box = gp.DEFAULT_BOUNDS.log_box(dim)
    centre, sd = _prior_centre(dim), _prior_sd(dim)

    def negative(theta):
        value, grad = _lml(theta, D, y, nu)
        if not math.isfinite(value):
            return 1e300, np.zeros_like(theta)
        z = (theta - centre) / sd
        return -(value - 0.5 * z @ z), -(grad - z / sd)

    starts = [np.clip(centre, box[:, 0], box[:, 1])]
    starts += list(np.clip(centre + sd * rng.standard_normal((3, len(centre))), *box.T))
    best, best_value = starts[0], math.inf
    for start in starts:
        result = optimize.minimize(negative, start, jac=True, method="L-BFGS-B", bounds=box)
        if result.fun < best_value:
            best, best_value = result.x, float(result.fun)
    return best


def _laplace(D, y, nu, mode) -> float:
    """Laplace log evidence at the mode; Hessian by central differences of the gradient."""
    dim = D.shape[0]
    centre, sd = _prior_centre(dim), _prior_sd(dim)

    def grad(theta):
        return _lml(theta, D, y, nu)[1] - (theta - centre) / sd**2

    step = 1e-4
    H = np.array([(grad(mode + e) - grad(mode - e)) / (2 * step) for e in step * np.eye(len(mode))])
    H = -(H + H.T) / 2
    # At a bound of the box the mode may not be a stationary point: floor the curvature.
    eig = np.maximum(np.linalg.eigvalsh(H), 1e-3)
    value = _lml(mode, D, y, nu)[0]
    # The prior's normalising constant is shared by the three ν, so it drops out of the weights.
    prior = -0.5 * np.sum(np.square((mode - centre) / sd))
    return value + prior + len(mode) * _HALF_LOG_2PI - 0.5 * np.sum(np.log(eig))


def hyper_posterior(
    X: ArrayLike, y: ArrayLike, rng: np.random.Generator, draws: int = DRAWS
) -> HyperPosterior:
    """Posterior of (ν, θ) given cube points X and values y (modelled as-is, standardised):
    ν by Laplace evidence, θ by slice sampling. Beyond ``MAX_ROWS`` rows, the subset
    :func:`.history.fitting_subset` chooses (the best rows and a max-min spread of the rest)."""
    X = np.atleast_2d(np.asarray(X, dtype=float))
    y = np.asarray(y, dtype=float)
    keep = fitting_subset(X, y, MAX_ROWS)
    X, y = X[keep], y[keep]
    y = (y - y.mean()) / (y.std() or 1.0)
    D = _sq_diffs(X)
    dim = X.shape[1]
    modes = np.array([_mode(D, y, nu, dim, rng) for nu in surfaces.SMOOTHNESS_VALUES])
    evidence = np.array(
        [_laplace(D, y, nu, m) for nu, m in zip(surfaces.SMOOTHNESS_VALUES, modes, strict=True)]
    )
    weights = np.exp(evidence - evidence.max())
    weights /= weights.sum()
    box, centre, sd = gp.DEFAULT_BOUNDS.log_box(dim), _prior_centre(dim), _prior_sd(dim)
    chains = []
    for nu, mode, weight in zip(surfaces.SMOOTHNESS_VALUES, modes, weights, strict=True):
        if weight < 1e-3:
            # Too unlikely to be drawn in practice: the mode stands in for its draws.
            chains.append(mode[None, :])
            continue

        def logp(theta, nu=nu):
            if np.any(theta < box[:, 0]) or np.any(theta > box[:, 1]):
                return -math.inf
            prior = -0.5 * np.sum(np.square((theta - centre) / sd))
            return prior + _lml(theta, D, y, nu, gradient=False)[0]

        chain = slice_sample(logp, mode, rng, BURN_IN + THIN * draws)
        chains.append(chain[BURN_IN::THIN])
    weights = np.where(weights < 1e-3, 0.0, weights)
    return HyperPosterior(weights / weights.sum(), tuple(chains), evidence, modes)


# --------------------------------------------------------------------------- the surface


def _snap(X: NDArray[np.float64], levels: NDArray[np.int64]) -> NDArray[np.float64]:
    """Discrete coordinates to the centre of their bin, (⌊x k⌋ + ½)/k, on the lattice
    extended beyond [0, 1]; continuous ones (k = 0) unchanged."""
    discrete = levels > 0
    if not discrete.any():
        return X
    X = np.array(X, dtype=float)
    k = levels[discrete]
    X[:, discrete] = (np.floor(X[:, discrete] * k) + 0.5) / k
    return X


@dataclass(frozen=True, eq=False)
class _Latent:
    """The latent surface with discrete axes snapped; its gradient is zero along them."""

    surface: surfaces.FeatureSurface
    levels: NDArray[np.int64]

    def __call__(self, U: NDArray[np.float64]) -> NDArray[np.float64]:
        return self.surface(_snap(np.atleast_2d(U), self.levels))

    def value_and_gradient(self, U):
        values, grads = self.surface.value_and_gradient(_snap(np.atleast_2d(U), self.levels))
        grads[:, self.levels > 0] = 0.0
        return values, grads


@dataclass(frozen=True, eq=False)
class LikeSurface:
    """warp(mean + scale · f(snap(X))): a latent draw f in standardised normal-score units,
    discrete axes snapped to bin centres, mapped to response units by the data's warp."""

    surface: surfaces.FeatureSurface
    warp: Warp
    mean: float = 0.0
    scale: float = 1.0
    levels: NDArray[np.int64] = field(default_factory=lambda: np.zeros(0, dtype=np.int64))

    @property
    def latent(self) -> _Latent:
        levels = self.levels if len(self.levels) else np.zeros(self.surface.dim, dtype=np.int64)
        return _Latent(self.surface, levels)

    def __call__(self, X: ArrayLike) -> NDArray[np.float64]:
        return self.warp(self.mean + self.scale * self.latent(np.asarray(X, dtype=float)))


def _scales(theta, dim, levels, categorical) -> NDArray[np.float64]:
    """Length scales of θ, capped at 1/(3k) on categorical axes."""
    scales = np.exp(theta[:dim])
    for i in range(dim):
        if categorical and categorical[i] and levels[i] > 0:
            scales[i] = min(scales[i], 1.0 / (CATEGORICAL_SPACING * levels[i]))
    return scales


@cache
def _posterior(X: tuple, y: tuple, draws: int) -> HyperPosterior:
    scores = normal_scores(np.array(y))
    return hyper_posterior(np.array(X), scores, np.random.default_rng(0), draws)


@dataclass(frozen=True)
class LikeData:
    """GP-prior surfaces drawn like earlier evaluations (cube points ``X``, values to minimise
    ``y``): hyper-parameters and smoothness from their posterior given the data, and the data's
    output warp (see the module docstring). ``levels`` per axis (0 continuous, else the bins
    of an integer or categorical parameter) and ``categorical`` flags; empty means all
    continuous. Along a discrete axis the landscape is a step function over bin centres."""

    X: tuple[tuple[float, ...], ...]
    y: tuple[float, ...]
    source: str
    levels: tuple[int, ...] = ()
    categorical: tuple[bool, ...] = ()
    features: int = surfaces.DEFAULT_FEATURES
    draws: int = DRAWS
    digest: str = ""
    response: str = ""
    goal: str = "minimise"
    kind: str = field(default="likedata", init=False)
    placed_at_belief: bool = field(default=True, init=False)

    @property
    def minimum_estimated(self) -> bool:
        return True

    @classmethod
    def from_history(cls, history, space=None, **options) -> LikeData:
        """From earlier evaluations (a :class:`workbench.world.history.History`) over
        ``space`` (a :class:`~.space.Space`, for its discrete axes; None: all continuous)."""
        if space is not None:
            from .space import Categorical

            options.setdefault("levels", tuple(int(v) for v in space.levels))
            options.setdefault(
                "categorical", tuple(isinstance(p, Categorical) for p in space.parameters)
            )
        return cls(**fitting_fields(history), **options)

    def posterior(self) -> HyperPosterior:
        """The hyper-parameter posterior (deterministic: a fixed seed; cached per process)."""
        return _posterior(self.X, self.y, self.draws)

    def warp(self) -> Warp:
        return Warp.from_data(self.y)

    def surface(self, rng: np.random.Generator) -> LikeSurface:
        """A new surface: (ν, θ) from the posterior, a prior draw with them, warped."""
        dim = len(self.X[0])
        levels = np.array(self.levels or (0,) * dim, dtype=np.int64)
        nu, theta = self.posterior().draw(rng)
        scales = _scales(theta, dim, levels, self.categorical)
        amplitude = math.exp(0.5 * theta[dim])
        latent = surfaces.draw_prior(dim, nu, scales, rng, self.features, amplitude=amplitude)
        scores = normal_scores(np.array(self.y))
        return LikeSurface(latent, self.warp(), float(scores.mean()), float(scores.std()), levels)

    def landscape(
        self, name: str, dim: int, rng: np.random.Generator, at: tuple | None = None
    ) -> Landscape:
        """A new surface from ``rng``; with ``at``, the window whose minimum sits at ``at``
        (:func:`.surfaces.window_minimum` on the latent surface: the warp keeps the argmin)."""
        surface = self.surface(rng)
        latent = surface.latent
        lower, u, _ = surfaces.window_minimum(latent, dim, rng, at)
        u = _snap(u[None, :], latent.levels)[0]
        if at is not None:
            lower = u - np.asarray(at, dtype=float)
        value = float(surface(u[None, :])[0])
        return Landscape(
            name=name,
            dim=dim,
            lower=tuple(lower.tolist()),
            upper=tuple((lower + 1.0).tolist()),
            minimum=value,
            minimisers=(tuple(float(v) for v in u),),
            source=f"a GP-prior draw like {self.source} (hyper-parameters from their posterior)",
            function=surface,
        )
