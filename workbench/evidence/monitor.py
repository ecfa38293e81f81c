"""The monitor: how likely each distortion of the belief is, given what a real campaign has
seen so far, and whether to keep the belief, switch to a faster decay, or drop it.

The monitor learns from the study's own simulated campaigns (the grid): every belief-guided
campaign of the grid is a labelled example (its distortion is known), described by features a
real campaign also has after t evaluations. One classifier per t gives p(distortion | features);
the grid's metric per setting and distortion then gives each action's expected cost.

Three parts, one module each: the features (:mod:`workbench.evidence.features`), the training
table and the classifiers (:mod:`workbench.evidence.training`), and here the advice on a live
campaign. Their public names are importable from this module too.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import xarray as xr

from ..analysis import campaign_metric, series
from ..engine.strategies import reference
from ..study.decay import parse
from ..validation import InputError, check_choice, raw
from ..world.reference import Belief, BeliefReference
from .features import FEATURES, campaign_features
from .training import MODELS, Monitor, TrainingTable, grid_beliefs, restrict, train, training_table
from .wording import most_like

__all__ = [
    "FEATURES",
    "MODELS",
    "Advice",
    "Monitor",
    "TrainingTable",
    "advise",
    "campaign_features",
    "check_setting",
    "grid_beliefs",
    "restrict",
    "train",
    "training_table",
]

NO_BELIEF = reference()


@dataclass(frozen=True, eq=False)
class Advice:
    """What the monitor says at each t of a live campaign.

    ``t`` (n_t,); ``probabilities`` (n_t, distortion); ``actions`` the action names and
    ``action_settings`` the grid setting each one runs; ``cost`` (action, distortion) the grid's
    mean metric of that setting under each distortion; ``available`` (n_t, action): a switch is
    offered only while its decay weight λ(t) is below the current one; ``expected_cost``
    (n_t, action) = Σ_d p(d) · cost[action, d] (NaN where not offered); ``best`` the index of
    the cheapest action; ``confidence`` the probability mass of the distortions under which it
    is also the cheapest offered action.
    """

    setting: str
    metric: str
    distortions: tuple[str, ...]
    actions: tuple[str, ...]
    action_settings: tuple[str, ...]
    t: np.ndarray
    model_step: np.ndarray
    probabilities: np.ndarray
    cost: np.ndarray
    available: np.ndarray
    expected_cost: np.ndarray
    best: np.ndarray
    confidence: np.ndarray

    @property
    def best_action(self) -> tuple[str, ...]:
        return tuple(self.actions[i] for i in self.best)

    def most_like(self, i: int = -1) -> str:
        """The distortion most probable after the ``i``-th step, in the audit's words
        (:mod:`workbench.evidence.wording`)."""
        p = self.probabilities[i]
        k = int(np.argmax(p))
        others = ", ".join(
            f"{d} {q:.2f}"
            for j, (d, q) in enumerate(zip(self.distortions, p, strict=True))
            if j != k
        )
        detail = f"probability {p[k]:.2f}" + (f"; {others}" if others else "")
        return most_like(self.distortions[k], "monitor", detail)

    def to_dict(self) -> dict:
        """Plain lists and numbers (NaN as None), ready for JSON."""

        def clean(a):
            a = np.asarray(a)
            if a.dtype.kind == "f":
                return [clean(x) for x in a] if a.ndim else (None if np.isnan(a) else float(a))
            return a.tolist()

        return {
            "setting": self.setting,
            "metric": self.metric,
            "distortions": list(self.distortions),
            "actions": list(self.actions),
            "action_settings": list(self.action_settings),
            "cost": clean(self.cost),
            "steps": [
                {
                    "t": int(self.t[i]),
                    "model_step": int(self.model_step[i]),
                    "probabilities": dict(
                        zip(self.distortions, clean(self.probabilities[i]), strict=True)
                    ),
                    "available": dict(zip(self.actions, self.available[i].tolist(), strict=True)),
                    "expected_cost": dict(
                        zip(self.actions, clean(self.expected_cost[i]), strict=True)
                    ),
                    "best_action": self.actions[int(self.best[i])],
                    "most_like": self.most_like(i),
                    "confidence": float(self.confidence[i]),
                }
                for i in range(len(self.t))
            ],
        }


def check_setting(
    ds: xr.Dataset, setting: str, key: str = "setting", where: str | None = None
) -> str:
    """The strategy of ``setting``, once it is known to be a belief-guided setting of the grid
    ``ds`` (a label of the analysis ``setting`` axis) and the grid has the no-belief baseline
    that the monitor's "drop the belief" action needs; else one :class:`InputError` that lists
    the valid labels. Cheap: call it before any training."""
    labels = series(ds, "normalized_regret")
    guided = labels["kind"].values == "guided"
    strategies = dict(
        zip(labels["setting"].values[guided], labels["strategy"].values[guided], strict=True)
    )
    if setting not in strategies:
        valid = "; ".join(f'"{s}"' for s in strategies)
        raise InputError(key, f"one of the grid's belief-guided settings ({valid})", setting, where)
    if NO_BELIEF not in labels["setting"].values:
        raise InputError(
            "baselines", f"a grid with the {NO_BELIEF!r} baseline", raw("a grid without it"), where
        )
    return str(strategies[setting])


def _actions(costs: xr.DataArray, setting: str) -> list[tuple[str, str, Any]]:
    """(name, setting label, schedule or None) of keep, every other decay of the same strategy
    and factors that the grid ran, and drop."""
    factors = ("strategy", "quantile", "exploration", "initial")
    here = costs.sel(setting=setting)
    out = [(f"keep ({setting})", setting, parse(str(here["decay"].values)))]
    for label in costs["setting"].values:
        other = costs.sel(setting=label)
        if label == setting or str(other["kind"].values) != "guided":
            continue
        same = all(
            str(other[f].values) == str(here[f].values)
            or (f == "quantile" and np.isnan(other[f].values) and np.isnan(here[f].values))
            for f in factors
        )
        if same:
            decay = str(other["decay"].values)
            out.append((f"switch to decay {decay}", str(label), parse(decay)))
    if NO_BELIEF not in costs["setting"].values:
        raise InputError(
            "baselines", f"a grid with the {NO_BELIEF!r} baseline", raw("a grid without it")
        )
    out.append((f"drop the belief ({NO_BELIEF})", NO_BELIEF, None))
    return out


def advise(
    monitor: Monitor,
    ds: xr.Dataset,
    points,
    values,
    belief: Belief | BeliefReference,
    setting: str,
    rule_metric: str = "evaluations_to_target",
) -> Advice:
    """The monitor's reading of a live campaign after each of its evaluations.

    ``points`` (T, d) cube points and ``values`` (T,) values to minimise (NaN where failed), in
    evaluation order; ``belief`` the belief the campaign uses; ``setting`` its label on the
    analysis ``setting`` axis of ``ds`` (the grid the monitor was trained on). Advice is given
    at every t from the monitor's first step to T, each with the classifier of the largest
    trained step at or below t.

    Cost of an action under distortion d is the grid's mean of ``rule_metric`` (over
    landscapes and replicates) for the setting the action runs, under d; a switch at t is
    costed as a whole campaign of the other decay, since the grid holds no campaign that
    switches midway. A faster decay is one whose weight λ(t) at the current t is below the
    current setting's.
    """
    values_all = campaign_metric(ds, rule_metric)
    guided = values_all["kind"].values == "guided"
    check_choice(setting, "setting", [str(s) for s in values_all["setting"].values[guided]])
    cost_all = values_all.mean(("landscape", "replicate")).sel(distortion=list(monitor.classes))
    actions = _actions(cost_all, setting)
    cost = np.stack([cost_all.sel(setting=a[1]).values for a in actions])

    points = np.asarray(points, dtype=float)
    values = np.asarray(values, dtype=float)
    budget = values.shape[-1]
    if values.ndim != 1 or budget < monitor.steps[0]:
        raise InputError(
            "values",
            f"one campaign's values, at least {monitor.steps[0]} evaluations",
            raw(f"shape {values.shape}"),
        )
    ts = np.arange(monitor.steps[0], budget + 1)
    feats = campaign_features(points, values, belief, list(ts), monitor.quantile)
    probs = np.vstack([monitor.predict_proba(f, int(t)) for f, t in zip(feats, ts, strict=True)])

    current = actions[0][2]
    available = np.ones((len(ts), len(actions)), dtype=bool)
    for a, (_, _, schedule) in enumerate(actions[1:-1], start=1):
        available[:, a] = schedule(ts) < current(ts)
    expected = np.where(available, probs @ cost.T, np.nan)
    best = np.nanargmin(expected, axis=1)
    # Under each distortion alone, the cheapest offered action.
    per_d = np.where(available[:, :, None], cost[None], np.inf).argmin(axis=1)
    confidence = np.sum(probs * (per_d == best[:, None]), axis=1)
    return Advice(
        setting=setting,
        metric=rule_metric,
        distortions=monitor.classes,
        actions=tuple(a[0] for a in actions),
        action_settings=tuple(a[1] for a in actions),
        t=ts,
        model_step=np.array([monitor.model_step(int(t)) for t in ts]),
        probabilities=probs,
        cost=cost,
        available=available,
        expected_cost=expected,
        best=best,
        confidence=confidence,
    )
