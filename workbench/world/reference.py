"""The belief contract, and the one fixed sample of a belief that every reading of its
highest-density regions uses.

:class:`Belief` states what the rest of the package may ask of a joint belief on the unit cube
(the objects of :mod:`workbench.world.beliefs` that span every coordinate: ``Product`` and
``Mixture``). :class:`BeliefReference` is a belief with a fixed sample of it, built once: the
audit, the monitor and the distortions' severity read levels, distances and masses from it, so
the same belief gives the same number wherever it is asked for.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Protocol, runtime_checkable

import numpy as np

__all__ = [
    "REFERENCE_DRAWS",
    "REFERENCE_SEED",
    "Belief",
    "BeliefReference",
    "InverseCdfBelief",
    "Marginal",
    "volume_fraction",
]

# The fixed sample every belief is read from: REFERENCE_DRAWS draws of
# np.random.default_rng(REFERENCE_SEED). A share read from it has a Monte-Carlo standard error
# of at most 0.5 / sqrt(4096) = 0.0078.
REFERENCE_DRAWS = 4096
REFERENCE_SEED = 0


class Marginal(Protocol):
    """A belief on one cube coordinate u in [0, 1]: ``logpdf``, ``cdf`` and ``ppf`` vectorised
    over u (or q), ``mode()`` a float, ``truncated_mass`` as for :class:`Belief`."""

    @property
    def truncated_mass(self) -> float: ...

    def logpdf(self, u) -> np.ndarray: ...

    def cdf(self, u) -> np.ndarray: ...

    def ppf(self, q) -> np.ndarray: ...

    def mode(self) -> float: ...


@runtime_checkable
class Belief(Protocol):
    """A joint belief: a probability distribution over the unit cube [0, 1]^d saying where the
    optimum is believed to lie. Frozen and vectorised. The contract:

    - ``dim``: d.
    - ``logpdf(U)``: log density at cube points ``U`` of shape (n, d), shape (n,); normalised
      over the cube, −inf outside it; each value depends on its own row only (campaigns of a
      batch share calls).
    - ``sample(n, rng)``: n draws, shape (n, d), every random number taken from ``rng``.
    - ``mode()``: the most probable point, shape (d,).
    - ``truncated_mass``: the mass an untruncated version would put outside the cube.
    - ``centred(c)``, ``scaled(f)``: a belief of the same shape with its mode moved to ``c``,
      or its spread multiplied by ``f`` (the distortions are built from these two).
    - ``marginal(j)``: the belief on coordinate j alone (:class:`Marginal`).
    - ``by_inverse_cdf``: True when ``sample(n, rng)`` is ``from_uniforms(uniforms(n, rng))``;
      the belief then also offers that pair (:class:`InverseCdfBelief`), which the engine uses
      to transform the draws of many campaigns in one call. False otherwise.
    """

    @property
    def dim(self) -> int: ...

    @property
    def truncated_mass(self) -> float: ...

    @property
    def by_inverse_cdf(self) -> bool: ...

    def logpdf(self, U) -> np.ndarray: ...

    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray: ...

    def mode(self) -> np.ndarray: ...

    def centred(self, c) -> Belief: ...

    def scaled(self, f: float) -> Belief: ...

    def marginal(self, j: int) -> Marginal: ...


class InverseCdfBelief(Belief, Protocol):
    """A belief whose ``by_inverse_cdf`` is True: sampling splits in two steps.

    - ``uniforms(n, rng)``: the uniform draws behind ``sample``, shape (d, n), in the order
      ``sample`` takes them from ``rng``;
    - ``from_uniforms(Q)``: points (..., n, d) from draws (..., d, n); each value depends on its
      own draw only.
    """

    def uniforms(self, n: int, rng: np.random.Generator) -> np.ndarray: ...

    def from_uniforms(self, Q: np.ndarray) -> np.ndarray: ...


@dataclass(frozen=True, eq=False)
class BeliefReference:
    """A belief with a fixed sample of it, from which levels, distances and masses are read.

    ``sample`` holds the draws (draws, d); ``sorted_logpdf`` the belief's log density at them,
    ascending; ``mode`` its mode and ``sd`` the per-coordinate standard deviation of the draws.
    Build it with :meth:`of`.
    """

    belief: Belief
    sample: np.ndarray
    sorted_logpdf: np.ndarray
    mode: np.ndarray
    sd: np.ndarray

    @classmethod
    def of(
        cls,
        belief: Belief | BeliefReference,
        rng: np.random.Generator | None = None,
        draws: int = REFERENCE_DRAWS,
    ) -> BeliefReference:
        """The reference of ``belief``: ``draws`` draws from ``rng`` (by default a fresh
        ``np.random.default_rng(REFERENCE_SEED)``, so the same belief always gives the same
        reference). A reference is returned as it is."""
        if isinstance(belief, BeliefReference):
            return belief
        rng = np.random.default_rng(REFERENCE_SEED) if rng is None else rng
        sample = np.asarray(belief.sample(draws, rng), dtype=float).reshape(draws, -1)
        lp = np.sort(np.asarray(belief.logpdf(sample), dtype=float).reshape(-1))
        mode = np.atleast_1d(np.asarray(belief.mode(), dtype=float))
        # A belief with no spread along a coordinate would divide by zero.
        sd = np.maximum(sample.std(axis=0), 1e-9)
        return cls(belief, sample, lp, mode, sd)

    @property
    def dim(self) -> int:
        return int(self.mode.size)

    @property
    def draws(self) -> int:
        return int(self.sorted_logpdf.size)

    def level(self, U) -> np.ndarray:
        """The highest-density level of each cube point: the share of the belief's mass with
        density above the point's (0 at the mode, near 1 far out; a point drawn from the belief
        has a level uniform on [0, 1]).

        level(u) = #{draws z : log p(z) > log p(u)} / draws; result has the shape of ``U``
        without its last axis.
        """
        U = np.asarray(U, dtype=float)
        lp = np.asarray(self.belief.logpdf(U.reshape(-1, self.dim)), dtype=float).reshape(-1)
        above = self.draws - np.searchsorted(self.sorted_logpdf, lp, side="right")
        return (above / self.draws).reshape(U.shape[:-1])

    def distance(self, U) -> np.ndarray:
        """Distance of each point from the mode in the sample's standard deviations:
        sqrt(mean_j ((u_j − mode_j) / sd_j)²), over the last axis."""
        z = (np.asarray(U, dtype=float) - self.mode) / self.sd
        return np.sqrt(np.mean(z**2, axis=-1))

    def mass_within(self, points, radius: float) -> float:
        """The belief's mass within ``radius`` (Euclidean, cube units) of the nearest of
        ``points``: the share of draws that close."""
        P = np.atleast_2d(np.asarray(points, dtype=float))
        gaps = np.linalg.norm(self.sample[:, None, :] - P[None, :, :], axis=2).min(axis=1)
        return float(np.mean(gaps <= radius))

    def density_threshold(self, mass: float) -> float:
        """τ such that the region {log p ≥ τ} holds ``mass`` of the belief: the (1 − mass)
        quantile of the log density at the draws."""
        return float(np.quantile(self.sorted_logpdf, 1.0 - mass))


def volume_fraction(belief: Belief, mass: float = 0.9, draws: int = 20000, seed: int = 0) -> float:
    """Fraction of the cube's volume in the highest-density region holding ``mass``.

    Monte Carlo on one stream ``default_rng(seed)``: a reference of ``draws`` belief draws gives
    the threshold τ (:meth:`BeliefReference.density_threshold`); the fraction is the share of
    ``draws`` uniform points, taken next from the same stream, with log density ≥ τ.
    """
    rng = np.random.default_rng(seed)
    tau = BeliefReference.of(belief, rng, draws).density_threshold(mass)
    return float(np.mean(belief.logpdf(rng.random((draws, belief.dim))) >= tau))
