"""Metrics of every campaign in the grid, as labelled xarray objects (the array versions are in
:mod:`workbench.analysis.metrics`).
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import xarray as xr

from ..validation import InputError, check_choice, check_number, raw
from . import metrics
from .dataset import METRICS, NO_BELIEF, series


def normalized_regret_at(ds: xr.Dataset, budgets: Sequence[int] | None = None) -> xr.DataArray:
    """Normalized regret after t evaluations, t in ``budgets`` (default: a quarter, half and
    all of the budget); dimensions (setting, landscape, distortion, replicate, budget)."""
    nr = series(ds)
    budget = nr.sizes["evaluation"]
    if budgets is None:
        budgets = sorted({max(1, budget // 4), max(1, budget // 2), budget})
    budgets = [check_number(b, "budgets", low=1, high=budget, integer=True) for b in budgets]
    out = nr.sel(evaluation=budgets).rename(evaluation="budget")
    return out.rename("normalized_regret_at")


def final_normalized_regret(ds: xr.Dataset) -> xr.DataArray:
    """Normalized regret after the whole budget, per campaign."""
    return series(ds).isel(evaluation=-1, drop=True).rename("final_normalized_regret")


def evaluations_to_target(ds: xr.Dataset) -> xr.Dataset:
    """First evaluation with normalized regret ≤ the grid's ``target``, censored at the budget.

    Variables ``evaluations`` (the budget where the target was not reached) and ``reached``,
    over (setting, landscape, distortion, replicate).
    """
    nr = series(ds)
    t, reached = metrics.evaluations_to_target(nr.values, float(ds.attrs["target"]))
    return _censored(nr, t, reached)


def _censored(like: xr.DataArray, t: np.ndarray, reached: np.ndarray) -> xr.Dataset:
    template = like.isel(evaluation=0, drop=True)
    return xr.Dataset(
        {
            "evaluations": template.copy(data=t),
            "reached": template.copy(data=reached),
        },
        attrs={"budget": int(like.sizes["evaluation"])},
    )


def evaluations_to_beat_mode(ds: xr.Dataset) -> xr.Dataset:
    """First evaluation whose best value is below ``mode_value`` (the value at the belief's
    mode, the expert's best guess), censored at the budget; as :func:`evaluations_to_target`."""
    best = series(ds, "best")
    beaten = (best < ds["mode_value"]).values
    reached = beaten.any(axis=-1)
    t = np.where(reached, beaten.argmax(axis=-1) + 1, best.sizes["evaluation"]).astype(float)
    return _censored(best, t, reached)


def log_regret_area(ds: xr.Dataset) -> xr.DataArray:
    """Mean over evaluations of log10 normalized regret (floored), per campaign; see
    :func:`workbench.analysis.metrics.log_regret_area`."""
    nr = series(ds)
    return nr.isel(evaluation=0, drop=True).copy(data=metrics.log_regret_area(nr.values))


def campaign_metric(ds: xr.Dataset, metric: str = "evaluations_to_target") -> xr.DataArray:
    """A decision metric per campaign (lower is better): evaluations to target (censored at
    the budget, so its mean is the restricted mean), final normalized regret, or the area
    under the log normalized-regret curve."""
    check_choice(metric, "--metric", METRICS)
    if metric == "evaluations_to_target":
        return evaluations_to_target(ds)["evaluations"].rename(metric)
    if metric == "final_normalized_regret":
        return final_normalized_regret(ds)
    return log_regret_area(ds).rename(metric)


def _no_belief(values: xr.DataArray) -> xr.DataArray:
    if NO_BELIEF not in values["setting"].values:
        raise InputError(
            "baselines", f"a grid with the {NO_BELIEF!r} baseline", raw("a grid without it")
        )
    return values.sel(setting=NO_BELIEF, drop=True)


def speedup(ds: xr.Dataset) -> xr.DataArray:
    """ett(no-belief) / ett(setting), paired by replicate (censored values at the budget);
    above 1 the belief saves evaluations."""
    ett = evaluations_to_target(ds)["evaluations"]
    return (_no_belief(ett) / ett).rename("speedup")


def belief_cost(ds: xr.Dataset, metric: str = "evaluations_to_target") -> xr.DataArray:
    """metric(setting) − metric(no-belief), paired by replicate; in evaluations for evaluations
    to target. Negative is a saving."""
    values = campaign_metric(ds, metric)
    return (values - _no_belief(values)).rename("belief_cost")
