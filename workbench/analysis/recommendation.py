"""Decision rules over distortions and the recommendation they give."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import xarray as xr

from ..validation import InputError, check_choice, check_number, raw
from .dataset import METRIC_NAMES, METRICS, RULES, SETTING_FACTORS, coordinate_names, guided_only
from .grid_metrics import campaign_metric
from .statistics import Resampling, bootstrap, mean_of


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


def stored_decision(ds: xr.Dataset) -> dict:
    """The study's [decision] table as the grid file stores it (attributes written at run time;
    a grid without them gives the defaults: expected evaluations to target, equal weights)."""
    a = ds.attrs
    return {
        "rule": str(a.get("decision_rule", "expected")),
        "weights": json.loads(a.get("decision_weights", "{}")),
        "level": float(a.get("decision_level", 0.25)),
        "metric": str(a.get("decision_metric", "evaluations_to_target")),
        "landscapes": json.loads(a.get("decision_landscapes", "{}")),
        "score": str(a.get("decision_score", "raw")),
    }


def decision_rule(
    ds: xr.Dataset,
    rule: str | None = None,
    weights: Mapping[str, float] | str | None = None,
    level: float | None = None,
    metric: str | None = None,
) -> Rule:
    """The decision rule: given values, else the study's [decision] table (stored in the grid,
    :func:`stored_decision`), else expected evaluations to target with equal weights. Weights
    name distortions of the grid; unnamed distortions get weight 0; they must not all be 0."""
    decision = stored_decision(ds)
    names = coordinate_names(ds, "distortion")
    rule = check_choice(rule if rule is not None else decision["rule"], "--rule", RULES)
    metric = check_choice(metric if metric is not None else decision["metric"], "--metric", METRICS)
    level = level if level is not None else decision["level"]
    level = check_number(level, "--level", low=0.0, high=1.0, closed="right")
    if isinstance(weights, str):
        weights = parse_weights(weights, names)
    elif weights is not None:
        for k, v in weights.items():
            check_choice(k, "--weights", names)
            check_number(v, f"--weights {k}", low=0.0)
    else:
        weights = dict(decision["weights"])
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


def short_number(value) -> str:
    """A number as the command line shows it: four significant digits."""
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


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

    def lines(self) -> list[str]:
        """The recommendation as the command line prints it, one line each: the setting, the
        rule, the value with its interval, the runner-up, the stability, each landscape left
        out."""
        name, unit = METRIC_NAMES[self.rule.metric]
        level = f"{self.resampling.level:.0%}"
        lo, hi = self.interval
        out = [
            f"recommendation: {self.setting}",
            f"  rule ({self.rule.rule}): {self.rule.describe()}",
            f"  {name}: {short_number(self.value)} {unit} "
            f"({level} interval {short_number(lo)} to {short_number(hi)})",
        ]
        if self.runner_up is not None:
            ru = self.runner_up
            lo, hi = ru["interval"]
            out.append(
                f"  runner-up: {ru['setting']}: {short_number(ru['value'])} "
                f"({short_number(lo)} to {short_number(hi)})"
            )
        out.append(
            f"  stability: {self.stability:.0%} of {self.resampling.draws} bootstrap resamples "
            f"of the replicates pick the same setting"
        )
        for landscape, choice in self.leave_one_landscape_out.items():
            same = "the same" if choice == self.setting else choice
            out.append(f"  without landscape {landscape}: {same}")
        return out

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
    values = guided_only(campaign_metric(ds, rule.metric))
    if values.sizes["setting"] == 0:
        raise InputError("strategy", "a grid with belief-guided settings", raw("none"))
    if strategy is not None:
        present = list(dict.fromkeys(str(v) for v in values["strategy"].values))
        check_choice(strategy, "--strategy", present)
        values = values.isel(setting=np.flatnonzero(values["strategy"].values == strategy))
    boot = bootstrap(values, lambda v: score(mean_of(v), rule), resampling=rs, keep=True)
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
        for name in coordinate_names(ds, "landscape"):
            rest = values.drop_sel(landscape=name)
            lolo[name] = labels[int(np.argmin(score(mean_of(rest), rule).values))]
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
