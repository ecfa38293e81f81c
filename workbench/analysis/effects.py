"""How much of a metric's variation each setting factor explains (the effects table)."""

from __future__ import annotations

import json

import numpy as np
import xarray as xr

from . import metrics
from .statistics import Resampling


def _grid_metric(ds: xr.Dataset, metric: str) -> xr.DataArray:
    """The metric on the grid's own dimensions (the belief-guided strategies only)."""
    nr = ds["normalized_regret"]
    if metric == "evaluations_to_target":
        t, _ = metrics.evaluations_to_target(nr.values, float(ds.attrs["target"]))
        t = np.where(nr.isnull().all("evaluation").values, np.nan, t)
    elif metric == "final_normalized_regret":
        t = nr.isel(evaluation=-1).values
    else:
        with np.errstate(all="ignore"):
            t = metrics.log_regret_area(nr.values)
    return nr.isel(evaluation=0, drop=True).copy(data=t)


def _drop_incomplete(y: xr.DataArray, factors: list[str]) -> tuple[xr.DataArray, list[str]]:
    """Drop factor levels holding NaN (combinations the study does not run) until the array is
    complete; the dropped levels are returned as notes."""
    notes = []
    while bool(y.isnull().any()):
        worst, share = None, -1.0
        for f in factors:
            if y.sizes[f] < 2:
                continue
            frac = y.isnull().mean([d for d in y.dims if d != f]).values
            i = int(np.argmax(frac))
            if frac[i] > share:
                worst, share = (f, i), float(frac[i])
        if worst is None:
            break
        f, i = worst
        notes.append(f"{f} {y[f].values[i]}")
        y = y.drop_isel({f: i})
    return y, notes


def _sums_of_squares(y: np.ndarray, factors: int) -> tuple[np.ndarray, float, float]:
    """Balanced ANOVA on y with shape (*levels, replicates): sums of squares of each main
    effect then each two-way interaction (pairs in itertools order), within-cell SS, total SS."""
    import itertools

    r = y.shape[-1]
    cells = y.mean(axis=-1)
    grand = cells.mean()
    n = y.size
    axes = list(range(factors))
    out = []
    means = {}
    for a in axes:
        m = cells.mean(axis=tuple(x for x in axes if x != a))
        means[a] = m
        out.append(n / m.size * ((m - grand) ** 2).sum())
    for a, b in itertools.combinations(axes, 2):
        m = cells.mean(axis=tuple(x for x in axes if x not in (a, b)))
        inter = m - means[a][:, None] - means[b][None, :] + grand
        out.append(n / m.size * (inter**2).sum())
    within = float(((y - cells[..., None]) ** 2).sum()) if r > 1 else 0.0
    return np.array(out), within, float(((y - grand) ** 2).sum())


def effects(
    ds: xr.Dataset, metric: str = "evaluations_to_target", resampling: Resampling | None = None
) -> xr.Dataset:
    """Variance decomposition of the metric over the factors that vary (strategy, decay,
    quantile, exploration, initial, distortion, landscape): ANOVA sums of squares of the main
    effects and two-way interactions, the higher-order remainder and the replicate-to-replicate
    (within-cell) part, each as a share of the total sum of squares with a bootstrap interval.

    Levels of a combination the study does not run are dropped first (named in the
    ``dropped`` attribute), so that the array is complete.
    """
    import itertools

    rs = resampling or Resampling()
    y = _grid_metric(ds, metric)
    candidates = ("strategy", "decay", "quantile", "exploration", "initial", "distortion")
    factors = [f for f in (*candidates, "landscape") if y.sizes[f] > 1]
    y, dropped = _drop_incomplete(y, factors)
    factors = [f for f in factors if y.sizes[f] > 1]
    y = y.squeeze([d for d in y.dims if d not in (*factors, "replicate")], drop=True)
    y = y.transpose(*factors, "replicate").values
    sources = [*factors, *(f"{a} × {b}" for a, b in itertools.combinations(factors, 2))]
    sources += ["higher-order interactions", "replicates (within cells)"]

    def shares(arr):
        ss, within, total = _sums_of_squares(arr, len(factors))
        rest = max(total - ss.sum() - within, 0.0)
        full = np.concatenate([ss, [rest, within]])
        return full, full / total if total > 0 else np.zeros_like(full)

    ss, share = shares(y)
    index = rs.indices(y.shape[-1])
    draws = np.array([shares(y[..., i])[1] for i in index])
    alpha = (1 - rs.level) / 2
    lo, hi = np.quantile(draws, [alpha, 1 - alpha], axis=0)
    order = [1] * len(factors) + [2] * (len(sources) - len(factors) - 2) + [3, 0]
    return xr.Dataset(
        {
            "sum_of_squares": ("source", ss),
            "share": ("source", share),
            "low": ("source", lo),
            "high": ("source", hi),
            "order": ("source", order),
        },
        coords={"source": sources},
        attrs={
            "metric": metric,
            "factors": json.dumps(factors),
            "dropped": json.dumps(dropped),
            "level": rs.level,
        },
    )
