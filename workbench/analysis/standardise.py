"""Scores that no landscape dominates by its scale: a metric standardised within each landscape
before landscapes are combined.

A plain mean over landscapes lets the landscapes with the widest spread between settings decide:
an easy landscape (target in a few evaluations) spreads the settings over several evaluations,
while a hard one sits at the budget for every setting (censored: no spread) and so adds the same
number to every setting. Standardising within each landscape × distortion first puts every
landscape on one scale:

- :func:`ranks`: the settings' ranks in each landscape × distortion, normalised to [0, 1]
  (0 the best, 1 the worst; ties share their average rank, so a landscape where every setting
  ties gives everyone ½);
- :func:`saving`: the saving against the no-belief baseline in units of the metric's spread
  over the settings, ``(baseline − metric) / spread`` (higher is better); a landscape where the
  settings tie contributes 0;
- :func:`raw`: the metric as it is.

:func:`standardise` applies one of them oriented so that lower is better (as the decision
rules want), :func:`over_landscapes` takes the weighted mean over landscapes (what
:func:`workbench.analysis.recommendation.score` then combines over distortions) and
:func:`combine` also averages over distortions: one score per setting.

The inputs are per-campaign metrics as :func:`workbench.analysis.grid_metrics.campaign_metric`
gives them: dimensions (setting, landscape, distortion, replicate), lower is better. By default
the replicates are averaged first (so a resample of the replicates, as the paired bootstrap
draws them, is standardised as a whole).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np
import xarray as xr
from scipy.stats import rankdata

from ..study.spec import SCORES
from ..validation import InputError, check_choice, check_number
from ..validation import raw as raw_text
from .dataset import NO_BELIEF

__all__ = [
    "AVERAGED",
    "METHODS",
    "SPREADS",
    "TIE_FLOOR",
    "combine",
    "over_landscapes",
    "ranks",
    "raw",
    "saving",
    "standardise",
]

METHODS = SCORES
SPREADS = ("sd", "iqr")
# A landscape × distortion whose spread over settings is at most this fraction of the largest
# |metric| there (settings and baseline) counts as a tie and contributes 0 under `saving`.
# For evaluations to target with a budget of 20 that is 0.02 evaluations: less than one
# campaign in 32 replicates differing by one evaluation.
TIE_FLOOR = 1e-3
# Dimensions averaged before standardising.
AVERAGED = ("replicate",)


def _averaged(values: xr.DataArray, over: Sequence[str]) -> xr.DataArray:
    dims = [d for d in over if d in values.dims]
    return values.mean(dims) if dims else values


def _check(values: xr.DataArray) -> None:
    missing = [d for d in ("setting", "landscape") if d not in values.dims]
    if missing:
        raise ValueError(
            f"'values' must have the dimensions setting and landscape; got {values.dims}"
        )


def raw(values: xr.DataArray) -> xr.DataArray:
    """The metric as it is (lower is better)."""
    _check(values)
    out = values.copy()
    out.attrs.update(standardised="raw", lower_is_better=1)
    return out


def _normalised_ranks(a: np.ndarray) -> np.ndarray:
    """Average ranks along the last axis, NaN left out, mapped to [0, 1]: (r − 1)/(k − 1) with
    k the non-NaN count; ½ where k = 1."""
    r = rankdata(a, axis=-1, nan_policy="omit")
    k = np.sum(~np.isnan(a), axis=-1, keepdims=True).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(k > 1, (r - 1.0) / (k - 1.0), 0.5)
    return np.where(np.isnan(a), np.nan, out)


def ranks(values: xr.DataArray, *, average_over: Sequence[str] = AVERAGED) -> xr.DataArray:
    """The settings' ranks within each landscape × distortion (every index but ``setting``),
    normalised to [0, 1]: ``(r − 1) / (k − 1)`` with ``r`` the average rank (ties share it;
    rank 1 the lowest metric) among the ``k`` settings with a value. 0 is the best setting,
    1 the worst; where every setting ties, each gets ½. ``average_over`` (default: the
    replicates) is averaged first. Unchanged by any increasing transform of the metric that is
    applied after that average, within one landscape or to all.
    """
    _check(values)
    mean = _averaged(values, average_over)
    out = xr.apply_ufunc(
        _normalised_ranks,
        mean,
        input_core_dims=[["setting"]],
        output_core_dims=[["setting"]],
    ).transpose(*mean.dims)
    out.attrs.update(standardised="ranks", lower_is_better=1)
    return out.rename(f"{values.name or 'metric'}_rank")


def _spread(values: xr.DataArray, spread: str) -> xr.DataArray:
    if spread == "sd":
        # The settings are the whole set compared, not a sample of them: ddof = 0.
        return values.std("setting", ddof=0, skipna=True)
    # numpy's default (linear) percentiles; xarray's quantile would clash with the setting
    # axis's `quantile` coordinate.
    return xr.apply_ufunc(
        lambda a: np.subtract(*np.nanpercentile(a, [75, 25], axis=-1)),
        values,
        input_core_dims=[["setting"]],
    )


def saving(
    values: xr.DataArray,
    baseline: str | xr.DataArray = NO_BELIEF,
    *,
    spread: str = "sd",
    floor: float = TIE_FLOOR,
    average_over: Sequence[str] = AVERAGED,
    with_baseline: bool = False,
) -> xr.DataArray:
    """The saving against the baseline in units of the metric's spread over the settings,
    within each landscape × distortion (higher is better):

        saving = (b − m) / s,   s = sd over settings (ddof 0) or their interquartile range,

    after averaging ``average_over`` (default: the replicates); with ``with_baseline`` the
    spread is taken over the settings and the baseline together, which bounds the saving
    (|b − m| / sd ≤ √(2(k + 1)) for k settings) where the settings barely differ among themselves
    but all differ much from the baseline. ``baseline`` is a setting label
    of ``values`` (default no-belief; that row is then left out of the result and of the
    spread) or a DataArray without ``setting``. Where ``s ≤ floor · max(|m|, |b|)`` (the
    settings tie, for instance all censored at the budget) every setting's saving is 0, not
    ±inf: that landscape × distortion contributes nothing. Multiplying a landscape's metric
    (baseline included) by a positive constant changes nothing.
    """
    _check(values)
    check_choice(spread, "spread", SPREADS)
    floor = check_number(floor, "floor", low=0.0)
    if isinstance(baseline, str):
        labels = [str(s) for s in values["setting"].values]
        if baseline not in labels:
            raise InputError(
                "baselines", f"a grid with the {baseline!r} baseline", raw_text("a grid without it")
            )
        base = values.sel(setting=baseline, drop=True)
        values = values.isel(setting=[i for i, s in enumerate(labels) if s != baseline])
    else:
        base = baseline
    m = _averaged(values, average_over)
    b = _averaged(base, average_over)
    pool = m
    if with_baseline:
        bare = m.drop_vars([c for c in m.coords if "setting" in m[c].dims])
        pool = xr.concat([bare, b.expand_dims("setting")], "setting", coords="minimal")
    s = _spread(pool, spread)
    size = np.maximum(abs(m).max("setting", skipna=True), abs(b))
    tie = s <= floor * size
    ratio = (b - m) / s.where(~tie, 1.0)
    out = xr.where(tie & m.notnull(), 0.0, ratio).transpose(*m.dims)
    out.attrs.update(standardised="saving", spread=spread, floor=floor, lower_is_better=0)
    return out.rename(f"{values.name or 'metric'}_saving")


def standardise(
    values: xr.DataArray,
    method: str = "raw",
    baseline: str | xr.DataArray = NO_BELIEF,
    **options,
) -> xr.DataArray:
    """``values`` standardised by ``method`` (one of ``METHODS``), oriented so that lower is
    better: ``raw`` and ``ranks`` as they are, ``saving`` negated (a standardised belief cost,
    ``(m − b) / s``). A ``baseline`` given as a label is left out of the result for every
    method (the baseline is not a candidate); ``options`` go to :func:`ranks` or
    :func:`saving`.
    """
    check_choice(method, "standardise", METHODS)
    if method == "saving":
        out = -saving(values, baseline, **options)
        out.attrs.update(lower_is_better=1)
        return out
    if isinstance(baseline, str) and baseline in [str(s) for s in values["setting"].values]:
        values = values.drop_sel(setting=baseline)
    return raw(values) if method == "raw" else ranks(values, **options)


def _weights(weights: Mapping[str, float] | None, names: Sequence[str], key: str) -> np.ndarray:
    """Weights over ``names`` summing to 1: equal if None; unnamed names get 0."""
    if weights is None:
        return np.full(len(names), 1.0 / len(names))
    for name, value in weights.items():
        check_choice(name, key, names)
        check_number(value, f"{key} {name}", low=0.0)
    w = np.array([float(weights.get(n, 0.0)) for n in names])
    if not w.sum() > 0:
        raise InputError(key, "weights that are not all 0", raw_text(str(dict(weights))))
    return w / w.sum()


def _weighted_mean(values: xr.DataArray, dim: str, weights, key: str) -> xr.DataArray:
    names = [str(v) for v in values[dim].values]
    w = xr.DataArray(_weights(weights, names, key), dims=(dim,), coords={dim: values[dim]})
    # NaN stays NaN: a setting missing on a weighted landscape has no score.
    return (values * w).sum(dim, skipna=False)


def over_landscapes(
    standardised: xr.DataArray, landscape_weights: Mapping[str, float] | None = None
) -> xr.DataArray:
    """Σ_l w_l x[setting, l, …] with the weights normalised to sum 1 (equal if None; landscapes
    not named get 0), after averaging any ``replicate`` dimension; dimensions (setting,
    distortion) for :func:`workbench.analysis.recommendation.score`."""
    out = _weighted_mean(
        _averaged(standardised, AVERAGED), "landscape", landscape_weights, "landscape_weights"
    )
    out.attrs.update(standardised.attrs)
    return out


def combine(
    standardised: xr.DataArray,
    landscape_weights: Mapping[str, float] | None = None,
    distortion_weights: Mapping[str, float] | None = None,
) -> xr.DataArray:
    """One score per setting: ``Σ_l Σ_d w_l v_d x[setting, l, d]`` (replicates averaged), with
    each set of weights normalised to sum 1 (equal if None; names left out get 0). The
    orientation is the input's (``attrs['lower_is_better']``)."""
    out = over_landscapes(standardised, landscape_weights)
    if "distortion" in out.dims:
        out = _weighted_mean(out, "distortion", distortion_weights, "distortion_weights")
    out.attrs.update(standardised.attrs)
    return out.rename("score")
