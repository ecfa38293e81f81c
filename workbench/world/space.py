"""Search spaces in the user's units and their encoding on the unit cube.

Every parameter owns one coordinate ``u`` in ``[0, 1]``:

- continuous, linear scale: ``u = (x - lower) / (upper - lower)``;
- continuous, log scale: the same on ``log(x)``, so equal steps in ``u`` are equal ratios in ``x``;
- integer on a log scale (a batch size from 16 to 512): the log-scale coordinate above, and the
  user value ``x(u)`` rounded to the nearest integer (the bounds are integers, so rounding keeps
  them); the coordinate snaps to ``u(round(x(u)))``, so each integer owns the stretch of ``u``
  that rounds to it (the bounds half as long as their neighbours' stretches);
- integer with ``k = upper - lower + 1`` values: value ``lower + i`` owns the bin
  ``[i/k, (i+1)/k)`` and is encoded at the bin centre ``(i + 0.5)/k``;
- categorical with ``k`` choices: choice ``i`` owns the same bin as above, encoded at its centre.

Beliefs are densities on this cube, so a discrete parameter's belief is piecewise constant
over its bins. The surrogate sees continuous and integer coordinates as they are and
categorical ones one-hot (:meth:`Space.features`).

The constructors raise plain ``ValueError`` for impossible values; the study parser
(:func:`workbench.study.tables.space_table`) checks every value first, under its key.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import cached_property
from numbers import Integral, Real
from typing import Any

import numpy as np

__all__ = ["Categorical", "Continuous", "Integer", "Parameter", "Space"]


def _name(name: Any) -> str:
    if not isinstance(name, str) or not name.strip():
        raise ValueError(f"a parameter's name must be a non-empty string; got {name!r}")
    return name


def _bound(value: Any, name: str, which: str, integer: bool = False) -> float | int:
    """A finite number (an integer if ``integer``); bools are not numbers here."""
    kind = Integral if integer else Real
    if isinstance(value, bool) or not isinstance(value, kind) or not math.isfinite(value):
        noun = "an integer" if integer else "a finite number"
        raise ValueError(f"{name}: {which} must be {noun}; got {value!r}")
    return int(value) if integer else float(value)


@dataclass(frozen=True)
class Continuous:
    """A real parameter on ``[lower, upper]``, on a linear or log scale; with ``integer`` its
    user values are whole numbers: ``x(u)`` rounded to the nearest one (for an integer on a log
    scale; a linear integer is :class:`Integer`)."""

    name: str
    lower: float
    upper: float
    log: bool = False
    unit: str = ""
    integer: bool = False

    def __post_init__(self):
        name = _name(self.name)
        lower = _bound(self.lower, name, "lower")
        upper = _bound(self.upper, name, "upper")
        if lower >= upper:
            raise ValueError(f"{name}: upper must be greater than lower ({lower:g}); got {upper:g}")
        if self.log and lower <= 0:
            raise ValueError(f"{name}: lower must be positive on a log scale; got {lower:g}")
        if self.integer and not (float(lower).is_integer() and float(upper).is_integer()):
            raise ValueError(f"{name}: an integer parameter's bounds must be whole numbers")
        object.__setattr__(self, "lower", float(lower))
        object.__setattr__(self, "upper", float(upper))

    @property
    def levels(self) -> int:
        """Number of bins on the cube coordinate (0 for a continuous parameter)."""
        return 0

    def to_unit(self, x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        if self.log:
            return (np.log(x) - np.log(self.lower)) / (np.log(self.upper) - np.log(self.lower))
        return (x - self.lower) / (self.upper - self.lower)

    def from_unit(self, u: np.ndarray) -> np.ndarray:
        u = np.clip(np.asarray(u, dtype=float), 0.0, 1.0)
        if self.log:
            x = np.exp(np.log(self.lower) + u * (np.log(self.upper) - np.log(self.lower)))
        else:
            x = self.lower + u * (self.upper - self.lower)
        if self.integer:
            # Round half up, then clip: exp(log(upper)) may land a hair above upper.
            return np.clip(np.floor(x + 0.5), self.lower, self.upper).astype(int)
        return x

    def snap(self, u: np.ndarray) -> np.ndarray:
        if self.integer:
            return self.to_unit(self.from_unit(u))
        return np.clip(np.asarray(u, dtype=float), 0.0, 1.0)

    def describe(self) -> str:
        scale = "log" if self.log else "linear"
        scale += ", integer" if self.integer else ""
        return f"{self.lower:g} to {self.upper:g} {self.unit}".rstrip() + f" ({scale})"


@dataclass(frozen=True)
class Integer:
    """An integer parameter taking every value from ``lower`` to ``upper`` inclusive."""

    name: str
    lower: int
    upper: int
    unit: str = ""

    def __post_init__(self):
        name = _name(self.name)
        lower = _bound(self.lower, name, "lower", integer=True)
        upper = _bound(self.upper, name, "upper", integer=True)
        if lower >= upper:
            raise ValueError(f"{name}: upper must be greater than lower ({lower}); got {upper}")
        object.__setattr__(self, "lower", lower)
        object.__setattr__(self, "upper", upper)

    @property
    def levels(self) -> int:
        return self.upper - self.lower + 1

    def to_unit(self, x: np.ndarray) -> np.ndarray:
        return (np.asarray(x, dtype=float) - self.lower + 0.5) / self.levels

    def from_unit(self, u: np.ndarray) -> np.ndarray:
        index = np.clip(np.floor(np.asarray(u, dtype=float) * self.levels), 0, self.levels - 1)
        return (self.lower + index).astype(int)

    def snap(self, u: np.ndarray) -> np.ndarray:
        return self.to_unit(self.from_unit(u))

    def describe(self) -> str:
        return f"{self.lower} to {self.upper} {self.unit}".rstrip() + " (integer)"


@dataclass(frozen=True)
class Categorical:
    """A parameter taking one of a list of named choices (no order is implied)."""

    name: str
    choices: tuple[str, ...]
    unit: str = ""

    def __post_init__(self):
        name = _name(self.name)
        choices = tuple(self.choices) if isinstance(self.choices, (list, tuple)) else ()
        if len(choices) < 2:
            raise ValueError(f"{name}: at least 2 choices; got {self.choices!r}")
        for choice in choices:
            if not isinstance(choice, str) or not choice.strip():
                raise ValueError(f"{name}: choices must be non-empty strings; got {choice!r}")
        if len(set(choices)) != len(choices):
            dup = next(c for c in choices if choices.count(c) > 1)
            raise ValueError(f"{name}: choices must be distinct; got {dup!r} twice")
        object.__setattr__(self, "choices", choices)

    @property
    def levels(self) -> int:
        return len(self.choices)

    def index(self, choice: str) -> int:
        """Position of ``choice``; an unknown choice is a ``ValueError``."""
        if choice not in self.choices:
            known = ", ".join(map(repr, self.choices))
            raise ValueError(f"{self.name}: a choice must be one of {known}; got {choice!r}")
        return self.choices.index(choice)

    def to_unit(self, x: np.ndarray) -> np.ndarray:
        x = np.asarray(x)
        if x.dtype.kind in "UO":
            x = np.vectorize(self.index, otypes=[int])(x)
        return (np.asarray(x, dtype=float) + 0.5) / self.levels

    def from_unit(self, u: np.ndarray) -> np.ndarray:
        """The choice index (an integer array); ``choices[i]`` names it."""
        return np.clip(
            np.floor(np.asarray(u, dtype=float) * self.levels), 0, self.levels - 1
        ).astype(int)

    def snap(self, u: np.ndarray) -> np.ndarray:
        return (self.from_unit(u) + 0.5) / self.levels

    def describe(self) -> str:
        return "one of " + ", ".join(self.choices)


Parameter = Continuous | Integer | Categorical


@dataclass(frozen=True)
class Space:
    """An ordered set of named parameters; column ``j`` of a cube point is parameter ``j``."""

    parameters: tuple[Parameter, ...]

    def __post_init__(self):
        params = tuple(self.parameters)
        if not params:
            raise ValueError("a space needs at least one parameter")
        names = [p.name for p in params]
        for name in names:
            if names.count(name) > 1:
                raise ValueError(f"parameter names must be used once; got {name!r} twice")
        object.__setattr__(self, "parameters", params)

    @classmethod
    def unit_cube(cls, dim: int, names: Sequence[str] | None = None) -> Space:
        """``dim`` continuous parameters on ``[0, 1]``."""
        names = names or [f"x{i + 1}" for i in range(dim)]
        return cls(tuple(Continuous(n, 0.0, 1.0) for n in names))

    @property
    def dim(self) -> int:
        return len(self.parameters)

    @property
    def names(self) -> list[str]:
        return [p.name for p in self.parameters]

    @property
    def levels(self) -> np.ndarray:
        """Bins per coordinate, 0 for continuous ones."""
        return np.array([p.levels for p in self.parameters], dtype=int)

    @property
    def is_discrete(self) -> np.ndarray:
        """Coordinates that snap (bins, or an integer on a log scale): flat almost everywhere."""
        rounded = [isinstance(p, Continuous) and p.integer for p in self.parameters]
        return (self.levels > 0) | np.array(rounded, dtype=bool)

    def __getitem__(self, name: str) -> Parameter:
        for p in self.parameters:
            if p.name == name:
                return p
        raise KeyError(name)

    def to_unit(self, columns: Sequence[np.ndarray]) -> np.ndarray:
        """Cube points, shape ``(n, dim)``, from one array of user values per parameter."""
        return np.column_stack(
            [p.to_unit(c) for p, c in zip(self.parameters, columns, strict=True)]
        )

    def from_unit(self, U: np.ndarray) -> list[np.ndarray]:
        """User values, one array per parameter (choice indices for categorical ones)."""
        U = np.atleast_2d(U)
        return [p.from_unit(U[:, j]) for j, p in enumerate(self.parameters)]

    def to_user_array(self, U: np.ndarray) -> np.ndarray:
        """User values as one float array ``(n, dim)``; categorical columns hold choice indices."""
        return np.column_stack([c.astype(float) for c in self.from_unit(U)])

    @cached_property
    def _continuous(self) -> bool:
        return not self.is_discrete.any()

    def snap(self, U: np.ndarray) -> np.ndarray:
        """Move discrete coordinates to their bin centres and clip everything into the cube."""
        U = np.atleast_2d(np.asarray(U, dtype=float))
        if self._continuous:
            return np.clip(U, 0.0, 1.0)
        return np.column_stack([p.snap(U[:, j]) for j, p in enumerate(self.parameters)])

    def features(self, U: np.ndarray) -> np.ndarray:
        """Surrogate inputs: snapped coordinates, each categorical expanded one-hot."""
        U = self.snap(U)
        if self._continuous:
            return U
        cols = []
        for j, p in enumerate(self.parameters):
            if isinstance(p, Categorical):
                cols.append(np.eye(p.levels)[p.from_unit(U[:, j])])
            else:
                cols.append(U[:, j : j + 1])
        return np.hstack(cols)

    def format_point(self, u: np.ndarray) -> dict[str, float | int | str]:
        """One cube point as ``{name: value}`` in user units (choice names for categoricals)."""
        values = self.from_unit(np.atleast_2d(u))
        out: dict[str, float | int | str] = {}
        for p, v in zip(self.parameters, values, strict=True):
            if isinstance(p, Categorical):
                out[p.name] = p.choices[int(v[0])]
            elif isinstance(p, Integer):
                out[p.name] = int(v[0])
            else:
                out[p.name] = float(v[0])
        return out
