"""What the report says, computed once from the grid: the recommendation, the tables' numbers
and the figures' data, with the formatting helpers every section shares.
"""

from __future__ import annotations

import html
import math
from dataclasses import dataclass
from pathlib import Path

import xarray as xr

from .. import analysis as an
from ..analysis.transfer_check import TransferCheck, transfer_from_grids
from ..engine.strategies import uses_belief, uses_quantile
from .page import Group

REPORT = "report.html"
SUMMARY = "summary.md"
FIGURES = "figures"
__all__ = ["Content", "Group", "ReportFiles", "compute_content"]
DPI = 110

DECAY_TEXT = {
    "hyperbolic": "λ(t) = β/t: the belief counts as β evaluations' worth",
    "exponential": "λ(t) = exp(−t/τ)",
    "step": "λ(t) = 1 for the first k evaluations, then 0",
    "linear": "λ(t) = max(0, 1 − t/T)",
    "constant": "λ(t) = c: the belief never washes out",
}


@dataclass(frozen=True)
class ReportFiles:
    """What :func:`write_report` wrote."""

    html: Path
    summary: Path
    figures: tuple[Path, ...]


def escape(text) -> str:
    return html.escape(str(text), quote=True)


def num(v, digits: int = 3) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return "–"
    v = float(v)
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    if abs(v) >= 1000:
        return f"{v:.0f}"
    return f"{v:.{digits}g}"


def pct(v) -> str:
    return f"{100 * float(v):.0f} %"


def span(lo, hi) -> str:
    """An interval in running text."""
    return f"{num(lo)} to {num(hi)}"


def cell(value, lo, hi, fmt=None) -> tuple[str, str]:
    """A table cell: the value, and its interval shown beneath it."""
    fmt = fmt or num
    return fmt(value), f"[{fmt(lo)}, {fmt(hi)}]"


def beyond_budget(budget: int):
    """Number format for medians that may lie beyond the budget."""

    def fmt(v) -> str:
        return f"> {budget}" if v is not None and math.isinf(float(v)) else num(v)

    return fmt


# --------------------------------------------------------------------------- computing


@dataclass
class Content:
    """Everything the page shows, computed once."""

    ds: xr.Dataset
    rule: an.Rule
    rs: an.Resampling
    rec: an.Recommendation
    pseudo_posterior: an.Recommendation | None
    shown: list[str]
    ett: xr.Dataset
    km: xr.Dataset
    recovery: xr.Dataset
    speedup: xr.Dataset | None
    cost: xr.Dataset | None
    beat: xr.Dataset
    beat_share: xr.DataArray
    regret_at: xr.Dataset
    decision: xr.Dataset
    distance: xr.DataArray
    mass: xr.DataArray
    sensitivity: xr.Dataset | None
    bands: xr.Dataset
    frontier: xr.Dataset | None
    effects: xr.Dataset
    transfer: xr.Dataset | None = None
    truth: TransferCheck | None = None
    truth_grid: xr.Dataset | None = None
    resemblance: xr.Dataset | None = None
    # One sensitivity Dataset per belief-guided strategy (the quantile's user first).
    sensitivities: tuple[xr.Dataset, ...] = ()


RESEMBLANCE_VARIABLES = (
    "landscape_kind",
    "resemblance",
    "resemblance_low",
    "resemblance_high",
    "resemblance_likelihood",
    "resemblance_measure",
    "resemblance_placements",
)


def resemblance_of(ds: xr.Dataset) -> xr.Dataset | None:
    """How well each landscape explains the study's earlier evaluations, as the grid stores
    it (see :mod:`workbench.study.gridfile`); None when the grid has no such data."""
    if "resemblance" not in ds:
        return None
    return ds[[v for v in RESEMBLANCE_VARIABLES if v in ds]]


def compute_content(
    ds: xr.Dataset, rule: an.Rule, rs: an.Resampling, truth: xr.Dataset | None = None
) -> Content:
    """The page's numbers from the grid (and the truth grid of ``workbench transfer``, if any:
    the transfer check)."""
    rec = an.recommend(ds, rule, rs)
    baselines = [str(b) for b in ds["baseline"].values]
    shown = [rec.setting]
    if rec.runner_up is not None:
        shown.append(rec.runner_up["setting"])
    shown += baselines
    has_none = an.NO_BELIEF in baselines
    beat = an.evaluations_to_beat_mode(ds)
    nr_at = an.normalized_regret_at(ds).sel(setting=shown)
    sens = pp = None
    # The strategy whose decay and quantile the sensitivity grid shows (the registry says
    # which strategies use the quantile): its planner needs them even when another wins.
    with_quantile = [str(s) for s in ds["strategy"].values if uses_quantile(str(s))]
    if with_quantile:
        name = with_quantile[0]
        pp = rec if rec.choice["strategy"] == name else an.recommend(ds, rule, rs, strategy=name)
        fixed = {k: rec.choice[k] for k in ("exploration", "initial")}
        sens = an.sensitivity(ds, rule, rs, name, fixed)
    guided = [str(s) for s in ds["strategy"].values if uses_belief(str(s))]
    fixed = {k: rec.choice[k] for k in ("exploration", "initial")}
    every = [sens] if sens is not None else []
    every += [an.sensitivity(ds, rule, rs, s, fixed) for s in guided if s not in with_quantile[:1]]
    return Content(
        ds=ds,
        rule=rule,
        rs=rs,
        rec=rec,
        pseudo_posterior=pp,
        shown=shown,
        ett=an.summarise(an.campaign_metric(ds, "evaluations_to_target"), rs),
        km=an.median_evaluations_to_target(ds, resampling=rs),
        recovery=an.recovery(ds, level=rs.level),
        speedup=an.summarise(an.speedup(ds), rs, geometric=True) if has_none else None,
        cost=an.summarise(an.belief_cost(ds), rs) if has_none else None,
        beat=an.summarise(beat["evaluations"], rs),
        beat_share=beat["reached"].mean(["landscape", "replicate"]),
        regret_at=an.bootstrap(
            nr_at, lambda v: v.median(["landscape", "replicate"]), resampling=rs
        ),
        decision=an.summarise(an.campaign_metric(ds, rule.metric), rs),
        distance=ds["severity_distance"].mean(["landscape", "replicate"]),
        mass=ds["severity_mass"].mean(["landscape", "replicate"]),
        sensitivity=sens,
        bands=an.regret_bands(ds, shown, rs),
        frontier=an.frontier(ds, rule.metric, rs) if has_none else None,
        effects=an.effects(ds, rule.metric, rs),
        transfer=an.transfer(ds, rule, rs) if len(set(an.landscape_kinds(ds))) > 1 else None,
        truth=transfer_from_grids(ds, truth, rule, rs) if truth is not None else None,
        truth_grid=truth,
        resemblance=resemblance_of(ds),
        sensitivities=tuple(every),
    )
