import numpy as np
import pytest

from workbench import gp
from workbench.engine.acquisition import log_odds_good
from workbench.engine.strategies import STRATEGIES, Step, get
from workbench.engine.strategies import pseudo_posterior as pp
from workbench.validation import InputError
from workbench.world.beliefs import gaussian_at
from workbench.world.space import Categorical, Continuous, Space


def _step(weight, rng, belief=None, space=None):
    space = space or Space.unit_cube(2)
    X = rng.random((12, space.dim))
    y = np.sin(5 * X[:, 0]) + (X[:, 1] - 0.3) ** 2
    model = gp.fit(space.features(X), y, rng=rng)
    belief = belief or gaussian_at([0.8, 0.2], 0.05)
    mode = np.atleast_2d(belief.mode())
    return Step(space, X, y, belief, float(belief.logpdf(mode)[0]), weight, 0.25, model)


def test_with_zero_weight_pseudo_posterior_ranks_exactly_by_the_model_log_odds(rng):
    step = _step(0.0, rng)
    U = rng.random((500, 2))
    mean, sd = step.predict(U)
    threshold = float(np.quantile(step.y, 0.25))
    ours = pp.score(mean, sd, step.log_belief(U), step.log_belief_max, 0.0, threshold)
    ref = log_odds_good(mean, sd, threshold)
    np.testing.assert_array_equal(np.argsort(ours, kind="stable"), np.argsort(ref, kind="stable"))


def test_with_a_huge_weight_pseudo_posterior_proposes_the_belief_mode(rng):
    step = _step(1e6, rng)
    u, threshold = get("pseudo-posterior").propose(step, rng)
    assert np.linalg.norm(u - np.array([0.8, 0.2])) < 0.02
    assert threshold == pytest.approx(np.quantile(step.y, 0.25))


def test_the_belief_odds_are_floored_and_largest_at_the_mode():
    log_b = np.array([0.0, -1.0, -1e6])
    odds = pp.belief_log_odds(log_b, 0.0)
    assert odds[0] == pytest.approx(np.log((1 - 1e-12) / 1e-12))
    assert odds[2] == pytest.approx(np.log(1e-12 / (1 - 1e-12)))
    assert odds[0] > odds[1] > odds[2]


def test_prior_weighted_with_a_huge_weight_proposes_near_the_belief_mode(rng):
    step = _step(1e4, rng)
    u, threshold = get("prior-weighted").propose(step, rng)
    assert np.linalg.norm(u - np.array([0.8, 0.2])) < 0.05
    assert np.isnan(threshold)


@pytest.mark.parametrize("name", list(STRATEGIES))
def test_every_strategy_proposes_a_new_point_inside_the_cube(name, rng):
    step = _step(1.0, rng)
    u, _ = get(name).propose(step, rng)
    assert u.shape == (2,) and np.all((u >= 0) & (u <= 1))
    assert np.abs(step.X - u).max(axis=1).min() > 0


def test_proposals_on_discrete_coordinates_sit_on_bin_centres(rng):
    space = Space((Continuous("t", 0, 1), Categorical("flour", ("rye", "wheat", "spelt"))))
    step = _step(1.0, rng, space=space)
    u, _ = get("pseudo-posterior").propose(step, rng)
    assert u[1] * 3 - 0.5 == pytest.approx(round(u[1] * 3 - 0.5))


def test_an_unknown_strategy_lists_the_valid_ones():
    with pytest.raises(InputError, match="pseudo-posterior") as err:
        get("pseudo_posterior")
    assert "did you mean 'pseudo-posterior'" in str(err.value)


def test_candidate_sets_of_many_steps_are_each_steps_candidates_alone():
    # Steps sharing one belief object share its transform; a step with a Beta belief samples
    # on its own. Either way each set is the one its own stream gives alone, value for value.
    from workbench.engine.strategies.base import candidate_sets, candidates
    from workbench.world.beliefs import Beta, Product

    shared = gaussian_at([0.8, 0.2], 0.05)
    steps = [
        _step(0.5, np.random.default_rng(k), belief=b)
        for k, b in enumerate([shared, shared, Product((Beta(2.0, 3.0), Beta(3.0, 2.0))), shared])
    ]
    together = candidate_sets(steps, [np.random.default_rng(100 + k) for k in range(4)])
    for k, step in enumerate(steps):
        alone = candidates(step, np.random.default_rng(100 + k))
        np.testing.assert_array_equal(together[k], alone)
    assert not np.array_equal(together[0], together[1])
