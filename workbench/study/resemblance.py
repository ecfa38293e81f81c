"""How well each landscape of a study explains the study's earlier evaluations: one row per
landscape, from the measures of :mod:`workbench.world.resemblance`.

The earlier evaluations are those of the first landscape that reads them (a fitted or likedata
landscape: cube points ``X``, values to minimise ``y``, their ``source``). Each landscape is
scored by what it is:

- placed landscapes (textbook, drawn, likedata) and the user's table or function: the rank
  agreement (Spearman) of the landscape's values at the data's configurations with the
  measured responses, the median over the first replicate placements (:data:`PLACEMENTS`;
  :data:`BUILT_PLACEMENTS` for surfaces built per replicate, each of which costs a minimum
  search), with a bootstrap interval over the data rows; and the log marginal likelihood per
  point of the data under a GP fitted to the landscape's values at a Sobol design
  (:data:`DESIGN_POINTS` points, the first :data:`LIKELIHOOD_PLACEMENTS` distinct placements);
- fitted landscapes, trained on the data: the leave-one-out rank agreement and log predictive
  density per point of the GP fitted to the data (never a point the model saw).

Placements are those of the exact distortion's cells (:class:`.cells.Cell`), the ones the
campaigns face. Every measure is larger-is-better. The rank agreement reads 1 when the
landscape orders the data as measured, 0 when it does no better than chance, below 0 when it
orders them against the measurements. The likelihood cannot tell a landscape from its mirror
image (a zero-mean GP gives z and −z the same density); the rank agreement can.

GP fits run with one BLAS thread (``threadpoolctl``): with more, these small fits are many
times slower on a shared machine.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..seeding import derive, generator
from ..world import resemblance as rs
from ..world.history import fit_to_rows
from .cells import Cell
from .spec import Study

__all__ = [
    "BUILT_PLACEMENTS",
    "DESIGN_POINTS",
    "LIKELIHOOD_PLACEMENTS",
    "PLACEMENTS",
    "Evaluations",
    "LandscapeResemblance",
    "ResemblanceTable",
    "earlier_evaluations",
    "resemblance_table",
    "table_lines",
]

# Replicate placements scored for rank agreement (at most the study's replicates); surfaces
# built per replicate (drawn, likedata) cost a minimum search each, so fewer of them.
PLACEMENTS = 8
BUILT_PLACEMENTS = 4
# Distinct placements whose GP is fitted for the likelihood, and the size of its Sobol design.
LIKELIHOOD_PLACEMENTS = 2
DESIGN_POINTS = 64
# Kinds that read the earlier evaluations, and the kinds built anew per replicate.
_READERS = ("fitted", "likedata")
_BUILT = ("drawn", "likedata")
_ONE_PLACEMENT = ("table", "function")
# Bootstrap draws of the rank intervals, and their level.
DRAWS = 1000
LEVEL = 0.95

READING = (
    "rank agreement 1: orders the data as measured; 0: no better than chance; negative: "
    "against it (log likelihood per point: higher is better)"
)


@dataclass(frozen=True, eq=False)
class Evaluations:
    """The study's earlier evaluations: cube points ``X`` (n, d), values to minimise ``y``
    (n,), and where they come from (``source``, e.g. "25 evaluations in bakery.csv")."""

    X: np.ndarray
    y: np.ndarray
    source: str


@dataclass(frozen=True)
class LandscapeResemblance:
    """One landscape's row: ``measure`` names the rank measure (``rank_agreement``, or
    ``loo_rank_agreement`` for a fitted landscape), ``estimate`` its value with the interval
    ``(low, high)``; ``likelihood`` the log marginal likelihood per point (for a fitted
    landscape the leave-one-out log predictive density per point); ``placements`` how many
    replicate placements the rank agreement is the median of (0 for a fitted landscape)."""

    landscape: str
    kind: str
    measure: str
    estimate: float
    low: float
    high: float
    likelihood: float
    placements: int

    @property
    def how(self) -> str:
        """The measure in words."""
        if self.measure == "loo_rank_agreement":
            return "leave-one-out of the GP fitted to the data"
        if self.placements == 1:
            return "Spearman, one placement"
        return f"Spearman, median of {self.placements} placements"


@dataclass(frozen=True)
class ResemblanceTable:
    """The rows of every landscape, the data's ``source``, their number ``n`` and the
    intervals' ``level``."""

    rows: tuple[LandscapeResemblance, ...]
    source: str
    n: int
    level: float = LEVEL


def earlier_evaluations(study: Study) -> Evaluations | None:
    """The earlier evaluations of the first landscape that reads them, or None."""
    for entry in study.landscapes:
        if entry.kind in _READERS:
            spec = entry.spec
            return Evaluations(
                np.asarray(spec.X, dtype=float), np.asarray(spec.y, dtype=float), spec.source
            )
    return None


def _exact(study: Study) -> int:
    names = [d.name for d in study.distortions]
    return names.index("exact") if "exact" in names else 0


def _placements(study: Study, index: int, limit: int) -> list:
    entry = study.landscapes[index]
    if entry.kind in _ONE_PLACEMENT:
        count = 1
    else:
        count = min(study.replicates, BUILT_PLACEMENTS if entry.kind in _BUILT else limit)
    d = _exact(study)
    return [Cell(study, index, d, r).placement for r in range(count)]


def _placed_row(
    study: Study, index: int, data: Evaluations, noise: float, limit: int, points: np.ndarray
) -> LandscapeResemblance:
    entry = study.landscapes[index]
    placements = _placements(study, index, limit)
    values = np.array([p.value(data.X) for p in placements])
    # A configuration where any placement fails (a table without it, a function that
    # raised) is left out; fewer than 3 left: no ranking to speak of.
    keep = np.isfinite(values).all(axis=0)
    estimate = low = high = math.nan
    if keep.sum() >= 3:
        rank = rs.rank_agreement(
            values[:, keep],
            data.y[keep],
            draws=DRAWS,
            level=LEVEL,
            seed=generator(derive(study.seed, "resemblance", entry.label)),
        )
        estimate, low, high = rank.estimate, rank.low, rank.high
    # The likelihood on the first few distinct placements (a textbook landscape placed at the
    # belief's mode is the same in every replicate).
    design = np.array([p.value(points) for p in placements])
    _, first = np.unique(design, axis=0, return_index=True)
    design = design[np.sort(first)][:LIKELIHOOD_PLACEMENTS]
    likelihood = math.nan
    if np.isfinite(design).all() and np.ptp(design, axis=1).min() > 0:
        likelihood = rs.likelihood_agreement(
            points, design, data.X, data.y, noise_variance=noise, level=LEVEL
        ).estimate
    return LandscapeResemblance(
        entry.label, entry.kind, "rank_agreement", estimate, low, high, likelihood, len(placements)
    )


def _fitted_row(study: Study, index: int) -> LandscapeResemblance:
    entry = study.landscapes[index]
    rank, density = rs.loo_agreement(
        entry.spec.model(),
        draws=DRAWS,
        level=LEVEL,
        seed=generator(derive(study.seed, "resemblance", entry.label)),
    )
    return LandscapeResemblance(
        entry.label,
        entry.kind,
        rank.measure,
        rank.estimate,
        rank.low,
        rank.high,
        density.estimate,
        0,
    )


def resemblance_table(
    study: Study, replicates: int = PLACEMENTS, data: Evaluations | None = None
) -> ResemblanceTable | None:
    """One row per landscape of ``study`` (see the module docstring); None when the study has
    no earlier evaluations. ``replicates`` caps the placements scored for rank agreement;
    ``data`` replaces the study's earlier evaluations (a fitted landscape is still scored by
    leave-one-out on its own data).

    On the demo study (4 landscapes, 25 evaluations, 2-D) this takes about 2 s of one core,
    most of it the minimum searches of the drawn surfaces.
    """
    from threadpoolctl import threadpool_limits

    data = earlier_evaluations(study) if data is None else data
    if data is None:
        return None
    points = rs.design(data.X.shape[1], DESIGN_POINTS)
    rows = []
    with threadpool_limits(1):
        # The data's own noise, estimated once (standardised units; see likelihood_agreement).
        noise = fit_to_rows(data.X, data.y, rng=np.random.default_rng(0)).hyperparameters
        for index, entry in enumerate(study.landscapes):
            if entry.kind == "fitted":
                rows.append(_fitted_row(study, index))
            else:
                rows.append(
                    _placed_row(study, index, data, noise.noise_variance, replicates, points)
                )
    return ResemblanceTable(tuple(rows), data.source, int(data.y.size))


def _fmt(v: float, digits: int = 2) -> str:
    return "–" if not math.isfinite(v) else f"{v:+.{digits}f}"


def table_lines(table: ResemblanceTable) -> list[str]:
    """The table as lines of text for the command line: a heading naming the data, a reading
    guide, then one line per landscape."""
    level = f"{100 * table.level:.0f} %"
    head = ("landscape", "kind", f"rank agreement [{level}]", "log lik./point", "measure")
    body = [
        (
            r.landscape,
            r.kind,
            f"{_fmt(r.estimate)} [{_fmt(r.low)}, {_fmt(r.high)}]",
            _fmt(r.likelihood),
            r.how,
        )
        for r in table.rows
    ]
    widths = [max(len(str(row[j])) for row in (head, *body)) for j in range(len(head))]
    lines = [
        f"How well each landscape explains the earlier evaluations ({table.source}):",
        f"  {READING}.",
    ]
    for row in (head, *body):
        cells = (str(v).ljust(w) for v, w in zip(row, widths, strict=True))
        lines.append(("  " + "  ".join(cells)).rstrip())
    return lines
