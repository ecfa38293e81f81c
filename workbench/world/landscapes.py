"""Landscapes: cheap test functions with published optima, and their catalogue.

A :class:`Landscape` is a function to minimise on its native domain, with the published global
minimum and minimisers. :meth:`Landscape.placed` maps it onto the unit cube ``[0, 1]^d`` as a
:class:`~workbench.world.placement.Placement` (re-exported here), which translates the native
domain so that the first published minimiser sits at a given cube point and recomputes what the
campaign needs there (minimum, reference value, worst point, decoy).

Noise is not part of a landscape; the campaign adds it.

Where the sources print fewer digits, stored minima and minimisers were polished once with a
local optimiser while writing this module (to about 1e-9), and agree with the printed values to
the printed precision.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from functools import partial
from numbers import Integral
from types import MappingProxyType
from typing import Any

import numpy as np

from .placement import Placement, _frozen, _points

__all__ = ["MAX_DIM", "Landscape", "Placement", "catalogue", "dimensions", "get"]

# Generic landscapes take any dimension up to this; beyond it the fixed Sobol sets used by a
# placement (``placement._REFERENCE_POINTS``) no longer say much about the landscape.
MAX_DIM = 20

_VLSE = "Surjanovic & Bingham (2013), Virtual Library of Simulation Experiments"
_DIXON = "Dixon & Szegő (1978), Towards Global Optimisation 2"
_FORRESTER = "Forrester, Sóbester & Keane (2008), Engineering Design via Surrogate Modelling"


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
