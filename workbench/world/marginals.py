"""The belief marginals as figures draw them: each parameter's density (or bin probabilities)
under every named belief, in the parameter's own units.

Computed from beliefs and a space, so that the grid file can store them at run time and the
report draws them from the grid alone.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field

import numpy as np

from .space import Categorical, Continuous, Space

__all__ = ["GRID_POINTS", "MarginalCurve", "marginal_curves"]

# Points of the cube grid on which continuous marginals are evaluated.
GRID_POINTS = 401


@dataclass(frozen=True)
class MarginalCurve:
    """One parameter's marginals under several beliefs.

    Continuous: ``x`` the user values of a regular cube grid u, and each density the marginal's
    density at u (per unit of the normalised range). Discrete: ``x`` the level indices 0 … k−1,
    ``labels`` their names, and each density the probability of the level,
    p_i = density(u_i) / k at the bin centres u_i = (i + ½) / k. ``optimum`` is where the
    landscape's optimum lies on the x axis (None when not known).
    """

    name: str
    unit: str
    log: bool
    labels: tuple[str, ...]
    x: np.ndarray = field(repr=False)
    densities: Mapping[str, np.ndarray] = field(repr=False)
    optimum: float | None = None

    @property
    def discrete(self) -> bool:
        return bool(self.labels)


def marginal_curves(
    space: Space,
    beliefs: Mapping[str, object],
    optimum: np.ndarray | None = None,
    grid: int = GRID_POINTS,
) -> tuple[MarginalCurve, ...]:
    """Every parameter's :class:`MarginalCurve` under ``beliefs`` (label → belief on the cube);
    ``optimum`` is a cube point."""
    u = np.linspace(0.0, 1.0, grid)
    out = []
    for j, p in enumerate(space.parameters):
        if p.levels:
            centres = (np.arange(p.levels) + 0.5) / p.levels
            labels = (
                tuple(p.choices)
                if isinstance(p, Categorical)
                else tuple(str(v) for v in range(p.lower, p.upper + 1))
            )
            x = np.arange(p.levels, dtype=float)
            dens = {k: np.exp(b.marginal(j).logpdf(centres)) / p.levels for k, b in beliefs.items()}
            # the optimum's level, as a position on the x axis (level indices)
            at = None if optimum is None else float(min(int(optimum[j] * p.levels), p.levels - 1))
        else:
            labels = ()
            x = np.asarray(p.from_unit(u), dtype=float)
            dens = {k: np.exp(b.marginal(j).logpdf(u)) for k, b in beliefs.items()}
            at = None if optimum is None else float(p.from_unit(optimum[j]))
        log = isinstance(p, Continuous) and p.log
        out.append(MarginalCurve(p.name, p.unit, log, labels, x, dens, at))
    return tuple(out)
