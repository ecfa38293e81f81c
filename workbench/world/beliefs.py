"""Beliefs: probability distributions over the unit cube saying where the optimum is believed to be.

A belief is a frozen, vectorised object. One-dimensional beliefs (*marginals*) live on one cube
coordinate ``u`` in ``[0, 1]``; joint beliefs live on ``[0, 1]^d``. Both offer

- ``logpdf(u)``: log density on the cube (normalised over the bounded domain);
- ``sample(n, rng)``: ``n`` draws;
- ``mode()``: the most probable point;
- ``truncated_mass``: the mass an untruncated version would have put outside the cube;
- ``centred(c)`` and ``scaled(f)``: the same shape moved so that its mode is ``c``, or with its
  spread multiplied by ``f``; the distortions are built from these two.

Marginals also offer ``cdf`` and ``ppf`` for intervals. The joint beliefs (``Product``,
``Mixture``) fulfil the contract :class:`workbench.world.reference.Belief`. Densities in user
units follow from the encoding in :mod:`workbench.world.space`: a Gaussian on a log-scale
parameter's coordinate is a log-normal in the user's units; a discrete parameter's belief is
piecewise constant over its bins.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, replace
from functools import cached_property

import numpy as np

from ..lazy import LazyModule
from .reference import volume_fraction
from .space import Categorical, Continuous, Integer, Parameter, Space

optimize = LazyModule("scipy.optimize")
special = LazyModule("scipy.special")
stats = LazyModule("scipy.stats")

__all__ = [
    "Beta",
    "Discrete",
    "Mixture",
    "Product",
    "TruncatedGaussian",
    "Uniform",
    "from_points",
    "gaussian_at",
    "gaussian_for",
    "level_labels",
    "probabilities_for",
]

# z such that the central 90 % of a normal lies within ±z standard deviations: the value of
# float(scipy.stats.norm.ppf(0.95)), written out so that importing this module does not load
# scipy.stats (tests/test_startup.py checks the two agree to the last bit).
_Z90 = 1.6448536269514722


def _as_unit(u) -> np.ndarray:
    return np.asarray(u, dtype=float)


def _outside(u: np.ndarray) -> np.ndarray:
    return (u < 0.0) | (u > 1.0)


# --------------------------------------------------------------------------- marginals


@dataclass(frozen=True)
class TruncatedGaussian:
    """Normal with mean ``centre`` and sd ``spread`` (cube units) truncated to ``[0, 1]``.

    density(u) = φ((u − c)/s) / (s · Z),  Z = Φ((1 − c)/s) − Φ(−c/s).
    """

    centre: float
    spread: float

    def __post_init__(self):
        if not 0.0 <= self.centre <= 1.0:
            raise ValueError(f"centre must be in [0, 1]; got {self.centre!r}")
        if not 0.0 < self.spread < math.inf:
            raise ValueError(f"spread must be positive; got {self.spread!r}")

    @cached_property
    def _bounds(self) -> tuple[float, float]:
        return (-self.centre / self.spread, (1.0 - self.centre) / self.spread)

    @cached_property
    def _log_z(self) -> float:
        a, b = self._bounds
        return float(np.log(special.ndtr(b) - special.ndtr(a)))

    def logpdf(self, u) -> np.ndarray:
        u = _as_unit(u)
        z = (u - self.centre) / self.spread
        out = -0.5 * z**2 - np.log(self.spread) - 0.5 * np.log(2 * np.pi) - self._log_z
        return np.where(_outside(u), -np.inf, out)

    def cdf(self, u) -> np.ndarray:
        a, _ = self._bounds
        u = np.clip(_as_unit(u), 0.0, 1.0)
        z = (u - self.centre) / self.spread
        return (special.ndtr(z) - special.ndtr(a)) / np.exp(self._log_z)

    def ppf(self, q) -> np.ndarray:
        """Inverse cdf: Φ⁻¹ of Φ(a) + q·Z, taken from the nearer tail so that neither end loses
        precision (a = −c/s ≤ 0 ≤ b = (1 − c)/s, so the lower form serves below the median
        and the mirrored upper form above it)."""
        a, b = self._bounds
        q = _as_unit(q)
        z = np.exp(self._log_z)
        lower = special.ndtr(a) + q * z
        upper = special.ndtr(-b) + (1.0 - q) * z
        with np.errstate(divide="ignore", invalid="ignore"):
            x = np.where(lower < 0.5, special.ndtri(lower), -special.ndtri(upper))
        return np.clip(self.centre + self.spread * np.clip(x, a, b), 0.0, 1.0)

    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return self.ppf(rng.random(n))

    def mode(self) -> float:
        return self.centre

    @property
    def truncated_mass(self) -> float:
        return float(1.0 - np.exp(self._log_z))

    def centred(self, c: float) -> TruncatedGaussian:
        return replace(self, centre=float(np.clip(c, 0.0, 1.0)))

    def scaled(self, f: float) -> TruncatedGaussian:
        return replace(self, spread=self.spread * f)


@dataclass(frozen=True)
class Beta:
    """Beta(a, b) on the cube coordinate; ``centred`` keeps the concentration a + b."""

    a: float
    b: float

    def __post_init__(self):
        if not (0.0 < self.a < math.inf and 0.0 < self.b < math.inf):
            raise ValueError(
                f"beta parameters must be positive; got a = {self.a!r}, b = {self.b!r}"
            )

    def logpdf(self, u) -> np.ndarray:
        u = _as_unit(u)
        with np.errstate(divide="ignore"):
            out = stats.beta.logpdf(np.clip(u, 0.0, 1.0), self.a, self.b)
        return np.where(_outside(u), -np.inf, out)

    def cdf(self, u) -> np.ndarray:
        return stats.beta.cdf(np.clip(_as_unit(u), 0.0, 1.0), self.a, self.b)

    def ppf(self, q) -> np.ndarray:
        return stats.beta.ppf(q, self.a, self.b)

    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return rng.beta(self.a, self.b, size=n)

    def mode(self) -> float:
        a, b = self.a, self.b
        if a > 1 and b > 1:
            return (a - 1) / (a + b - 2)
        if a <= 1 < b:
            return 0.0
        if b <= 1 < a:
            return 1.0
        return 0.5 if a == b else float(a > b)

    @property
    def truncated_mass(self) -> float:
        return 0.0

    def centred(self, c: float) -> Beta:
        kappa = max(self.a + self.b, 2.0 + 1e-6)
        c = float(np.clip(c, 1e-3, 1 - 1e-3))
        a = 1.0 + c * (kappa - 2.0)
        return Beta(a, kappa - a)

    def scaled(self, f: float) -> Beta:
        # Keep the mean, multiply the standard deviation by f: var = m(1 − m)/(κ + 1).
        m = self.a / (self.a + self.b)
        var = m * (1 - m) / (self.a + self.b + 1) * f**2
        kappa = max(m * (1 - m) / var - 1.0, 1e-3)
        return Beta(m * kappa, (1 - m) * kappa)


@dataclass(frozen=True)
class Uniform:
    """No preference: density 1 on the coordinate. Its mode is taken as the centre, 0.5."""

    def logpdf(self, u) -> np.ndarray:
        u = _as_unit(u)
        return np.where(_outside(u), -np.inf, 0.0)

    def cdf(self, u) -> np.ndarray:
        return np.clip(_as_unit(u), 0.0, 1.0)

    def ppf(self, q) -> np.ndarray:
        return _as_unit(q)

    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray:
        return rng.random(n)

    def mode(self) -> float:
        return 0.5

    @property
    def truncated_mass(self) -> float:
        return 0.0

    def centred(self, c: float) -> Uniform:
        return self

    def scaled(self, f: float) -> Uniform:
        return self


@dataclass(frozen=True)
class Discrete:
    """Probabilities over the ``k`` equal bins of an integer or categorical coordinate.

    density(u) = k · p_i for u in bin i = [i/k, (i+1)/k). ``scaled(f)`` tempers the
    probabilities, p_i ∝ p_i^(1/f²), the discrete analogue of multiplying a normal's spread by f;
    ``centred`` moves the whole list so that the most probable bin holds ``c``.
    """

    probabilities: tuple[float, ...]
    lost_mass: float = 0.0

    def __post_init__(self):
        p = np.asarray(self.probabilities, dtype=float)
        if p.ndim != 1 or p.size < 2 or not np.all(np.isfinite(p)) or np.any(p < 0):
            raise ValueError(
                f"probabilities must be non-negative numbers; got {self.probabilities}"
            )
        if p.sum() <= 0:
            raise ValueError(f"probabilities must not all be zero; got {self.probabilities}")
        object.__setattr__(self, "probabilities", tuple(float(x) for x in p / p.sum()))

    @property
    def k(self) -> int:
        return len(self.probabilities)

    @cached_property
    def _p(self) -> np.ndarray:
        return np.asarray(self.probabilities)

    def _bin(self, u: np.ndarray) -> np.ndarray:
        return np.clip(np.floor(u * self.k), 0, self.k - 1).astype(int)

    def logpdf(self, u) -> np.ndarray:
        u = _as_unit(u)
        with np.errstate(divide="ignore"):
            out = np.log(self._p[self._bin(u)] * self.k)
        return np.where(_outside(u), -np.inf, out)

    def cdf(self, u) -> np.ndarray:
        u = np.clip(_as_unit(u), 0.0, 1.0)
        edges = np.concatenate([[0.0], np.cumsum(self._p)])
        i = self._bin(u)
        return edges[i] + self._p[i] * (u * self.k - i)

    def ppf(self, q) -> np.ndarray:
        """The bin centre of the first bin whose cumulative probability reaches ``q``."""
        cum = np.cumsum(self._p)
        i = np.clip(np.searchsorted(cum, _as_unit(q) - 1e-12), 0, self.k - 1)
        return (i + 0.5) / self.k

    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray:
        i = rng.choice(self.k, size=n, p=self._p)
        return (i + rng.random(n)) / self.k

    def mode(self) -> float:
        return (int(np.argmax(self._p)) + 0.5) / self.k

    @property
    def truncated_mass(self) -> float:
        return self.lost_mass

    def centred(self, c: float) -> Discrete:
        target = int(np.clip(np.floor(c * self.k), 0, self.k - 1))
        move = target - int(np.argmax(self._p))
        moved = np.zeros(self.k)
        # Mass pushed past an edge piles up on the edge bin.
        np.add.at(moved, np.clip(np.arange(self.k) + move, 0, self.k - 1), self._p)
        return Discrete(tuple(moved))

    def scaled(self, f: float) -> Discrete:
        with np.errstate(divide="ignore"):
            logp = np.log(self._p) / f**2
        logp -= logp.max()
        return Discrete(tuple(np.exp(logp)))

    @classmethod
    def from_marginal(cls, marginal, k: int) -> Discrete:
        """The bin masses of a continuous marginal over ``k`` bins (for integer parameters)."""
        edges = np.linspace(0.0, 1.0, k + 1)
        p = np.diff(marginal.cdf(edges))
        return cls(tuple(np.maximum(p, 0.0)), lost_mass=marginal.truncated_mass)


# --------------------------------------------------------------------------- joint beliefs


@dataclass(frozen=True)
class Product:
    """Independent marginals, one per cube coordinate: log density is the sum of theirs."""

    marginals: tuple

    def __post_init__(self):
        object.__setattr__(self, "marginals", tuple(self.marginals))

    @property
    def dim(self) -> int:
        return len(self.marginals)

    @cached_property
    def _gaussian(self) -> tuple[np.ndarray, np.ndarray, float] | None:
        """Centres, spreads and the summed log normaliser when every marginal is a truncated
        Gaussian: then the log density is one vectorised expression (the common case)."""
        if not all(isinstance(m, TruncatedGaussian) for m in self.marginals):
            return None
        c = np.array([m.centre for m in self.marginals])
        s = np.array([m.spread for m in self.marginals])
        const = float(
            sum(-np.log(m.spread) - 0.5 * np.log(2 * np.pi) - m._log_z for m in self.marginals)
        )
        return c, s, const

    def logpdf(self, U) -> np.ndarray:
        U = np.atleast_2d(_as_unit(U))
        if self._gaussian is not None:
            c, s, const = self._gaussian
            z = (U - c) / s
            out = const - 0.5 * np.einsum("ij,ij->i", z, z)
            return np.where(_outside(U).any(axis=1), -np.inf, out)
        return sum(m.logpdf(U[:, j]) for j, m in enumerate(self.marginals))

    def sample(self, n: int, rng: np.random.Generator) -> np.ndarray:
        if self.by_inverse_cdf:
            return self.from_uniforms(self.uniforms(n, rng))
        return np.column_stack([m.sample(n, rng) for m in self.marginals])

    @cached_property
    def by_inverse_cdf(self) -> bool:
        """Whether every marginal samples as its ``ppf`` of uniform draws (truncated Gaussian,
        uniform): then sampling splits into :meth:`uniforms` and :meth:`from_uniforms`, and
        the transform of many draws can be one call."""
        return all(isinstance(m, TruncatedGaussian | Uniform) for m in self.marginals)

    def uniforms(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """The uniform draws behind :meth:`sample`, ``(dim, n)``, in the order it takes them."""
        return np.stack([rng.random(n) for _ in self.marginals])

    def from_uniforms(self, Q: np.ndarray) -> np.ndarray:
        """Points ``(..., n, dim)`` from uniform draws ``(..., dim, n)`` (with
        :attr:`by_inverse_cdf`); each value depends on its own draw only."""
        return np.stack([m.ppf(Q[..., j, :]) for j, m in enumerate(self.marginals)], axis=-1)

    def mode(self) -> np.ndarray:
        return np.array([m.mode() for m in self.marginals], dtype=float)

    def marginal(self, j: int):
        return self.marginals[j]

    @property
    def truncated_mass(self) -> float:
        return float(1.0 - np.prod([1.0 - m.truncated_mass for m in self.marginals]))

    def centred(self, c) -> Product:
        return Product(tuple(m.centred(cj) for m, cj in zip(self.marginals, c, strict=True)))

    def scaled(self, f: float) -> Product:
        return Product(tuple(m.scaled(f) for m in self.marginals))


@dataclass(frozen=True)
class Mixture:
    """A weighted mixture of beliefs of the same dimension (all marginals, or all joint).

    log density = logsumexp_k(log w_k + log density_k). ``centred`` moves every component by the
    same offset, so the mixture's shape is kept; ``scaled`` scales every component.
    """

    components: tuple
    weights: tuple[float, ...]

    def __post_init__(self):
        comps = tuple(self.components)
        w = np.asarray(self.weights, dtype=float)
        if not comps or w.shape != (len(comps),):
            raise ValueError(f"a mixture needs one weight per component; got {self.weights}")
        if np.any(~np.isfinite(w)) or np.any(w < 0) or w.sum() <= 0:
            raise ValueError(f"weights must be non-negative, not all zero; got {self.weights}")
        object.__setattr__(self, "components", comps)
        object.__setattr__(self, "weights", tuple(float(x) for x in w / w.sum()))

    @property
    def is_joint(self) -> bool:
        first = self.components[0]
        return isinstance(first, Product) or (isinstance(first, Mixture) and first.is_joint)

    @property
    def dim(self) -> int:
        return self.components[0].dim if self.is_joint else 1

    @property
    def by_inverse_cdf(self) -> bool:
        """Never: a draw first picks a component (the contract's optional pair is absent)."""
        return False

    def logpdf(self, u) -> np.ndarray:
        logs = np.stack([c.logpdf(u) for c in self.components])
        with np.errstate(divide="ignore"):
            logw = np.log(np.asarray(self.weights))
        return special.logsumexp(logs + logw.reshape((-1,) + (1,) * (logs.ndim - 1)), axis=0)

    def sample(self, n: int, rng: np.random.Generator):
        which = rng.choice(len(self.components), size=n, p=np.asarray(self.weights))
        out = np.empty((n, self.dim) if self.is_joint else n)
        for k, comp in enumerate(self.components):
            idx = np.flatnonzero(which == k)
            if idx.size:
                out[idx] = comp.sample(idx.size, rng)
        return out

    def cdf(self, u) -> np.ndarray:
        return sum(w * c.cdf(u) for w, c in zip(self.weights, self.components, strict=True))

    def ppf(self, q) -> np.ndarray:
        """Inverse of the mixture cdf, by interpolation on a fine grid (marginals only)."""
        grid = np.linspace(0.0, 1.0, 4097)
        cdf = np.maximum.accumulate(self.cdf(grid))
        return np.interp(_as_unit(q), cdf, grid)

    @cached_property
    def _mode(self):
        starts = [np.atleast_1d(c.mode()) for c in self.components]
        values = [float(np.squeeze(self.logpdf(self._shape(s)))) for s in starts]
        best = starts[int(np.argmax(values))]

        def negative(x):
            value = float(np.squeeze(self.logpdf(self._shape(x))))
            return -value if np.isfinite(value) else 1e300

        res = optimize.minimize(negative, best, method="L-BFGS-B", bounds=[(0.0, 1.0)] * best.size)
        x = res.x if res.fun <= negative(best) else best
        return x if self.is_joint else float(x[0])

    def _shape(self, x):
        x = np.asarray(x, dtype=float)
        return x.reshape(1, -1) if self.is_joint else x.reshape(1)

    def mode(self):
        return self._mode

    def marginal(self, j: int) -> Mixture:
        return Mixture(tuple(c.marginal(j) for c in self.components), self.weights)

    @property
    def truncated_mass(self) -> float:
        return float(
            sum(w * c.truncated_mass for w, c in zip(self.weights, self.components, strict=True))
        )

    def centred(self, c) -> Mixture:
        offset = np.asarray(c, dtype=float) - np.asarray(self.mode(), dtype=float)
        moved = []
        for comp in self.components:
            target = np.asarray(comp.mode(), dtype=float) + offset
            moved.append(comp.centred(target if self.is_joint else float(target)))
        return Mixture(tuple(moved), self.weights)

    def scaled(self, f: float) -> Mixture:
        return Mixture(tuple(c.scaled(f) for c in self.components), self.weights)


# --------------------------------------------------------------------------- constructors


def gaussian_for(
    parameter: Parameter,
    centre,
    *,
    spread: float | None = None,
    within: float | None = None,
    factor: float | None = None,
):
    """A Gaussian belief on one parameter, given in the user's units.

    ``spread`` is the standard deviation as a fraction of the parameter's cube range. Or give
    ``within``: 90 % of the (untruncated) mass lies within ``centre ± within`` (user units), so
    spread = within / (1.645 · range); on a log scale give ``factor``: 90 % lies within
    ``[centre / factor, centre · factor]``, so spread = ln(factor) / (1.645 · ln(upper / lower)).
    On an integer parameter the Gaussian is turned into bin masses. Impossible values raise
    ``ValueError`` (the study parser checks them first, under their keys).
    """
    if isinstance(parameter, Categorical):
        raise ValueError(f"{parameter.name}: a Gaussian belief on a categorical parameter")
    given = [
        name
        for name, v in (("spread", spread), ("within", within), ("factor", factor))
        if v is not None
    ]
    if len(given) != 1:
        raise ValueError(f"exactly one of spread, within, factor; got {given or 'none'}")
    low, high = parameter.lower, parameter.upper
    if not low <= centre <= high:
        raise ValueError(f"centre {centre!r} outside [{low:g}, {high:g}]")
    log = isinstance(parameter, Continuous) and parameter.log
    if spread is not None:
        s = float(spread)
    elif within is not None:
        if log:
            raise ValueError("a log-scale parameter takes 'factor', not 'within'")
        width = (high - low + 1) if isinstance(parameter, Integer) else (high - low)
        s = within / (_Z90 * width)
    else:
        if not log:
            raise ValueError("a linear parameter takes 'within' or 'spread', not 'factor'")
        if not factor > 1:
            raise ValueError(f"factor must be above 1; got {factor!r}")
        s = np.log(factor) / (_Z90 * np.log(high / low))
    if not s > 0:
        raise ValueError(f"the spread must be positive; got {given[0]} = {locals()[given[0]]!r}")
    marginal = TruncatedGaussian(float(parameter.to_unit(centre)), float(s))
    if isinstance(parameter, Integer):
        return Discrete.from_marginal(marginal, parameter.levels)
    return marginal


def level_labels(parameter: Parameter) -> list[str]:
    """The names of a discrete parameter's levels (categorical choices, or integers as text)."""
    if isinstance(parameter, Categorical):
        return list(parameter.choices)
    return [str(v) for v in range(parameter.lower, parameter.upper + 1)]


def probabilities_for(parameter: Parameter, probabilities) -> Discrete:
    """A list of probabilities (or ``{choice: p}``) over a categorical or integer parameter.

    Choices left out of a table get zero. Probabilities that do not sum to 1 are normalised
    with a warning. Impossible values raise ``ValueError``.
    """
    if isinstance(parameter, Continuous):
        raise ValueError(f"{parameter.name}: probabilities on a continuous parameter")
    labels = level_labels(parameter)
    if isinstance(probabilities, dict):
        unknown = [str(name) for name in probabilities if str(name) not in labels]
        if unknown:
            raise ValueError(f"{parameter.name}: unknown levels {', '.join(unknown)}")
        values = [
            probabilities.get(name, probabilities.get(_maybe_int(name), 0.0)) for name in labels
        ]
    else:
        values = list(probabilities) if isinstance(probabilities, (list, tuple)) else probabilities
        if not isinstance(values, list) or len(values) != len(labels):
            raise ValueError(f"{parameter.name}: {len(labels)} probabilities; got {probabilities}")
    total = float(sum(values))
    if total > 0 and abs(total - 1.0) > 1e-9:
        warnings.warn(
            f"probabilities of {parameter.name} sum to {total:g}; normalised to 1", stacklevel=2
        )
    return Discrete(tuple(values))


def _maybe_int(name: str):
    try:
        return int(name)
    except ValueError:
        return name


# Categorical coordinates of a density estimate keep this much mass off the observed choice
# (an Aitchison–Aitken style kernel with a fixed smoothing of 0.1).
_DISCRETE_SMOOTHING = 0.1


def from_points(U, space: Space) -> Mixture:
    """A kernel density estimate from earlier good points (cube coordinates, shape (n, d)).

    Continuous and integer coordinates: a Gaussian kernel per point, truncated to the cube and
    renormalised there, with Scott's rule bandwidth h_j = σ_j · n^(−1/(d+4)) (σ_j the sample
    standard deviation of coordinate j, floored at 0.01). Categorical coordinates: mass 0.9 on the
    point's choice and 0.1 shared by the others. The estimate is an equal-weight mixture.
    """
    U = np.atleast_2d(np.asarray(U, dtype=float))
    n, d = U.shape
    if d != space.dim:
        raise ValueError(f"points with {space.dim} coordinates; got {d}")
    if n < 2:
        raise ValueError(f"at least 2 earlier good points; got {n}")
    sd = np.maximum(U.std(axis=0, ddof=1), 0.01)
    h = sd * n ** (-1.0 / (d + 4))
    components = []
    for row in U:
        marginals = []
        for j, p in enumerate(space.parameters):
            if isinstance(p, Categorical):
                probs = np.full(p.levels, _DISCRETE_SMOOTHING / (p.levels - 1))
                probs[int(p.from_unit(row[j]))] = 1.0 - _DISCRETE_SMOOTHING
                marginals.append(Discrete(tuple(probs)))
            else:
                marginals.append(TruncatedGaussian(float(np.clip(row[j], 0, 1)), float(h[j])))
        components.append(Product(tuple(marginals)))
    return Mixture(tuple(components), tuple([1.0] * n))


def gaussian_at(point, spread: float) -> Product:
    """Independent Gaussians of sd ``spread`` (cube units) centred on a cube point."""
    return Product(tuple(TruncatedGaussian(float(c), float(spread)) for c in np.atleast_1d(point)))


# --------------------------------------------------------------------------- diagnostics


@dataclass(frozen=True)
class ParameterSummary:
    """One parameter's marginal belief in the user's units.

    For an ordered parameter ``central50`` and ``central90`` are (low, high) intervals; for a
    categorical one they are the fewest most-probable choices holding at least that mass.
    """

    name: str
    unit: str
    mode: float | int | str
    central50: tuple
    central90: tuple
    truncated_mass: float


@dataclass(frozen=True)
class BeliefSummary:
    """Per-parameter summaries, the joint mode, the fraction of the search volume holding 90 %
    of the belief's mass, and the mass lost to truncation."""

    parameters: tuple[ParameterSummary, ...]
    mode: dict
    volume90: float
    truncated_mass: float


def _user_value(parameter: Parameter, u: float):
    value = parameter.from_unit(np.array([u]))[0]
    if isinstance(parameter, Categorical):
        return parameter.choices[int(value)]
    whole = isinstance(parameter, Integer) or getattr(parameter, "integer", False)
    return int(value) if whole else float(value)


def _top_choices(parameter: Categorical, marginal, mass: float) -> tuple[str, ...]:
    centres = (np.arange(parameter.levels) + 0.5) / parameter.levels
    p = np.exp(marginal.logpdf(centres)) / parameter.levels
    order = np.argsort(-p, kind="stable")
    count = int(np.searchsorted(np.cumsum(p[order]), mass - 1e-12) + 1)
    return tuple(parameter.choices[i] for i in order[:count])


def summarise(belief, space: Space) -> BeliefSummary:
    """Diagnostics of a joint belief over ``space`` (see :class:`BeliefSummary`)."""
    rows = []
    for j, p in enumerate(space.parameters):
        m = belief.marginal(j)
        if isinstance(p, Categorical):
            c50, c90 = _top_choices(p, m, 0.5), _top_choices(p, m, 0.9)
        else:
            lo50, hi50, lo90, hi90 = m.ppf(np.array([0.25, 0.75, 0.05, 0.95]))
            c50 = (_user_value(p, lo50), _user_value(p, hi50))
            c90 = (_user_value(p, lo90), _user_value(p, hi90))
        rows.append(
            ParameterSummary(p.name, p.unit, _user_value(p, m.mode()), c50, c90, m.truncated_mass)
        )
    return BeliefSummary(
        tuple(rows),
        space.format_point(np.asarray(belief.mode())),
        volume_fraction(belief),
        belief.truncated_mass,
    )
