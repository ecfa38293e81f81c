"""Decision rules over distortions and the recommendation they give."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace

import numpy as np
import xarray as xr

from ..engine.strategies import reference
from ..study.spec import EQUAL, RESEMBLANCE, SCORES, Decision
from ..validation import InputError, check_choice, check_number, raw
from .dataset import (
    METRIC_NAMES,
    METRICS,
    RULES,
    SETTING_FACTORS,
    coordinate_names,
    guided_only,
    landscape_kinds,
)
from .edges import Edge, edge_lines, edge_snippet, study_edges
from .grid_metrics import campaign_metric
from .standardise import over_landscapes, standardise
from .statistics import Resampling, bootstrap


@dataclass(frozen=True)
class Rule:
    """A decision rule: ``expected`` (weighted mean over distortions), ``minimax`` (the worst
    distortion with positive weight) or ``cvar`` (mean of the worst ``level`` share of the
    weight), applied to ``metric`` (lower is better). ``weights`` sum to 1.

    Before distortions are combined, the metric is standardised within each landscape by
    ``score`` (:mod:`.standardise`: ``raw``, ``ranks`` or ``saving``) and averaged over
    landscapes with ``landscape_weights`` (summing to 1; empty means equal), chosen as
    ``landscape_basis`` says."""

    rule: str
    weights: Mapping[str, float]
    level: float
    metric: str
    landscape_weights: Mapping[str, float] = field(default_factory=dict)
    score: str = "raw"
    landscape_basis: str = "equal weights"

    def weights_over(self, landscapes: Sequence[str]) -> dict[str, float] | None:
        """The landscape weights restricted to ``landscapes`` and renormalised; None (equal)
        when the rule has none or gives them all 0."""
        w = {n: float(self.landscape_weights.get(n, 0.0)) for n in landscapes}
        if not self.landscape_weights or sum(w.values()) <= 0:
            return None
        return w

    def landscapes_text(self) -> str:
        """How landscapes are combined, in words."""
        score = {
            "raw": "the metric as it is",
            "ranks": "the settings' ranks within each landscape",
            "saving": "the saving against no belief in units of each landscape's spread",
        }[self.score]
        if self.landscape_weights:
            w = ", ".join(f"{k} {v:.2g}" for k, v in self.landscape_weights.items())
            return f"landscapes weighted {w} ({self.landscape_basis}); score: {score}"
        why = "" if self.landscape_basis == "equal weights" else f" ({self.landscape_basis})"
        return f"landscapes weighted equally{why}; score: {score}"

    def describe(self) -> str:
        """The rule in words, for reports and the command line: the weights it uses (minimax
        uses only which distortions have weight, so it names those and no numbers)."""
        w = ", ".join(f"{k} {v:.2g}" for k, v in self.weights.items())
        if self.rule == "minimax":
            used = [k for k, v in self.weights.items() if v > 0]
            left = [k for k, v in self.weights.items() if v <= 0]
            out = f" ({', '.join(left)} left out: weight 0)" if left else ""
            return (
                f"{METRIC_NAMES[self.metric][0]} at the worst of the distortions "
                f"{', '.join(used)}{out}; lower is better"
            )
        head = {
            "expected": f"expected {METRIC_NAMES[self.metric][0]} over distortions",
            "cvar": (
                f"mean {METRIC_NAMES[self.metric][0]} over the worst {self.level:.0%} "
                "of the distortion weight (CVaR)"
            ),
        }[self.rule]
        return f"{head} (weights {w}); lower is better"


def parse_weights(text: str, names: Sequence[str] | None, key: str = "--weights") -> dict:
    """Weights from ``name=value,name=value`` text; names must be among ``names`` (the grid's
    distortions, say) unless None (checked later)."""
    out: dict[str, float] = {}
    for part in text.split(","):
        name, sep, value = part.partition("=")
        name = name.strip()
        if not sep or not name:
            raise InputError(key, "name=value pairs separated by commas", text)
        if names is not None:
            check_choice(name, key, names)
        try:
            number = float(value)
        except ValueError:
            raise InputError(f"{key} {name}", "a number", value.strip()) from None
        out[name] = check_number(number, f"{key} {name}", low=0.0)
    return out


def stored_decision(ds: xr.Dataset) -> dict:
    """The study's [decision] table as the grid file stores it (attributes written at run time;
    a grid without them gives the defaults: expected evaluations to target, equal weights)."""
    a, default = ds.attrs, Decision()
    return {
        "rule": str(a.get("decision_rule", default.rule)),
        "weights": json.loads(a.get("decision_weights", "{}")),
        "level": float(a.get("decision_level", default.level)),
        "metric": str(a.get("decision_metric", default.metric)),
        "landscapes": json.loads(a.get("decision_landscapes", "{}")),
        "score": str(a.get("decision_score", default.score)),
    }


def decision_rule(
    ds: xr.Dataset,
    rule: str | None = None,
    weights: Mapping[str, float] | str | None = None,
    level: float | None = None,
    metric: str | None = None,
    landscapes: Mapping[str, float] | str | None = None,
    score_method: str | None = None,
) -> Rule:
    """The decision rule: given values, else the study's [decision] table (stored in the grid,
    :func:`stored_decision`), else expected evaluations to target with equal weights. Weights
    name distortions of the grid and must not all be 0. Given ones (the command line's
    ``--weights``) must name every distortion, so that none is 0 by omission; the study's
    [decision] weights may leave some out (the study format allows it), and those get 0, which
    :meth:`Rule.describe` shows."""
    decision = stored_decision(ds)
    names = coordinate_names(ds, "distortion")
    rule = check_choice(rule if rule is not None else decision["rule"], "--rule", RULES)
    metric = check_choice(metric if metric is not None else decision["metric"], "--metric", METRICS)
    level = level if level is not None else decision["level"]
    level = check_number(level, "--level", low=0.0, high=1.0, closed="right")
    if weights:
        given = weights
        if isinstance(weights, str):
            weights = parse_weights(weights, names)
        for k, v in weights.items():
            check_choice(k, "--weights", names)
            check_number(v, f"--weights {k}", low=0.0)
        missing = [n for n in names if n not in weights]
        if missing:
            # A weight left out would silently be 0: the command line asks for every one.
            raise InputError(
                "--weights",
                f"a weight for every distortion of the grid ({', '.join(names)}; write 0 to "
                f"leave one out; missing: {', '.join(missing)})",
                given if isinstance(given, str) else raw(str(dict(given))),
            )
    elif weights is None:
        weights = dict(decision["weights"])
    if not weights:
        weights = dict.fromkeys(names, 1.0)
    total = float(sum(weights.values()))
    if total <= 0:
        raise InputError("--weights", "weights that are not all 0", raw(str(dict(weights))))
    full = {n: float(weights.get(n, 0.0)) / total for n in names}
    score_method = check_choice(
        score_method if score_method is not None else decision["score"], "--score", SCORES
    )
    lw, basis = landscape_weights(
        ds, landscapes if landscapes is not None else decision["landscapes"]
    )
    return Rule(rule, full, float(level), metric, lw, score_method, basis)


def landscape_weights(ds: xr.Dataset, given: Mapping[str, float] | str) -> tuple[dict, str]:
    """Weights over the grid's landscapes, summing to 1, and why: ``given`` by label or kind (a
    kind's weight shared equally by its landscapes), ``"resemblance"`` (each landscape's rank
    agreement with the study's earlier evaluations, its negative part cut to 0: a landscape
    that orders the data against the measurements gets no weight), or nothing: resemblance
    when the grid has earlier evaluations to measure it against, else equal weights.

    Resemblance is the default because on the measured tables of ``benchmarks/tables`` it
    kept or improved the real rank of the simulated pick (``benchmarks/transfer.py``)."""
    labels = coordinate_names(ds, "landscape")
    kinds = landscape_kinds(ds)
    default = not given and "resemblance" in ds
    if default:
        given = RESEMBLANCE
    if given == EQUAL:
        return {}, "equal weights, as the study asks"
    if given == RESEMBLANCE:
        if "resemblance" not in ds:
            raise InputError(
                "decision.landscapes",
                "a grid whose study has earlier evaluations (a fitted or drawn_like landscape)",
                raw("a grid without resemblance"),
            )
        r = np.nan_to_num(ds["resemblance"].values.astype(float), nan=0.0)
        w = np.maximum(r, 0.0)
        source = ds.attrs.get("resemblance_data", "the earlier evaluations")
        why = "the study sets none, so " if default else ""
        if w.sum() <= 0:
            return {}, f"{why}equal: no landscape orders {source} better than chance"
        w = w / w.sum()
        return (
            dict(zip(labels, w.tolist(), strict=True)),
            f"{why}by resemblance to {source}: rank agreement, negative cut to 0",
        )
    if not given:
        return {}, "equal weights"
    w = np.zeros(len(labels))
    for key, value in given.items():
        if key in labels:
            w[labels.index(key)] += float(value)
        else:
            members = [i for i, k in enumerate(kinds) if k == key]
            check_choice(key, "--landscapes", [*labels, *dict.fromkeys(kinds)])
            w[members] += float(value) / len(members)
    if w.sum() <= 0:
        raise InputError("--landscapes", "weights that are not all 0", raw(str(dict(given))))
    return dict(zip(labels, (w / w.sum()).tolist(), strict=True)), "the study's weights"


def setting_scores(values: xr.DataArray, rule: Rule) -> xr.DataArray:
    """The rule's score of every belief-guided setting (lower is better): the metric
    standardised within each landscape (``rule.score``; ``saving`` needs the no-belief row in
    ``values``), averaged over landscapes with the rule's weights, combined over distortions.
    With the raw metric and equal weights this is the plain mean over landscapes and
    replicates."""
    labels = coordinate_names(values, "landscape")
    std = standardise(values, rule.score)
    return score(over_landscapes(std, rule.weights_over(labels)), rule)


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
    edges: tuple[Edge, ...] = ()

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
            f"  {self.rule.landscapes_text()}",
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
        return out + edge_lines(self.edges)

    def to_dict(self) -> dict:
        """Everything as plain JSON-ready values."""
        out = {k: v for k, v in self.choice.items()}
        out.update(
            rule=self.rule.rule,
            weights=dict(self.rule.weights),
            landscape_weights=dict(self.rule.landscape_weights),
            landscape_basis=self.rule.landscape_basis,
            score=self.rule.score,
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
            edge_of_study=[e.to_dict() for e in self.edges],
            edge_snippet=edge_snippet(self.edges) or None,
        )
        return json.loads(json.dumps(out, default=_plain))


def _plain(v):
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, float) and not math.isfinite(v):
        return None
    return v


def decision_values(ds: xr.Dataset, rule: Rule, strategy: str | None = None) -> xr.DataArray:
    """The per-campaign metric a rule scores: the belief-guided settings (only ``strategy``'s
    if given), with the no-belief row when the score is a saving against it."""
    metric = campaign_metric(ds, rule.metric)
    values = guided_only(metric)
    if values.sizes["setting"] == 0:
        raise InputError("strategy", "a grid with belief-guided settings", raw("none"))
    if strategy is not None:
        present = list(dict.fromkeys(str(v) for v in values["strategy"].values))
        check_choice(strategy, "--strategy", present)
        values = values.isel(setting=np.flatnonzero(values["strategy"].values == strategy))
    if rule.score == "saving":
        base = reference()
        if base not in coordinate_names(metric, "setting"):
            raise InputError(
                "--score", f"a grid with the {base!r} baseline (a saving is against it)", "saving"
            )
        values = xr.concat([values, metric.sel(setting=[base])], "setting")
    return values


def recommend(
    ds: xr.Dataset,
    rule: Rule | None = None,
    resampling: Resampling | None = None,
    strategy: str | None = None,
) -> Recommendation:
    """The belief-guided setting with the lowest score under ``rule`` (default
    :func:`decision_rule` of the grid; :func:`setting_scores`). ``strategy`` restricts the
    choice to one strategy's settings (for example the pseudo-posterior's decay × quantile).

    The value shown, with its interval, is the rule's raw metric under the rule's landscape
    weights (evaluations, say), whatever the score that chose."""
    rule = rule or decision_rule(ds)
    rs = resampling or Resampling()
    values = decision_values(ds, rule, strategy)
    boot = bootstrap(values, lambda v: setting_scores(v, rule), resampling=rs, keep=True)
    shown = boot
    if rule.score != "raw":
        plain = replace(rule, score="raw")
        shown = bootstrap(values, lambda v: setting_scores(v, plain), resampling=rs)
    estimate = boot["estimate"].values
    order = np.argsort(estimate, kind="stable")
    labels = [str(s) for s in boot["setting"].values]
    best = labels[order[0]]
    # A draw counts for the choice in proportion when several settings tie at its minimum.
    draws = boot["distribution"].transpose("draw", "setting").values
    lowest = draws == draws.min(axis=1, keepdims=True)
    stability = float(np.mean(lowest[:, order[0]] / lowest.sum(axis=1)))

    def plain_value(i: int) -> tuple[float, float, float]:
        return tuple(float(shown[k].values[i]) for k in ("estimate", "low", "high"))

    runner = None
    if len(order) > 1:
        r = order[1]
        value, low, high = plain_value(r)
        runner = _factors(values, labels[r])
        runner.update(value=_plain(value), interval=[_plain(low), _plain(high)])
    lolo = {}
    if values.sizes["landscape"] > 1:
        for name in coordinate_names(ds, "landscape"):
            rest = values.drop_sel(landscape=name)
            lolo[name] = labels[int(np.argmin(setting_scores(rest, rule).values))]
    value, low, high = plain_value(order[0])
    return Recommendation(
        rule=rule,
        choice=_factors(values, best),
        value=value,
        interval=(low, high),
        runner_up=runner,
        stability=stability,
        leave_one_landscape_out=lolo,
        scores=boot.drop_vars("distribution"),
        resampling=rs,
        edges=study_edges(_studied(values), _factors(values, best)),
    )


def _studied(values: xr.DataArray) -> list[dict]:
    """The belief-guided settings of ``values`` as mappings of their factors."""
    guided = np.flatnonzero(values["kind"].values == "guided") if "kind" in values.coords else []
    return [
        {k: values[k].values[i].item() for k in SETTING_FACTORS}
        for i in (guided if len(guided) else range(values.sizes["setting"]))
    ]
