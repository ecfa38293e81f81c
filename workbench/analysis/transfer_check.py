"""The transfer check: does the setting chosen in simulation also do well on the real problem?

Two grids share their belief-guided settings, distortions and decision rule: the study's
simulated grid and a grid of the same campaigns run on the truth (a table of measured
configurations, or the user's function). Each grid gives every setting a score under the rule
(lower is better). The check compares the two orders:

- **Spearman** and **Kendall** (τ-b) correlation between the simulated and the real scores of
  the settings (1: the simulation orders the settings as the real problem does);
- the **real rank** of the simulated recommendation among the settings (1 is best) and its
  **real cost**: its real score minus the best real score;
- the **transfer gap** (real score of the pick − best real score) / (median real score − best
  real score): 0 is perfect, 1 is no better than a setting picked at random (by the median);
- the same per landscape of the study, each landscape's scores alone against the real ones, so
  a user sees which landscapes rank the settings like the real problem;
- the **reliability** of the real order, its ceiling: the Spearman correlation between the real
  scores of two random halves of the real replicates (median over random splits), and its
  Spearman–Brown step-up to the whole set, 2r / (1 + r) (common practice for split-half
  reliability).

Intervals are percentile bootstrap intervals (Efron and Tibshirani 1993): each draw resamples
the replicates of the simulated grid and, independently, those of the real grid (the two grids
share no random numbers), and recomputes everything.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
import xarray as xr
from scipy.stats import rankdata

from ..engine.strategies import reference
from ..seeding import generator
from ..validation import InputError, raw
from .grid_metrics import campaign_metric
from .recommendation import Rule, decision_rule, decision_values, setting_scores
from .statistics import Resampling

__all__ = [
    "TransferCheck",
    "check_transfer",
    "difficulty",
    "kendall_tau",
    "spearman",
    "transfer_from_grids",
    "transfer_gap",
]

# Random halves for the reliability of the real order.
SPLITS = 200
# Where ``workbench transfer`` keeps the truth grid inside a study's results folder, and the
# check it writes beside the study's grid.
TRUTH_FOLDER = "truth"
TRANSFER_FILE = "transfer.json"

Scorer = Callable[[xr.DataArray], xr.DataArray]


def _ranks(x: np.ndarray) -> np.ndarray:
    """Average ranks (1 … n) along the last axis, ties sharing their mean rank."""
    return rankdata(x, axis=-1)


def spearman(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Spearman's ρ along the last axis: Pearson correlation of average ranks (NaN when either
    side has no spread)."""
    ra, rb = _ranks(np.asarray(a, float)), _ranks(np.asarray(b, float))
    ra = ra - ra.mean(axis=-1, keepdims=True)
    rb = rb - rb.mean(axis=-1, keepdims=True)
    den = np.sqrt((ra**2).sum(axis=-1) * (rb**2).sum(axis=-1))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, (ra * rb).sum(axis=-1) / den, np.nan)


def kendall_tau(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Kendall's τ-b along the last axis: (concordant − discordant) / √((n0 − t_a)(n0 − t_b)),
    n0 the number of pairs and t the pairs tied on one side."""
    a, b = np.asarray(a, float), np.asarray(b, float)
    da = np.sign(a[..., :, None] - a[..., None, :])
    db = np.sign(b[..., :, None] - b[..., None, :])
    iu = np.triu_indices(a.shape[-1], k=1)
    da, db = da[..., iu[0], iu[1]], db[..., iu[0], iu[1]]
    num = (da * db).sum(axis=-1)
    den = np.sqrt((da != 0).sum(axis=-1) * (db != 0).sum(axis=-1))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(den > 0, num / den, np.nan)


def transfer_gap(real: np.ndarray, pick: np.ndarray) -> np.ndarray:
    """(real[pick] − min real) / (median real − min real) along the last axis; 0 where every
    setting scores the same (any pick is then as good as the best)."""
    real = np.asarray(real, float)
    best = real.min(axis=-1)
    chosen = np.take_along_axis(real, np.asarray(pick)[..., None], axis=-1)[..., 0]
    spread = np.median(real, axis=-1) - best
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(spread > 0, (chosen - best) / np.where(spread > 0, spread, 1.0), 0.0)


def _real_rank(real: np.ndarray, pick: np.ndarray) -> np.ndarray:
    """Rank (1 is best, ties counted in the pick's favour) of the pick among the settings."""
    chosen = np.take_along_axis(real, np.asarray(pick)[..., None], axis=-1)
    return (real < chosen).sum(axis=-1) + 1


@dataclass(frozen=True)
class Measure:
    """An estimate with its bootstrap interval."""

    estimate: float
    low: float
    high: float

    @classmethod
    def of(cls, estimate, draws: np.ndarray, level: float) -> Measure:
        draws = np.asarray(draws, float)
        draws = draws[np.isfinite(draws)]
        if not draws.size:
            return cls(float(estimate), math.nan, math.nan)
        alpha = (1 - level) / 2
        low, high = np.quantile(draws, [alpha, 1 - alpha])
        return cls(float(estimate), float(low), float(high))

    def to_dict(self) -> dict:
        return {k: (None if math.isnan(v) else v) for k, v in vars(self).items()}


@dataclass(frozen=True)
class Row:
    """One line of the check: all landscapes of the study together, or one alone."""

    landscape: str
    pick: str
    real_rank: Measure
    real_cost: Measure
    gap: Measure
    spearman: Measure
    kendall: Measure

    def to_dict(self) -> dict:
        out = {"landscape": self.landscape, "pick": self.pick}
        for k in ("real_rank", "real_cost", "gap", "spearman", "kendall"):
            out[k] = getattr(self, k).to_dict()
        return out


@dataclass(frozen=True)
class TransferCheck:
    """The check's result; ``overall`` for the study as it stands, ``by_landscape`` each
    landscape alone; ``reliability`` the split-half Spearman of the real order and its
    Spearman–Brown step-up."""

    settings: tuple[str, ...]
    simulated: tuple[float, ...]
    real: tuple[float, ...]
    best_real: str
    overall: Row
    by_landscape: tuple[Row, ...]
    split_half: Measure
    reliability: float
    level: float
    draws: int

    def lines(self) -> list[str]:
        """The check as the command line prints it."""
        n = len(self.settings)
        o = self.overall
        pct = f"{self.level:.0%}"

        def m(x: Measure, fmt: str = ".2f") -> str:
            if math.isnan(x.low):
                return f"{x.estimate:{fmt}}"
            return f"{x.estimate:{fmt}} ({pct} interval {x.low:{fmt}} to {x.high:{fmt}})"

        out = [
            f"simulated pick: {o.pick}",
            f"  real rank: {o.real_rank.estimate:.0f} of {n} "
            f"({pct} interval {o.real_rank.low:.0f} to {o.real_rank.high:.0f}); "
            f"best on the real problem: {self.best_real}",
            f"  real cost of the pick: {m(o.real_cost)} (score above the best real setting)",
            f"  transfer gap: {m(o.gap)} (0 perfect, 1 no better than a random setting)",
            f"  Spearman, simulated vs real scores: {m(o.spearman)}",
            f"  Kendall, simulated vs real scores: {m(o.kendall)}",
            f"  reliability of the real order: split-half Spearman {self.split_half.estimate:.2f}"
            f" (middle {pct} of random splits {self.split_half.low:.2f} to "
            f"{self.split_half.high:.2f}); whole set {self.reliability:.2f} (Spearman–Brown)",
        ]
        if len(self.by_landscape) > 1:
            out.append("  by landscape (each alone): Spearman, real rank of its pick, gap")
            for r in self.by_landscape:
                out.append(
                    f"    {r.landscape}: {m(r.spearman)}; rank "
                    f"{r.real_rank.estimate:.0f} of {n}; gap {r.gap.estimate:.2f}"
                )
        return out

    def to_dict(self) -> dict:
        return {
            "settings": list(self.settings),
            "simulated_score": list(self.simulated),
            "real_score": list(self.real),
            "best_real": self.best_real,
            "overall": self.overall.to_dict(),
            "by_landscape": [r.to_dict() for r in self.by_landscape],
            "split_half_spearman": self.split_half.to_dict(),
            "reliability": self.reliability,
            "level": self.level,
            "draws": self.draws,
        }


def _order(simulated: xr.DataArray, real: xr.DataArray) -> np.ndarray:
    """Where each simulated setting's score sits among the real scores (the same settings)."""
    sim_labels = [str(v) for v in simulated["setting"].values]
    real_labels = [str(v) for v in real["setting"].values]
    missing = [s for s in sim_labels if s not in real_labels]
    if missing:
        raise InputError(
            "truth grid", "the study's belief-guided settings", raw(f"missing {missing[0]!r}")
        )
    return np.array([real_labels.index(s) for s in sim_labels])


def _scores_over(values: xr.DataArray, scorer: Scorer, index: np.ndarray) -> xr.DataArray:
    """Scores of every setting for each row of replicate indices ``index`` (draws, n)."""
    pick = xr.DataArray(index, dims=("draw", "replicate"))
    return scorer(values.isel(replicate=pick)).transpose("draw", "setting")


def check_transfer(
    simulated: xr.DataArray,
    real: xr.DataArray,
    scorer: Scorer,
    real_scorer: Scorer | None = None,
    resampling: Resampling | None = None,
) -> TransferCheck:
    """Compare the settings' scores on the simulated grid with their scores on the truth.

    ``simulated`` and ``real`` hold a per-campaign metric over (setting, landscape,
    distortion, replicate) for the belief-guided settings (the real grid has the truth as its
    only landscape); ``scorer`` turns such values into one score per setting (lower is
    better; the study's rule), ``real_scorer`` the same for the truth (default ``scorer``).
    """
    rs = resampling or Resampling()
    real_scorer = real_scorer or scorer
    sim_d = [str(d) for d in simulated["distortion"].values]
    real_d = [str(d) for d in real["distortion"].values]
    if sim_d != real_d:
        raise InputError("truth grid", f"distortions {sim_d}", raw(str(real_d)))
    rng = generator(rs.seed)
    n_sim, n_real = simulated.sizes["replicate"], real.sizes["replicate"]
    sim_index = rng.integers(0, n_sim, size=(rs.draws, n_sim))
    real_index = rng.integers(0, n_real, size=(rs.draws, n_real))
    whole_sim = np.arange(n_sim)[None, :]
    whole_real = np.arange(n_real)[None, :]

    first = _scores_over(simulated, scorer, whole_sim)
    labels = tuple(str(v) for v in first["setting"].values)
    real_first = _scores_over(real, real_scorer, whole_real)
    order = _order(first, real_first)
    real_point = real_first.values[0, order]
    real_draws = _scores_over(real, real_scorer, real_index).values[:, order]

    def row(name: str, values: xr.DataArray) -> Row:
        point = _scores_over(values, scorer, whole_sim).values[0]
        draws = _scores_over(values, scorer, sim_index).values
        pick = int(np.argmin(point))
        picks = np.argmin(draws, axis=1)
        real_best = real_point.min()
        cost_draws = np.take_along_axis(real_draws, picks[:, None], 1)[:, 0] - real_draws.min(1)
        return Row(
            landscape=name,
            pick=labels[pick],
            real_rank=Measure.of(
                _real_rank(real_point, np.array(pick)), _real_rank(real_draws, picks), rs.level
            ),
            real_cost=Measure.of(real_point[pick] - real_best, cost_draws, rs.level),
            gap=Measure.of(
                transfer_gap(real_point, np.array(pick)),
                transfer_gap(real_draws, picks),
                rs.level,
            ),
            spearman=Measure.of(spearman(point, real_point), spearman(draws, real_draws), rs.level),
            kendall=Measure.of(
                kendall_tau(point, real_point), kendall_tau(draws, real_draws), rs.level
            ),
        )

    overall = row("all", simulated)
    by_landscape = tuple(
        row(str(name), simulated.sel(landscape=[name])) for name in simulated["landscape"].values
    )

    # Reliability of the real order: random halves of the real replicates.
    half = n_real // 2
    split_rho = np.full(SPLITS, np.nan)
    if half >= 1:
        perms = np.argsort(rng.random((SPLITS, n_real)), axis=1)
        a = _scores_over(real, real_scorer, perms[:, :half]).values
        b = _scores_over(real, real_scorer, perms[:, half : 2 * half]).values
        split_rho = spearman(a, b)
    finite = split_rho[np.isfinite(split_rho)]
    if finite.size:
        alpha = (1 - rs.level) / 2
        lo, mid, hi = np.quantile(finite, [alpha, 0.5, 1 - alpha])
        split = Measure(float(mid), float(lo), float(hi))
        step_up = 2 * mid / (1 + mid) if mid > -1 else math.nan
    else:
        split, step_up = Measure(math.nan, math.nan, math.nan), math.nan
    return TransferCheck(
        settings=labels,
        simulated=tuple(float(v) for v in first.values[0]),
        real=tuple(float(v) for v in real_point),
        best_real=labels[int(np.argmin(real_point))],
        overall=overall,
        by_landscape=by_landscape,
        split_half=split,
        reliability=float(step_up),
        level=rs.level,
        draws=rs.draws,
    )


def transfer_from_grids(
    simulated: xr.Dataset,
    truth: xr.Dataset,
    rule: Rule | None = None,
    resampling: Resampling | None = None,
) -> TransferCheck:
    """The check of a study's grid against its truth grid: the simulated scores under the
    study's rule (its landscape weights and score included), the real ones under the same rule
    on the raw metric (the truth is one landscape)."""
    rule = rule or decision_rule(simulated)
    real_rule = replace(rule, score="raw", landscape_weights={}, landscape_basis="one landscape")
    return check_transfer(
        decision_values(simulated, rule),
        decision_values(truth, real_rule),
        lambda v: setting_scores(v, rule),
        lambda v: setting_scores(v, real_rule),
        resampling,
    )


def difficulty(ds: xr.Dataset) -> dict[str, float]:
    """How hard each landscape of a grid is: no-belief's mean evaluations to target with the
    exact belief (NaN-free landscapes only), to set beside the truth's."""
    ett = campaign_metric(ds, "evaluations_to_target")
    base = reference()
    if base not in [str(s) for s in ett["setting"].values]:
        return {}
    means = ett.sel(setting=base, distortion="exact").mean("replicate")
    return {str(k): float(v) for k, v in zip(means["landscape"].values, means.values, strict=True)}
