"""The audit before a campaign: what earlier evaluations say about the belief.

Three questions, each answered from the data and, where a grid is given, from the simulation:

1. **Where do the good evaluations sit in the belief?** The best share of the data (the
   study's threshold quantile, or ``top``) and each one's highest-density level under the
   belief (the share of belief mass denser than it). Were the belief exact and the good points
   spread like it, the levels would be uniform on [0, 1]: a median near 0.5 and 10 % of them
   beyond the 90 % region.
2. **Where do the data put the optimum?** A GP fitted to the data (as for fitted landscapes),
   ``draws`` posterior draws and the argmin of each; the probability that the optimum lies
   inside the belief's 50 % and 90 % highest-density regions (the share of argmins whose level
   is at most 0.5 or 0.9, so it grows with the region); the distance from the belief's mode to
   the median argmin (cube units, i.e. fractions of each range) and the belief's mass within
   the severity radius of it: the same measures the distortions report.
3. **Which simulated distortion is most like this?** The study's distortion whose mean
   severity (distance, mass) is nearest; with the grid, what it costs the recommended setting
   against no belief.

Levels, the mode and the mass are read from the belief's fixed sample
(:class:`~workbench.world.reference.BeliefReference`), the one the monitor and the
distortions' severity read.

The verdict: ``consistent`` when the data put the optimum inside the belief's 90 % region with
probability at least ``CONSISTENT_AT``, ``contradicted`` below ``CONTRADICTED_BELOW``,
``doubtful`` between.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..world import kinds
from ..world.history import History
from ..world.reference import Belief, BeliefReference

__all__ = [
    "CONSISTENT_AT",
    "CONTRADICTED_BELOW",
    "Audit",
    "audit",
    "nearest_distortion",
    "study_severities",
    "to_dict",
]

CONSISTENT_AT = 0.5
CONTRADICTED_BELOW = 0.1
# Posterior draws of the data's GP whose argmins say where the optimum is.
DRAWS = 64


@dataclass(frozen=True)
class Audit:
    """What :func:`audit` found; cube coordinates throughout (the edge converts to units)."""

    rows: int
    top: float
    good: np.ndarray = field(repr=False)  # (k, d) cube points of the best share
    good_levels: np.ndarray = field(repr=False)  # (k,)
    argmins: np.ndarray = field(repr=False)  # (draws, d)
    argmin_levels: np.ndarray = field(repr=False)  # (draws,)
    median_argmin: np.ndarray = field(repr=False)  # (d,)
    mode: np.ndarray = field(repr=False)  # (d,)
    distance: float
    mass_within: float
    radius: float
    inside_50: float
    inside_90: float
    verdict: str
    distortion: str | None = None
    distortion_distances: dict[str, tuple[float, float]] = field(default_factory=dict)
    cost: tuple[float, float, float] | None = None  # belief cost of the recommended setting
    setting: str | None = None

    @property
    def good_median_level(self) -> float:
        return float(np.median(self.good_levels))

    @property
    def good_outside_90(self) -> float:
        return float(np.mean(self.good_levels > 0.9))


def _verdict(inside_90: float) -> str:
    if inside_90 >= CONSISTENT_AT:
        return "consistent"
    if inside_90 < CONTRADICTED_BELOW:
        return "contradicted"
    return "doubtful"


def nearest_distortion(
    distance: float, mass: float, severities: dict[str, tuple[float, float]]
) -> str | None:
    """The distortion whose (distance, mass) is nearest (Euclidean: both are shares of a unit)."""
    if not severities:
        return None
    return min(
        severities, key=lambda k: np.hypot(severities[k][0] - distance, severities[k][1] - mass)
    )


def audit(
    history: History,
    belief: Belief,
    *,
    top: float,
    radius: float,
    rng: np.random.Generator,
    draws: int = DRAWS,
    severities: dict[str, tuple[float, float]] | None = None,
) -> Audit:
    """Audit ``belief`` against ``history`` (see the module docstring); ``severities`` are the
    study's distortions' mean (distance, mass within ``radius``), for the nearest match."""
    k = max(1, int(np.ceil(top * history.rows)))
    order = np.argsort(history.y, kind="stable")
    good = history.X[order[:k]]
    ref = BeliefReference.of(belief)
    good_levels = ref.level(good)
    argmins = kinds.Fitted.from_history(history).optima(draws, rng)
    argmin_levels = ref.level(argmins)
    median = np.median(argmins, axis=0)
    mode = ref.mode
    inside_50 = float(np.mean(argmin_levels <= 0.5))
    inside_90 = float(np.mean(argmin_levels <= 0.9))
    distance = float(np.linalg.norm(mode - median))
    mass = ref.mass_within(median, radius)
    severities = severities or {}
    return Audit(
        rows=history.rows,
        top=top,
        good=good,
        good_levels=good_levels,
        argmins=argmins,
        argmin_levels=argmin_levels,
        median_argmin=median,
        mode=mode,
        distance=distance,
        mass_within=mass,
        radius=radius,
        inside_50=inside_50,
        inside_90=inside_90,
        verdict=_verdict(inside_90),
        distortion=nearest_distortion(distance, mass, severities),
        distortion_distances=dict(severities),
    )


def study_severities(study, ds=None, replicates: int = 4) -> dict[str, tuple[float, float]]:
    """Mean (distance, mass within the severity radius) of each of the study's distortions,
    over its landscapes that are placed at the belief (textbook and drawn): from the grid when
    given, else from the cells of the first ``replicates`` replicates (no campaign runs)."""
    from ..study.cells import Cell

    placed = [i for i, e in enumerate(study.landscapes) if e.placed_at_belief]
    out = {}
    for di, d in enumerate(study.distortions):
        if ds is not None and placed:
            sel = {"landscape": placed, "distortion": di}
            dist = float(ds["severity_distance"].isel(sel).mean())
            mass = float(ds["severity_mass"].isel(sel).mean())
        elif placed:
            cells = [
                Cell(study, li, di, r).severity
                for li in placed
                for r in range(min(replicates, study.replicates))
            ]
            dist = float(np.mean([c.distance for c in cells]))
            mass = float(np.mean([c.mass_within for c in cells]))
        else:
            continue
        out[d.name] = (dist, mass)
    return out


def to_dict(a: Audit, space) -> dict:
    """The audit as plain JSON-ready values (points in user units)."""
    return {
        "verdict": a.verdict,
        "thresholds": {"consistent_at": CONSISTENT_AT, "contradicted_below": CONTRADICTED_BELOW},
        "rows": a.rows,
        "top": a.top,
        "good_levels": [float(v) for v in a.good_levels],
        "good_median_level": a.good_median_level,
        "good_outside_90": a.good_outside_90,
        "inside_50": a.inside_50,
        "inside_90": a.inside_90,
        "median_optimum": space.format_point(a.median_argmin),
        "belief_mode": space.format_point(a.mode),
        "distance": a.distance,
        "mass_within": a.mass_within,
        "radius": a.radius,
        "distortion": a.distortion,
        "distortions": {
            k: {"distance": d, "mass": m} for k, (d, m) in a.distortion_distances.items()
        },
        "setting": a.setting,
        "belief_cost": None
        if a.cost is None
        else dict(zip(("estimate", "low", "high"), a.cost, strict=True)),
    }
