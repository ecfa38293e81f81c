"""Adding a strategy is one subclass and one register line: toy strategies defined here run
through the batch engine, a study file and a grid chunk with no edit to any other module."""

import numpy as np
import pytest
from helpers import make_study

from workbench.engine import strategies as st
from workbench.engine.acquisition import log_expected_improvement_grad
from workbench.engine.batch import run_batch
from workbench.engine.campaign import Campaign
from workbench.engine.strategies import Strategy
from workbench.seeding import campaign_streams, derive
from workbench.study.decay import parse
from workbench.study.grid import Setting, chunks, run_chunk, settings, split
from workbench.world import landscapes as ls
from workbench.world.beliefs import gaussian_at
from workbench.world.space import Space


class ShiftedLogEI(Strategy):
    """log EI plus a constant, times the belief: ranks exactly as prior-weighted."""

    name = "shifted-log-ei"
    description = "log expected improvement plus one, weighted by the belief"

    def model_term(self, mean, sd, reference):
        value, d_mean, d_sd = log_expected_improvement_grad(mean, sd, reference)
        return value + 1.0, d_mean, d_sd


class Uniform(Strategy):
    """A model-free baseline that ignores the belief: uniform draws, as random search."""

    name = "uniform-draws"
    description = "uniform draws"
    is_baseline = True
    uses_model = False
    uses_belief = False

    def propose(self, step, rng):
        return step.space.snap(rng.random((1, step.space.dim)))[0]


@pytest.fixture
def registered(monkeypatch):
    # As a new module's register lines would, on a copy of the registry restored afterwards.
    monkeypatch.setattr(st, "STRATEGIES", dict(st.STRATEGIES))
    st.register(ShiftedLogEI)
    st.register(Uniform)


def _campaigns(names, budget=14):
    placement = ls.get("branin").placed(at=[0.3, 0.6])
    belief = gaussian_at([0.35, 0.55], 0.15)
    return [
        Campaign(n, placement, Space.unit_cube(2), belief, budget, decay=parse("hyperbolic:4"))
        for n in names
    ]


def test_a_toy_score_runs_stacked_and_ranks_as_the_strategy_it_shifts(registered):
    names = ["prior-weighted", "shifted-log-ei", "uniform-draws", "random"]
    streams = [campaign_streams(derive(9, 0)) for _ in names]  # the same streams for each
    pw, shifted, uniform, rand = run_batch(_campaigns(names), streams)
    # A constant added to the score moves no candidate ranking; the polish sees the same
    # gradient. Measured: the same points to 1e-12 on this campaign.
    np.testing.assert_allclose(shifted.points, pw.points, rtol=0, atol=1e-9)
    np.testing.assert_array_equal(shifted.weight, pw.weight)
    assert np.isnan(shifted.threshold).all()
    # The model-free toy draws from its stream as random search does, with no belief: the
    # same points, and no weight recorded.
    np.testing.assert_array_equal(uniform.points, rand.points)
    assert np.isnan(uniform.weight).all()


def test_a_toy_strategy_is_read_from_a_study_and_runs_in_a_grid_chunk(registered):
    study = make_study(
        """
        title = "toy"
        budget = 9
        replicates = 2
        seed = 5
        baselines = ["uniform-draws", "no-belief"]
        [[landscape]]
        name = "branin"
        [belief]
        spread = 0.15
        [distortion.far]
        shift = 0.3
        [strategy.shifted-log-ei]
        decay = ["hyperbolic:4"]
        [strategy.prior-weighted]
        decay = ["hyperbolic:4"]
        """
    )
    guided, _ = settings(study)
    assert [s.strategy for s in guided] == ["shifted-log-ei", "prior-weighted"]
    assert guided[0].label == "shifted-log-ei, decay hyperbolic:4, initial belief"
    every = chunks(study)
    exact, far = (next(c for c in every if c.distortion == d) for d in (0, 1))
    # The belief-free toy runs in the exact distortion's chunk only, as the other baselines.
    assert [s.strategy for s in far.settings] == ["shifted-log-ei", "prior-weighted"]
    assert "uniform-draws" in [s.strategy for s in exact.settings]
    arrays = run_chunk(study, far)
    for _, data in split(far, arrays):
        np.testing.assert_allclose(data["points"][0], data["points"][1], rtol=0, atol=1e-9)
    assert Setting("uniform-draws").label == "uniform-draws, initial sobol"
