"""Campaign behaviour on small budgets, 8 replicates (each claim was observed to hold here)."""

import numpy as np
import pytest
from helpers import make_study

from workbench.engine.batch import run
from workbench.engine.campaign import Campaign
from workbench.seeding import campaign_streams, derive
from workbench.study.grid import chunks, split
from workbench.study.runner import execute
from workbench.world import landscapes as ls
from workbench.world.beliefs import gaussian_at
from workbench.world.space import Space


def final_regrets(study, distortion="exact", evaluation=-1):
    """{(strategy, decay, quantile, exploration, initial): normalized regrets per replicate}
    in the named distortion (the belief-free baselines run in the exact one only)."""
    out = {}
    for chunk, arrays, _ in execute(study, chunks(study), jobs=2):
        if study.distortions[chunk.distortion].name != distortion:
            continue
        for r, data in split(chunk, arrays):
            for k, s in enumerate(chunk.settings):
                key = (s.strategy, str(s.decay), s.quantile, s.exploration, s.initial)
                out.setdefault(key, {})[r] = data["normalized_regret"][k][evaluation]
    return {k: np.array([v[r] for r in sorted(v)]) for k, v in out.items()}


def _by(results, strategy, **match):
    for (s, decay, q, e, i), values in results.items():
        fields = {"decay": decay, "quantile": q, "exploration": e, "initial": i}
        if s == strategy and all(fields[k] == v for k, v in match.items()):
            return values
    raise KeyError((strategy, match))


def test_a_well_placed_belief_beats_no_belief_after_ten_evaluations_on_branin():
    study = make_study(
        """
        title = "well placed"
        budget = 10
        replicates = 8
        seed = 11
        baselines = ["no-belief"]
        [[landscape]]
        name = "branin"
        [belief]
        spread = 0.1
        [strategy.pseudo-posterior]
        decay = ["hyperbolic:10"]
        [strategy.prior-weighted]
        decay = ["hyperbolic:10"]
        """
    )
    r = final_regrets(study)
    none = np.median(_by(r, "no-belief"))
    assert np.median(_by(r, "pseudo-posterior")) < none
    assert np.median(_by(r, "prior-weighted")) < none


@pytest.mark.slow
def test_prior_weighted_washes_out_a_misplaced_belief_with_hyperbolic_decay():
    study = make_study(
        """
        title = "misplaced, decay"
        budget = 50
        replicates = 8
        seed = 12
        baselines = []
        [[landscape]]
        name = "hartmann3"
        [belief]
        spread = 0.1
        [distortion]
        misplaced = { misplace = "worst" }
        [strategy.prior-weighted]
        decay = ["hyperbolic:5", "constant:1"]
        """
    )
    r = final_regrets(study, "misplaced")
    hyper = np.median(_by(r, "prior-weighted", decay="hyperbolic:5"))
    const = np.median(_by(r, "prior-weighted", decay="constant:1"))
    assert hyper < const


@pytest.mark.slow
def test_exploration_and_a_spread_design_rescue_the_pseudo_posterior_from_a_misplaced_belief():
    study = make_study(
        """
        title = "misplaced, exploration"
        budget = 50
        replicates = 8
        seed = 13
        baselines = []
        [[landscape]]
        name = "branin"
        [belief]
        spread = 0.1
        [initial]
        design = ["belief", "sobol"]
        [distortion]
        misplaced = { misplace = "worst" }
        [strategy.pseudo-posterior]
        decay = ["hyperbolic:10"]
        exploration = [0.0, 0.2]
        """
    )
    results = {}
    for chunk, data, _ in execute(study, chunks(study), jobs=2):
        if study.distortions[chunk.distortion].name != "misplaced":
            continue
        for k, s in enumerate(chunk.settings):
            results.setdefault((s.exploration, s.initial), []).extend(
                data["normalized_regret"][:, k, -1]
            )
    rescued = np.median(results[(0.2, "sobol")])
    neither = np.median(results[(0.0, "belief")])
    assert rescued < neither


def _campaign(strategy="pseudo-posterior", budget=15, placement=None, **kw):
    placement = placement or ls.get("branin").placed(at=[0.3, 0.6])
    return Campaign(
        strategy, placement, Space.unit_cube(2), gaussian_at([0.3, 0.6], 0.1), budget, **kw
    )


def test_a_campaign_is_deterministic_for_a_seed():
    from workbench.study.decay import parse

    c = _campaign(decay=parse("hyperbolic:5"), design="belief")
    a = run(c, campaign_streams(derive(5, 1)))
    b = run(c, campaign_streams(derive(5, 1)))
    other = run(c, campaign_streams(derive(5, 2)))
    np.testing.assert_array_equal(a.points, b.points)
    np.testing.assert_array_equal(a.best, b.best)
    assert not np.array_equal(a.points, other.points)


def test_a_trace_records_regret_weights_thresholds_and_the_belief_mode_value():
    from workbench.study.decay import parse

    placement = ls.get("branin").placed(at=[0.3, 0.6])
    c = _campaign(decay=parse("hyperbolic:6"), design="sobol", design_size=3, placement=placement)
    t = run(c, campaign_streams(derive(5, 3)))
    assert np.all(np.diff(t.best) <= 0)
    np.testing.assert_allclose(t.regret, t.best - placement.minimum)
    np.testing.assert_allclose(t.normalized_regret, t.regret / placement.gap)
    assert np.all(np.isnan(t.weight[:3])) and np.all(np.isnan(t.threshold[:3]))
    np.testing.assert_allclose(t.weight[3:], 6 / np.arange(3, 15))
    assert np.all(np.isfinite(t.threshold[3:]))
    # The belief's mode is the placed minimiser: the expert's guess is the optimum itself.
    assert t.mode_value == pytest.approx(placement.minimum, abs=1e-9)


class _Flaky:
    """A placement that fails (NaN, infinity or an exception) in part of the cube."""

    def __init__(self, placement):
        self.p = placement
        self.minimum, self.gap = placement.minimum, placement.gap
        self.calls = 0

    def value(self, U):
        self.calls += 1
        U = np.atleast_2d(U)
        if self.calls % 7 == 0:
            raise RuntimeError("sensor fault")
        v = self.p.value(U)
        v[U[:, 0] > 0.8] = np.nan
        v[U[:, 1] > 0.9] = np.inf
        return v

    def normalized_regret(self, best):
        return self.p.normalized_regret(best)


@pytest.mark.parametrize("strategy", ["pseudo-posterior", "prior-weighted", "no-belief"])
def test_failed_evaluations_are_recorded_and_the_campaign_goes_on(strategy):
    from workbench.study.decay import parse

    flaky = _Flaky(ls.get("branin").placed(at=[0.3, 0.6]))
    c = _campaign(strategy, budget=25, placement=flaky, decay=parse("hyperbolic:3"), design="sobol")
    t = run(c, campaign_streams(derive(9, 0)))
    assert t.failed.any() and not t.failed.all()
    assert np.all(np.isnan(t.value[t.failed]))
    assert np.all(np.isfinite(t.best[np.argmax(~t.failed) :]))
