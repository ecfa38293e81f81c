"""The monitor's training: a table of every belief-guided campaign of a grid, and one classifier
of distortions per number of evaluations.

The table (:func:`training_table`) holds the :data:`~workbench.evidence.features.FEATURES` of
each campaign at each t; its label is the campaign's distortion, its group its replicate.

Model (:func:`train`): one classifier per t, since the features' meaning changes with t (a
Spearman correlation over 4 points is not one over 14), and so that each t is calibrated and
validated on its own. Per t, a multinomial logistic regression (standardised features) and a
histogram gradient-boosting classifier are compared by cross-validated multiclass Brier score
over replicate groups (GroupKFold: the campaigns of one replicate share their initial design
and streams, so they are held out together); the boosted trees are calibrated by temperature
scaling, the logistic regression keeps its own probabilities.
The ``validation`` table gives, per t, the held-out scores against the base rate.

Cost: the boosted trees are fitted once per fold and once on everything (6 fits per t with
5 folds). Their temperature is fitted on the folds' held-out probabilities, not by a
calibrated ensemble nested in every fold (which took 18 fits per t, three times the time for
the same calibration); the held-out score of a fold uses a temperature fitted on the other
folds' held-out probabilities only, so it stays held out.
"""

from __future__ import annotations

import os
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
import xarray as xr
from threadpoolctl import threadpool_limits

from ..analysis import series
from ..engine.strategies import DEFAULT_QUANTILE
from ..study.cells import Cell
from ..validation import InputError, check_choice, check_number, raw
from ..world.reference import Belief, BeliefReference
from .features import campaign_features

__all__ = [
    "MODELS",
    "Monitor",
    "TrainingTable",
    "grid_beliefs",
    "restrict",
    "train",
    "training_table",
]

MODELS = ("logistic", "boosted-trees")
_FOLDS = 5
_INNER_FOLDS = 3
# Temperature scaling (softmax of logits / T) calibrates all classes at once; on the test
# study it beat one-vs-rest sigmoid scaling on fresh campaigns (Brier 0.13 against 0.15).


@dataclass(frozen=True, eq=False)
class TrainingTable:
    """Features of every belief-guided campaign of a grid at each of ``steps``.

    ``features`` (campaign, step, feature); ``labels`` the distortion index of each campaign
    (names in ``classes``); ``groups`` its replicate; ``settings``, ``strategies`` and
    ``landscapes`` its setting label, strategy and landscape index.
    """

    features: np.ndarray
    labels: np.ndarray
    groups: np.ndarray
    settings: np.ndarray
    strategies: np.ndarray
    landscapes: np.ndarray
    steps: tuple[int, ...]
    classes: tuple[str, ...]
    quantile: float


def _replicate_beliefs(study, ds_sizes: dict, replicates) -> dict:
    return {
        (li, di, r): Cell(study, li, di, r).belief
        for r in replicates
        for li in range(ds_sizes["landscape"])
        for di in range(ds_sizes["distortion"])
    }


def grid_beliefs(study, ds: xr.Dataset, jobs: int | None = 1) -> dict[tuple[int, int, int], Belief]:
    """The belief every cell's campaigns used: ``{(landscape, distortion, replicate): belief}``,
    the distorted belief of :class:`workbench.study.cells.Cell`.

    Most of a first monitor's time goes here: a misplaced belief needs the landscape's worst
    point, so every drawn or fitted landscape of every replicate is built again (about 3.5 s
    per replicate of the demo on a busy machine). ``jobs`` processes share the replicates
    (None: one per idle core, from the load average; 1: none started). On a machine already
    busy, processes only add their start-up: 8 replicates of the demo took 25 s in 2
    processes against 20 s in one at a load of 7 on 2 cores.
    """
    sizes = {k: int(ds.sizes[k]) for k in ("landscape", "distortion", "replicate")}
    replicates = range(sizes["replicate"])
    if jobs is None:
        cores = os.cpu_count() or 1
        load = os.getloadavg()[0] if hasattr(os, "getloadavg") else 0.0
        jobs = max(1, round(cores - load))
    n = min(jobs, len(replicates))
    if n <= 1:
        return _replicate_beliefs(study, sizes, replicates)
    import joblib

    # A replicate's cells share its landscapes (built once per process), so replicates are
    # the unit of work.
    parts = [replicates[i::n] for i in range(n)]
    found = joblib.Parallel(n_jobs=n)(
        joblib.delayed(_replicate_beliefs)(study, sizes, part) for part in parts
    )
    out = {}
    for part in found:
        out |= part
    return dict(sorted(out.items()))


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
    quantile: float = DEFAULT_QUANTILE,
) -> TrainingTable:
    """Features at each t in ``steps`` of every belief-guided campaign of the grid ``ds``.

    ``beliefs[(landscape, distortion, replicate)]`` is the belief the cell's campaigns used
    (:func:`grid_beliefs`). ``setting`` (a label of the analysis ``setting`` axis) restricts the
    table to one strategy setting; by default every belief-guided setting is pooled. Labels are
    distortion indices, groups replicates; campaigns the grid did not run are left out.
    """
    observed, points = _campaign_arrays(ds)
    labels = [str(s) for s in observed["setting"].values]
    strategy_of = [str(s) for s in observed["strategy"].values]
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
    rows = {k: [] for k in ("features", "labels", "groups", "settings", "strategies", "landscapes")}
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
                ref = BeliefReference.of(beliefs[(li, di, r)])
                rows["features"].append(campaign_features(P[ran], v[ran], ref, steps, quantile))
                n = int(ran.sum())
                rows["labels"].append(np.full(n, di))
                rows["groups"].append(np.full(n, r))
                ran_keep = [keep[i] for i in np.flatnonzero(ran)]
                rows["settings"].append(np.array([labels[i] for i in ran_keep]))
                rows["strategies"].append(np.array([strategy_of[i] for i in ran_keep]))
                rows["landscapes"].append(np.full(n, li))
    if not rows["features"]:
        raise InputError("ds", "a grid with belief-guided campaigns", raw("none ran"))
    return TrainingTable(
        features=np.concatenate(rows["features"]),
        labels=np.concatenate(rows["labels"]),
        groups=np.concatenate(rows["groups"]),
        settings=np.concatenate(rows["settings"]),
        strategies=np.concatenate(rows["strategies"]),
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
        strategies=table.strategies[keep],
        landscapes=table.landscapes[keep],
    )


def _one_thread() -> threadpool_limits:
    """One thread in every thread pool (BLAS and scikit-learn's OpenMP runtime).

    threadpoolctl limits the libraries loaded when the limit is set, and scikit-learn loads
    its OpenMP runtime on the first import of its compiled estimators; so they are imported
    first. Without that, the boosted trees ran with every core's thread on a busy machine, and
    a fit of 384 campaigns took 2-11 s instead of 0.2 s (measured on the demo's strategy).
    """
    import sklearn.ensemble  # noqa: F401  (loads the OpenMP runtime)

    return threadpool_limits(limits=1)


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


# Probabilities are floored here before the logarithm (a class absent from a fit has p = 0).
_FLOOR = 1e-12


def tempered(p: np.ndarray, temperature: float) -> np.ndarray:
    """Temperature scaling of probabilities: softmax(log p / T), row by row (T > 1 flattens,
    T < 1 sharpens; T = 1 leaves p as it is)."""
    z = np.log(np.clip(p, _FLOOR, 1.0)) / temperature
    z -= z.max(axis=1, keepdims=True)
    e = np.exp(z)
    return e / e.sum(axis=1, keepdims=True)


def fit_temperature(p: np.ndarray, y: np.ndarray) -> float:
    """The T that minimises the log loss −mean log softmax(log p / T)[y] of held-out
    probabilities ``p`` (n, K) with labels ``y``; searched over log T in [−3, 3]."""
    from scipy.optimize import minimize_scalar

    rows = np.arange(len(y))

    def loss(log_t: float) -> float:
        return -float(np.mean(np.log(np.clip(tempered(p, np.exp(log_t))[rows, y], _FLOOR, 1))))

    return float(np.exp(minimize_scalar(loss, bounds=(-3.0, 3.0), method="bounded").x))


class Tempered:
    """A fitted classifier whose probabilities are temperature-scaled (see :func:`tempered`)."""

    def __init__(self, model, temperature: float):
        self.model = model
        self.temperature = float(temperature)
        self.classes_ = model.classes_

    def predict_proba(self, X: np.ndarray) -> np.ndarray:
        return tempered(self.model.predict_proba(X), self.temperature)


def _held_out(kind: str, X, y, splits, n_classes: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Held-out probabilities of one uncalibrated candidate, one fit per fold; for the boosted
    trees each fold's are then temperature-scaled with a T fitted on the other folds'."""
    p = np.zeros((len(y), n_classes))
    for fit_rows, test_rows in splits:
        model = _candidate(kind, seed).fit(X[fit_rows], y[fit_rows])
        p[test_rows] = _proba(model, X[test_rows], n_classes)
    if kind == "logistic":
        return p, p
    calibrated = np.empty_like(p)
    for _, test_rows in splits:
        others = np.setdiff1d(np.arange(len(y)), test_rows)
        calibrated[test_rows] = tempered(p[test_rows], fit_temperature(p[others], y[others]))
    return calibrated, p


def _fit(kind: str, X, y, seed: int, raw_held_out: np.ndarray):
    """One candidate fitted on (X, y); the boosted trees with the temperature fitted on their
    uncalibrated held-out probabilities ``raw_held_out``, the logistic regression as it is."""
    model = _candidate(kind, seed).fit(X, y)
    if kind == "logistic":
        return model
    return Tempered(model, fit_temperature(raw_held_out, y))


def _select(X, y, groups, n_classes: int, seed: int, folds: int):
    """The candidate with the lower cross-validated Brier score (over replicate groups), every
    candidate's score, its held-out probabilities (calibrated) and uncalibrated ones."""
    splits = _splits(groups, folds)
    scores, held_out, raw_held_out = {}, {}, {}
    for kind in MODELS:
        held_out[kind], raw_held_out[kind] = _held_out(kind, X, y, splits, n_classes, seed)
        scores[kind] = _brier(held_out[kind], y)
    return min(MODELS, key=lambda k: scores[k]), scores, held_out, raw_held_out


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
        with _one_thread():
            return _proba(model, X, len(self.classes))


def train(
    table: TrainingTable,
    seed: int = 0,
    folds: int = _FOLDS,
    nested: bool = False,
    progress: Callable[[int, int], None] | None = None,
) -> Monitor:
    """One calibrated classifier per step of ``table``, chosen by cross-validation over
    replicate groups (see the module docstring). Deterministic given ``seed``.

    The ``validation`` table holds held-out predictions (fit on the other replicates) of the
    chosen candidate from that same cross-validation, slightly optimistic since the better of
    two is kept; ``nested=True`` repeats the choice inside every fold instead (about four
    times the fits). ``progress(done, total)`` is called with the steps trained so far.
    """
    check_number(seed, "seed", low=0, integer=True)
    y = np.asarray(table.labels, dtype=int)
    groups = np.asarray(table.groups)
    n_classes = len(table.classes)
    models, kinds, rows = [], [], []
    # The data are small: parallel threads only contend (on a busy machine, OpenMP threads
    # spinning made a fit 10-100 times slower); see _one_thread.
    with _one_thread():
        for s in range(len(table.steps)):
            X = table.features[:, s]
            kind, scores, held_out, raw_held_out = _select(X, y, groups, n_classes, seed, folds)
            models.append(_fit(kind, X, y, seed, raw_held_out[kind]))
            kinds.append(kind)
            p = held_out[kind]
            base = np.zeros((len(y), n_classes))
            for fit_rows, test_rows in _splits(groups, folds):
                base[test_rows] = np.bincount(y[fit_rows], minlength=n_classes) / len(fit_rows)
                if nested:
                    f = fit_rows
                    inner, _, _, raw = _select(X[f], y[f], groups[f], n_classes, seed, _INNER_FOLDS)
                    model = _fit(inner, X[f], y[f], seed, raw[inner])
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
            if progress is not None:
                progress(s + 1, len(table.steps))
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
