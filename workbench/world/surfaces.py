"""Random surfaces: Matérn Gaussian-process landscapes on the unit cube, drawn as fixed functions.

A :class:`FeatureSurface` is one draw of a Gaussian process on ``[0, 1]^d``, frozen into a cheap
deterministic function that evaluates a batch of points ``U`` of shape (m, d) to shape (m,)::

    f(U) = mean + amplitude · φ(U) · w + k(U, X) · α

The middle term is a random Fourier feature (RFF) draw of the prior (Rahimi & Recht 2007,
"Random features for large-scale kernel machines", NeurIPS): ``φ(x) = sqrt(2/M) cos(x ω^T + b)``
with frequencies ``ω`` from the Matérn spectral density, phases ``b ~ U(0, 2π)`` and weights
``w ~ N(0, I_M)``. The last term is present only for posterior draws; it is the pathwise update
of Wilson, Borovitskiy, Terenin, Mostowsky & Deisenroth 2020 ("Efficiently sampling functions
from Gaussian process posteriors", ICML), which turns a prior draw into a posterior draw given
evaluations ``(X, y)``.

The kernel is the Matérn correlation of Rasmussen & Williams 2006 ("Gaussian Processes for
Machine Learning", eq. 4.14–4.17) with one length scale per dimension (ARD), in cube units (a
fraction of the range), times the signal variance ``amplitude²``: ``amplitude`` is the signal
standard deviation throughout this module.

:func:`global_minimum` is the stated search used to score any such surface: a dense scrambled
Sobol set followed by multi-start L-BFGS-B.

Every random draw comes from the ``np.random.Generator`` passed in; nothing here seeds or reads
global random state.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np
from numpy.typing import ArrayLike, NDArray

from ..lazy import LazyModule

distance = LazyModule("scipy.spatial.distance")
linalg = LazyModule("scipy.linalg")
optimize = LazyModule("scipy.optimize")
qmc = LazyModule("scipy.stats.qmc")

__all__ = [
    "DEFAULT_FEATURES",
    "DEFAULT_STARTS",
    "SMOOTHNESS_VALUES",
    "WINDOW_ROUNDS",
    "FeatureSurface",
    "dense_size",
    "draw_frequencies",
    "draw_posterior",
    "draw_prior",
    "fourier_features",
    "global_minimum",
    "matern",
    "matern_kernel",
    "matern_slope_over_r",
    "posterior_mean",
    "window_minimum",
]

# The Matérn orders with a closed form (R&W 2006 eq. 4.16: ν = p + 1/2 for integer p).
SMOOTHNESS_VALUES = (0.5, 1.5, 2.5)

# Number of random Fourier features M of a drawn surface. A single draw realises the kernel
# k̂(x, x') = φ(x)·φ(x') rather than k; averaging over ω and b gives, per entry,
#     sd(k̂ - k) = sqrt((1 + k(2Δ)/2 - k(Δ)²) / M) <= 1 / sqrt(M),
# (1/sqrt(2M) at Δ = 0, rising to 1/sqrt(M) where k is near 0). M = 1024 keeps that at 2.2–3.1 %
# of the signal variance, and evaluation at about 8 µs per point in 6-D on one core (goal
# <= 20 µs, see benchmarks/surfaces.py); M = 2048 would buy 0.9 percentage points for twice
# the cost, close to the goal.
DEFAULT_FEATURES = 1024

# Rounds of the window search (window_minimum) that puts a surface's minimum at a chosen point.
WINDOW_ROUNDS = 8

# Local searches in global_minimum: the best Sobol points each start one L-BFGS-B run.
DEFAULT_STARTS = 8

# Rows per evaluation block are chosen so that a block's (rows, M) work array holds about this
# many float64 values (1 MiB): it stays in cache, and memory stays bounded for any m.
_BLOCK_ELEMENTS = 2**17

# Cholesky of K + σ_n² I: if it fails, retry with jitter growing tenfold from 1e-10 to 1e-4 of
# the mean diagonal. The jitter acts as extra noise variance, so it is kept as small as works.
_JITTER_START = 1e-10
_JITTER_STEPS = 7

_SQRT3 = math.sqrt(3.0)
_SQRT5 = math.sqrt(5.0)
_TWO_PI = 2.0 * math.pi

# Taylor coefficients of cos(h) in t = (2h)², h in [-π/2, π/2]: c_k = (-1)^k / ((2k)! 4^k).
# Truncation after k = 10 leaves at most (π/2)^22 / 22! ≈ 2e-17.
_HALF_COS = tuple((-1) ** k / (math.factorial(2 * k) * 4.0**k) for k in range(11))


def _check_smoothness(smoothness: float) -> float:
    """The Matérn order as a float, if it is one with a closed form here."""
    nu = float(smoothness)
    if nu not in SMOOTHNESS_VALUES:
        raise ValueError(f"smoothness must be one of {SMOOTHNESS_VALUES}, got {smoothness!r}")
    return nu


def _length_scales(length_scale: ArrayLike, dim: int) -> NDArray[np.float64]:
    """Length scales as a (dim,) array: a scalar applies to every dimension."""
    scales = np.asarray(length_scale, dtype=float)
    if scales.ndim == 0:
        scales = np.full(dim, float(scales))
    if scales.shape != (dim,):
        raise ValueError(
            f"length_scale must be a scalar or have shape ({dim},), got {scales.shape}"
        )
    if not np.all(np.isfinite(scales) & (scales > 0)):
        raise ValueError(f"length_scale must be positive and finite, got {scales}")
    return scales


def _readonly(values: ArrayLike, shape: tuple[int, ...]) -> NDArray[np.float64]:
    """A read-only float copy with a checked shape, so a frozen surface stays fixed."""
    array = np.array(values, dtype=float)
    if array.shape != shape:
        raise ValueError(f"expected shape {shape}, got {array.shape}")
    array.flags.writeable = False
    return array


def matern(r: ArrayLike, smoothness: float) -> NDArray[np.float64]:
    """Matérn correlation at scaled distance r, closed form for ν in {0.5, 1.5, 2.5}.

    With r = ||(x - x') / ℓ|| (R&W 2006 eq. 4.14 with the length scale divided out; closed forms
    eq. 4.16–4.17):

        ν = 1/2:  k = exp(-r)
        ν = 3/2:  k = (1 + √3 r) exp(-√3 r)
        ν = 5/2:  k = (1 + √5 r + 5 r² / 3) exp(-√5 r)
    """
    nu = _check_smoothness(smoothness)
    r = np.asarray(r, dtype=float)
    if nu == 0.5:
        return np.exp(-r)
    if nu == 1.5:
        s = _SQRT3 * r
        return (1.0 + s) * np.exp(-s)
    s = _SQRT5 * r
    return (1.0 + s + s * s / 3.0) * np.exp(-s)


def matern_slope_over_r(r: NDArray[np.float64], nu: float) -> NDArray[np.float64]:
    """(dk/dr) / r for the closed forms, the factor that turns dk/dr into a gradient in x.

    ν = 1/2:  -exp(-r) / r   (set to 0 at r = 0, a subgradient at the kernel's cusp)
    ν = 3/2:  -3 exp(-√3 r)
    ν = 5/2:  -(5/3) (1 + √5 r) exp(-√5 r)
    """
    if nu == 0.5:
        with np.errstate(divide="ignore", invalid="ignore"):
            slope = -np.exp(-r) / r
        return np.where(r > 0, slope, 0.0)
    if nu == 1.5:
        return -3.0 * np.exp(-_SQRT3 * r)
    return -(5.0 / 3.0) * (1.0 + _SQRT5 * r) * np.exp(-_SQRT5 * r)


def matern_kernel(
    A: ArrayLike,
    B: ArrayLike,
    length_scale: ArrayLike,
    smoothness: float = 2.5,
    amplitude: float = 1.0,
) -> NDArray[np.float64]:
    """Matérn covariance matrix between the rows of A (n, d) and B (m, d), shape (n, m).

        K_ij = amplitude² · matern(||(A_i - B_j) / ℓ||, ν)

    with ℓ a scalar or one length scale per dimension (R&W 2006 eq. 4.14, ARD form §5.1).
    """
    A = np.atleast_2d(np.asarray(A, dtype=float))
    B = np.atleast_2d(np.asarray(B, dtype=float))
    scales = _length_scales(length_scale, A.shape[1])
    r = distance.cdist(A / scales, B / scales)
    return float(amplitude) ** 2 * matern(r, smoothness)


def draw_frequencies(
    dim: int,
    smoothness: float,
    length_scale: ArrayLike,
    n_features: int,
    rng: np.random.Generator,
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Frequencies ω (M, d) and phases b (M,) of random Fourier features for a Matérn kernel.

        ω = z / ℓ · sqrt(2ν / g),   z ~ N(0, I_d),   g ~ χ²(2ν),   b ~ U(0, 2π)

    so each row of ω is multivariate Student-t with 2ν degrees of freedom and scale 1/ℓ: the
    Matérn spectral density, proportional to (2ν/ℓ² + ||ω||²)^-(ν + d/2) in angular frequency
    (R&W 2006 eq. 4.15). By Bochner's theorem E[2 cos(ω·x + b) cos(ω·x' + b)] = k(x - x')
    (Rahimi & Recht 2007). One g per frequency, shared by its d components, as the
    multivariate t requires.
    """
    nu = _check_smoothness(smoothness)
    if n_features < 0:
        raise ValueError(f"n_features must be non-negative, got {n_features}")
    scales = _length_scales(length_scale, dim)
    z = rng.standard_normal((n_features, dim))
    g = rng.chisquare(2.0 * nu, n_features)
    frequencies = z / scales * np.sqrt(2.0 * nu / g)[:, None]
    phases = rng.uniform(0.0, _TWO_PI, n_features)
    return frequencies, phases


def fourier_features(
    U: ArrayLike, frequencies: ArrayLike, phases: ArrayLike
) -> NDArray[np.float64]:
    """Random Fourier features φ(U) = sqrt(2/M) cos(U ω^T + b), shape (m, M).

    The plain reference form (numpy's cos, no blocking), for checks; FeatureSurface evaluates
    the same thing faster (Rahimi & Recht 2007).
    """
    U = np.atleast_2d(np.asarray(U, dtype=float))
    frequencies = np.asarray(frequencies, dtype=float)
    n_features = frequencies.shape[0]
    return math.sqrt(2.0 / max(n_features, 1)) * np.cos(U @ frequencies.T + phases)


def _cos_dot(
    Z: NDArray[np.float64], coef: NDArray[np.float64], work: NDArray[np.float64]
) -> NDArray[np.float64]:
    """Σ_j coef_j cos(Z_ij) for each row i, overwriting Z and ``work`` (same shape as Z).

    numpy's float64 cos costs about 25 ns per element here and would dominate evaluation, so
    cos is computed with array arithmetic instead: reduce to y = Z - 2π·round(Z / 2π) in
    [-π, π], take p = cos(y / 2) by a degree-20 Taylor polynomial in y² (exact to ~1e-17 on
    [-π/2, π/2]), then cos(y) = 2p² - 1, whose "-1" folds into a constant -Σ coef. The result
    agrees with numpy's cos to ~3e-15 absolute for |Z| up to ~1e3; beyond that both are limited
    by the rounding of Z itself (~|Z|·1e-16).
    """
    K = np.multiply(Z, 1.0 / _TWO_PI, out=work)
    np.rint(K, out=K)
    K *= _TWO_PI
    Z -= K
    np.multiply(Z, Z, out=Z)
    P = np.multiply(Z, _HALF_COS[10], out=K)
    P += _HALF_COS[9]
    for c in _HALF_COS[8::-1]:
        P *= Z
        P += c
    np.multiply(P, P, out=P)
    return P @ (2.0 * coef) - coef.sum()


@dataclass(frozen=True, eq=False)
class FeatureSurface:
    """A fixed Gaussian-process draw on [0, 1]^d, evaluated in batches: f(U) = (m, d) → (m,).

        f(U) = mean + amplitude · sqrt(2/M) cos(U ω^T + b) · w + amplitude² k(U, X) · α

    ``k`` is the Matérn correlation (``smoothness`` ν, ``length_scale`` ℓ per dimension);
    ``amplitude`` is the signal standard deviation (variance amplitude²). With no ``data`` the
    surface is a prior RFF draw (Rahimi & Recht 2007); with ``data`` X (n, d) and
    ``coefficients`` α (n,) it is a pathwise posterior draw (Wilson et al. 2020), and with no
    features it is the exact posterior mean. Frozen, with read-only arrays, and picklable, so
    it can be shipped to worker processes; points are evaluated in bounded blocks.
    """

    frequencies: NDArray[np.float64] = field(repr=False)
    phases: NDArray[np.float64] = field(repr=False)
    weights: NDArray[np.float64] = field(repr=False)
    length_scale: NDArray[np.float64] = field(repr=False)
    smoothness: float = 2.5
    amplitude: float = 1.0
    mean: float = 0.0
    data: NDArray[np.float64] | None = field(default=None, repr=False)
    coefficients: NDArray[np.float64] | None = field(default=None, repr=False)
    # Derived once, so that each evaluation does only the per-point work.
    _feature_coef: NDArray[np.float64] = field(init=False, repr=False)
    _feature_grad: NDArray[np.float64] = field(init=False, repr=False)
    _scaled_data: NDArray[np.float64] = field(init=False, repr=False)

    def __post_init__(self) -> None:
        frequencies = np.asarray(self.frequencies, dtype=float)
        if frequencies.ndim != 2:
            raise ValueError(f"frequencies must have shape (M, d), got {frequencies.shape}")
        n_features, dim = frequencies.shape
        data = np.empty((0, dim)) if self.data is None else self.data
        n_data = np.shape(data)[0]
        coefficients = np.empty(0) if self.coefficients is None else self.coefficients
        scales = _length_scales(self.length_scale, dim)
        values = {
            "frequencies": _readonly(frequencies, (n_features, dim)),
            "phases": _readonly(self.phases, (n_features,)),
            "weights": _readonly(self.weights, (n_features,)),
            "length_scale": _readonly(scales, (dim,)),
            "smoothness": _check_smoothness(self.smoothness),
            "amplitude": float(self.amplitude),
            "mean": float(self.mean),
            "data": _readonly(data, (n_data, dim)),
            "coefficients": _readonly(coefficients, (n_data,)),
        }
        coef = values["amplitude"] * math.sqrt(2.0 / max(n_features, 1)) * values["weights"]
        values["_feature_coef"] = coef
        values["_feature_grad"] = coef[:, None] * values["frequencies"]
        values["_scaled_data"] = values["data"] / scales
        for name, value in values.items():
            object.__setattr__(self, name, value)

    def __repr__(self) -> str:
        return (
            f"FeatureSurface(dim={self.dim}, n_features={self.n_features}, "
            f"n_data={self.n_data}, smoothness={self.smoothness}, "
            f"amplitude={self.amplitude}, mean={self.mean})"
        )

    @property
    def dim(self) -> int:
        return self.frequencies.shape[1]

    @property
    def n_features(self) -> int:
        return self.frequencies.shape[0]

    @property
    def n_data(self) -> int:
        return self.data.shape[0]

    def __call__(self, U: ArrayLike) -> NDArray[np.float64]:
        """Surface values at the rows of U (m, d), shape (m,)."""
        U = self._points(U)
        out = np.empty(len(U))
        work = self._work(len(U))
        for block in self._blocks(len(U)):
            out[block] = self._values(U[block], work)
        return out

    def gradient(self, U: ArrayLike) -> NDArray[np.float64]:
        """Gradient of the surface at the rows of U (m, d), shape (m, d).

            ∇f(u) = -amplitude · sqrt(2/M) Σ_j w_j sin(u·ω_j + b_j) ω_j
                    + amplitude² Σ_i α_i (dk/dr / r)(r_i) (u - X_i) / ℓ²,   r_i = ||(u - X_i)/ℓ||

        At a data point under ν = 1/2 the kernel has a cusp; its term is taken as 0 there.
        """
        return self.value_and_gradient(U)[1]

    def value_and_gradient(self, U: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Values (m,) and gradients (m, d) together, sharing the work (for L-BFGS-B)."""
        U = self._points(U)
        values = np.empty(len(U))
        grads = np.empty(U.shape)
        work = self._work(len(U))
        for block in self._blocks(len(U)):
            values[block], grads[block] = self._values(U[block], work, with_gradient=True)
        return values, grads

    def _points(self, U: ArrayLike) -> NDArray[np.float64]:
        U = np.asarray(U, dtype=float)
        if U.ndim != 2 or U.shape[1] != self.dim:
            raise ValueError(f"points must have shape (m, {self.dim}), got {U.shape}")
        return U

    def _rows(self) -> int:
        return max(1, _BLOCK_ELEMENTS // max(self.n_features, self.n_data, 1))

    def _blocks(self, m: int) -> list[slice]:
        rows = self._rows()
        return [slice(start, start + rows) for start in range(0, m, rows)]

    def _work(self, m: int) -> NDArray[np.float64]:
        # Two (rows, M) buffers reused by every block of a call: a fresh 1 MiB array per block
        # costs page faults that, measured here, took longer than the arithmetic.
        return np.empty((2, min(self._rows(), max(m, 1)), self.n_features))

    def _values(
        self, U: NDArray[np.float64], work: NDArray[np.float64], with_gradient: bool = False
    ):
        values = np.full(len(U), self.mean)
        grads = np.zeros(U.shape) if with_gradient else None
        if self.n_features:
            Z, K = work[0, : len(U)], work[1, : len(U)]
            np.matmul(U, self.frequencies.T, out=Z)
            Z += self.phases
            if with_gradient:
                grads -= np.sin(Z, out=K) @ self._feature_grad
            values += _cos_dot(Z, self._feature_coef, K)
        if self.n_data:
            r = distance.cdist(U / self.length_scale, self._scaled_data)
            weighted = self.amplitude**2 * self.coefficients
            values += matern(r, self.smoothness) @ weighted
            if with_gradient:
                # Σ_i s_i (u - X_i) = u Σ_i s_i - s @ X, avoiding an (m, n, d) array.
                s = matern_slope_over_r(r, self.smoothness) * weighted
                grads += (U * s.sum(axis=1)[:, None] - s @ self.data) / self.length_scale**2
        if with_gradient:
            return values, grads
        return values


def draw_prior(
    dim: int,
    smoothness: float,
    length_scale: ArrayLike,
    rng: np.random.Generator,
    n_features: int = DEFAULT_FEATURES,
    amplitude: float = 1.0,
    mean: float = 0.0,
) -> FeatureSurface:
    """A prior Matérn GP draw on [0, 1]^d as random Fourier features.

        f(x) = mean + amplitude · sqrt(2/M) cos(x ω^T + b) · w,   w ~ N(0, I_M)

    with ω, b from :func:`draw_frequencies`; over draws, Cov[f(x), f(x')] = amplitude² k(x, x')
    exactly, and within one draw to about 1/sqrt(M) (Rahimi & Recht 2007; R&W 2006 eq. 4.14).
    """
    frequencies, phases = draw_frequencies(dim, smoothness, length_scale, n_features, rng)
    weights = rng.standard_normal(n_features)
    return FeatureSurface(
        frequencies=frequencies,
        phases=phases,
        weights=weights,
        length_scale=_length_scales(length_scale, dim),
        smoothness=smoothness,
        amplitude=amplitude,
        mean=mean,
    )


def _data(X: ArrayLike, y: ArrayLike) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    X = np.atleast_2d(np.asarray(X, dtype=float))
    y = np.asarray(y, dtype=float).reshape(-1)
    if len(y) != len(X):
        raise ValueError(f"X has {len(X)} rows but y has {len(y)} values")
    return X, y


def _solve(
    X: NDArray[np.float64],
    residual: NDArray[np.float64],
    length_scale: ArrayLike,
    amplitude: float,
    noise_variance: float,
    smoothness: float,
) -> NDArray[np.float64]:
    """(amplitude² K + σ_n² I)^-1 residual by Cholesky, with jitter escalation if needed."""
    if noise_variance < 0:
        raise ValueError(f"noise_variance must be non-negative, got {noise_variance}")
    scales = np.asarray(length_scale, dtype=float)
    key = (X.tobytes(), X.shape, scales.tobytes(), scales.shape)
    factor = _factor(key, amplitude, noise_variance, smoothness)
    return linalg.cho_solve(factor, residual)


@lru_cache(maxsize=8)
def _factor(key: tuple, amplitude: float, noise_variance: float, smoothness: float):
    """The Cholesky factor of amplitude² K + σ_n² I (jitter added if needed), kept for the next
    draw given the same data: a fitted landscape's draws all condition on one set of rows."""
    X = np.frombuffer(key[0]).reshape(key[1])
    length_scale = np.frombuffer(key[2]).reshape(key[3])
    gram = matern_kernel(X, X, length_scale, smoothness, amplitude)
    gram[np.diag_indices_from(gram)] += noise_variance
    scale = float(np.mean(np.diag(gram))) if len(X) else 1.0
    jitter = 0.0
    for step in range(_JITTER_STEPS + 1):
        try:
            return linalg.cho_factor(gram + jitter * np.eye(len(X)), lower=True)
        except linalg.LinAlgError:
            jitter = scale * _JITTER_START * 10.0**step
    raise linalg.LinAlgError("kernel matrix is not positive definite even with jitter")


def draw_posterior(
    X: ArrayLike,
    y: ArrayLike,
    *,
    length_scale: ArrayLike,
    amplitude: float,
    noise_variance: float,
    mean: float,
    smoothness: float = 2.5,
    rng: np.random.Generator,
    n_features: int = DEFAULT_FEATURES,
) -> FeatureSurface:
    """A posterior GP draw given evaluations y at X, by pathwise conditioning.

        f_post(·) = f_prior(·) + amplitude² k(·, X) (amplitude² K + σ_n² I)^-1 (y - f_prior(X) - ε)

    with f_prior a prior RFF draw (:func:`draw_prior`, same mean and amplitude = signal sd) and
    ε ~ N(0, σ_n² I), σ_n² = ``noise_variance`` (Wilson et al. 2020, pathwise update by
    Matheron's rule with a random-feature prior: "decoupled sampling", PMLR 119:10292–10302).
    Its expectation is the exact GP posterior mean (:func:`posterior_mean`); its covariance over
    draws is the exact posterior covariance, since each draw has fresh features.
    """
    X, y = _data(X, y)
    prior = draw_prior(
        X.shape[1], smoothness, length_scale, rng, n_features, amplitude=amplitude, mean=mean
    )
    noise = rng.standard_normal(len(y)) * math.sqrt(max(noise_variance, 0.0))
    # K carries amplitude², but FeatureSurface multiplies k(·, X) by amplitude² itself.
    alpha = _solve(X, y - prior(X) - noise, length_scale, amplitude, noise_variance, smoothness)
    return FeatureSurface(
        frequencies=prior.frequencies,
        phases=prior.phases,
        weights=prior.weights,
        length_scale=prior.length_scale,
        smoothness=smoothness,
        amplitude=amplitude,
        mean=mean,
        data=X,
        coefficients=alpha,
    )


def posterior_mean(
    X: ArrayLike,
    y: ArrayLike,
    *,
    length_scale: ArrayLike,
    amplitude: float,
    noise_variance: float,
    mean: float,
    smoothness: float = 2.5,
) -> FeatureSurface:
    """The exact GP posterior mean given evaluations y at X, as a surface with no features.

        m(·) = mean + amplitude² k(·, X) (amplitude² K + σ_n² I)^-1 (y - mean)

    (R&W 2006 eq. 2.23–2.25 and Algorithm 2.1, with a constant prior mean).
    """
    X, y = _data(X, y)
    alpha = _solve(X, y - mean, length_scale, amplitude, noise_variance, smoothness)
    dim = X.shape[1]
    return FeatureSurface(
        frequencies=np.empty((0, dim)),
        phases=np.empty(0),
        weights=np.empty(0),
        length_scale=_length_scales(length_scale, dim),
        smoothness=smoothness,
        amplitude=amplitude,
        mean=mean,
        data=X,
        coefficients=alpha,
    )


def dense_size(dim: int) -> int:
    """Default size of the Sobol set in :func:`global_minimum`: 2^14 up to 4-D, doubling per
    further dimension, capped at 2^17.

    At 2^14 points the set's spacing is about 2^(-14/d) cube units (0.008 in 2-D, 0.09 in 4-D),
    well inside a basin of a surface with length scale >= 0.1; doubling per dimension above 4
    keeps the set from thinning as fast as the volume grows, and the cap bounds the cost (about
    1.3 s at 10 µs per point).
    """
    return 2 ** min(14 + max(dim - 4, 0), 17)


def global_minimum(
    f: Callable[[NDArray[np.float64]], NDArray[np.float64]],
    dim: int,
    rng: np.random.Generator,
    n_dense: int | None = None,
    starts: int = DEFAULT_STARTS,
) -> tuple[NDArray[np.float64], float]:
    """Best point and value of f on [0, 1]^d by a stated search: dense Sobol set, then L-BFGS-B.

    1. Evaluate f on a scrambled Sobol set of 2^ceil(log2(n_dense)) points (scrambling drawn
       from rng; n_dense defaults to :func:`dense_size`).
    2. From each of the ``starts`` best of them, run L-BFGS-B (bounds [0, 1]^d) with f's
       ``value_and_gradient`` or ``gradient`` method if it has one, else finite differences.
    3. Return the best point seen and its value f(u*), evaluated by f as a one-row batch.

    f is any callable mapping (m, d) to (m,), such as a :class:`FeatureSurface`.
    """
    n_dense = dense_size(dim) if n_dense is None else int(n_dense)
    if n_dense < 1:
        raise ValueError(f"n_dense must be positive, got {n_dense}")
    # random_base2 keeps the Sobol set's balance properties, which need a power of two.
    # seed= (not rng=) is accepted by every SciPy the project supports (>= 1.11).
    sobol = qmc.Sobol(dim, scramble=True, seed=rng)
    points = sobol.random_base2(math.ceil(math.log2(n_dense)))
    values = np.asarray(f(points), dtype=float)
    order = np.argsort(values, kind="stable")
    best_u, best_value = points[order[0]].copy(), float(values[order[0]])

    def value(u: NDArray[np.float64]) -> float:
        return float(f(u[None, :])[0])

    if hasattr(f, "value_and_gradient"):

        def objective(u: NDArray[np.float64]) -> tuple[float, NDArray[np.float64]]:
            v, g = f.value_and_gradient(u[None, :])
            return float(v[0]), g[0]

        fun, jac = objective, True
    elif hasattr(f, "gradient"):
        fun, jac = value, (lambda u: np.asarray(f.gradient(u[None, :]), dtype=float)[0])
    else:
        fun, jac = value, None

    bounds = [(0.0, 1.0)] * dim
    for index in order[: max(starts, 0)]:
        result = optimize.minimize(fun, points[index], jac=jac, method="L-BFGS-B", bounds=bounds)
        u = np.clip(result.x, 0.0, 1.0)
        v = value(u)
        if v < best_value:
            best_u, best_value = u, v
    return best_u, best_value


def window_minimum(
    f: Callable[[NDArray[np.float64]], NDArray[np.float64]],
    dim: int,
    rng: np.random.Generator,
    at: ArrayLike | None = None,
) -> tuple[NDArray[np.float64], NDArray[np.float64], float]:
    """The window ``[lower, lower + 1]^d`` of a surface f defined on all of R^d whose global
    minimum sits at cube point ``at``: returns (lower, u*, f(u*)), u* in f's own coordinates.

    Starting from f's minimum u* on [0, 1]^d (:func:`global_minimum`), the window that puts u*
    at ``at`` is searched; if it holds a lower point, that point becomes the candidate and the
    search repeats (each round strictly lowers the value; at most ``WINDOW_ROUNDS``). Without
    ``at`` the window is the unit cube itself (lower = 0).
    """
    u, value = global_minimum(f, dim, rng)
    lower = np.zeros(dim)
    if at is None:
        return lower, u, value
    at = np.asarray(at, dtype=float)
    for _ in range(WINDOW_ROUNDS):
        lower = u - at
        # The shifted surface is searched without its gradient (finite differences), as
        # drawn landscapes always were, so their grids stay the same.
        inner, inner_value = global_minimum(lambda U, lo=lower: f(lo + U), dim, rng)
        if inner_value >= value - 1e-12 * max(1.0, abs(value)):
            break
        u, value = lower + inner, inner_value
    return u - at, u, value
