"""The monitor: how likely each distortion of the belief is, given what a real campaign has
seen so far, and whether to keep the belief, switch to a faster decay, or drop it.

The monitor learns from the study's own simulated campaigns (the grid): every belief-guided
campaign of the grid is a labelled example (its distortion is known), described by features a
real campaign also has after t evaluations. One classifier per t gives p(distortion | features);
the grid's metric per setting and distortion then gives each action's expected cost.

Features (:data:`FEATURES`, in that order), from the first t evaluations of a campaign; the
*level* of a point is the share of the belief's mass that is denser than the point (0 at the
mode, 1 far outside; for an untruncated Gaussian belief, chi2.cdf(Mahalanobis², d)), estimated
from a fixed sample of the belief (:class:`BeliefReference`); *distance* is the root mean
square of (u − mode) / sd over coordinates, sd the per-coordinate standard deviation of that
sample; the *good* observations are the ⌈quantile · n⌉ lowest of the n finite values (at least
one; failed evaluations rank last):

=========================  =====================================================================
``best_level``             level of the best point so far
``best_distance``          distance of the best point from the belief's mode
``good_share_hdr50``       share of the good observations inside the 50 % highest-density region
``good_share_hdr90``       share of the good observations inside the 90 % highest-density region
``good_level``             mean level of the good observations
``good_centroid_level``    level of the centroid of the good points
``good_centroid_distance`` distance of that centroid from the belief's mode
``all_level``              mean level of every evaluated point (how closely the campaign follows
                           the belief, against which the good points' levels are read)
``value_index_spearman``   Spearman correlation of value with evaluation index (below 0: values
                           keep falling)
``late_improvement``       share of the evaluations after the first third that improved the best
``failed_share``           share of failed evaluations
=========================  =====================================================================

Every feature is rank- or belief-based, so landscapes of different scales read alike.

Model (:func:`train`): one classifier per t, since the features' meaning changes with t (a
Spearman correlation over 4 points is not one over 14), and so that each t is calibrated and
validated on its own. Per t, a multinomial logistic regression (standardised features) and a
histogram gradient-boosting classifier are compared by cross-validated multiclass Brier score
over replicate groups (GroupKFold: the campaigns of one replicate share their initial design
and streams, so they are held out together); the boosted trees are calibrated by temperature
scaling over the same groups, the logistic regression keeps its own probabilities.
The ``validation`` table gives, per t, the held-out scores against the base rate.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

import numpy as np
import xarray as xr
from scipy import stats
from threadpoolctl import threadpool_limits

from ..analysis import campaign_metric, series
from ..engine.strategies import reference
from ..study.cells import Cell
from ..study.decay import parse
from ..validation import InputError, check_choice, check_number, raw

__all__ = [
    "FEATURES",
    "MODELS",
    "Advice",
    "BeliefReference",
    "Monitor",
    "TrainingTable",
    "advise",
    "belief_reference",
    "campaign_features",
    "grid_beliefs",
    "restrict",
    "train",
    "training_table",
]

FEATURES = (
    "best_level",
    "best_distance",
    "good_share_hdr50",
    "good_share_hdr90",
    "good_level",
    "good_centroid_level",
    "good_centroid_distance",
    "all_level",
    "value_index_spearman",
    "late_improvement",
    "failed_share",
)
MODELS = ("logistic", "boosted-trees")
NO_BELIEF = reference()
# The fixed sample every belief's levels and spread are read from.
REFERENCE_DRAWS = 4096
REFERENCE_SEED = 0
_FOLDS = 5
_INNER_FOLDS = 3
# Temperature scaling (softmax of logits / T) calibrates all classes at once; on the test
# study it beat one-vs-rest sigmoid scaling on fresh campaigns (Brier 0.13 against 0.15).
_CALIBRATION = "temperature"


# --------------------------------------------------------------------------- features


@dataclass(frozen=True, eq=False)
class BeliefReference:
    """A belief with a fixed sample of it, from which levels and distances are read.

    ``sorted_logpdf`` is the belief's log density at its draws, ascending; ``mode`` its mode and
    ``sd`` the per-coordinate standard deviation of the draws.
    """

    belief: Any
    sorted_logpdf: np.ndarray
    mode: np.ndarray
    sd: np.ndarray

    @property
    def dim(self) -> int:
        return int(self.mode.size)

    def level(self, U) -> np.ndarray:
        """Share of the belief's mass denser than each point: #{draws with log density above
        the point's} / draws; shape of ``U`` without its last axis."""
        U = np.asarray(U, dtype=float)
        flat = U.reshape(-1, self.dim)
        lp = np.asarray(self.belief.logpdf(flat), dtype=float).reshape(-1)
        above = self.sorted_logpdf.size - np.searchsorted(self.sorted_logpdf, lp, side="right")
        return (above / self.sorted_logpdf.size).reshape(U.shape[:-1])

    def distance(self, U) -> np.ndarray:
        """sqrt(mean_j ((u_j − mode_j) / sd_j)²), over the last axis."""
        z = (np.asarray(U, dtype=float) - self.mode) / self.sd
        return np.sqrt(np.mean(z**2, axis=-1))


def belief_reference(
    belief, draws: int = REFERENCE_DRAWS, seed: int = REFERENCE_SEED
) -> BeliefReference:
    """The fixed sample of ``belief``: ``draws`` draws from ``np.random.default_rng(seed)``.

    The same belief always gives the same reference, so a live campaign's features are read
    exactly as the training campaigns' were.
    """
    if isinstance(belief, BeliefReference):
        return belief
    sample = np.atleast_2d(np.asarray(belief.sample(draws, np.random.default_rng(seed)), float))
    if sample.shape[0] != draws:
        sample = sample.reshape(draws, -1)
    lp = np.sort(np.asarray(belief.logpdf(sample), dtype=float).reshape(-1))
    mode = np.atleast_1d(np.asarray(belief.mode(), dtype=float))
    # A belief with no spread along a coordinate would divide by zero.
    sd = np.maximum(sample.std(axis=0), 1e-9)
    return BeliefReference(belief, lp, mode, sd)


def _spearman_with_index(ranked: np.ndarray) -> np.ndarray:
    """Pearson correlation of already-ranked values with 1 … t over the last axis (0 where
    either is constant)."""
    t = ranked.shape[-1]
    index = np.arange(1, t + 1, dtype=float)
    a = ranked - ranked.mean(axis=-1, keepdims=True)
    b = index - index.mean()
    den = np.sqrt((a**2).sum(axis=-1) * (b**2).sum())
    with np.errstate(invalid="ignore", divide="ignore"):
        r = (a * b).sum(axis=-1) / den
    return np.where(den > 0, r, 0.0)


def _features_at(
    ref: BeliefReference,
    points: np.ndarray,
    values: np.ndarray,
    levels: np.ndarray,
    t: int,
    quantile: float,
) -> np.ndarray:
    """Features of (n, T, d) points and (n, T) values, with their levels, after t evaluations."""
    n = values.shape[0]
    P, v, lev = points[:, :t], values[:, :t], levels[:, :t]
    finite = np.isfinite(v)
    v_inf = np.where(finite, v, np.inf)
    rows = np.arange(n)

    best = np.argmin(v_inf, axis=1)
    best_point = P[rows, best]
    best_level = lev[rows, best]
    best_distance = ref.distance(best_point)

    n_finite = finite.sum(axis=1)
    k = np.maximum(1, np.ceil(quantile * n_finite).astype(int))
    # Ties go to the earlier evaluation, so exactly k points are good.
    rank = np.argsort(np.argsort(v_inf, axis=1, kind="stable"), axis=1, kind="stable")
    good = rank < k[:, None]
    weight = good / k[:, None]
    good_share50 = (weight * (lev <= 0.5)).sum(axis=1)
    good_share90 = (weight * (lev <= 0.9)).sum(axis=1)
    good_level = (weight * lev).sum(axis=1)
    centroid = np.einsum("nt,ntd->nd", weight, P)
    centroid_level = ref.level(centroid)
    centroid_distance = ref.distance(centroid)

    all_level = lev.mean(axis=1)
    spearman = _spearman_with_index(stats.rankdata(v_inf, axis=1))
    if t > 1:
        running = np.minimum.accumulate(v_inf, axis=1)
        improved = v_inf[:, 1:] < running[:, :-1]
        start = max(1, math.ceil(t / 3))
        late = improved[:, start - 1 :].mean(axis=1) if start < t else np.zeros(n)
    else:
        late = np.zeros(n)
    failed = 1.0 - n_finite / t
    return np.column_stack(
        [
            best_level,
            best_distance,
            good_share50,
            good_share90,
            good_level,
            centroid_level,
            centroid_distance,
            all_level,
            spearman,
            late,
            failed,
        ]
    )


def campaign_features(points, values, belief, t, quantile: float = 0.25) -> np.ndarray:
    """The :data:`FEATURES` of campaigns after their first t evaluations.

    ``points`` are cube points (..., T, d) in evaluation order, ``values`` the values to
    minimise (..., T), NaN where an evaluation failed; leading axes are campaigns that share
    ``belief`` (a belief object or its :func:`belief_reference`, reused across calls). ``t`` is
    one number of evaluations (result (..., F)) or a sequence of them (result (..., len(t), F)).
    """
    ref = belief_reference(belief)
    points = np.asarray(points, dtype=float)
    values = np.asarray(values, dtype=float)
    if points.ndim < 2 or points.shape[-1] != ref.dim or points.shape[:-1] != values.shape:
        raise InputError(
            "points",
            f"cube points (..., T, {ref.dim}) matching values (..., T)",
            raw(f"points {points.shape} and values {values.shape}"),
        )
    check_number(quantile, "quantile", low=0.0, high=1.0, closed="right")
    budget = values.shape[-1]
    steps = [t] if np.ndim(t) == 0 else list(t)
    steps = [check_number(s, "t", low=1, high=budget, integer=True) for s in steps]
    lead = values.shape[:-1]
    P = points.reshape(-1, budget, ref.dim)
    v = values.reshape(-1, budget)
    levels = ref.level(P)
    out = np.stack([_features_at(ref, P, v, levels, s, quantile) for s in steps], axis=1)
    out = out.reshape(*lead, len(steps), len(FEATURES))
    return out[..., 0, :] if np.ndim(t) == 0 else out


# --------------------------------------------------------------------------- training table


@dataclass(frozen=True, eq=False)
class TrainingTable:
    """Features of every belief-guided campaign of a grid at each of ``steps``.

    ``features`` (campaign, step, feature); ``labels`` the distortion index of each campaign
    (names in ``classes``); ``groups`` its replicate; ``settings`` and ``landscapes`` its
    setting label and landscape index.
    """

    features: np.ndarray
    labels: np.ndarray
    groups: np.ndarray
    settings: np.ndarray
    landscapes: np.ndarray
    steps: tuple[int, ...]
    classes: tuple[str, ...]
    quantile: float


def grid_beliefs(study, ds: xr.Dataset) -> dict[tuple[int, int, int], Any]:
    """The belief every cell's campaigns used: ``{(landscape, distortion, replicate): belief}``,
    the distorted belief of :class:`workbench.study.cells.Cell`."""
    return {
        (li, di, r): Cell(study, li, di, r).belief
        for li in range(ds.sizes["landscape"])
        for di in range(ds.sizes["distortion"])
        for r in range(ds.sizes["replicate"])
    }


def _guided(ds: xr.Dataset, name: str) -> xr.DataArray:
    values = series(ds, name)
    return values.isel(setting=np.flatnonzero(values["kind"].values == "guided"))


def _campaign_arrays(ds: xr.Dataset) -> tuple[xr.DataArray, np.ndarray]:
    """Observed values (setting, landscape, distortion, replicate, evaluation) of every
    belief-guided setting (the quantile repeats dropped) and their cube points, same axes and
    a last coordinate axis."""
    observed = _guided(ds, "observed")
    columns = []
    for j in range(ds.sizes["coordinate"]):
        one = ds.assign(
            _cube=ds["point_cube"].isel(coordinate=j, drop=True),
            baseline__cube=ds["baseline_point_cube"].isel(coordinate=j, drop=True),
        )
        columns.append(_guided(one, "_cube").values)
    return observed, np.stack(columns, axis=-1)


def training_table(
    ds: xr.Dataset,
    beliefs: dict,
    steps,
    setting: str | None = None,
    quantile: float = 0.25,
) -> TrainingTable:
    """Features at each t in ``steps`` of every belief-guided campaign of the grid ``ds``.

    ``beliefs[(landscape, distortion, replicate)]`` is the belief the cell's campaigns used
    (:func:`grid_beliefs`). ``setting`` (a label of the analysis ``setting`` axis) restricts the
    table to one strategy setting; by default every belief-guided setting is pooled. Labels are
    distortion indices, groups replicates; campaigns the grid did not run are left out.
    """
    observed, points = _campaign_arrays(ds)
    labels = [str(s) for s in observed["setting"].values]
    if setting is not None:
        check_choice(setting, "setting", labels)
        keep = [labels.index(setting)]
    else:
        keep = list(range(len(labels)))
    budget = observed.sizes["evaluation"]
    steps = tuple(
        sorted({check_number(s, "steps", low=1, high=budget, integer=True) for s in steps})
    )
    if not steps:
        raise InputError("steps", "at least one number of evaluations", raw("none"))
    values = observed.values
    rows = {k: [] for k in ("features", "labels", "groups", "settings", "landscapes")}
    for li in range(ds.sizes["landscape"]):
        for di in range(ds.sizes["distortion"]):
            for r in range(ds.sizes["replicate"]):
                v = values[keep, li, di, r]
                P = points[keep, li, di, r]
                ran = np.isfinite(P).all(axis=(1, 2))
                if not ran.any():
                    continue
                if (li, di, r) not in beliefs:
                    raise InputError(
                        "beliefs", "a belief for every grid cell", raw(f"none for {(li, di, r)}")
                    )
                ref = belief_reference(beliefs[(li, di, r)])
                rows["features"].append(campaign_features(P[ran], v[ran], ref, steps, quantile))
                n = int(ran.sum())
                rows["labels"].append(np.full(n, di))
                rows["groups"].append(np.full(n, r))
                rows["settings"].append(np.array([labels[keep[i]] for i in np.flatnonzero(ran)]))
                rows["landscapes"].append(np.full(n, li))
    if not rows["features"]:
        raise InputError("ds", "a grid with belief-guided campaigns", raw("none ran"))
    return TrainingTable(
        features=np.concatenate(rows["features"]),
        labels=np.concatenate(rows["labels"]),
        groups=np.concatenate(rows["groups"]),
        settings=np.concatenate(rows["settings"]),
        landscapes=np.concatenate(rows["landscapes"]),
        steps=steps,
        classes=tuple(str(d) for d in ds["distortion"].values),
        quantile=float(quantile),
    )


def restrict(table: TrainingTable, keep) -> TrainingTable:
    """The rows of ``table`` where ``keep`` is true (for example one strategy's campaigns)."""
    keep = np.asarray(keep, dtype=bool)
    if not keep.any():
        raise InputError(
            "setting", "a setting whose strategy has campaigns in the grid", raw("none")
        )
    return replace(
        table,
        features=table.features[keep],
        labels=table.labels[keep],
        groups=table.groups[keep],
        settings=table.settings[keep],
        landscapes=table.landscapes[keep],
    )


# --------------------------------------------------------------------------- training


def _candidate(kind: str, seed: int):
    from sklearn.ensemble import HistGradientBoostingClassifier
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    if kind == "logistic":
        # lbfgs fits the multinomial model on more than two classes.
        return make_pipeline(StandardScaler(), LogisticRegression(C=1.0, max_iter=2000))
    return HistGradientBoostingClassifier(
        max_iter=40,
        learning_rate=0.1,
        max_leaf_nodes=8,
        min_samples_leaf=10,
        l2_regularization=1.0,
        early_stopping=False,
        random_state=seed,
    )


def _proba(model, X: np.ndarray, n_classes: int) -> np.ndarray:
    """Probabilities over every class (a class absent from the fit gets 0)."""
    out = np.zeros((len(X), n_classes))
    out[:, np.asarray(model.classes_, dtype=int)] = model.predict_proba(X)
    return out


def _brier(p: np.ndarray, y: np.ndarray) -> float:
    """Multiclass Brier score: mean over rows of Σ_k (p_k − 1[y = k])²."""
    onehot = np.eye(p.shape[1])[y]
    return float(np.mean(np.sum((p - onehot) ** 2, axis=1)))


def _splits(groups: np.ndarray, folds: int):
    from sklearn.model_selection import GroupKFold

    n = min(folds, len(np.unique(groups)))
    if n < 2:
        raise InputError("table", "campaigns of at least 2 replicates", raw("one replicate"))
    return list(GroupKFold(n_splits=n).split(np.zeros(len(groups)), groups=groups))


def _fit(kind: str, X, y, groups, seed: int, folds: int):
    """One candidate fitted on (X, y); boosted trees calibrated by temperature scaling over
    replicate groups, the logistic regression as it is."""
    model = _candidate(kind, seed)
    if kind == "logistic" or len(np.unique(groups)) < 2:
        return model.fit(X, y)
    from sklearn.calibration import CalibratedClassifierCV

    splits = _splits(groups, folds)
    return CalibratedClassifierCV(model, method=_CALIBRATION, cv=splits).fit(X, y)


def _select(X, y, groups, n_classes: int, seed: int, folds: int):
    """The candidate with the lower cross-validated Brier score (over replicate groups), every
    candidate's score, and its held-out probabilities."""
    scores, held_out = {}, {}
    for kind in MODELS:
        p = np.zeros((len(y), n_classes))
        for fit_rows, test_rows in _splits(groups, folds):
            model = _fit(kind, X[fit_rows], y[fit_rows], groups[fit_rows], seed, _INNER_FOLDS)
            p[test_rows] = _proba(model, X[test_rows], n_classes)
        scores[kind], held_out[kind] = _brier(p, y), p
    return min(MODELS, key=lambda k: scores[k]), scores, held_out


@dataclass(frozen=True, eq=False)
class Monitor:
    """Fitted classifiers, one per t in ``steps`` (``kinds`` says which candidate won there),
    the class (distortion) names, and the ``validation`` table over ``step``: held-out
    ``accuracy`` and ``brier`` against ``base_accuracy`` (the majority class of the other
    replicates) and ``base_brier`` (their class frequencies), and each candidate's
    cross-validated Brier score."""

    models: tuple
    kinds: tuple[str, ...]
    steps: tuple[int, ...]
    classes: tuple[str, ...]
    quantile: float
    validation: xr.Dataset

    def model_step(self, t: int) -> int:
        """The trained step used at t: the largest at or below t (t ≥ the first step)."""
        below = [s for s in self.steps if s <= t]
        if not below:
            raise InputError("t", f"at least {self.steps[0]} evaluations", t)
        return below[-1]

    def predict_proba(self, features: np.ndarray, t: int) -> np.ndarray:
        """p(distortion | features) with the classifier of :meth:`model_step` (t); features
        (n, F) or (F,)."""
        X = np.atleast_2d(np.asarray(features, dtype=float))
        model = self.models[self.steps.index(self.model_step(t))]
        with threadpool_limits(limits=1):
            return _proba(model, X, len(self.classes))


def train(
    table: TrainingTable, seed: int = 0, folds: int = _FOLDS, nested: bool = False
) -> Monitor:
    """One calibrated classifier per step of ``table``, chosen by cross-validation over
    replicate groups (see the module docstring). Deterministic given ``seed``.

    The ``validation`` table holds held-out predictions (fit on the other replicates) of the
    chosen candidate from that same cross-validation, slightly optimistic since the better of
    two is kept; ``nested=True`` repeats the choice inside every fold instead (about four
    times the fits).
    """
    check_number(seed, "seed", low=0, integer=True)
    y = np.asarray(table.labels, dtype=int)
    groups = np.asarray(table.groups)
    n_classes = len(table.classes)
    models, kinds, rows = [], [], []
    # The data are small: parallel threads only contend (on a busy machine, OpenMP threads
    # spinning made a fit 10-100 times slower).
    with threadpool_limits(limits=1):
        for s in range(len(table.steps)):
            X = table.features[:, s]
            kind, scores, held_out = _select(X, y, groups, n_classes, seed, folds)
            models.append(_fit(kind, X, y, groups, seed, folds))
            kinds.append(kind)
            p = held_out[kind]
            base = np.zeros((len(y), n_classes))
            for fit_rows, test_rows in _splits(groups, folds):
                base[test_rows] = np.bincount(y[fit_rows], minlength=n_classes) / len(fit_rows)
                if nested:
                    f = fit_rows
                    inner = _select(X[f], y[f], groups[f], n_classes, seed, _INNER_FOLDS)[0]
                    model = _fit(inner, X[f], y[f], groups[f], seed, _INNER_FOLDS)
                    p[test_rows] = _proba(model, X[test_rows], n_classes)
            rows.append(
                (
                    float(np.mean(p.argmax(axis=1) == y)),
                    _brier(p, y),
                    float(np.mean(base.argmax(axis=1) == y)),
                    _brier(base, y),
                    scores["logistic"],
                    scores["boosted-trees"],
                )
            )
    rows = np.array(rows)
    names = (
        "accuracy",
        "brier",
        "base_accuracy",
        "base_brier",
        "cv_brier_logistic",
        "cv_brier_boosted_trees",
    )
    validation = xr.Dataset(
        {name: ("step", rows[:, i]) for i, name in enumerate(names)}
        | {"model": ("step", list(kinds))},
        coords={"step": list(table.steps)},
        attrs={
            "campaigns": len(y),
            "replicates": len(np.unique(groups)),
            "folds": folds,
            "nested": int(nested),
        },
    )
    return Monitor(
        tuple(models), tuple(kinds), table.steps, table.classes, table.quantile, validation
    )


# --------------------------------------------------------------------------- advice


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
                    "confidence": float(self.confidence[i]),
                }
                for i in range(len(self.t))
            ],
        }


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
    belief,
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
