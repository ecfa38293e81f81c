"""Acquisition formulas (minimisation), as pure functions of the model's mean and sd.

- expected improvement (Jones, Schonlau & Welch 1998):
  EI = (f_min − μ) Φ(z) + σ φ(z),  z = (f_min − μ) / σ;
- its logarithm, computed without cancellation for very negative z;
- the model's log odds of a point being good, log(M_g / M_b), with M_g = Φ((f_γ − μ)/σ)
  the probability of falling below the γ-quantile f_γ (Kushner 1964's probability of improvement
  below a threshold).
"""

from __future__ import annotations

import numpy as np

from ..lazy import LazyModule

special = LazyModule("scipy.special")

__all__ = [
    "expected_improvement",
    "log_expected_improvement",
    "log_expected_improvement_grad",
    "log_odds_good",
    "log_odds_good_grad",
]

_LOG_SQRT_2PI = 0.5 * np.log(2 * np.pi)
_LOG_SQRT_PI_2 = 0.5 * np.log(np.pi / 2)
_DIRECT_BELOW = -10.0


def expected_improvement(mean, sd, best: float) -> np.ndarray:
    """Closed-form expected improvement below ``best``."""
    mean, sd = np.asarray(mean, dtype=float), np.asarray(sd, dtype=float)
    z = (best - mean) / sd
    return (best - mean) * special.ndtr(z) + sd * np.exp(-0.5 * z**2 - _LOG_SQRT_2PI)


def _log_h(z: np.ndarray) -> np.ndarray:
    """log(z Φ(z) + φ(z)), stable for every z.

    The direct form loses only about log10(1 + z²) digits to cancellation (h(z) ≈ φ(z)/z²),
    so it is accurate to ~1e-13 for z > −10 and used there. Below, write
    Φ(z) = ½ erfcx(−z/√2) e^(−z²/2), so z Φ(z) + φ(z) = φ(z) (1 − |z| √(π/2) erfcx(|z|/√2)),
    and take log1p of the negative term;
    beyond |z| = 1e6 use the asymptote φ(z)/z². Both forms are computed on the whole (small)
    array and selected, which costs fewer array operations than masking.
    """
    z = np.asarray(z, dtype=float)
    with np.errstate(all="ignore"):
        direct = np.log(z * special.ndtr(z) + np.exp(-0.5 * z**2 - _LOG_SQRT_2PI))
        if z.size == 0 or z.min() > _DIRECT_BELOW:
            return direct
        a = np.minimum(z, _DIRECT_BELOW)
        inner = np.log(special.erfcx(-a / np.sqrt(2)) * -a) + _LOG_SQRT_PI_2
        tail = np.where(inner > -np.log(2), np.log(-np.expm1(inner)), np.log1p(-np.exp(inner)))
        tail = np.where(a < -1e6, -2.0 * np.log(-a), tail)
        return np.where(z > _DIRECT_BELOW, direct, -0.5 * a**2 - _LOG_SQRT_2PI + tail)


def log_expected_improvement(mean, sd, best: float) -> np.ndarray:
    """log EI = log σ + log h(z), h(z) = z Φ(z) + φ(z); finite wherever σ > 0."""
    mean, sd = np.asarray(mean, dtype=float), np.asarray(sd, dtype=float)
    return np.log(sd) + _log_h((best - mean) / sd)


def log_odds_good(mean, sd, threshold: float) -> np.ndarray:
    """log(M_g / M_b) with M_g = Φ(z), M_b = 1 − M_g = Φ(−z), z = (f_γ − μ)/σ, via log Φ."""
    z = (threshold - np.asarray(mean, dtype=float)) / np.asarray(sd, dtype=float)
    return special.log_ndtr(z) - special.log_ndtr(-z)


def log_expected_improvement_grad(mean, sd, best):
    """log EI and its derivatives in μ and σ: with z = (f_min − μ)/σ and h' = Φ,
    ∂/∂μ = −(Φ(z)/h(z))/σ and ∂/∂σ = (φ(z)/h(z))/σ (since h − zΦ = φ); the ratios are taken
    in log space, so they stay finite far below the incumbent."""
    mean, sd = np.asarray(mean, dtype=float), np.asarray(sd, dtype=float)
    z = (best - mean) / sd
    log_h = _log_h(z)
    d_mean = -np.exp(special.log_ndtr(z) - log_h) / sd
    d_sd = np.exp(-0.5 * z**2 - _LOG_SQRT_2PI - log_h) / sd
    return np.log(sd) + log_h, d_mean, d_sd


def log_odds_good_grad(mean, sd, threshold):
    """log(M_g/M_b) and its derivatives in μ and σ: d/dz = φ(z)/Φ(z) + φ(z)/Φ(−z), with
    ∂z/∂μ = −1/σ and ∂z/∂σ = −z/σ."""
    mean, sd = np.asarray(mean, dtype=float), np.asarray(sd, dtype=float)
    z = (threshold - mean) / sd
    lo, hi = special.log_ndtr(z), special.log_ndtr(-z)
    log_phi = -0.5 * z**2 - _LOG_SQRT_2PI
    dz = np.exp(log_phi - lo) + np.exp(log_phi - hi)
    return lo - hi, -dz / sd, -dz * z / sd
