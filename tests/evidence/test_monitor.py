"""The monitor: features of a campaign against the belief, the classifier of distortions learnt
from a study's grid, and the advice it gives on campaigns the grid never saw."""

import json
import re
import textwrap
from dataclasses import replace

import numpy as np
import pytest
import scipy.stats
from helpers import oven
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.calibration import calibration_curve

from workbench.analysis import open_grid
from workbench.evidence import monitor as mo
from workbench.study.runner import run_study
from workbench.study.spec import load
from workbench.world.beliefs import gaussian_at
from workbench.world.reference import BeliefReference

STUDY = (
    """
title = "monitor check"
budget = 14
replicates = {replicates}
seed = {seed}
target = 0.05
baselines = ["no-belief"]
[initial]
design = "belief"
size = 3
"""
    + oven()
    + """[[landscape]]
name = "branin"
[[landscape]]
name = "six-hump-camel"
[distortion]
shifted = {{ shift = 0.25 }}
misplaced = {{ misplace = "worst" }}
[strategy.prior-weighted]
decay = ["hyperbolic:2", "hyperbolic:20"]
"""
)
STEPS = (8, 10, 12, 14)
BELIEF = gaussian_at([0.4, 0.6], 0.15)


def _run(tmp, name: str, seed: int, replicates: int):
    path = tmp / f"{name}.toml"
    path.write_text(textwrap.dedent(STUDY.format(seed=seed, replicates=replicates)), "utf-8")
    study = load(path)
    return study, open_grid(run_study(study, tmp / name, jobs=2).grid)


# Not the shared grid (tests/conftest.py): a classifier worth checking needs 10 replicates of
# 14 evaluations from a belief design, and a second grid of fresh seeds.
@pytest.fixture(scope="module")
def trained(tmp_path_factory):
    """A monitor trained on a 10-replicate grid, and a 6-replicate grid of fresh seeds."""
    tmp = tmp_path_factory.mktemp("monitor")
    study, ds = _run(tmp, "train", seed=11, replicates=10)
    beliefs = mo.grid_beliefs(study, ds)
    table = mo.training_table(ds, beliefs, STEPS)
    monitor = mo.train(table, seed=0)
    fresh_study, fresh = _run(tmp, "fresh", seed=977, replicates=6)
    return {
        "ds": ds,
        "beliefs": beliefs,
        "table": table,
        "monitor": monitor,
        "fresh_study": fresh_study,
        "fresh": fresh,
        "fresh_table": mo.training_table(fresh, mo.grid_beliefs(fresh_study, fresh), STEPS),
    }


# --------------------------------------------------------------------------- features


def test_every_feature_is_documented_in_the_order_of_its_column():
    # The module docstring documents every column; a feature added to the mapping must be
    # added to that table too, in its place.
    from workbench.evidence import features

    documented = re.findall(r"^``(\w+)``", features.__doc__, flags=re.MULTILINE)
    assert tuple(documented) == mo.FEATURES
    f = mo.campaign_features(np.tile([0.4, 0.6], (5, 1)), np.arange(5.0), BELIEF, 5)
    assert f.shape == (len(mo.FEATURES),)


def test_spearman_feature_matches_scipy_and_improvement_counts_new_bests():
    values = np.array([5.0, 3.0, 4.0, 2.0, 2.5, 1.0, 6.0, 0.5, 7.0])
    points = np.tile([0.4, 0.6], (9, 1))
    f = dict(zip(mo.FEATURES, mo.campaign_features(points, values, BELIEF, 9), strict=True))
    # Reference: scipy.stats.spearmanr of value against evaluation index.
    rho = scipy.stats.spearmanr(values, np.arange(9)).statistic
    assert f["value_index_spearman"] == pytest.approx(rho)
    # After the first third (evaluations 4 … 9): 2.0, 1.0 and 0.5 set new bests, 3 of 6.
    assert f["late_improvement"] == pytest.approx(0.5)
    assert f["best_level"] == 0.0 and f["failed_share"] == 0.0


def test_failed_evaluations_rank_last_and_are_counted():
    values = np.array([np.nan, 2.0, np.nan, 1.0])
    points = np.array([[0.4, 0.6], [0.9, 0.9], [0.4, 0.6], [0.1, 0.1]])
    f = dict(zip(mo.FEATURES, mo.campaign_features(points, values, BELIEF, 4), strict=True))
    assert f["failed_share"] == 0.5
    ref = BeliefReference.of(BELIEF)
    # The best is the last point, not a failed one at the mode.
    assert f["best_level"] == pytest.approx(ref.level(points[3:])[0])


campaigns = st.integers(2, 6).flatmap(
    lambda n: st.tuples(
        st.just(n),
        st.integers(0, 2**32 - 1),
        st.integers(1, 12),
        st.floats(0.1, 1.0),
    )
)


@settings(max_examples=25, deadline=None)
@given(campaigns)
def test_features_are_finite_permutation_invariant_and_use_only_the_first_t(case):
    n, seed, t, quantile = case
    rng = np.random.default_rng(seed)
    points = rng.random((n, 12, 2))
    values = rng.normal(size=(n, 12))
    values[rng.random((n, 12)) < 0.2] = np.nan
    ref = BeliefReference.of(BELIEF)
    f = mo.campaign_features(points, values, ref, [t, 12], quantile)
    assert f.shape == (n, 2, len(mo.FEATURES)) and np.isfinite(f).all()
    order = rng.permutation(n)
    np.testing.assert_array_equal(
        mo.campaign_features(points[order], values[order], ref, [t, 12], quantile), f[order]
    )
    later = values.copy()
    later[:, t:] = rng.normal(size=(n, 12 - t))
    np.testing.assert_array_equal(mo.campaign_features(points, later, ref, t, quantile), f[:, 0])


# --------------------------------------------------------------------------- the grid


@pytest.mark.slow
def test_training_table_holds_every_guided_campaign_once(trained):
    table = trained["table"]
    # 2 landscapes × 3 distortions × 10 replicates × 2 prior-weighted decays, quantile repeats
    # dropped.
    assert table.features.shape == (120, len(STEPS), len(mo.FEATURES))
    assert np.bincount(table.labels).tolist() == [40, 40, 40]
    assert sorted(set(table.groups.tolist())) == list(range(10))
    setting = "prior-weighted, decay hyperbolic:2"
    one = mo.training_table(trained["ds"], trained["beliefs"], STEPS, setting=setting)
    assert one.features.shape[0] == 60 and set(one.settings.tolist()) == {setting}
    # The same campaigns, whether the table is pooled or not.
    pooled = table.features[table.settings == setting]
    np.testing.assert_array_equal(np.sort(one.features, axis=0), np.sort(pooled, axis=0))


@pytest.mark.slow
def test_held_out_accuracy_beats_the_base_rate_from_eight_evaluations(trained):
    v = trained["monitor"].validation
    # Observed: accuracy 0.88-0.95 against a base rate of 0.33; Brier 0.10-0.19 against 0.67.
    assert np.all(v["accuracy"] >= v["base_accuracy"] + 0.3)
    assert np.all(v["brier"] <= v["base_brier"] - 0.25)


@pytest.mark.slow
def test_probabilities_are_calibrated_on_campaigns_with_fresh_seeds(trained):
    monitor, fresh = trained["monitor"], trained["fresh_table"]
    p = np.concatenate(
        [monitor.predict_proba(fresh.features[:, s], t) for s, t in enumerate(STEPS)]
    )
    y = np.eye(len(monitor.classes))[np.tile(fresh.labels, len(STEPS))]
    # Reliability (sklearn.calibration.calibration_curve): observed frequency against mean
    # predicted probability in 5 bins of equal count (~170 class-campaign pairs each).
    observed, predicted = calibration_curve(y.ravel(), p.ravel(), n_bins=5, strategy="quantile")
    # Observed: largest gap 0.023 (accuracy on these fresh campaigns 0.83-0.92).
    assert np.max(np.abs(observed - predicted)) < 0.1


@pytest.mark.slow
def test_advice_on_a_misplaced_belief_differs_from_that_on_an_exact_one(trained):
    monitor, ds, fresh = trained["monitor"], trained["ds"], trained["fresh"]
    beliefs = mo.grid_beliefs(trained["fresh_study"], fresh)
    exact, misplaced = (list(fresh["distortion"].values).index(d) for d in ("exact", "misplaced"))
    differs, last = [], {}
    for decay in ("hyperbolic:2", "hyperbolic:20"):
        setting = f"prior-weighted, decay {decay}"
        cube = (
            fresh["point_cube"]
            .sel(strategy="prior-weighted", decay=decay)
            .isel(quantile=0, exploration=0, initial=0)
        )
        seen = (
            fresh["observed"]
            .sel(strategy="prior-weighted", decay=decay)
            .isel(quantile=0, exploration=0, initial=0)
        )
        for li in range(fresh.sizes["landscape"]):
            for r in range(fresh.sizes["replicate"]):
                best = []
                for d in (exact, misplaced):
                    at = {"landscape": li, "distortion": d, "replicate": r}
                    advice = mo.advise(
                        monitor,
                        ds,
                        cube.isel(at).values,
                        seen.isel(at).values,
                        beliefs[(li, d, r)],
                        setting,
                    )
                    best.append(advice.best_action[list(advice.t).index(12)])
                differs.append(best[0] != best[1])
        last[decay] = advice
    # Observed: 24 of 24 campaign pairs (exact: keep; misplaced: drop, or switch to the faster
    # decay in 2 of 12).
    assert np.mean(differs) >= 0.75
    # A switch is offered only to the faster decay (λ = 2/t below 20/t), and advice serialises.
    slow, fast = last["hyperbolic:2"], last["hyperbolic:20"]
    assert not slow.available[:, slow.actions.index("switch to decay hyperbolic:20")].any()
    assert fast.available[:, fast.actions.index("switch to decay hyperbolic:2")].all()
    np.testing.assert_allclose(fast.probabilities.sum(axis=1), 1.0)
    assert json.loads(json.dumps(fast.to_dict()))["setting"] == setting


@pytest.mark.slow
def test_training_is_deterministic_given_the_seed(trained):
    table = trained["table"]
    one = replace(table, features=table.features[:, -1:], steps=table.steps[-1:])
    a, b = mo.train(one, seed=5), mo.train(one, seed=5)
    X = trained["fresh_table"].features[:, -1]
    np.testing.assert_array_equal(a.predict_proba(X, 14), b.predict_proba(X, 14))
