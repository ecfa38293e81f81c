"""Placement: a landscape on the unit cube, and the searches for what a campaign needs there.

A :class:`Placement` maps a :class:`~workbench.world.landscapes.Landscape` onto the unit cube
``[0, 1]^d``: cube point ``u`` is native point ``x = lower + u * width``. Placing a landscape
``at`` a cube point translates the native domain (same widths) so that the first published
minimiser sits there; the placement then recomputes what the campaign needs: the minimum over
the placed cube (some functions go lower outside their native domain), a reference value for
normalised regret, the worst point and a decoy local optimum.

:mod:`.landscapes` imports this module (``Landscape.placed``) and re-exports :class:`Placement`;
this module imports the landscape for type checking only, so the two do not import in a circle.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from numbers import Real
from typing import TYPE_CHECKING, Any

import numpy as np

if TYPE_CHECKING:
    from .landscapes import Landscape

__all__ = ["Placement"]


def _frozen(values: Any) -> np.ndarray:
    """A read-only float array, so module constants and cached results cannot be altered."""
    array = np.array(values, dtype=float)
    array.flags.writeable = False
    return array


def _points(X: Any, dim: int, key: str) -> np.ndarray:
    """X as an (n, dim) float array; a single (dim,) point becomes (1, dim)."""
    X = np.asarray(X, dtype=float)
    if X.ndim == 1 and X.shape[0] == dim:
        return X[None, :]
    if X.ndim != 2 or X.shape[1] != dim:
        raise ValueError(f"{key} must be an array of shape (n, {dim}) or ({dim},); got {X.shape}")
    return X


# ---------------------------------------------------------------------------------------------
# Placement on the unit cube
# ---------------------------------------------------------------------------------------------

# Fixed point sets (scrambled Sobol, fixed seeds), so every placement's derived values are
# reproducible and the same for every replicate and cell.
_REFERENCE_POINTS = (10, 0)  # 2^10 = 1024 points, seed 0: minimum starts and reference median
_WORST_POINTS = (12, 1)  # 4096 points, seed 1: the worst-point search
_DECOY_POINTS = (6, 2)  # 64 points, seed 2: the decoy starts
_MINIMUM_STARTS = 8
_WORST_STARTS = 4
_LOWER_BY = 1e-9  # a found value replaces the published minimum if lower by this, relatively
_TIED_WITHIN = 1e-6  # a found value this close (relatively) to the minimum is a global one too
_SAME_POINT = 1e-3  # found minimisers closer than this (cube units) are one
_DECOY_MERGE = 0.05
_DECOY_APART = 0.1
_DECOY_ABOVE = 1e-3  # a decoy lies above the minimum by at least this fraction of the gap
_STEP = 1e-7  # central-difference step in cube units


def _sobol(dim: int, log2_n: int, seed: int) -> np.ndarray:
    from scipy.stats import qmc

    return qmc.Sobol(dim, scramble=True, seed=seed).random_base2(log2_n)


def _scale(value: float) -> float:
    return max(1.0, abs(value))


@dataclass(frozen=True)
class Placement:
    """A landscape mapped onto the unit cube: cube point u is native x = lower + u * width.

    Construction is cheap; the derived values (minimum, reference, worst point, decoy) are
    computed on first use and cached. A placement pickles, with its small cached results.

    Parameters
    ----------
    landscape : Landscape
    at : tuple of float, optional
        Cube point of the first published minimiser; None keeps the native domain.
    """

    landscape: Landscape
    at: tuple[float, ...] | None = None

    def __post_init__(self):
        if self.at is not None:
            object.__setattr__(self, "at", _check_at(self.at, self.landscape.dim))

    def __getstate__(self) -> dict[str, Any]:
        # Placements travel to worker processes: keep the small derived results (minimum,
        # reference, worst, decoy), drop the reference set, cheap to recompute.
        state = dict(self.__dict__)
        state.pop("_reference_set", None)
        return state

    # -- the map ------------------------------------------------------------------------------

    @property
    def dim(self) -> int:
        return self.landscape.dim

    @cached_property
    def width(self) -> np.ndarray:
        """Native widths, upper - lower (the same as the landscape's)."""
        return _frozen(np.subtract(self.landscape.upper, self.landscape.lower))

    @cached_property
    def lower(self) -> np.ndarray:
        """Native lower corner of the placed cube: x*_1 - at * width, or the native one."""
        if self.at is None:
            return _frozen(self.landscape.lower)
        first = np.asarray(self.landscape.minimisers[0])
        return _frozen(first - np.asarray(self.at) * self.width)

    @property
    def upper(self) -> np.ndarray:
        return self.lower + self.width

    def to_native(self, U: Any) -> np.ndarray:
        """Native points x = lower + u * width for cube points U of shape (n, d) or (d,)."""
        return self.lower + np.asarray(U, dtype=float) * self.width

    def to_cube(self, X: Any) -> np.ndarray:
        """Cube points u = (x - lower) / width for native points X."""
        return (np.asarray(X, dtype=float) - self.lower) / self.width

    def value(self, U: Any) -> np.ndarray:
        """Noise-free values at cube points U of shape (n, d), shape (n,).

        A single point of shape (d,) is accepted and gives shape (1,). Points outside the cube
        are evaluated on the landscape's extension; campaigns keep to the cube.
        """
        return self.landscape.function(self.lower + _points(U, self.dim, "U") * self.width)

    def _one(self, u: np.ndarray) -> float:
        return float(self.landscape.function((self.lower + u * self.width)[None, :])[0])

    def _value_and_gradient(self, u: np.ndarray, sign: float) -> tuple[float, np.ndarray]:
        """sign * f at u with its central-difference gradient, in one vectorised call."""
        steps = _STEP * np.eye(self.dim)
        U = np.vstack([u[None, :], u + steps, u - steps])
        f = sign * self.landscape.function(self.lower + U * self.width)
        return float(f[0]), (f[1 : self.dim + 1] - f[self.dim + 1 :]) / (2 * _STEP)

    def _descend(self, starts: np.ndarray, sign: float = 1.0) -> list[tuple[np.ndarray, float]]:
        """L-BFGS-B on sign * f within [0, 1]^d from each start; the end points and their f."""
        # Multi-threaded BLAS costs far more than it saves on these tiny problems (about ten
        # times slower on a busy machine), so the searches run single-threaded.
        from threadpoolctl import threadpool_limits

        with threadpool_limits(limits=1, user_api="blas"):
            return [self._descend_one(start, sign) for start in starts]

    def _descend_one(self, start: np.ndarray, sign: float) -> tuple[np.ndarray, float]:
        from scipy.optimize import minimize

        result = minimize(
            self._value_and_gradient,
            np.clip(start, 0.0, 1.0),
            args=(sign,),
            jac=True,
            method="L-BFGS-B",
            bounds=[(0.0, 1.0)] * self.dim,
        )
        u = np.clip(result.x, 0.0, 1.0)
        return u, self._one(u)

    # -- the optimum --------------------------------------------------------------------------

    @cached_property
    def _reference_set(self) -> tuple[np.ndarray, np.ndarray]:
        U = _sobol(self.dim, *_REFERENCE_POINTS)
        return U, self.value(U)

    @cached_property
    def _published_inside(self) -> np.ndarray:
        """Published minimisers in cube coordinates, those inside the cube (the first always)."""
        U = self.to_cube(np.asarray(self.landscape.minimisers))
        inside = np.all((U >= -1e-12) & (U <= 1 + 1e-12), axis=1)
        return np.clip(U[inside], 0.0, 1.0)

    @cached_property
    def _optimum(self) -> tuple[float, np.ndarray]:
        # Start from the published minimum at the placed minimiser(s), then look for lower
        # values from the best points of the reference set: outside its native domain a
        # landscape may go lower (Michalewicz does).
        published = self.landscape.minimum
        U, f = self._reference_set
        found = sorted(self._descend(U[np.argsort(f)[:_MINIMUM_STARTS]]), key=lambda item: item[1])
        lowest = found[0][1]
        best = lowest if lowest < published - _LOWER_BY * _scale(published) else published
        tie = best + _TIED_WITHIN * _scale(best)
        kept = list(self._published_inside) if published <= tie else []
        for u, value in found:
            # A found point tied with the minimum is a global minimiser too, unless already kept.
            if value <= tie and all(np.linalg.norm(u - k) >= _SAME_POINT for k in kept):
                kept.append(u)
        return best, _frozen(np.array(kept).reshape(-1, self.dim))

    @property
    def minimum(self) -> float:
        """Global minimum over the placed cube (published, or lower if a local search found it)."""
        return self._optimum[0]

    @property
    def minimisers(self) -> np.ndarray:
        """Cube coordinates (k, d) of the global minimisers inside the cube."""
        return self._optimum[1]

    @cached_property
    def reference(self) -> float:
        """Median of the finite values over the fixed scrambled Sobol set ``_REFERENCE_POINTS``."""
        # nanmedian: a user function may fail at some points of the set.
        return float(np.nanmedian(self._reference_set[1]))

    @property
    def gap(self) -> float:
        """reference - minimum, the yardstick of normalised regret."""
        return self.reference - self.minimum

    def normalized_regret(self, best: Any) -> np.ndarray | float:
        """(best - minimum) / gap, elementwise; 0 at the optimum, 1 at the reference value."""
        regret = (np.asarray(best, dtype=float) - self.minimum) / self.gap
        return float(regret) if regret.ndim == 0 else regret

    def nearest_minimiser_distance(self, u: Any) -> float | np.ndarray:
        """Euclidean distance, in cube units, from u to the nearest global minimiser.

        A (d,) point gives a float; points of shape (n, d) give shape (n,).
        """
        u = np.asarray(u, dtype=float)
        U = _points(u, self.dim, "u")
        distances = np.linalg.norm(U[:, None, :] - self.minimisers[None, :, :], axis=2).min(axis=1)
        return float(distances[0]) if u.ndim == 1 else distances

    # -- bad regions, for misplaced beliefs ---------------------------------------------------

    @cached_property
    def _worst(self) -> tuple[np.ndarray, float]:
        U = _sobol(self.dim, *_WORST_POINTS)
        f = np.nan_to_num(self.value(U), nan=-np.inf)  # a failing point is not the worst
        order = np.argsort(f)[::-1][:_WORST_STARTS]
        best_u, best_f = U[order[0]], float(f[order[0]])
        for u, value in self._descend(U[order], sign=-1.0):
            if value > best_f:
                best_u, best_f = u, value
        return _frozen(best_u), best_f

    def worst(self) -> tuple[np.ndarray, float]:
        """The worst point of the cube and its value, by a stated search.

        The maximum over the fixed scrambled Sobol set ``_WORST_POINTS``, then L-BFGS-B
        maximisation within the cube from the ``_WORST_STARTS`` highest of those points; the
        highest found.
        """
        u, value = self._worst
        return u.copy(), value

    @cached_property
    def _decoy(self) -> tuple[np.ndarray, float] | None:
        ends = sorted(self._descend(_sobol(self.dim, *_DECOY_POINTS)), key=lambda item: item[1])
        merged: list[tuple[np.ndarray, float]] = []
        for u, value in ends:
            if all(np.linalg.norm(u - k) >= _DECOY_MERGE for k, _ in merged):
                merged.append((u, value))
        floor = self.minimum + _DECOY_ABOVE * self.gap
        for u, value in merged:
            if value > floor and self.nearest_minimiser_distance(u) > _DECOY_APART:
                return _frozen(u), value
        return None

    @property
    def has_decoy(self) -> bool:
        """Whether :meth:`decoy` finds a local optimum apart from the global ones."""
        return self._decoy is not None

    def decoy(self) -> tuple[np.ndarray, float]:
        """A decoy: the lowest local minimum apart from the global ones, and its value.

        L-BFGS-B minimisations within the cube from the fixed scrambled Sobol starts
        ``_DECOY_POINTS``; end points closer than ``_DECOY_MERGE`` are merged (the lower kept);
        those within ``_DECOY_APART`` of a global minimiser (Euclidean, cube units), or within
        ``_DECOY_ABOVE`` · gap of the minimum, are dropped; the lowest remaining is the decoy.

        Raises
        ------
        ValueError
            If the landscape has no such local optimum (then misplace on the worst point);
            :attr:`has_decoy` says so beforehand.
        """
        if self._decoy is None:
            raise ValueError(
                f"{self.landscape.name} has no local optimum apart from its global ones "
                "(misplace on the worst point instead)"
            )
        u, value = self._decoy
        return u.copy(), value


def _check_at(at: Any, dim: int) -> tuple[float, ...]:
    values = np.asarray(at, dtype=object).ravel().tolist() if not isinstance(at, str) else None
    if values is None or len(values) != dim:
        raise ValueError(f"at must be {dim} number(s) in [0, 1]; got {at!r}")
    for v in values:
        if isinstance(v, bool) or not isinstance(v, Real) or not 0.0 <= v <= 1.0:
            raise ValueError(f"at must be {dim} number(s) in [0, 1]; got {v!r} in {at!r}")
    return tuple(float(v) for v in values)
