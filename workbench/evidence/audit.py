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
``doubtful`` between; but first, whether the data can support a verdict at all
(:func:`support`): at least ``MIN_ROWS_PER_PARAMETER`` rows per parameter, and at most
``MAX_UNSUPPORTED_SHARE`` of the optimum draws on the bounds of the space or outside the data's
bounding box (there the GP extrapolates: its optimum is the prior's, not the data's). Otherwise
the verdict is ``too little data to judge``, with what would be needed, and no distortion is
matched. Draws farther than ``FAR_FROM_DATA`` from every evaluation are marked.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..world import kinds
from ..world.history import FAR_FROM_DATA, History, distance_to_data
from ..world.reference import Belief, BeliefReference
from .wording import most_like

__all__ = [
    "BOUND_TOLERANCE",
    "BOX_MARGIN",
    "CONSISTENT_AT",
    "CONTRADICTED_BELOW",
    "FAR_FROM_DATA",
    "MAX_UNSUPPORTED_SHARE",
    "MIN_ROWS_PER_PARAMETER",
    "TOO_LITTLE",
    "Audit",
    "Support",
    "audit",
    "nearest_distortion",
    "study_severities",
    "support",
    "to_dict",
]

CONSISTENT_AT = 0.5
CONTRADICTED_BELOW = 0.1
# Posterior draws of the data's GP whose argmins say where the optimum is.
DRAWS = 64

# When the data can support a verdict (cube units: fractions of each parameter's range).
# Common practice: a GP surrogate wants about 10 points per dimension to be trusted globally
# (an initial design of 10·d); 5 per parameter is the least we judge a belief on.
MIN_ROWS_PER_PARAMETER = 5
# A draw's coordinate this close to 0 or 1 sits on the bounds of the space.
BOUND_TOLERANCE = 0.01
# A draw's coordinate beyond the data's range by more than this is outside their bounding box.
BOX_MARGIN = 0.02
# Largest share of optimum draws on the bounds or outside the data's box for a verdict.
MAX_UNSUPPORTED_SHARE = 0.25
TOO_LITTLE = "too little data to judge"


@dataclass(frozen=True)
class Support:
    """Whether the data can support a verdict: ``rows`` and ``dim``; the shares of optimum
    draws ``on_bounds`` (a coordinate within ``BOUND_TOLERANCE`` of a bound), ``outside_box``
    (beyond the data's range by more than ``BOX_MARGIN``) and ``unsupported`` (either);
    ``far`` (draws,) marks draws farther than ``FAR_FROM_DATA`` from every evaluation;
    ``needs`` says what is missing (empty: enough)."""

    rows: int
    dim: int
    on_bounds: float
    outside_box: float
    unsupported: float
    far: np.ndarray = field(repr=False)
    needs: tuple[str, ...]

    @property
    def enough(self) -> bool:
        return not self.needs


def support(X: np.ndarray, argmins: np.ndarray) -> Support:
    """How far the data ``X`` (n, d) support the optimum draws ``argmins`` (draws, d), cube
    points (see :class:`Support`)."""
    X, argmins = np.atleast_2d(X), np.atleast_2d(argmins)
    n, d = X.shape
    bounds = np.any((argmins <= BOUND_TOLERANCE) | (argmins >= 1 - BOUND_TOLERANCE), axis=1)
    low, high = X.min(axis=0) - BOX_MARGIN, X.max(axis=0) + BOX_MARGIN
    box = np.any((argmins < low) | (argmins > high), axis=1)
    nearest = distance_to_data(argmins, X)
    unsupported = float(np.mean(bounds | box))
    needs = []
    if n < MIN_ROWS_PER_PARAMETER * d:
        needs.append(
            f"at least {MIN_ROWS_PER_PARAMETER} rows per parameter "
            f"({MIN_ROWS_PER_PARAMETER * d} for {d}); got {n} for {d}"
        )
    if unsupported > MAX_UNSUPPORTED_SHARE:
        needs.append(
            f"at most {MAX_UNSUPPORTED_SHARE:.0%} of the optimum draws on the bounds of the "
            f"space or outside the data's bounding box; got {unsupported:.0%} (evaluations "
            f"nearer to where the draws go would settle it)"
        )
    return Support(
        rows=n,
        dim=d,
        on_bounds=float(np.mean(bounds)),
        outside_box=float(np.mean(box)),
        unsupported=unsupported,
        far=nearest > FAR_FROM_DATA,
        needs=tuple(needs),
    )


@dataclass(frozen=True)
class Audit:
    """What :func:`audit` found; cube coordinates throughout (the edge converts to units)."""

    rows: int
    top: float
    support: Support
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
    response: str = ""
    goal: str = "minimise"
    goal_source: str = ""

    @property
    def good_median_level(self) -> float:
        return float(np.median(self.good_levels))

    @property
    def good_outside_90(self) -> float:
        return float(np.mean(self.good_levels > 0.9))

    @property
    def most_like(self) -> str | None:
        """The matched distortion in the monitor's words (:mod:`.wording`), or None."""
        if self.distortion is None:
            return None
        d, m = self.distortion_distances[self.distortion]
        return most_like(self.distortion, "audit", f"distance {d:.2f}, mass {100 * m:.0f} %")


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
    enough = support(history.X, argmins)
    return Audit(
        rows=history.rows,
        top=top,
        support=enough,
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
        verdict=_verdict(inside_90) if enough.enough else TOO_LITTLE,
        # The median optimum of draws the data do not support matches no distortion.
        distortion=nearest_distortion(distance, mass, severities) if enough.enough else None,
        distortion_distances=dict(severities),
        response=history.response,
        goal=history.goal,
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
    s = a.support
    return {
        "response": a.response,
        "goal": a.goal,
        "goal_source": a.goal_source,
        "verdict": a.verdict,
        "thresholds": {
            "consistent_at": CONSISTENT_AT,
            "contradicted_below": CONTRADICTED_BELOW,
            "min_rows_per_parameter": MIN_ROWS_PER_PARAMETER,
            "max_unsupported_share": MAX_UNSUPPORTED_SHARE,
            "bound_tolerance": BOUND_TOLERANCE,
            "box_margin": BOX_MARGIN,
            "far_from_data": FAR_FROM_DATA,
        },
        "support": {
            "enough": s.enough,
            "needs": list(s.needs),
            "rows_per_parameter": s.rows / s.dim,
            "draws_on_bounds": s.on_bounds,
            "draws_outside_data_box": s.outside_box,
            "draws_far_from_data": float(np.mean(s.far)),
        },
        "rows": a.rows,
        "top": a.top,
        "good_levels": [float(v) for v in a.good_levels],
        "good_median_level": a.good_median_level,
        "good_outside_90": a.good_outside_90,
        "inside_50": a.inside_50,
        "inside_90": a.inside_90,
        "median_optimum": space.format_point(a.median_argmin),
        "optimum_draws": [
            {"point": space.format_point(u), "far_from_data": bool(f)}
            for u, f in zip(a.argmins, s.far, strict=True)
        ],
        "belief_mode": space.format_point(a.mode),
        "distance": a.distance,
        "mass_within": a.mass_within,
        "radius": a.radius,
        "distortion": a.distortion,
        "most_like": a.most_like,
        "distortions": {
            k: {"distance": d, "mass": m} for k, (d, m) in a.distortion_distances.items()
        },
        "setting": a.setting,
        "belief_cost": None
        if a.cost is None
        else dict(zip(("estimate", "low", "high"), a.cost, strict=True)),
    }
