"""Landscapes: cheap test functions with published optima, and their placement on the unit cube.

A :class:`Landscape` is a function to minimise on its native domain, with the published global
minimum and minimisers. A :class:`Placement` maps it onto the unit cube ``[0, 1]^d``: cube
point ``u`` is native point ``x = lower + u * width``. Placing a landscape ``at`` a cube point
translates the native domain (same widths) so that the first published minimiser sits there;
the placement then recomputes what the campaign needs: the minimum over the placed cube (some
functions go lower outside their native domain), a reference value for normalised regret, the
worst point and a decoy local optimum.

Noise is not part of a landscape; the campaign adds it.

Where the sources print fewer digits, stored minima and minimisers were polished once with a
local optimiser while writing this module (to about 1e-9), and agree with the printed values to
the printed precision.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from functools import cached_property, partial
from numbers import Integral, Real
from types import MappingProxyType
from typing import Any

import numpy as np

__all__ = ["MAX_DIM", "Landscape", "Placement", "catalogue", "dimensions", "get"]

# Generic landscapes take any dimension up to this; beyond it the fixed Sobol sets used by a
# placement (``_REFERENCE_POINTS``) no longer say much about the landscape.
MAX_DIM = 20

_VLSE = "Surjanovic & Bingham (2013), Virtual Library of Simulation Experiments"
_DIXON = "Dixon & Szegő (1978), Towards Global Optimisation 2"
_FORRESTER = "Forrester, Sóbester & Keane (2008), Engineering Design via Surrogate Modelling"


def _frozen(values: Any) -> np.ndarray:
    """A read-only float array, so module constants and cached results cannot be altered."""
    array = np.array(values, dtype=float)
    array.flags.writeable = False
    return array


# ---------------------------------------------------------------------------------------------
# The functions. Each takes native points X of shape (n, d) and returns values of shape (n,).
# ---------------------------------------------------------------------------------------------


def _branin(X: np.ndarray) -> np.ndarray:
    """Branin: f = (x2 - b x1² + c x1 - r)² + s (1 - t) cos(x1) + s.

    With b = 5.1 / (4π²), c = 5 / π, r = 6, s = 10, t = 1 / (8π).
    """
    x1, x2 = X[:, 0], X[:, 1]
    b, c, r, s, t = 5.1 / (4 * math.pi**2), 5 / math.pi, 6.0, 10.0, 1 / (8 * math.pi)
    return (x2 - b * x1**2 + c * x1 - r) ** 2 + s * (1 - t) * np.cos(x1) + s


def _six_hump_camel(X: np.ndarray) -> np.ndarray:
    """Six-hump camel: f = (4 - 2.1 x1² + x1⁴ / 3) x1² + x1 x2 + (-4 + 4 x2²) x2²."""
    x1, x2 = X[:, 0], X[:, 1]
    return (4 - 2.1 * x1**2 + x1**4 / 3) * x1**2 + x1 * x2 + (-4 + 4 * x2**2) * x2**2


def _goldstein_price(X: np.ndarray) -> np.ndarray:
    """Goldstein–Price: f = [1 + (x1 + x2 + 1)² A] [30 + (2 x1 - 3 x2)² B].

    With A = 19 - 14 x1 + 3 x1² - 14 x2 + 6 x1 x2 + 3 x2² and
    B = 18 - 32 x1 + 12 x1² + 48 x2 - 36 x1 x2 + 27 x2².
    """
    x1, x2 = X[:, 0], X[:, 1]
    a = 19 - 14 * x1 + 3 * x1**2 - 14 * x2 + 6 * x1 * x2 + 3 * x2**2
    b = 18 - 32 * x1 + 12 * x1**2 + 48 * x2 - 36 * x1 * x2 + 27 * x2**2
    return (1 + (x1 + x2 + 1) ** 2 * a) * (30 + (2 * x1 - 3 * x2) ** 2 * b)


# Hartmann coefficient tables as printed by Dixon & Szegő (1978) and Surjanovic & Bingham (2013).
_HARTMANN_ALPHA = _frozen([1.0, 1.2, 3.0, 3.2])
_HARTMANN3_A = _frozen([[3.0, 10, 30], [0.1, 10, 35], [3.0, 10, 30], [0.1, 10, 35]])
# P_41 = 0.03815 as printed by Dixon & Szegő; Surjanovic & Bingham round it to 381e-4, but the
# minimiser both print (x1 = 0.114614) is the one of the 0.03815 table.
_HARTMANN3_P = _frozen(
    [
        [0.3689, 0.1170, 0.2673],
        [0.4699, 0.4387, 0.7470],
        [0.1091, 0.8732, 0.5547],
        [0.03815, 0.5743, 0.8828],
    ]
)
_HARTMANN6_A = _frozen(
    [
        [10, 3, 17, 3.5, 1.7, 8],
        [0.05, 10, 17, 0.1, 8, 14],
        [3, 3.5, 1.7, 10, 17, 8],
        [17, 8, 0.05, 10, 0.1, 14],
    ]
)
_HARTMANN6_P = _frozen(
    1e-4
    * np.array(
        [
            [1312, 1696, 5569, 124, 8283, 5886],
            [2329, 4135, 8307, 3736, 1004, 9991],
            [2348, 1451, 3522, 2883, 3047, 6650],
            [4047, 8828, 8732, 5743, 1091, 381],
        ]
    )
)


def _hartmann(X: np.ndarray, A: np.ndarray, P: np.ndarray) -> np.ndarray:
    """Hartmann: f = -Σ_i α_i exp(-Σ_j A_ij (x_j - P_ij)²), i = 1..4."""
    inner = np.einsum("ij,nij->ni", A, (X[:, None, :] - P[None, :, :]) ** 2)
    return -(np.exp(-inner) @ _HARTMANN_ALPHA)


# Shekel tables (Dixon & Szegő 1978; Surjanovic & Bingham 2013): the centres a_i and widths c_i.
_SHEKEL_A = _frozen(
    [
        [4, 4, 4, 4],
        [1, 1, 1, 1],
        [8, 8, 8, 8],
        [6, 6, 6, 6],
        [3, 7, 3, 7],
        [2, 9, 2, 9],
        [5, 5, 3, 3],
        [8, 1, 8, 1],
        [6, 2, 6, 2],
        [7, 3.6, 7, 3.6],
    ]
)
_SHEKEL_C = _frozen([0.1, 0.2, 0.2, 0.4, 0.4, 0.6, 0.3, 0.7, 0.5, 0.5])


def _shekel(X: np.ndarray, m: int) -> np.ndarray:
    """Shekel with m terms: f = -Σ_{i=1..m} 1 / (Σ_j (x_j - a_ij)² + c_i)."""
    squared = ((X[:, None, :] - _SHEKEL_A[None, :m, :]) ** 2).sum(axis=2)
    return -(1.0 / (squared + _SHEKEL_C[None, :m])).sum(axis=1)


def _ackley(X: np.ndarray) -> np.ndarray:
    """Ackley: f = -a exp(-b √(mean x²)) - exp(mean cos(c x)) + a + e, a = 20, b = 0.2, c = 2π."""
    a, b, c = 20.0, 0.2, 2 * math.pi
    root = np.sqrt(np.mean(X**2, axis=1))
    return -a * np.exp(-b * root) - np.exp(np.mean(np.cos(c * X), axis=1)) + a + math.e


def _levy(X: np.ndarray) -> np.ndarray:
    """Levy: with w = 1 + (x - 1) / 4,

    f = sin²(π w_1) + Σ_{i<d} (w_i - 1)² [1 + 10 sin²(π w_i + 1)] + (w_d - 1)² [1 + sin²(2π w_d)].
    """
    w = 1 + (X - 1) / 4
    head = np.sin(math.pi * w[:, 0]) ** 2
    body = ((w[:, :-1] - 1) ** 2 * (1 + 10 * np.sin(math.pi * w[:, :-1] + 1) ** 2)).sum(axis=1)
    tail = (w[:, -1] - 1) ** 2 * (1 + np.sin(2 * math.pi * w[:, -1]) ** 2)
    return head + body + tail


def _rosenbrock(X: np.ndarray) -> np.ndarray:
    """Rosenbrock: f = Σ_{i<d} 100 (x_{i+1} - x_i²)² + (x_i - 1)²."""
    return (100 * (X[:, 1:] - X[:, :-1] ** 2) ** 2 + (X[:, :-1] - 1) ** 2).sum(axis=1)


def _styblinski_tang(X: np.ndarray) -> np.ndarray:
    """Styblinski–Tang: f = ½ Σ_i (x_i⁴ - 16 x_i² + 5 x_i)."""
    return 0.5 * (X**4 - 16 * X**2 + 5 * X).sum(axis=1)


def _michalewicz(X: np.ndarray, m: int = 10) -> np.ndarray:
    """Michalewicz: f = -Σ_i sin(x_i) sin^(2m)(i x_i² / π), m = 10."""
    i = np.arange(1, X.shape[1] + 1)
    return -(np.sin(X) * np.sin(i * X**2 / math.pi) ** (2 * m)).sum(axis=1)


def _griewank(X: np.ndarray) -> np.ndarray:
    """Griewank: f = Σ_i x_i² / 4000 - Π_i cos(x_i / √i) + 1."""
    i = np.arange(1, X.shape[1] + 1)
    return (X**2).sum(axis=1) / 4000 - np.prod(np.cos(X / np.sqrt(i)), axis=1) + 1


def _rastrigin(X: np.ndarray) -> np.ndarray:
    """Rastrigin: f = 10 d + Σ_i (x_i² - 10 cos(2π x_i))."""
    return 10 * X.shape[1] + (X**2 - 10 * np.cos(2 * math.pi * X)).sum(axis=1)


def _forrester(X: np.ndarray) -> np.ndarray:
    """Forrester: f = (6x - 2)² sin(12x - 4)."""
    x = X[:, 0]
    return (6 * x - 2) ** 2 * np.sin(12 * x - 4)


# ---------------------------------------------------------------------------------------------
# Landscape
# ---------------------------------------------------------------------------------------------


def _points(X: Any, dim: int, key: str) -> np.ndarray:
    """X as an (n, dim) float array; a single (dim,) point becomes (1, dim)."""
    X = np.asarray(X, dtype=float)
    if X.ndim == 1 and X.shape[0] == dim:
        return X[None, :]
    if X.ndim != 2 or X.shape[1] != dim:
        raise ValueError(f"{key} must be an array of shape (n, {dim}) or ({dim},); got {X.shape}")
    return X


@dataclass(frozen=True)
class Landscape:
    """A test function to minimise on its native domain, with its published optimum.

    Parameters
    ----------
    name, dim : str, int
        Catalogue name and dimension d.
    lower, upper : tuple of float
        The native domain, the box ``[lower, upper]``.
    minimum : float
        Published global minimum f* over the native domain (polished where printed briefly).
    minimisers : tuple of tuple of float
        All published global minimisers, in native coordinates.
    source : str
        Where the function, domain and optimum are published.
    function : callable
        Native points X of shape (n, d) to values of shape (n,); a module-level function (or a
        ``functools.partial`` of one) so that a landscape pickles.
    """

    name: str
    dim: int
    lower: tuple[float, ...]
    upper: tuple[float, ...]
    minimum: float
    minimisers: tuple[tuple[float, ...], ...]
    source: str
    # Not compared: a partial does not compare equal to its unpickled copy; name and dim suffice.
    function: Callable[[np.ndarray], np.ndarray] = field(compare=False, repr=False)

    def __call__(self, X: Any) -> np.ndarray:
        """Values at native points X of shape (n, d), shape (n,); a (d,) point gives shape (1,)."""
        return self.function(_points(X, self.dim, "X"))

    def describe(self) -> dict[str, Any]:
        """Name, dimension, domain, minimum and minimisers, as plain JSON-ready values."""
        return {
            "name": self.name,
            "dimension": self.dim,
            "domain": [[lo, hi] for lo, hi in zip(self.lower, self.upper, strict=True)],
            "minimum": self.minimum,
            "minimisers": [list(x) for x in self.minimisers],
        }

    def placed(self, at: Sequence[float] | np.ndarray | None = None) -> Placement:
        """This landscape on the unit cube; ``at`` puts the first published minimiser there.

        ``at=None`` keeps the native domain; otherwise the domain is translated (same widths) so
        that the first published minimiser sits at cube point ``at`` (d values in [0, 1]).
        """
        return Placement(self, at)


@dataclass(frozen=True)
class _Fixed:
    """A landscape of one fixed dimension, with its published domain and optimum."""

    function: Callable[[np.ndarray], np.ndarray]
    lower: tuple[float, ...]
    upper: tuple[float, ...]
    minimum: float
    minimisers: tuple[tuple[float, ...], ...]
    source: str

    def make(self, name: str, dim: int | None) -> Landscape:
        own = len(self.lower)
        if dim is not None and (isinstance(dim, bool) or dim != own):
            raise ValueError(f"dim must be {own} for {name}; got {dim!r}")
        return Landscape(
            name,
            own,
            self.lower,
            self.upper,
            self.minimum,
            self.minimisers,
            self.source,
            self.function,
        )


@dataclass(frozen=True)
class _Generic:
    """A landscape defined for any dimension d: the same interval, optimum per coordinate."""

    function: Callable[[np.ndarray], np.ndarray]
    interval: tuple[float, float]
    minimum_per_dim: float
    coordinate: float
    source: str
    min_dim: int = 1

    def make(self, name: str, dim: int | None) -> Landscape:
        if dim is None:
            dim = 2
        if isinstance(dim, bool) or not isinstance(dim, Integral):
            raise ValueError(f"dim must be an integer; got {dim!r}")
        if not self.min_dim <= dim <= MAX_DIM:
            raise ValueError(f"dim must be in [{self.min_dim}, {MAX_DIM}] for {name}; got {dim}")
        dim = int(dim)
        lo, hi = self.interval
        return Landscape(
            name,
            dim,
            (lo,) * dim,
            (hi,) * dim,
            self.minimum_per_dim * dim,
            ((self.coordinate,) * dim,),
            self.source,
            self.function,
        )


# Polished optima (see the module docstring): refined once from the printed values by a local
# optimiser and a root of the gradient; the printed values agree to their printed digits.
_SIXHUMP_MIN = -1.0316284534898774
_SIXHUMP_X = (0.0898420131, -0.7126564030)
_HARTMANN3_MIN = -3.862782147820755
_HARTMANN3_X = (0.1146143386, 0.5556488500, 0.8525469535)
_HARTMANN6_MIN = -3.3223680114155147
_HARTMANN6_X = (0.2016895110, 0.1500106918, 0.4768739741, 0.2753324305, 0.3116516166, 0.6573005341)
# The Shekel minimisers lie near, not at, (4, 4, 4, 4), where the other terms pull slightly.
_SHEKEL5_MIN = -10.153199679058229
_SHEKEL5_X = (4.0000371528, 4.0001332766, 4.0000371528, 4.0001332766)
_SHEKEL7_MIN = -10.402940566818662
_SHEKEL7_X = (4.0005729162, 4.0006893662, 3.9994897089, 3.9996061589)
_SHEKEL10_MIN = -10.536409816692045
_SHEKEL10_X = (4.0007465316, 4.0005929341, 3.9996633980, 3.9995098006)
# Styblinski–Tang: x* is the negative root of 4x³ - 32x + 5 = 0 (f' = 0); the printed
# -39.16599 d lies a little above the value at the printed x* = -2.903534 (-39.166166 d).
_STYBLINSKI_MIN = -39.16616570377142
_STYBLINSKI_X = -2.9035340277711783
_MICHALEWICZ_MIN = -1.8013034100985534
_MICHALEWICZ_X1 = 2.2029055202
_FORRESTER_MIN = -6.020740055767083
_FORRESTER_X = 0.7572487577

_BOTH = f"{_DIXON}; {_VLSE}"

_CATALOGUE: MappingProxyType[str, _Fixed | _Generic] = MappingProxyType(
    {
        "branin": _Fixed(
            _branin,
            (-5.0, 0.0),
            (10.0, 15.0),
            5 / (4 * math.pi),  # exact: s t = 10 / (8π)
            ((-math.pi, 12.275), (math.pi, 2.275), (3 * math.pi, 2.475)),
            _BOTH,
        ),
        "six-hump-camel": _Fixed(
            _six_hump_camel,
            (-3.0, -2.0),
            (3.0, 2.0),
            _SIXHUMP_MIN,
            (_SIXHUMP_X, (-_SIXHUMP_X[0], -_SIXHUMP_X[1])),
            _VLSE,
        ),
        "goldstein-price": _Fixed(
            _goldstein_price, (-2.0, -2.0), (2.0, 2.0), 3.0, ((0.0, -1.0),), _BOTH
        ),
        "hartmann3": _Fixed(
            partial(_hartmann, A=_HARTMANN3_A, P=_HARTMANN3_P),
            (0.0,) * 3,
            (1.0,) * 3,
            _HARTMANN3_MIN,
            (_HARTMANN3_X,),
            _BOTH,
        ),
        "hartmann6": _Fixed(
            partial(_hartmann, A=_HARTMANN6_A, P=_HARTMANN6_P),
            (0.0,) * 6,
            (1.0,) * 6,
            _HARTMANN6_MIN,
            (_HARTMANN6_X,),
            _BOTH,
        ),
        "shekel5": _Fixed(
            partial(_shekel, m=5), (0.0,) * 4, (10.0,) * 4, _SHEKEL5_MIN, (_SHEKEL5_X,), _BOTH
        ),
        "shekel7": _Fixed(
            partial(_shekel, m=7), (0.0,) * 4, (10.0,) * 4, _SHEKEL7_MIN, (_SHEKEL7_X,), _BOTH
        ),
        "shekel10": _Fixed(
            partial(_shekel, m=10), (0.0,) * 4, (10.0,) * 4, _SHEKEL10_MIN, (_SHEKEL10_X,), _BOTH
        ),
        "ackley": _Generic(_ackley, (-32.768, 32.768), 0.0, 0.0, _VLSE),
        "levy": _Generic(_levy, (-10.0, 10.0), 0.0, 1.0, _VLSE),
        # d = 1 would leave the sum empty (f = 0 everywhere), so Rosenbrock starts at d = 2.
        "rosenbrock": _Generic(_rosenbrock, (-5.0, 10.0), 0.0, 1.0, _VLSE, min_dim=2),
        "styblinski-tang": _Generic(
            _styblinski_tang, (-5.0, 5.0), _STYBLINSKI_MIN, _STYBLINSKI_X, _VLSE
        ),
        "michalewicz": _Fixed(
            _michalewicz,
            (0.0, 0.0),
            (math.pi, math.pi),
            _MICHALEWICZ_MIN,
            ((_MICHALEWICZ_X1, math.pi / 2),),  # x2 = π/2 exactly: both sine factors equal 1
            _VLSE,
        ),
        "griewank": _Generic(_griewank, (-600.0, 600.0), 0.0, 0.0, _VLSE),
        "rastrigin": _Generic(_rastrigin, (-5.12, 5.12), 0.0, 0.0, _VLSE),
        "forrester": _Fixed(
            _forrester, (0.0,), (1.0,), _FORRESTER_MIN, ((_FORRESTER_X,),), _FORRESTER
        ),
    }
)


def catalogue() -> list[str]:
    """Names of the landscapes, in catalogue order."""
    return list(_CATALOGUE)


def get(name: str, dim: int | None = None) -> Landscape:
    """The landscape called ``name``; generic ones take ``dim`` in [1, 20] (default 2).

    A fixed-dimension landscape accepts ``dim=None`` or its own dimension. An unknown name or
    an impossible dimension raises ``ValueError`` (the study parser checks both first, under
    their keys).
    """
    if name not in _CATALOGUE:
        raise ValueError(f"no landscape called {name!r}; known: {', '.join(_CATALOGUE)}")
    return _CATALOGUE[name].make(name, dim)


def dimensions(name: str) -> tuple[int, int]:
    """The dimensions landscape ``name`` takes, ``(lowest, highest)``: a fixed one's own twice,
    a generic one's ``(min_dim, MAX_DIM)``."""
    if name not in _CATALOGUE:
        raise ValueError(f"no landscape called {name!r}; known: {', '.join(_CATALOGUE)}")
    entry = _CATALOGUE[name]
    if isinstance(entry, _Fixed):
        return len(entry.lower), len(entry.lower)
    return entry.min_dim, MAX_DIM


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
