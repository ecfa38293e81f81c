"""A table of measured configurations as the truth: campaigns on the real response cost a lookup.

The table holds configurations (cube points of the study's space; integer and categorical
coordinates at their bin centres) and the measured response in the minimising orientation.
A campaign's point is looked up in one of two ways:

- **exact**: every coordinate is matched to a measured position on its axis (a discrete
  parameter to its level; a continuous one to the nearest value measured on that axis, which
  is exact on a table measured on a grid), and the configuration of those positions is read
  from the table; a configuration the table lacks is a failed evaluation (NaN).
- **nearest**: the measured configuration nearest to the point, by Euclidean distance in cube
  units (each parameter's range scaled to 1; a categorical level at its bin centre), suits
  tables that are not grids, such as the logs of past campaigns.

The landscape's minimum is the table's smallest response, at its row. Placement keeps the
truth where it was measured (a table is never moved to the belief).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .landscapes import Landscape

__all__ = ["LOOKUPS", "MeasuredTable", "TableLookup"]

LOOKUPS = ("exact", "nearest")


def _positions(X: np.ndarray, levels: np.ndarray) -> tuple[np.ndarray, ...]:
    """Measured positions of every axis: the bin centres of a discrete axis, the distinct
    measured values of a continuous one."""
    out = []
    for j, k in enumerate(levels):
        out.append((np.arange(k) + 0.5) / k if k > 0 else np.unique(X[:, j]))
    return tuple(out)


def _nearest_index(values: np.ndarray, grid: np.ndarray) -> np.ndarray:
    """Index of the nearest entry of the sorted ``grid`` for each value (ties to the lower)."""
    i = np.clip(np.searchsorted(grid, values), 1, max(len(grid) - 1, 1))
    lower = grid[i - 1] if len(grid) > 1 else grid[np.zeros_like(i)]
    upper = grid[np.minimum(i, len(grid) - 1)]
    return np.where(np.abs(values - lower) <= np.abs(upper - values), i - 1, i).clip(
        0, len(grid) - 1
    )


@dataclass(frozen=True)
class TableLookup:
    """The table as a function of cube points (n, d) → values (n,); pickles for workers."""

    X: np.ndarray = field(repr=False)
    y: np.ndarray = field(repr=False)
    levels: np.ndarray = field(repr=False)
    lookup: str = "exact"

    def __post_init__(self):
        positions = _positions(self.X, self.levels)
        keys = self._keys(self.X, positions)
        order = np.lexsort(keys.T[::-1])
        object.__setattr__(self, "_positions", positions)
        object.__setattr__(self, "_sorted_keys", keys[order])
        object.__setattr__(self, "_sorted_rows", order)
        if self.lookup == "nearest":
            from scipy.spatial import cKDTree

            object.__setattr__(self, "_tree", cKDTree(self.X))

    @staticmethod
    def _keys(U: np.ndarray, positions) -> np.ndarray:
        return np.stack([_nearest_index(U[:, j], grid) for j, grid in enumerate(positions)], axis=1)

    def rows(self, U: np.ndarray) -> np.ndarray:
        """The table row each cube point reads (−1 where an exact lookup finds none)."""
        U = np.atleast_2d(np.asarray(U, dtype=float))
        if self.lookup == "nearest":
            return self._tree.query(U)[1]
        keys = self._keys(U, self._positions)
        # Row-wise search of the sorted keys: a structured view compares rows as records.
        view = np.dtype([(f"k{j}", keys.dtype) for j in range(keys.shape[1])])
        table = np.ascontiguousarray(self._sorted_keys).view(view).ravel()
        query = np.ascontiguousarray(keys).view(view).ravel()
        at = np.searchsorted(table, query).clip(0, len(table) - 1)
        found = table[at] == query
        return np.where(found, self._sorted_rows[at], -1)

    def __call__(self, U: np.ndarray) -> np.ndarray:
        rows = self.rows(U)
        return np.where(rows >= 0, self.y[np.maximum(rows, 0)], np.nan)


@dataclass(frozen=True)
class MeasuredTable:
    """Measured configurations as a landscape kind (``table``): cube points ``X``, values to
    minimise ``y``, the space's ``levels`` (0 for a continuous parameter) and the ``lookup``.

    Raises ``ValueError`` naming the first pair of data rows that measure the same
    configuration (by their ``lines`` in the file when given, else 1 = the first data row), and
    when every response is the same.
    """

    X: tuple[tuple[float, ...], ...]
    y: tuple[float, ...]
    levels: tuple[int, ...]
    source: str
    lookup: str = "exact"
    digest: str = ""
    response: str = ""
    goal: str = "minimise"
    lines: tuple[int, ...] = field(default=(), repr=False, compare=False)
    kind: str = field(default="table", init=False)
    placed_at_belief: bool = field(default=False, init=False)

    def __post_init__(self):
        if self.lookup not in LOOKUPS:
            raise ValueError(f"lookup must be one of {LOOKUPS}; got {self.lookup!r}")
        f = self.function()
        keys = f._sorted_keys
        same = np.flatnonzero((keys[1:] == keys[:-1]).all(axis=1))
        if same.size:
            a, b = sorted(f._sorted_rows[[same[0], same[0] + 1]])
            if self.lines:
                a, b = self.lines[a], self.lines[b]
                raise ValueError(f"lines {a} and {b} measure the same configuration")
            raise ValueError(f"data rows {a + 1} and {b + 1} measure the same configuration")
        if np.ptp(np.asarray(self.y)) == 0:
            raise ValueError("every response has the same value")

    @property
    def minimum_estimated(self) -> bool:
        return False

    def function(self) -> TableLookup:
        return TableLookup(
            np.asarray(self.X, dtype=float),
            np.asarray(self.y, dtype=float),
            np.asarray(self.levels, dtype=int),
            self.lookup,
        )

    def landscape(self, name: str, dim: int, rng: np.random.Generator | None = None) -> Landscape:
        """The table on the unit cube; ``rng`` is not used (the truth is one and fixed)."""
        y = np.asarray(self.y, dtype=float)
        best = int(np.argmin(y))
        return Landscape(
            name=name,
            dim=dim,
            lower=(0.0,) * dim,
            upper=(1.0,) * dim,
            minimum=float(y[best]),
            minimisers=(tuple(float(v) for v in self.X[best]),),
            source=self.source,
            function=self.function(),
        )
