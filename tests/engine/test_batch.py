"""Campaigns in lock-step: a campaign's trace does not depend on its batch."""

from dataclasses import replace

import numpy as np
import pytest
from scipy.stats import qmc

from workbench.engine.batch import run, run_batch
from workbench.engine.campaign import Campaign, Trace
from workbench.seeding import campaign_streams, derive
from workbench.study.decay import parse
from workbench.world import landscapes as ls
from workbench.world.beliefs import gaussian_at
from workbench.world.space import Categorical, Continuous, Integer, Space

FIELDS = ("points", "observed", "value", "failed", "best", "regret", "weight", "threshold")


def _mixed(budget=18, space=None, dim=2):
    space = space or Space.unit_cube(dim)
    placement = ls.get("branin").placed(at=[0.3, 0.6])
    belief = gaussian_at([0.3, 0.6], 0.1)
    decay = parse("hyperbolic:5")
    return [
        Campaign(s, placement, space, belief, budget, decay=decay, exploration=e, quantile=q)
        for s, e, q in (
            ("pseudo-posterior", 0.0, 0.25),
            ("pseudo-posterior", 0.3, 0.5),
            ("prior-weighted", 0.0, 0.25),
            ("prior-weighted", 0.2, 0.25),
            ("no-belief", 0.0, 0.25),
            ("random", 0.0, 0.25),
            ("belief-sampling", 0.0, 0.25),
        )
    ]


def _streams(n, root=3):
    return [campaign_streams(derive(root, i)) for i in range(n)]


def _same(a: Trace, b: Trace):
    # Measured: equal bit for bit. Stated tolerance 1e-9 (absolute), the brief's bound.
    for name in FIELDS:
        np.testing.assert_allclose(getattr(a, name), getattr(b, name), rtol=0, atol=1e-9)
    assert a.mode_value == b.mode_value


def test_a_campaign_runs_the_same_alone_and_in_a_batch_of_mixed_strategies():
    campaigns = _mixed()
    together = run_batch(campaigns, _streams(len(campaigns)))
    for c, s, t in zip(campaigns, _streams(len(campaigns)), together, strict=True):
        _same(run_batch([c], [s])[0], t)


def test_a_batch_of_replicates_matches_each_replicate_alone_on_hartmann6_past_ninety_points():
    # Past n = 90 the kernel matrices exceed numpy's 8,192-element buffer, where a buffered
    # reduction would split by stack size; the campaign must still not see its batch.
    placement = ls.get("hartmann6").placed()
    c = Campaign("no-belief", placement, Space.unit_cube(6), gaussian_at(np.full(6, 0.5), 0.2), 96)
    together = run_batch([c] * 3, _streams(3, root=8))
    for r, s in enumerate(_streams(3, root=8)):
        _same(run(c, s), together[r])


def test_batches_on_discrete_coordinates_stay_independent_and_on_bin_centres():
    space = Space(
        (Continuous("t", 0, 1), Categorical("flour", ("rye", "wheat", "spelt")), Integer("n", 1, 4))
    )
    placement = ls.get("hartmann3").placed()
    belief = gaussian_at([0.5, 0.5, 0.5], 0.2)
    campaigns = [
        Campaign(s, placement, space, belief, 14, decay=parse("hyperbolic:3"))
        for s in ("pseudo-posterior", "prior-weighted", "no-belief")
    ]
    together = run_batch(campaigns, _streams(3))
    for c, s, t in zip(campaigns, _streams(3), together, strict=True):
        _same(run(c, s), t)
        np.testing.assert_array_equal(t.points, space.snap(t.points))


@pytest.mark.filterwarnings("ignore:The balance properties")
@pytest.mark.parametrize(
    ("strategy", "asked", "taken"),
    [
        ("no-belief", "belief", "sobol"),
        ("random", "belief", "sobol"),
        ("belief-sampling", "lhs", "belief"),
    ],
)
def test_the_initial_design_follows_what_the_strategy_uses(strategy, asked, taken):
    # A strategy that ignores the belief takes Sobol points for a belief design; belief
    # sampling always draws from the belief. The design comes from the design stream alone.
    c = replace(_mixed()[0], strategy=strategy, design=asked)
    trace = run(c, _streams(1)[0])
    n0 = c.n_initial
    rng = _streams(1)[0]["design"]
    if taken == "sobol":
        expected = qmc.Sobol(2, scramble=True, seed=rng).random(n0)
    else:
        expected = c.belief.sample(n0, rng)
    np.testing.assert_array_equal(trace.points[:n0], c.space.snap(expected))


def test_a_batch_refuses_campaigns_of_different_shapes():
    a, b = _mixed(budget=12)[0], _mixed(budget=13)[0]
    with pytest.raises(ValueError, match="share dimension, budget and design size"):
        run_batch([a, b], _streams(2))
    with pytest.raises(ValueError, match="one entry per campaign"):
        run_batch([a], _streams(2))
    assert run_batch([], []) == []
