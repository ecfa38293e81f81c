"""The data behind the figures: sensitivity panels, regret bands, the robustness frontier."""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import xarray as xr

from ..engine.strategies import uses_quantile
from ..validation import InputError
from .dataset import POOLED, coordinate_names, guided_only, series
from .grid_metrics import belief_cost, campaign_metric
from .recommendation import Rule, score
from .statistics import Resampling, bootstrap, mean_of


def sensitivity(
    ds: xr.Dataset,
    rule: Rule,
    resampling: Resampling | None = None,
    strategy: str | None = None,
    fixed: Mapping[str, object] | None = None,
) -> xr.Dataset:
    """The metric of one strategy over decay × quantile, per distortion and under the rule.

    Dimensions (panel, decay, quantile): one panel per distortion, then one for the rule's
    score. ``estimate``, ``low``, ``high`` as in :func:`bootstrap`; ``best`` marks each
    panel's lowest cell and ``tied`` the cells whose paired bootstrap interval of the
    difference with that best includes 0 (they cannot be told apart from it). ``fixed`` gives
    the exploration and initial levels when those vary (default: the first). A strategy
    that does not use the quantile (prior-weighted) has one quantile column, NaN: a row per
    decay. ``strategy`` defaults to the grid's first strategy that uses the quantile (the
    registry says which), else its first.
    """
    rs = resampling or Resampling()
    if strategy is None:
        guided = [str(s) for s in ds["strategy"].values]
        strategy = next((s for s in guided if uses_quantile(s)), guided[0])
    values = guided_only(campaign_metric(ds, rule.metric))
    fixed = dict(fixed or {})
    keep = values["strategy"].values == strategy
    for f in ("exploration", "initial"):
        level = fixed.get(f, ds[f].values[0])
        keep &= values[f].values == level
    values = values.isel(setting=np.flatnonzero(keep))
    if values.sizes["setting"] == 0:
        raise InputError("strategy", "a strategy of the grid", strategy)
    names = coordinate_names(ds, "distortion")
    panels = [*names, rule.rule]

    def reduce(v):
        m = mean_of(v)
        return xr.concat([m, score(m, rule).expand_dims(distortion=[rule.rule])], "distortion")

    boot = bootstrap(values, reduce, resampling=rs, keep=True)
    dist = boot["distribution"].transpose("draw", "setting", "distortion").values
    est = boot["estimate"].transpose("setting", "distortion").values
    best = np.nanargmin(est, axis=0)
    diff = dist - dist[:, best, np.arange(len(panels))][:, None, :]
    alpha = (1 - rs.level) / 2
    lo, hi = np.nanquantile(diff, [alpha, 1 - alpha], axis=0)
    tied = (lo <= 0) & (hi >= 0)
    decays = list(dict.fromkeys(str(d) for d in values["decay"].values))
    # A strategy that does not use the quantile (NaN there) has one column: key -1.
    qkeys = [float(q) if np.isfinite(q) else -1.0 for q in values["quantile"].values]
    quantiles = list(dict.fromkeys(qkeys))
    shape = (len(panels), len(decays), len(quantiles))
    out = {k: np.full(shape, np.nan) for k in ("estimate", "low", "high")}
    flags = {k: np.zeros(shape, bool) for k in ("tied", "best")}
    for s in range(values.sizes["setting"]):
        di = decays.index(str(values["decay"].values[s]))
        qi = quantiles.index(qkeys[s])
        for k in ("estimate", "low", "high"):
            out[k][:, di, qi] = boot[k].transpose("setting", "distortion").values[s]
        flags["tied"][:, di, qi] = tied[s]
        flags["best"][:, di, qi] = best == s
    dims = ("panel", "decay", "quantile")
    return xr.Dataset(
        {k: (dims, v) for k, v in {**out, **flags}.items()},
        coords={
            "panel": panels,
            "decay": decays,
            "quantile": [q if q >= 0 else np.nan for q in quantiles],
        },
        attrs={
            "metric": rule.metric,
            "strategy": strategy,
            "rule": rule.rule,
            "level": rs.level,
            "draws": rs.draws,
        },
    )


def regret_bands(
    ds: xr.Dataset, settings: Sequence[str], resampling: Resampling | None = None
) -> xr.Dataset:
    """Median normalized regret over landscapes and replicates at each evaluation, with
    bootstrap bands, for ``settings`` (labels of :func:`series`); over
    (setting, distortion, evaluation)."""
    nr = series(ds).sel(setting=list(settings))
    return bootstrap(nr, lambda v: v.median(list(POOLED)), resampling=resampling)


def frontier(
    ds: xr.Dataset, metric: str = "evaluations_to_target", resampling: Resampling | None = None
) -> xr.Dataset:
    """Each belief-guided setting's benefit when the belief is exact, metric(no-belief) −
    metric(setting) at ``exact``, against its cost at its worst distortion, max over the other
    distortions of metric(setting) − metric(no-belief); paired, with bootstrap intervals.

    ``efficient`` marks the settings no other beats on both (more benefit and less cost).
    """
    cost = guided_only(belief_cost(ds, metric))
    names = coordinate_names(ds, "distortion")
    others = [n for n in names if n != "exact"] or names

    def reduce(v):
        m = mean_of(v)
        return xr.concat(
            [
                -m.sel(distortion="exact" if "exact" in names else names[0], drop=True),
                m.sel(distortion=others).max("distortion"),
            ],
            dim=xr.DataArray(["benefit", "cost"], dims="axis", name="axis"),
        )

    boot = bootstrap(cost, reduce, resampling=resampling)
    worst = mean_of(cost).sel(distortion=others).idxmax("distortion")
    b = boot["estimate"].sel(axis="benefit").values
    c = boot["estimate"].sel(axis="cost").values
    dominated = ((b[None, :] >= b[:, None]) & (c[None, :] <= c[:, None])) & (
        (b[None, :] > b[:, None]) | (c[None, :] < c[:, None])
    )
    boot["efficient"] = ("setting", ~dominated.any(axis=1))
    boot["worst"] = worst
    boot.attrs["metric"] = metric
    return boot
