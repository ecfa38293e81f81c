"""Analysis of a grid: metrics as labelled xarray objects, bootstrap intervals, the decision
rules and the recommendation. Pure: no printing, no files written.

Every function takes the grid Dataset (``xarray.open_dataset(".../grid.nc")``, or
:func:`open_grid`) and returns labelled xarray objects. The belief-guided settings and the
baselines are put side by side along one ``setting`` dimension (:func:`series`), so that a
metric of every campaign has the dimensions (setting, landscape, distortion, replicate).

Uncertainty comes from the bootstrap over replicates. Replicate k of every setting, baseline
and distortion shares its landscape placement and random streams (common random numbers), so
each bootstrap draw resamples the replicate index once and applies it to everything alike:
differences between settings are paired.
"""

from __future__ import annotations

import json
import math
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
import xarray as xr

from ..seeding import generator
from ..validation import InputError, check_choice, check_number, raw
from . import metrics

__all__ = [
    "METRICS",
    "METRIC_NAMES",
    "NO_BELIEF",
    "RULES",
    "SETTING_FACTORS",
    "Recommendation",
    "Resampling",
    "Rule",
    "belief_cost",
    "bootstrap",
    "campaign_metric",
    "decision_rule",
    "effects",
    "evaluations_to_beat_mode",
    "evaluations_to_target",
    "final_normalized_regret",
    "frontier",
    "kaplan_meier",
    "kaplan_meier_median",
    "log_regret_area",
    "median_evaluations_to_target",
    "normalized_regret_at",
    "open_grid",
    "parse_weights",
    "recommend",
    "recovery",
    "regret_bands",
    "score",
    "sensitivity",
    "series",
    "speedup",
    "summarise",
    "wilson_interval",
]

GRID = "grid.nc"
NO_BELIEF = "no-belief"
RULES = ("expected", "minimax", "cvar")
METRICS = ("evaluations_to_target", "final_normalized_regret", "log_regret_area")
# What each decision metric is called in tables and figures, and its unit.
METRIC_NAMES = {
    "evaluations_to_target": ("evaluations to target", "evaluations"),
    "final_normalized_regret": ("final normalized regret", "normalized regret"),
    "log_regret_area": ("area under the log10 normalized-regret curve", "log10 regret"),
}
SETTING_FACTORS = ("strategy", "decay", "quantile", "exploration", "initial")
# The grid repeats these strategies' values across the quantile levels (see gridfile).
QUANTILE_FREE = ("prior-weighted",)
_CAMPAIGN = ("setting", "landscape", "distortion", "replicate")
_POOLED = ("landscape", "replicate")
# Survival that is ½ in exact arithmetic may come out a rounding error above it.
_HALF_TOLERANCE = 1e-9


# --------------------------------------------------------------------------- the grid


def open_grid(path: str | Path) -> xr.Dataset:
    """The grid Dataset of a results folder (or of a grid.nc path), loaded into memory.

    A missing file raises :class:`InputError` naming it.
    """
    path = Path(path)
    file = path / GRID if path.is_dir() or path.suffix != ".nc" else path
    if not file.is_file():
        raise InputError("DIR", f"a folder holding {GRID}", raw(f"no file at {file}"))
    with xr.open_dataset(file) as ds:
        return ds.load()


def _names(ds: xr.Dataset, dim: str) -> list[str]:
    return [str(v) for v in ds[dim].values]


def _varied(ds: xr.Dataset) -> list[str]:
    return [f for f in ("exploration", "initial") if ds.sizes[f] > 1]


def _label(strategy: str, decay: str, quantile: float, exploration, initial, varied) -> str:
    parts = [strategy, f"decay {decay}"]
    if not math.isnan(quantile):
        parts.append(f"quantile {quantile:g}")
    if "exploration" in varied:
        parts.append(f"exploration {exploration:g}")
    if "initial" in varied:
        parts.append(f"initial {initial}")
    return ", ".join(parts)


def _picks(ds: xr.Dataset) -> list[tuple[tuple[int, ...], dict]]:
    """Index (strategy, decay, quantile, exploration, initial) and factors of every setting
    the grid ran; a quantile-free strategy appears once, at its first quantile level."""
    ran = (
        ds["normalized_regret"]
        .notnull()
        .any(("landscape", "distortion", "replicate", "evaluation"))
        .transpose(*SETTING_FACTORS)
        .values
    )
    varied = _varied(ds)
    out, seen = [], set()
    for index in np.argwhere(ran):
        si, di, qi, ei, ii = (int(i) for i in index)
        strategy = str(ds["strategy"].values[si])
        quantile = float(ds["quantile"].values[qi])
        if strategy in QUANTILE_FREE:
            if (si, di, ei, ii) in seen:
                continue
            seen.add((si, di, ei, ii))
            quantile = math.nan
        factors = {
            "strategy": strategy,
            "decay": str(ds["decay"].values[di]),
            "quantile": quantile,
            "exploration": float(ds["exploration"].values[ei]),
            "initial": str(ds["initial"].values[ii]),
        }
        factors["label"] = _label(**{k: factors[k] for k in SETTING_FACTORS}, varied=varied)
        out.append(((si, di, qi, ei, ii), factors))
    return out


def series(ds: xr.Dataset, name: str = "normalized_regret") -> xr.DataArray:
    """A per-evaluation variable of every setting and baseline along one ``setting`` dimension.

    Dimensions (setting, landscape, distortion, replicate, evaluation). The setting label is
    the index; coordinates ``strategy``, ``decay``, ``quantile`` (NaN where it plays no part),
    ``exploration``, ``initial`` and ``kind`` ('guided' or 'baseline') describe each one.
    """
    rest = ("landscape", "distortion", "replicate", "evaluation")
    picks = _picks(ds)
    rows, coords = [], {k: [] for k in (*SETTING_FACTORS, "kind", "setting")}
    if picks:
        guided = ds[name].transpose(*SETTING_FACTORS, *rest).values
        for index, factors in picks:
            rows.append(guided[index])
            for k in SETTING_FACTORS:
                coords[k].append(factors[k])
            coords["kind"].append("guided")
            coords["setting"].append(factors["label"])
    if ds.sizes.get("baseline", 0):
        base = ds["baseline_" + name].transpose("baseline", *rest).values
        for b, label in enumerate(_names(ds, "baseline")):
            rows.append(base[b])
            coords["strategy"].append(label)
            coords["decay"].append("")
            coords["quantile"].append(math.nan)
            coords["exploration"].append(math.nan)
            coords["initial"].append("")
            coords["kind"].append("baseline")
            coords["setting"].append(label)
    data = np.stack(rows).astype(float)
    return xr.DataArray(
        data,
        dims=("setting", *rest),
        coords={
            "setting": coords["setting"],
            **{k: ("setting", coords[k]) for k in (*SETTING_FACTORS, "kind")},
            "landscape": ds["landscape"].values,
            "distortion": ds["distortion"].values,
            "replicate": ds["replicate"].values,
            "evaluation": ds["evaluation"].values,
        },
        name=name,
    )


def _guided(values: xr.DataArray) -> xr.DataArray:
    return values.isel(setting=np.flatnonzero(values["kind"].values == "guided"))


# --------------------------------------------------------------------------- metrics


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
    :func:`workbench.metrics.log_regret_area`."""
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


# --------------------------------------------------------------------------- reference statistics


def wilson_interval(successes, n, level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
    """Wilson score interval of a proportion k/n:
    (p + z²/2n ± z √(p(1−p)/n + z²/4n²)) / (1 + z²/n), z the normal (1+level)/2 quantile."""
    from scipy.stats import norm

    k = np.asarray(successes, dtype=float)
    n = np.asarray(n, dtype=float)
    z = norm.ppf(0.5 + level / 2)
    with np.errstate(invalid="ignore", divide="ignore"):
        p = k / n
        denom = 1 + z**2 / n
        centre = (p + z**2 / (2 * n)) / denom
        half = z / denom * np.sqrt(p * (1 - p) / n + z**2 / (4 * n**2))
    return np.clip(centre - half, 0, 1), np.clip(centre + half, 0, 1)


def kaplan_meier(times, reached) -> tuple[np.ndarray, np.ndarray]:
    """Kaplan–Meier survival S(t) = Π over event times u ≤ t of (1 − d_u / n_u), with d_u the
    events at u and n_u those still at risk (time ≥ u); returns (event times, S)."""
    t = np.asarray(times, dtype=float).ravel()
    e = np.asarray(reached, dtype=bool).ravel()
    u = np.unique(t[e])
    at_risk = (t[None, :] >= u[:, None]).sum(axis=1)
    events = ((t[None, :] == u[:, None]) & e[None, :]).sum(axis=1)
    return u, np.cumprod(1.0 - events / at_risk)


def kaplan_meier_median(times, reached) -> float:
    """Smallest event time with S(t) ≤ ½; infinite when survival stays above ½ (the median
    lies beyond the budget)."""
    u, s = kaplan_meier(times, reached)
    below = np.flatnonzero(s <= 0.5 + _HALF_TOLERANCE)
    return float(u[below[0]]) if below.size else math.inf


def _km_median(times: np.ndarray, reached: np.ndarray, budget: int) -> np.ndarray:
    """Kaplan–Meier median over the last axis for whole-number times 1 … budget, vectorised."""
    grid = np.arange(1, budget + 1, dtype=float)
    at_risk = (times[..., None, :] >= grid[:, None]).sum(axis=-1)
    events = ((times[..., None, :] == grid[:, None]) & reached[..., None, :]).sum(axis=-1)
    with np.errstate(invalid="ignore", divide="ignore"):
        factor = np.where(at_risk > 0, 1.0 - events / at_risk, 1.0)
    survival = np.cumprod(factor, axis=-1)
    below = survival <= 0.5 + _HALF_TOLERANCE
    return np.where(below.any(axis=-1), below.argmax(axis=-1) + 1.0, np.inf)


def median_evaluations_to_target(
    ds: xr.Dataset, over: Sequence[str] = _POOLED, resampling: Resampling | None = None
) -> xr.Dataset:
    """Kaplan–Meier median of evaluations to target, pooling ``over``, with bootstrap interval
    (infinite: the median lies beyond the budget)."""
    ett = evaluations_to_target(ds)
    budget = ett.attrs["budget"]

    def reduce(d):
        return xr.apply_ufunc(
            lambda t, r: _km_median(
                t.reshape(*t.shape[: -len(over)], -1),
                r.reshape(*r.shape[: -len(over)], -1).astype(bool),
                budget,
            ),
            d["evaluations"],
            d["reached"],
            input_core_dims=[list(over), list(over)],
        )

    return bootstrap(ett, reduce, resampling=resampling)


def recovery(ds: xr.Dataset, level: float = 0.95, over: Sequence[str] = _POOLED) -> xr.Dataset:
    """Share of campaigns that reached the target within the budget, with Wilson intervals;
    variables ``probability``, ``low``, ``high``, ``successes``, ``campaigns``."""
    reached = evaluations_to_target(ds)["reached"]
    k = reached.sum(list(over))
    n = reached.count(list(over))
    low, high = wilson_interval(k.values, n.values, level)
    return xr.Dataset(
        {
            "probability": k / n,
            "low": k.copy(data=low),
            "high": k.copy(data=high),
            "successes": k,
            "campaigns": n,
        },
        attrs={"level": level},
    )


# --------------------------------------------------------------------------- bootstrap


@dataclass(frozen=True)
class Resampling:
    """The bootstrap over replicates: number of draws, interval level and fixed seed."""

    draws: int = 1000
    level: float = 0.95
    seed: int = 0

    def __post_init__(self):
        check_number(self.draws, "--draws", low=1, integer=True)
        check_number(self.level, "--confidence", low=0.0, high=1.0, closed="neither")
        check_number(self.seed, "--seed", low=0, integer=True)

    def indices(self, n: int) -> np.ndarray:
        """Replicate indices of every draw, shape (draws, n): one resample per draw."""
        return generator(self.seed).integers(0, n, size=(self.draws, n))


def bootstrap(
    data: xr.DataArray | xr.Dataset,
    reduce: Callable[[xr.DataArray | xr.Dataset], xr.DataArray],
    *,
    resampling: Resampling | None = None,
    keep: bool = False,
) -> xr.Dataset:
    """Percentile bootstrap of ``reduce(data)`` over the ``replicate`` dimension.

    Each draw resamples the replicate index once (with replacement) and applies it to every
    other coordinate alike (common random numbers: paired). Returns ``estimate`` (on the data
    as they are), ``low`` and ``high`` (the (1 ∓ level)/2 percentiles of the draws) and, if
    ``keep``, the draws themselves as ``distribution`` along ``draw``.
    """
    rs = resampling or Resampling()
    index = rs.indices(data.sizes["replicate"])
    estimate = reduce(data)
    size = int(np.prod([data.sizes[d] for d in data.dims])) or 1
    batch = max(1, int(2e7 // size))
    parts = []
    for start in range(0, rs.draws, batch):
        pick = xr.DataArray(index[start : start + batch], dims=("draw", "replicate"))
        parts.append(reduce(data.isel(replicate=pick)))
    dist = xr.concat(parts, "draw") if len(parts) > 1 else parts[0]
    alpha = (1 - rs.level) / 2
    # Infinite values (a median beyond the budget) would interpolate to NaN: bound them first.
    big = np.finfo(float).max / 4
    bounds = dist.clip(-big, big).quantile([alpha, 1 - alpha], dim="draw")
    bounds = bounds.where(np.abs(bounds) < big, np.sign(bounds) * np.inf)
    out = xr.Dataset(
        {
            "estimate": estimate,
            "low": bounds.isel(quantile=0, drop=True),
            "high": bounds.isel(quantile=1, drop=True),
        },
        attrs={"level": rs.level, "draws": rs.draws, "seed": rs.seed},
    )
    if keep:
        out["distribution"] = dist
    return out


def _mean(values):
    return values.mean(list(_POOLED))


def _geometric_mean(values):
    return np.exp(np.log(values).mean(list(_POOLED)))


def summarise(
    values: xr.DataArray, resampling: Resampling | None = None, geometric: bool = False
) -> xr.Dataset:
    """Mean (geometric if ``geometric``) over landscapes and replicates of a per-campaign
    metric, with its paired bootstrap interval; over (setting, distortion)."""
    return bootstrap(values, _geometric_mean if geometric else _mean, resampling=resampling)


# --------------------------------------------------------------------------- decision rules


@dataclass(frozen=True)
class Rule:
    """A decision rule: ``expected`` (weighted mean over distortions), ``minimax`` (the worst
    distortion with positive weight) or ``cvar`` (mean of the worst ``level`` share of the
    weight), applied to ``metric`` (lower is better). ``weights`` sum to 1."""

    rule: str
    weights: Mapping[str, float]
    level: float
    metric: str

    def describe(self) -> str:
        """The rule in words, for reports and the command line."""
        w = ", ".join(f"{k} {v:.2g}" for k, v in self.weights.items())
        head = {
            "expected": f"expected {METRIC_NAMES[self.metric][0]} over distortions",
            "minimax": f"{METRIC_NAMES[self.metric][0]} at the worst distortion",
            "cvar": (
                f"mean {METRIC_NAMES[self.metric][0]} over the worst {self.level:.0%} "
                "of the distortion weight (CVaR)"
            ),
        }[self.rule]
        return f"{head} (weights {w}); lower is better"


def parse_weights(text: str, distortions: Sequence[str], key: str = "--weights") -> dict:
    """Weights from ``name=value,name=value`` text; names must be distortions of the grid."""
    out: dict[str, float] = {}
    for part in text.split(","):
        name, sep, value = part.partition("=")
        name = name.strip()
        if not sep or not name:
            raise InputError(key, "name=value pairs separated by commas", text)
        check_choice(name, key, distortions)
        try:
            number = float(value)
        except ValueError:
            raise InputError(f"{key} {name}", "a number", value.strip()) from None
        out[name] = check_number(number, f"{key} {name}", low=0.0)
    return out


def decision_rule(
    ds: xr.Dataset,
    rule: str | None = None,
    weights: Mapping[str, float] | str | None = None,
    level: float | None = None,
    metric: str | None = None,
) -> Rule:
    """The decision rule: given values, else the study's [decision] table, else expected
    evaluations to target with equal weights. Weights name distortions of the grid; unnamed
    distortions get weight 0; they must not all be 0."""
    from ..study.spec import parse_text

    decision = parse_text(ds.attrs["study"]).decision if "study" in ds.attrs else None
    names = _names(ds, "distortion")
    rule = check_choice(rule if rule is not None else decision.rule, "--rule", RULES)
    metric = check_choice(metric if metric is not None else decision.metric, "--metric", METRICS)
    level = level if level is not None else decision.level
    level = check_number(level, "--level", low=0.0, high=1.0, closed="right")
    if isinstance(weights, str):
        weights = parse_weights(weights, names)
    elif weights is not None:
        for k, v in weights.items():
            check_choice(k, "--weights", names)
            check_number(v, f"--weights {k}", low=0.0)
    else:
        weights = dict(decision.weights) if decision is not None else {}
    if not weights:
        weights = dict.fromkeys(names, 1.0)
    total = float(sum(weights.values()))
    if total <= 0:
        raise InputError("--weights", "weights that are not all 0", raw(str(dict(weights))))
    full = {n: float(weights.get(n, 0.0)) / total for n in names}
    return Rule(rule, full, float(level), metric)


def score(values: xr.DataArray, rule: Rule) -> xr.DataArray:
    """The rule's score over the ``distortion`` dimension of ``values`` (lower is better).

    expected: Σ w_d m_d; minimax: max of m_d over distortions with w_d > 0; cvar at level α:
    the mean of m over the worst α of the weight, (1/α) Σ min(w_(i), max(0, α − W_(i−1))) m_(i)
    with distortions sorted worst first and W the cumulative weight.
    """
    names = [str(d) for d in values["distortion"].values]
    w = np.array([rule.weights.get(n, 0.0) for n in names])
    m = values.transpose(..., "distortion").values
    if rule.rule == "expected":
        s = (m * w).sum(axis=-1)
    elif rule.rule == "minimax":
        s = np.where(w > 0, m, -np.inf).max(axis=-1)
    else:
        order = np.argsort(-m, axis=-1, kind="stable")
        ms = np.take_along_axis(m, order, axis=-1)
        ws = w[order]
        before = np.cumsum(ws, axis=-1) - ws
        take = np.minimum(ws, np.maximum(0.0, rule.level - before))
        s = (take * ms).sum(axis=-1) / rule.level
    template = values.isel(distortion=0, drop=True)
    return template.copy(data=s).rename("score")


# --------------------------------------------------------------------------- recommendation


def _factors(values: xr.DataArray, label: str) -> dict:
    one = values.sel(setting=label)
    out = {"setting": label}
    for k in SETTING_FACTORS:
        v = one[k].item()
        out[k] = None if isinstance(v, float) and math.isnan(v) else v
    return out


@dataclass(frozen=True)
class Recommendation:
    """The setting a rule picks, its score with interval, the runner-up, the stability (the
    share of bootstrap resamples of the replicates that pick the same setting, ties shared
    evenly) and the choice with each landscape left out."""

    rule: Rule
    choice: dict
    value: float
    interval: tuple[float, float]
    runner_up: dict | None
    stability: float
    leave_one_landscape_out: dict[str, str]
    scores: xr.Dataset = field(repr=False)
    resampling: Resampling = field(default_factory=Resampling)

    @property
    def setting(self) -> str:
        return self.choice["setting"]

    def to_dict(self) -> dict:
        """Everything as plain JSON-ready values."""
        out = {k: v for k, v in self.choice.items()}
        out.update(
            rule=self.rule.rule,
            weights=dict(self.rule.weights),
            level=self.rule.level,
            metric=self.rule.metric,
            lower_is_better=True,
            value=_plain(self.value),
            interval=[_plain(v) for v in self.interval],
            confidence=self.resampling.level,
            draws=self.resampling.draws,
            seed=self.resampling.seed,
            stability=self.stability,
            runner_up=self.runner_up,
            leave_one_landscape_out={
                k: {"setting": v, "same": v == self.setting}
                for k, v in self.leave_one_landscape_out.items()
            },
        )
        return json.loads(json.dumps(out, default=_plain))


def _plain(v):
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def recommend(
    ds: xr.Dataset,
    rule: Rule | None = None,
    resampling: Resampling | None = None,
    strategy: str | None = None,
) -> Recommendation:
    """The belief-guided setting with the lowest score under ``rule`` (default
    :func:`decision_rule` of the grid); the metric is averaged over landscapes and replicates
    in each distortion before the rule combines distortions. ``strategy`` restricts the choice
    to one strategy's settings (for example the pseudo-posterior's decay × quantile)."""
    rule = rule or decision_rule(ds)
    rs = resampling or Resampling()
    values = _guided(campaign_metric(ds, rule.metric))
    if values.sizes["setting"] == 0:
        raise InputError("strategy", "a grid with belief-guided settings", raw("none"))
    if strategy is not None:
        present = list(dict.fromkeys(str(v) for v in values["strategy"].values))
        check_choice(strategy, "--strategy", present)
        values = values.isel(setting=np.flatnonzero(values["strategy"].values == strategy))
    boot = bootstrap(values, lambda v: score(_mean(v), rule), resampling=rs, keep=True)
    estimate = boot["estimate"].values
    order = np.argsort(estimate, kind="stable")
    labels = [str(s) for s in values["setting"].values]
    best = labels[order[0]]
    # A draw counts for the choice in proportion when several settings tie at its minimum.
    draws = boot["distribution"].transpose("draw", "setting").values
    lowest = draws == draws.min(axis=1, keepdims=True)
    stability = float(np.mean(lowest[:, order[0]] / lowest.sum(axis=1)))
    runner = None
    if len(order) > 1:
        r = order[1]
        runner = _factors(values, labels[r])
        runner.update(
            value=_plain(float(estimate[r])),
            interval=[_plain(float(boot["low"].values[r])), _plain(float(boot["high"].values[r]))],
        )
    lolo = {}
    if values.sizes["landscape"] > 1:
        for name in _names(ds, "landscape"):
            rest = values.drop_sel(landscape=name)
            lolo[name] = labels[int(np.argmin(score(_mean(rest), rule).values))]
    return Recommendation(
        rule=rule,
        choice=_factors(values, best),
        value=float(estimate[order[0]]),
        interval=(float(boot["low"].values[order[0]]), float(boot["high"].values[order[0]])),
        runner_up=runner,
        stability=stability,
        leave_one_landscape_out=lolo,
        scores=boot.drop_vars("distribution"),
        resampling=rs,
    )


# --------------------------------------------------------------------------- figure data


def sensitivity(
    ds: xr.Dataset,
    rule: Rule,
    resampling: Resampling | None = None,
    strategy: str = "pseudo-posterior",
    fixed: Mapping[str, object] | None = None,
) -> xr.Dataset:
    """The metric of one strategy over decay × quantile, per distortion and under the rule.

    Dimensions (panel, decay, quantile): one panel per distortion, then one for the rule's
    score. ``estimate``, ``low``, ``high`` as in :func:`bootstrap`; ``best`` marks each
    panel's lowest cell and ``tied`` the cells whose paired bootstrap interval of the
    difference with that best includes 0 (they cannot be told apart from it). ``fixed`` gives
    the exploration and initial levels when those vary (default: the first).
    """
    rs = resampling or Resampling()
    values = _guided(campaign_metric(ds, rule.metric))
    fixed = dict(fixed or {})
    keep = values["strategy"].values == strategy
    for f in ("exploration", "initial"):
        level = fixed.get(f, ds[f].values[0])
        keep &= values[f].values == level
    values = values.isel(setting=np.flatnonzero(keep))
    if values.sizes["setting"] == 0:
        raise InputError("strategy", "a strategy of the grid", strategy)
    names = _names(ds, "distortion")
    panels = [*names, rule.rule]

    def reduce(v):
        m = _mean(v)
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
    quantiles = list(dict.fromkeys(float(q) for q in values["quantile"].values))
    shape = (len(panels), len(decays), len(quantiles))
    out = {k: np.full(shape, np.nan) for k in ("estimate", "low", "high")}
    flags = {k: np.zeros(shape, bool) for k in ("tied", "best")}
    for s in range(values.sizes["setting"]):
        di = decays.index(str(values["decay"].values[s]))
        qi = quantiles.index(float(values["quantile"].values[s]))
        for k in ("estimate", "low", "high"):
            out[k][:, di, qi] = boot[k].transpose("setting", "distortion").values[s]
        flags["tied"][:, di, qi] = tied[s]
        flags["best"][:, di, qi] = best == s
    dims = ("panel", "decay", "quantile")
    return xr.Dataset(
        {k: (dims, v) for k, v in {**out, **flags}.items()},
        coords={"panel": panels, "decay": decays, "quantile": quantiles},
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
    return bootstrap(nr, lambda v: v.median(list(_POOLED)), resampling=resampling)


def frontier(
    ds: xr.Dataset, metric: str = "evaluations_to_target", resampling: Resampling | None = None
) -> xr.Dataset:
    """Each belief-guided setting's benefit when the belief is exact, metric(no-belief) −
    metric(setting) at ``exact``, against its cost at its worst distortion, max over the other
    distortions of metric(setting) − metric(no-belief); paired, with bootstrap intervals.

    ``efficient`` marks the settings no other beats on both (more benefit and less cost).
    """
    cost = _guided(belief_cost(ds, metric))
    names = _names(ds, "distortion")
    others = [n for n in names if n != "exact"] or names

    def reduce(v):
        m = _mean(v)
        return xr.concat(
            [
                -m.sel(distortion="exact" if "exact" in names else names[0], drop=True),
                m.sel(distortion=others).max("distortion"),
            ],
            dim=xr.DataArray(["benefit", "cost"], dims="axis", name="axis"),
        )

    boot = bootstrap(cost, reduce, resampling=resampling)
    worst = _mean(cost).sel(distortion=others).idxmax("distortion")
    b = boot["estimate"].sel(axis="benefit").values
    c = boot["estimate"].sel(axis="cost").values
    dominated = ((b[None, :] >= b[:, None]) & (c[None, :] <= c[:, None])) & (
        (b[None, :] > b[:, None]) | (c[None, :] < c[:, None])
    )
    boot["efficient"] = ("setting", ~dominated.any(axis=1))
    boot["worst"] = worst
    boot.attrs["metric"] = metric
    return boot


# --------------------------------------------------------------------------- effects


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
