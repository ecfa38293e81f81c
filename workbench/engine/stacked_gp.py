"""The GP of :mod:`workbench.gp` for R campaigns at once, on ``(R, n, n)`` stacks.

The model is the same (standardised outputs, ARD Matérn 5/2, Gaussian noise, the bounds,
start and jitter policy of :mod:`workbench.gp`); only the arithmetic is stacked:

- squared distances by one matrix product per stack, ``z² = 5r² = ‖a‖² + ‖b‖² − 2abᵀ`` on
  inputs scaled by ``√5/l`` (Rasmussen & Williams 2006, eq. 4.17);
- Cholesky factors by ``numpy.linalg.cholesky`` on the stack; a stack that fails is factorised
  matrix by matrix with ``gp.JITTER_STEPS`` (the same LAPACK routine, so the same factor);
- the inverse factor ``L⁻¹`` is kept, so a prediction is matrix products only:
  ``μ = s² k*ᵀα``, ``σ² = s² − s⁴ ‖L⁻¹k*‖²`` (Algorithm 2.1);
- the hyper-parameter fit runs scipy's L-BFGS-B driver per start of every campaign, all
  their requests for the log marginal likelihood and its gradient (eq. 5.9) answered by one
  stacked evaluation (:func:`workbench.engine.lbfgsb.minimise_driven`).

Every operation acts slice by slice, so a campaign's numbers do not depend on the others in
its stack.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.linalg.lapack import dtrtri

from .. import gp
from ..gp import unit_matern
from .lbfgsb import minimise_driven

__all__ = [
    "Stack",
    "build",
    "cholesky",
    "fit",
    "lml_and_grad",
    "standardise",
]

_SQRT5 = math.sqrt(5.0)
_HALF_LOG_2PI = 0.5 * math.log(2.0 * math.pi)
_VARIANCE_FLOOR = 1e-12


def standardise(y: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Row-wise mean, scale (``std``, ddof 0; zero becomes 1) and standardised ``y``."""
    mean = y.mean(axis=1)
    scale = y.std(axis=1)
    scale = np.where(scale == 0.0, 1.0, scale)
    return mean, scale, (y - mean[:, None]) / scale[:, None]


def cholesky(K: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Lower factors of a stack ``(B, n, n)``: factors, jitter added (absolute) and success.

    Jitter follows :func:`workbench.gp._jittered_cholesky`: ``j·mean(diag K)`` for ``j`` in
    ``gp.JITTER_STEPS`` until the factorisation succeeds. A failed slice has a unit factor.
    """
    B, n, _ = K.shape
    jitter = np.zeros(B)
    ok = np.ones(B, dtype=bool)
    try:
        return np.linalg.cholesky(K), jitter, ok
    except np.linalg.LinAlgError:
        pass
    L = np.empty_like(K)
    eye = np.eye(n)
    for b in range(B):
        try:
            L[b] = np.linalg.cholesky(K[b])
            continue
        except np.linalg.LinAlgError:
            pass
        mean_diag = float(np.trace(K[b])) / n
        ok[b] = False
        if mean_diag > 0.0 and math.isfinite(mean_diag):
            for step in gp.JITTER_STEPS:
                try:
                    L[b] = np.linalg.cholesky(K[b] + (step * mean_diag) * eye)
                except np.linalg.LinAlgError:
                    continue
                jitter[b], ok[b] = step * mean_diag, True
                break
        if not ok[b]:
            L[b] = eye
    return L, jitter, ok


def _sq_dist(a: np.ndarray, b: np.ndarray, bb: np.ndarray) -> np.ndarray:
    """Squared distances between the rows of ``a`` ``(B, m, p)`` and ``b`` ``(B, n, p)``
    (``bb = ‖b‖²``) by one matrix product: ``‖a‖² + ‖b‖² − 2abᵀ``. The cancellation near
    r = 0 is harmless because the Matérn 5/2 kernel is flat there (k ≈ s²(1 − 5r²/6))."""
    d2 = np.matmul(a, np.swapaxes(b, 1, 2))
    d2 *= -2.0
    d2 += np.einsum("bmk,bmk->bm", a, a)[:, :, None]
    d2 += bb[:, None, :]
    np.maximum(d2, 0.0, out=d2)
    return d2


def _kernel_stack(theta: np.ndarray, F: np.ndarray):
    _, n, p = F.shape
    values = np.exp(theta)
    # Centred inputs: distances are unchanged and the norms stay small.
    X = F - F.mean(axis=1, keepdims=True)
    a = X * (_SQRT5 / values[:, :p])[:, None, :]
    z2 = _sq_dist(a, a, np.einsum("bnk,bnk->bn", a, a))
    z2[:, np.arange(n), np.arange(n)] = 0.0
    k, z, e = unit_matern(z2)
    K = k * values[:, p, None, None]
    K[:, np.arange(n), np.arange(n)] += values[:, p + 1, None]
    return values, X, k, z, e, K


def _inverse_factor(L: np.ndarray) -> np.ndarray:
    """``L⁻¹`` of each lower factor by LAPACK ``trtri``, slice by slice: three times faster
    than ``numpy.linalg.inv`` (an LU) at n = 100. A C-ordered ``L`` is a Fortran-ordered
    ``Lᵀ``, so ``trtri`` on the upper triangle gives ``L⁻ᵀ`` without a copy."""
    out = np.empty_like(L)
    for b in range(L.shape[0]):
        inv, _ = dtrtri(L[b].T, lower=0)
        out[b] = inv.T
    return out


def _factor(K: np.ndarray, y: np.ndarray):
    """Factor, inverse factor, α, log marginal likelihood and success of a stack."""
    n = K.shape[1]
    L, jitter, ok = cholesky(K)
    Linv = _inverse_factor(L)
    alpha = np.matmul(np.swapaxes(Linv, 1, 2), np.matmul(Linv, y[:, :, None]))[:, :, 0]
    logdet = np.log(np.diagonal(L, axis1=1, axis2=2)).sum(axis=1)
    value = -0.5 * np.einsum("ij,ij->i", y, alpha) - logdet - n * _HALF_LOG_2PI
    ok = ok & np.isfinite(value) & np.isfinite(alpha).all(axis=1)
    return L, Linv, alpha, value, jitter, ok


def lml_and_grad(theta: np.ndarray, F: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Log marginal likelihood ``(B,)`` and gradient ``(B, p + 2)`` at ``theta`` ``(B, p + 2)``
    for inputs ``F`` ``(B, n, p)`` and standardised ``y`` ``(B, n)``.

    ``−½ yᵀα − Σ log L_ii − (n/2) log 2π`` and ``½ tr((ααᵀ − K⁻¹) ∂K/∂θ)`` (Rasmussen &
    Williams 2006, Algorithm 2.1 and eq. 5.9), as :func:`workbench.gp.log_marginal_likelihood`;
    where ``K`` cannot be factorised, the value is ``−inf``. The length-scale terms
    ``Σ_ij G_ij (x_ik − x_jk)²`` with ``G`` symmetric are ``2 Σ_i x_ik² (G1)_i − 2 Σ_i x_ik
    (GX)_ik``: matrix products, without the ``(p, n, n)`` differences.
    """
    B, n, p = F.shape
    values, X, k, z, e, K = _kernel_stack(theta, F)
    inv_l2 = 1.0 / np.square(values[:, :p])
    signal, noise = values[:, p], values[:, p + 1]
    _, Linv, alpha, value, _, ok = _factor(K, y)
    Kinv = np.matmul(np.swapaxes(Linv, 1, 2), Linv)
    W = alpha[:, :, None] * alpha[:, None, :]
    W -= Kinv
    G = (z + 1.0) * e * W
    GX = np.matmul(G, X)
    g1 = G.sum(axis=2)
    DG = 2.0 * (np.matmul(g1[:, None, :], X * X)[:, 0, :] - (X * GX).sum(axis=1))
    grad = np.empty((B, p + 2))
    grad[:, :p] = (0.5 * 5.0 / 3.0) * signal[:, None] * inv_l2 * DG
    # A matrix product, not einsum: einsum's buffered reduction over more than 8,192
    # elements splits where the stack's size says, which would make a campaign's numbers
    # depend on its batch.
    Wk = np.matmul(W.reshape(B, 1, n * n), k.reshape(B, n * n, 1))[:, 0, 0]
    grad[:, p] = 0.5 * signal * Wk
    grad[:, p + 1] = 0.5 * noise * np.trace(W, axis1=1, axis2=2)
    ok &= np.isfinite(grad).all(axis=1)
    value = np.where(ok, value, -np.inf)
    grad[~ok] = 0.0
    return value, grad


@dataclass(frozen=True, eq=False)
class Stack:
    """R conditioned GPs of one data size: what prediction needs, in standardised units.

    ``b = X·√5/l`` (scaled inputs) and ``bb = ‖b‖²``; ``Linv`` the inverse Cholesky factor of
    ``K + (noise + jitter)·I``; ``alpha = (K + (noise + jitter)·I)⁻¹ y_std``.
    """

    theta: np.ndarray  # (R, p + 2) log hyper-parameters
    b: np.ndarray  # (R, n, p)
    bb: np.ndarray  # (R, n)
    Linv: np.ndarray  # (R, n, n)
    alpha: np.ndarray  # (R, n)
    y_mean: np.ndarray  # (R,)
    y_scale: np.ndarray  # (R,)
    log_marginal_likelihood: np.ndarray  # (R,)

    @property
    def p(self) -> int:
        return self.b.shape[2]

    @property
    def signal(self) -> np.ndarray:
        return np.exp(self.theta[:, self.p])

    @property
    def lengthscales(self) -> np.ndarray:
        return np.exp(self.theta[:, : self.p])

    def take(self, rows: np.ndarray) -> Stack:
        """The GPs of ``rows`` (an index array), as a stack."""
        return Stack(*(getattr(self, f)[rows] for f in self.__dataclass_fields__))

    def predict(
        self, F: np.ndarray, gradient: bool = False
    ) -> tuple[np.ndarray, np.ndarray] | tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Mean and latent sd ``(R, m)`` at inputs ``F`` ``(R, m, p)``, in output units; with
        ``gradient``, also their derivatives in ``F`` ``(R, m, p)``.

        ``∂k/∂x_k = −s² (5/3)(1 + z) e^(−z) (x_k − x'_k)/l_k²`` for the Matérn 5/2 kernel, so
        ``∂μ = Σ_j α_j ∂k_j`` and ``∂σ² = −2 s⁴ Σ_j (K⁻¹k*)_j ∂k_j``.
        """
        ls = self.lengthscales
        s = self.signal
        a = F * (_SQRT5 / ls)[:, None, :]
        k, z, e = unit_matern(_sq_dist(a, self.b, self.bb))
        mean = np.matmul(k, self.alpha[:, :, None])[:, :, 0]
        V = np.matmul(k, np.swapaxes(self.Linv, 1, 2))
        quad = np.einsum("rmn,rmn->rm", V, V)
        var = s[:, None] - (s * s)[:, None] * quad
        floor = _VARIANCE_FLOOR * s[:, None]
        floored = var <= floor
        var = np.maximum(var, floor)
        sd = np.sqrt(var)
        scale = self.y_scale[:, None]
        mean_out = self.y_mean[:, None] + scale * s[:, None] * mean
        sd_out = scale * sd
        if not gradient:
            return mean_out, sd_out
        # Σ_j w_j ∂k_j/∂x_k = −(√5/3)/l_k · (a_k Σ_j G_j − Σ_j G_j b_jk), G = (1 + z) e^(−z) w.
        ze = (1.0 + z) * e
        c = -(_SQRT5 / 3.0) / ls[:, None, :]

        def weighted(w):
            G = ze * w
            return c * (a * G.sum(axis=2)[:, :, None] - np.matmul(G, self.b))

        dmean = (scale * s[:, None])[:, :, None] * weighted(self.alpha[:, None, :])
        w = np.matmul(V, self.Linv)  # K⁻¹k* (unit signal), row by row
        dvar = (-2.0 * (s * s))[:, None, None] * weighted(w)
        dvar[floored] = 0.0
        dsd = (scale / (2.0 * sd))[:, :, None] * dvar
        return mean_out, sd_out, dmean, dsd


def build(F: np.ndarray, y: np.ndarray, theta: np.ndarray) -> tuple[Stack, np.ndarray]:
    """Condition GPs with log hyper-parameters ``theta`` on inputs ``F`` ``(R, n, p)`` and raw
    outputs ``y`` ``(R, n)``; returns the stack and which slices could be factorised."""
    mean, scale, ys = standardise(y)
    K = _kernel_stack(theta, F)[-1]
    _, Linv, alpha, value, _, ok = _factor(K, ys)
    b = F * (_SQRT5 / np.exp(theta[:, : F.shape[2]]))[:, None, :]
    stack = Stack(theta, b, np.einsum("rnk,rnk->rn", b, b), Linv, alpha, mean, scale, value)
    return stack, ok


def fit(
    F: np.ndarray,
    y: np.ndarray,
    previous: list[np.ndarray | None],
    rngs: list[np.random.Generator],
    *,
    restarts: int = 1,
    maxiter: int = 16,
    bounds: gp.Bounds = gp.DEFAULT_BOUNDS,
) -> Stack:
    """Fit every campaign's hyper-parameters by maximum marginal likelihood and condition.

    The starts of :func:`workbench.gp.fit`, per campaign: a warm start from ``previous[r]``
    (clipped into the bounds) for ``maxiter // 2`` iterations, or else the default plus
    ``restarts`` uniform draws in the log box from ``rngs[r]`` for ``maxiter`` iterations, at
    most ``2·iterations`` evaluations. The best optimum wins; if its factorisation fails the
    default is used (and if that fails too, ``numpy.linalg.LinAlgError``). A start whose
    evaluation fails is skipped, as in :func:`workbench.gp.fit`.
    """
    R, n, p = F.shape
    box = bounds.log_box(p)
    default = gp._default_theta(p, bounds)
    starts, owner, iters = [], [], []
    for r in range(R):
        if previous[r] is not None:
            starts.append(np.clip(previous[r], box[:, 0], box[:, 1])[None, :])
            iters.append(np.full(1, max(1, maxiter // 2)))
        else:
            draws = rngs[r].uniform(box[:, 0], box[:, 1], size=(restarts, p + 2))
            starts.append(np.vstack([default, draws]))
            iters.append(np.full(1 + restarts, maxiter))
        owner.append(np.full(len(starts[-1]), r))
    x0, owner, iters = np.vstack(starts), np.concatenate(owner), np.concatenate(iters)
    ys = standardise(y)[2]
    if n < 2:
        first = np.searchsorted(owner, np.arange(R))
        theta = x0[first]
    else:

        def negative(T, idx):
            value, grad = lml_and_grad(T, F[owner[idx]], ys[owner[idx]])
            return -value, -grad

        result = minimise_driven(
            negative, x0, box[:, 0], box[:, 1], maxiter=iters, maxfun=2 * iters
        )
        theta = np.empty((R, p + 2))
        for r in range(R):
            mine = np.flatnonzero(owner == r)
            best = mine[np.argmin(result.fun[mine])]
            theta[r] = result.x[best] if np.isfinite(result.fun[best]) else default
    stack, ok = build(F, y, theta)
    if not ok.all():
        theta = np.where(ok[:, None], theta, default[None, :])
        stack, ok = build(F, y, theta)
        if not ok.all():
            raise np.linalg.LinAlgError(
                "covariance matrix is not positive definite even with jitter"
            )
    return stack
