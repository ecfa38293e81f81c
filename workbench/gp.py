"""The Gaussian-process surrogate: Matérn 5/2 kernel, log marginal likelihood, fit, predict.

The model is a zero-mean GP on standardised outputs, ``y_std = (y - mean) / scale`` (numpy
``std`` with ``ddof=0``; a zero scale becomes 1), with an ARD Matérn ν = 5/2 kernel and
Gaussian noise (Rasmussen & Williams 2006, eq. 4.17 and Algorithm 2.1). Inputs are points of
the unit cube ``[0, 1]^p``; the hyper-parameter bounds below assume that scale.

Hyper-parameters are fitted by maximising the log marginal likelihood with its analytic
gradient (eq. 5.9) by bounded L-BFGS-B in log space. Between refits, :func:`condition` keeps
the hyper-parameters and only refactorises, and :func:`refit_due` says when to refit.

Linear algebra goes straight to LAPACK (``potrf``, ``potrs``, ``trtrs``) through
:mod:`scipy.linalg.lapack`: inputs are validated once at the edge, and the wrappers in
:mod:`scipy.linalg` cost more than the factorisation itself at these sizes.

Run with one BLAS thread per process (``threadpoolctl.threadpool_limits(1)`` or
``OPENBLAS_NUM_THREADS=1``): on a busy machine, multi-threaded BLAS makes the many tiny calls
inside L-BFGS-B 3-20 times slower. Setting that is the job of the process that owns the pool.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from numpy.linalg import LinAlgError  # the class scipy.linalg raises too

from .lazy import LazyModule
from .seeding import generator

lapack = LazyModule("scipy.linalg.lapack")
optimize = LazyModule("scipy.optimize")

__all__ = [
    "DEFAULT_BOUNDS",
    "DEFAULT_NOISE_VARIANCE",
    "DEFAULT_SIGNAL_VARIANCE",
    "GP",
    "JITTER_STEPS",
    "LENGTHSCALE_BOUNDS",
    "NOISE_VARIANCE_BOUNDS",
    "REFIT_EVERY_STEP_BELOW",
    "REFIT_GROWTH",
    "REFIT_MAX_GAP",
    "SIGNAL_VARIANCE_BOUNDS",
    "Bounds",
    "Hyperparameters",
    "condition",
    "default_lengthscale",
    "fit",
    "log_marginal_likelihood",
    "matern52",
    "posterior",
    "refit_due",
    "unit_matern",
]

# Bounds in standardised-output units; length scales are in unit-cube units.
LENGTHSCALE_BOUNDS = (0.01, 20.0)
SIGNAL_VARIANCE_BOUNDS = (0.01, 100.0)
NOISE_VARIANCE_BOUNDS = (1e-8, 1.0)

# The default start: signal variance 1 (the standardised outputs' variance), little noise.
DEFAULT_SIGNAL_VARIANCE = 1.0
DEFAULT_NOISE_VARIANCE = 1e-4

# Jitter tried in turn when K + noise·I is not numerically positive definite, as multiples
# of the mean diagonal of K.
JITTER_STEPS = (1e-10, 1e-8, 1e-6, 1e-4)

# Refit cadence (see ``refit_due``).
REFIT_EVERY_STEP_BELOW = 8
REFIT_GROWTH = 0.20
REFIT_MAX_GAP = 5

# Elements of one block of the candidate-by-data kernel in ``GP.predict`` (256 KiB).
_BLOCK_ELEMENTS = 32_768

# Floor of the latent variance, relative to the signal variance, so that sd > 0.
_VARIANCE_FLOOR = 1e-12

_SQRT5 = math.sqrt(5.0)
_HALF_LOG_2PI = 0.5 * math.log(2.0 * math.pi)


def _fail(key: str, expected: str, got: object) -> ValueError:
    text = repr(got)
    text = text if len(text) <= 80 else text[:77] + "..."
    return ValueError(f"'{key}' must be {expected}; got {text}")


@dataclass(frozen=True)
class Bounds:
    """Box bounds of the hyper-parameters (each a ``(low, high)`` pair, positive)."""

    lengthscale: tuple[float, float] = LENGTHSCALE_BOUNDS
    signal_variance: tuple[float, float] = SIGNAL_VARIANCE_BOUNDS
    noise_variance: tuple[float, float] = NOISE_VARIANCE_BOUNDS

    def __post_init__(self):
        for name in ("lengthscale", "signal_variance", "noise_variance"):
            pair = getattr(self, name)
            try:
                low, high = (float(v) for v in pair)
            except (TypeError, ValueError):
                raise _fail(f"bounds.{name}", "a (low, high) pair", pair) from None
            if not (0.0 < low <= high < math.inf):
                raise _fail(f"bounds.{name}", "a pair with 0 < low <= high < inf", pair)
            object.__setattr__(self, name, (low, high))

    def log_box(self, p: int) -> np.ndarray:
        """The ``(p + 2, 2)`` array of log-space bounds, in the order of ``to_log``."""
        rows = [self.lengthscale] * p + [self.signal_variance, self.noise_variance]
        return np.log(np.array(rows, dtype=float))


DEFAULT_BOUNDS = Bounds()


@dataclass(frozen=True, eq=False)
class Hyperparameters:
    """ARD length scales ``(p,)``, signal and noise variance, in standardised-output units."""

    lengthscales: np.ndarray
    signal_variance: float
    noise_variance: float

    def __post_init__(self):
        ls = np.array(self.lengthscales, dtype=float, ndmin=1)
        if ls.ndim != 1 or ls.size == 0 or not np.all(np.isfinite(ls)) or np.any(ls <= 0):
            raise _fail("lengthscales", "a non-empty 1-D array of positive numbers", ls)
        ls.setflags(write=False)
        object.__setattr__(self, "lengthscales", ls)
        for name in ("signal_variance", "noise_variance"):
            value = float(getattr(self, name))
            if not (0.0 < value < math.inf):
                raise _fail(name, "a positive finite number", getattr(self, name))
            object.__setattr__(self, name, value)

    @property
    def p(self) -> int:
        """Number of input dimensions."""
        return self.lengthscales.size

    def to_log(self) -> np.ndarray:
        """``theta = log([*lengthscales, signal_variance, noise_variance])``, length p + 2."""
        return np.log(np.append(self.lengthscales, (self.signal_variance, self.noise_variance)))

    @classmethod
    def from_log(cls, theta: np.ndarray) -> Hyperparameters:
        """The inverse of :meth:`to_log`."""
        theta = np.asarray(theta, dtype=float)
        if theta.ndim != 1 or theta.size < 3:
            raise _fail("theta", "a 1-D array of length p + 2 >= 3", theta)
        values = np.exp(theta)
        return cls(values[:-2], float(values[-2]), float(values[-1]))


def default_lengthscale(p: int) -> float:
    """The default start length scale, ``0.3·sqrt(p)``, since typical distances between
    points of ``[0, 1]^p`` grow like ``sqrt(p)``."""
    return 0.3 * math.sqrt(p)


def _default_theta(p: int, bounds: Bounds) -> np.ndarray:
    theta = Hyperparameters(
        np.full(p, default_lengthscale(p)), DEFAULT_SIGNAL_VARIANCE, DEFAULT_NOISE_VARIANCE
    ).to_log()
    box = bounds.log_box(p)
    return np.clip(theta, box[:, 0], box[:, 1])


# --- kernel ---------------------------------------------------------------------------------


def unit_matern(z2: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Matérn 5/2 with unit signal variance from ``z² = 5r²``, overwriting ``z2``.

    Returns ``(1 + z + z²/3) exp(-z)``, ``z = √5 r`` and ``exp(-z)`` (the last two for the
    gradient). The signal variance is applied by the callers, most cheaply to vectors.
    """
    z = np.sqrt(z2, out=z2)
    e = np.negative(z)
    np.exp(e, out=e)
    # 1 + √5 r + 5r²/3 = 1 + z(1 + z/3); eight passes over the matrix in all.
    k = z * (1.0 / 3.0)
    k += 1.0
    k *= z
    k += 1.0
    k *= e
    return k, z, e


def _scaled(X: np.ndarray, lengthscales: np.ndarray) -> np.ndarray:
    """Inputs scaled so that plain squared distances are ``z² = 5r²``."""
    return X * (_SQRT5 / lengthscales)


def _sq_dist(a: np.ndarray, b: np.ndarray, bb: np.ndarray | None = None) -> np.ndarray:
    """Squared Euclidean distances between the rows of ``a`` and ``b``; ``bb`` = row norms²."""
    if a.shape[1] == 1:
        # Exact, and the cheapest in one dimension.
        return np.square(a - b.T)
    # |a|² + |b|² - 2a·b: one matrix product; the cancellation error near r = 0 is harmless
    # because the Matérn 5/2 kernel is flat there (k ≈ s²(1 - 5r²/6)).
    d2 = a @ b.T
    d2 *= -2.0
    d2 += np.einsum("ij,ij->i", a, a)[:, None]
    d2 += np.einsum("ij,ij->i", b, b) if bb is None else bb
    np.maximum(d2, 0.0, out=d2)
    return d2


def matern52(
    A: np.ndarray, B: np.ndarray, lengthscales: np.ndarray, signal_variance: float
) -> np.ndarray:
    """Matérn ν = 5/2 ARD kernel matrix between the rows of ``A`` and ``B``.

    ``k(r) = s²(1 + √5 r + 5r²/3) exp(-√5 r)`` with ``r² = Σ_k ((a_k - b_k)/l_k)²``
    (Rasmussen & Williams 2006, eq. 4.17).
    """
    A = np.asarray(A, dtype=float)
    B = np.asarray(B, dtype=float)
    lengthscales = np.asarray(lengthscales, dtype=float)
    p = lengthscales.size
    if lengthscales.ndim != 1 or A.ndim != 2 or B.ndim != 2 or not A.shape[1] == B.shape[1] == p:
        raise _fail("A, B", f"2-D arrays with {lengthscales.size} columns", (A.shape, B.shape))
    k = unit_matern(_sq_dist(_scaled(A, lengthscales), _scaled(B, lengthscales)))[0]
    k *= float(signal_variance)
    return k


# --- Cholesky with jitter -------------------------------------------------------------------


def _jittered_cholesky(K: np.ndarray) -> tuple[np.ndarray, float]:
    """Lower Cholesky factor of ``K`` (not modified), adding jitter only if needed.

    Tries ``K`` itself, then ``K + j·mean(diag K)·I`` for ``j`` in ``JITTER_STEPS``; returns
    the factor and the jitter added (an absolute variance).
    """
    L, info = lapack.dpotrf(K, lower=1, clean=1)
    if info == 0:
        return L, 0.0
    n = K.shape[0]
    mean_diag = float(np.trace(K)) / n
    if not (mean_diag > 0.0 and math.isfinite(mean_diag)):
        raise LinAlgError(f"covariance matrix has a mean diagonal of {mean_diag!r}")
    for step in JITTER_STEPS:
        jitter = step * mean_diag
        Kj = K.copy()
        Kj.ravel()[:: n + 1] += jitter
        L, info = lapack.dpotrf(Kj, lower=1, clean=1, overwrite_a=1)
        if info == 0:
            return L, jitter
    raise LinAlgError(
        f"covariance matrix ({n}x{n}) is not positive definite even with jitter "
        f"{JITTER_STEPS[-1]:g} x mean diagonal ({mean_diag:.3g}) added"
    )


def _lml_value(L: np.ndarray, y: np.ndarray, alpha: np.ndarray) -> float:
    # -½ yᵀα - Σ log L_ii - (n/2) log 2π (Rasmussen & Williams 2006, Algorithm 2.1).
    return float(-0.5 * (y @ alpha) - np.log(L.diagonal()).sum() - y.size * _HALF_LOG_2PI)


# --- log marginal likelihood ----------------------------------------------------------------


def _sq_diffs(X: np.ndarray) -> np.ndarray:
    """Per-dimension squared differences ``(x_ik - x_jk)²``, shape ``(p, n, n)``, C order."""
    Xt = np.ascontiguousarray(X.T)
    D = Xt[:, :, None] - Xt[:, None, :]
    D *= D
    return D


def _lml_and_grad(theta: np.ndarray, D: np.ndarray, y: np.ndarray) -> tuple[float, np.ndarray]:
    """Log marginal likelihood and its gradient in ``theta``, from precomputed ``_sq_diffs``."""
    p, n, _ = D.shape
    D = D.reshape(p, n * n)
    values = np.exp(theta)
    inv_l2 = 1.0 / np.square(values[:p])
    signal, noise = values[p], values[p + 1]

    k, z, e = unit_matern((5.0 * inv_l2 @ D).reshape(n, n))
    K = k * signal
    K.ravel()[:: n + 1] += noise
    L, _ = _jittered_cholesky(K)
    alpha, _ = lapack.dpotrs(L, y, lower=1)
    value = _lml_value(L, y, alpha)

    # ∂L/∂θ = ½ tr((ααᵀ - K⁻¹) ∂K/∂θ) (Rasmussen & Williams 2006, eq. 5.9); with W symmetric
    # the trace is the elementwise sum of W ∘ ∂K/∂θ.
    # potrs against I gives the full (symmetric) inverse as fast as potri gives half of it.
    Kinv, _ = lapack.dpotrs(L, np.eye(n), lower=1, overwrite_b=1)
    W = np.outer(alpha, alpha)
    W -= Kinv

    grad = np.empty(p + 2)
    # ∂K/∂log l_k = s²(5/3)(1 + √5 r) exp(-√5 r) · (x_ik - x_jk)²/l_k².
    G = z + 1.0
    G *= e
    G *= W
    grad[:p] = (0.5 * 5.0 / 3.0 * signal) * inv_l2 * (D @ G.ravel())
    grad[p] = 0.5 * signal * np.vdot(W, k)  # ∂K/∂log s² = K without the noise
    grad[p + 1] = 0.5 * noise * W.trace()  # ∂K/∂log σ² = σ² I
    if not (math.isfinite(value) and np.isfinite(grad).all()):
        raise FloatingPointError(f"log marginal likelihood is not finite at theta={theta!r}")
    return value, grad


def log_marginal_likelihood(
    theta: np.ndarray, X: np.ndarray, y: np.ndarray
) -> tuple[float, np.ndarray]:
    """Log marginal likelihood of standardised ``y`` and its gradient in ``theta``.

    ``theta = log([*lengthscales, signal_variance, noise_variance])``. The value is
    ``-½ yᵀα - Σ log L_ii - (n/2) log 2π`` with ``L Lᵀ = K + σ²I`` and ``α = (K + σ²I)⁻¹ y``
    (Rasmussen & Williams 2006, Algorithm 2.1); the gradient is
    ``½ tr((ααᵀ - (K + σ²I)⁻¹) ∂K/∂θ)`` (eq. 5.9). Jitter, if needed, is held constant.
    """
    X, y = _check_data(X, y)
    theta = np.asarray(theta, dtype=float)
    if theta.shape != (X.shape[1] + 2,) or not np.all(np.isfinite(theta)):
        raise _fail("theta", f"a finite 1-D array of length {X.shape[1] + 2}", theta)
    return _lml_and_grad(theta, _sq_diffs(X), y)


# --- the fitted model -----------------------------------------------------------------------


def _readonly(a: np.ndarray) -> np.ndarray:
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class GP:
    """A GP conditioned on data: the factorisation needed to predict, in standardised units.

    ``y_std = (y - y_mean) / y_scale``; ``cholesky`` is the lower factor of
    ``K + (noise + jitter)·I``, ``alpha = (K + (noise + jitter)·I)⁻¹ y_std``, and
    ``log_marginal_likelihood`` is that of ``y_std`` (Rasmussen & Williams 2006, Algorithm 2.1).
    Build one with :func:`fit`, :func:`posterior` or :func:`condition`.
    """

    X: np.ndarray
    y: np.ndarray
    y_mean: float
    y_scale: float
    hyperparameters: Hyperparameters
    cholesky: np.ndarray = field(repr=False)
    alpha: np.ndarray = field(repr=False)
    jitter: float
    log_marginal_likelihood: float

    @property
    def n(self) -> int:
        """Number of observations."""
        return self.X.shape[0]

    @cached_property
    def _scaled_data(self) -> tuple[np.ndarray, np.ndarray]:
        """The training inputs scaled by the length scales, and their squared norms: the same
        for every prediction, so computed once."""
        b = _scaled(self.X, self.hyperparameters.lengthscales)
        return b, np.einsum("ij,ij->i", b, b)

    def predict(self, Xc: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Posterior mean and latent sd (without the noise) at the rows of ``Xc``, in the
        original output units.

        ``μ = k*ᵀα``, ``σ² = k(x, x) - vᵀv`` with ``v = L⁻¹ k*`` (Rasmussen & Williams 2006,
        Algorithm 2.1), floored at ``1e-12·s²`` so that sd > 0. Raises ``FloatingPointError``
        rather than return a non-finite value.
        """
        Xc = np.asarray(Xc, dtype=float)
        p = self.X.shape[1]
        if Xc.ndim != 2 or Xc.shape[1] != p:
            raise _fail("Xc", f"a 2-D array with {p} columns", Xc.shape)
        if Xc.shape[0] == 0:
            return np.empty(0), np.empty(0)
        hp = self.hyperparameters
        signal = hp.signal_variance
        a = _scaled(Xc, hp.lengthscales)
        b, bb = self._scaled_data
        m, n = Xc.shape[0], self.X.shape[0]
        mean = np.empty(m)
        var = np.empty(m)
        # Blocks of rows whose m x n temporaries stay in cache: about twice as fast as one
        # pass over thousands of candidates.
        rows = max(1, _BLOCK_ELEMENTS // n)
        for start in range(0, m, rows):
            block = slice(start, start + rows)
            # The unit-signal cross-kernel; s² is applied to the length-m vectors instead.
            Ks = unit_matern(_sq_dist(a[block], b, bb))[0]
            np.dot(Ks, self.alpha, out=mean[block])
            # Ks.T is Fortran-ordered, as LAPACK wants it: no copy.
            V, info = lapack.dtrtrs(self.cholesky, Ks.T, lower=1)
            if info != 0:
                raise LinAlgError(f"triangular solve failed (LAPACK trtrs info={info})")
            np.einsum("ij,ij->j", V, V, out=var[block])
        mean *= signal
        var *= -(signal * signal)
        var += signal
        np.maximum(var, _VARIANCE_FLOOR * signal, out=var)
        sd = np.sqrt(var, out=var)
        sd *= self.y_scale
        mean *= self.y_scale
        mean += self.y_mean
        # One reduction: the sum is finite only if every value is.
        if not math.isfinite(float(mean.sum() + sd.sum())):
            bad = int(np.count_nonzero(~(np.isfinite(mean) & np.isfinite(sd))))
            raise FloatingPointError(
                f"GP prediction is not finite at {bad} of {Xc.shape[0]} points "
                "(non-finite candidates or a degenerate model)"
            )
        return mean, sd


def _check_data(X: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    if X.ndim != 2 or X.shape[0] == 0 or X.shape[1] == 0:
        raise _fail("X", "a 2-D array with at least one row and one column", X.shape)
    if y.shape != (X.shape[0],):
        raise _fail("y", f"a 1-D array of length {X.shape[0]} (the rows of X)", y.shape)
    if not np.all(np.isfinite(X)):
        raise _fail("X", "finite", "non-finite values")
    if not np.all(np.isfinite(y)):
        raise _fail("y", "finite", "non-finite values")
    return X, y


def _standardise(y: np.ndarray) -> tuple[float, float, np.ndarray]:
    mean = float(np.mean(y))
    scale = float(np.std(y))
    if not (math.isfinite(mean) and math.isfinite(scale)):
        raise FloatingPointError("the mean or standard deviation of y overflows")
    if scale == 0.0:
        scale = 1.0
    return mean, scale, (y - mean) / scale


def _build(
    X: np.ndarray, y: np.ndarray, mean: float, scale: float, ys: np.ndarray, hp: Hyperparameters
) -> GP:
    n = X.shape[0]
    a = _scaled(X, hp.lengthscales)
    K = unit_matern(_sq_dist(a, a))[0]
    K *= hp.signal_variance
    K.ravel()[:: n + 1] += hp.noise_variance
    L, jitter = _jittered_cholesky(K)
    alpha, _ = lapack.dpotrs(L, ys, lower=1)
    lml = _lml_value(L, ys, alpha)
    if not (math.isfinite(lml) and np.all(np.isfinite(alpha))):
        raise FloatingPointError("GP factorisation produced non-finite values")
    return GP(
        X=_readonly(np.array(X)),
        y=_readonly(np.array(y)),
        y_mean=mean,
        y_scale=scale,
        hyperparameters=hp,
        cholesky=_readonly(L),
        alpha=_readonly(alpha),
        jitter=jitter,
        log_marginal_likelihood=lml,
    )


def posterior(X: np.ndarray, y: np.ndarray, hyperparameters: Hyperparameters) -> GP:
    """The GP with fixed ``hyperparameters`` conditioned on ``(X, y)`` (one Cholesky)."""
    X, y = _check_data(X, y)
    if hyperparameters.p != X.shape[1]:
        raise _fail("X", f"a 2-D array with {hyperparameters.p} columns", X.shape)
    mean, scale, ys = _standardise(y)
    return _build(X, y, mean, scale, ys, hyperparameters)


def condition(gp: GP, X: np.ndarray, y: np.ndarray) -> GP:
    """``gp``'s hyper-parameters conditioned on new data: re-standardise and refactorise."""
    return posterior(X, y, gp.hyperparameters)


def _negative(theta: np.ndarray, D: np.ndarray, y: np.ndarray) -> tuple[float, np.ndarray]:
    value, grad = _lml_and_grad(theta, D, y)
    return -value, -grad


def fit(
    X: np.ndarray,
    y: np.ndarray,
    *,
    previous: Hyperparameters | None = None,
    rng: np.random.Generator | None = None,
    restarts: int = 3,
    maxiter: int = 50,
    bounds: Bounds = DEFAULT_BOUNDS,
) -> GP:
    """Fit the hyper-parameters by maximum marginal likelihood and condition on the data.

    L-BFGS-B with the analytic gradient, in log space, within ``bounds`` (standardised units;
    by default ``LENGTHSCALE_BOUNDS`` in unit-cube units, ``SIGNAL_VARIANCE_BOUNDS`` and
    ``NOISE_VARIANCE_BOUNDS``).

    Starts: with ``previous``, one warm start from it (clipped into the bounds) for
    ``maxiter // 2`` iterations; otherwise the default (length scales
    ``default_lengthscale(p)``, ``DEFAULT_SIGNAL_VARIANCE``, ``DEFAULT_NOISE_VARIANCE``) plus
    ``restarts`` starts drawn uniformly in the log box from ``rng`` (a fixed seed if ``None``,
    so a fit is always reproducible). The best optimum wins. A start that fails
    (``LinAlgError`` or a non-finite likelihood) is skipped; if all fail, the default
    hyper-parameters are used (and if even they cannot be factorised, the ``LinAlgError``
    propagates). With a single observation nothing is
    fitted: the start is used as it is.
    """
    X, y = _check_data(X, y)
    if isinstance(restarts, bool) or not isinstance(restarts, int) or restarts < 0:
        raise _fail("restarts", "an integer >= 0", restarts)
    if isinstance(maxiter, bool) or not isinstance(maxiter, int) or maxiter < 1:
        raise _fail("maxiter", "an integer >= 1", maxiter)
    n, p = X.shape
    mean, scale, ys = _standardise(y)
    box = bounds.log_box(p)
    default = _default_theta(p, bounds)

    if previous is not None:
        if previous.p != p:
            raise _fail("previous.lengthscales", f"of length {p} (the columns of X)", previous.p)
        starts = np.clip(previous.to_log(), box[:, 0], box[:, 1])[None, :]
        iterations = max(1, maxiter // 2)
    else:
        draws = generator(0 if rng is None else rng).uniform(
            box[:, 0], box[:, 1], size=(restarts, p + 2)
        )
        starts = np.vstack([default, draws])
        iterations = maxiter

    best_theta, best_value = None, math.inf
    if n < 2:
        best_theta = starts[0]
    else:
        D = _sq_diffs(X)
        for start in starts:
            try:
                # The same L-BFGS-B as minimize(method="L-BFGS-B"), with less set-up per call.
                theta, value, _ = optimize.fmin_l_bfgs_b(
                    _negative,
                    start,
                    args=(D, ys),
                    bounds=box,
                    maxiter=iterations,
                    maxfun=2 * iterations,
                )
            except (LinAlgError, FloatingPointError):
                continue
            if math.isfinite(value) and value < best_value:
                best_theta, best_value = theta, float(value)

    if best_theta is not None:
        try:
            return _build(X, y, mean, scale, ys, Hyperparameters.from_log(best_theta))
        except (LinAlgError, FloatingPointError):
            pass
    return _build(X, y, mean, scale, ys, Hyperparameters.from_log(default))


def refit_due(n_observations: int, last_fit_n: int) -> bool:
    """Whether to refit the hyper-parameters now, rather than :func:`condition` the last fit.

    Refit at every step while fewer than ``REFIT_EVERY_STEP_BELOW`` observations are in,
    when the hyper-parameters still move a lot; after that, once the data have grown by the
    fraction ``REFIT_GROWTH`` since the last fit, and at least every ``REFIT_MAX_GAP``
    evaluations: the gap is ``min(REFIT_MAX_GAP, ceil(REFIT_GROWTH · last_fit_n))``.
    Between refits the model is conditioned on the new data with the last hyper-parameters.
    Also refit if there has been no fit yet (``last_fit_n <= 0``) or the data shrank.
    """
    if last_fit_n <= 0 or n_observations < last_fit_n:
        return True
    if n_observations < REFIT_EVERY_STEP_BELOW:
        return n_observations > last_fit_n
    gap = min(REFIT_MAX_GAP, max(1, math.ceil(REFIT_GROWTH * last_fit_n)))
    return n_observations - last_fit_n >= gap
