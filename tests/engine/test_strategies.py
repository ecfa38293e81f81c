"""The strategies as the engine runs them: each stacked score against its formula, the polish
gradient against finite differences, one implementation for one campaign and a batch, and
proposals through run_batch."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as hs
from scipy import stats

from workbench.engine import stacked_gp as sg
from workbench.engine import strategies as st
from workbench.engine.batch import run_batch
from workbench.engine.campaign import Campaign, candidate_sets
from workbench.engine.strategies import Derivatives, Step, get
from workbench.engine.strategies import pseudo_posterior as pp
from workbench.engine.strategies.base import LOG_BELIEF_FLOOR
from workbench.seeding import campaign_streams, derive
from workbench.study.decay import parse
from workbench.validation import InputError
from workbench.world import landscapes as ls
from workbench.world.beliefs import Beta, Product, gaussian_at
from workbench.world.space import Categorical, Continuous, Space

MODEL_BASED = [n for n in st.STRATEGIES if st.get(n).uses_model]


def _inputs(rng, R=3, m=40):
    mean = rng.normal(0.0, 1.0, (R, m))
    sd = rng.uniform(0.2, 2.0, (R, m))
    ref = rng.normal(-0.5, 0.5, R)
    lam = np.array([0.0, 0.7, 3.0])[:R]
    log_belief = rng.normal(-2.0, 1.5, (R, m))
    top = np.full(R, 0.5)
    return mean, sd, ref, lam, log_belief, top


def test_prior_weighted_scores_log_ei_plus_lambda_log_belief_with_ei_checked_by_monte_carlo(rng):
    mean, sd, ref, lam, log_belief, top = _inputs(rng)
    ours = get("prior-weighted").score(mean, sd, ref, lam, log_belief, top)
    # EI's closed form, Jones, Schonlau & Welch (1998), eq. 15, with scipy.stats.norm.
    z = (ref[:, None] - mean) / sd
    ei = (ref[:, None] - mean) * stats.norm.cdf(z) + sd * stats.norm.pdf(z)
    np.testing.assert_allclose(ours, np.log(ei) + lam[:, None] * log_belief, rtol=1e-10)
    # ... and at λ = 0 against EI's definition E[max(f_min − Y, 0)], Y ~ N(μ, σ²), by a
    # Monte-Carlo average of 400,000 draws (standard error below 0.6% of EI for z in [−1, 1]).
    mu, sigma = np.array([-1.0, -0.3, 0.0, 0.4, 1.0]) * 0.7, np.full(5, 0.7)
    y = mu[:, None] + sigma[:, None] * rng.standard_normal((5, 400_000))
    mc = np.maximum(0.0 - y, 0.0).mean(axis=1)
    ei = np.exp(get("prior-weighted").score(mu, sigma, 0.0, 0.0, np.zeros(5), 0.0))
    np.testing.assert_allclose(ei, mc, rtol=0.03)


def test_pseudo_posterior_scores_the_model_and_belief_log_odds_as_scipy_norm_gives_them(rng):
    mean, sd, ref, lam, log_belief, top = _inputs(rng)
    ours = get("pseudo-posterior").score(mean, sd, ref, lam, log_belief, top)
    z = (ref[:, None] - mean) / sd
    model = stats.norm.logcdf(z) - stats.norm.logsf(z)  # log Φ(z) − log(1 − Φ(z))
    p_good = np.clip(np.exp(log_belief - top[:, None]), 1e-12, 1 - 1e-12)
    belief = np.log(p_good / (1 - p_good))
    np.testing.assert_allclose(ours, model + lam[:, None] * belief, rtol=1e-9, atol=1e-12)


def test_no_belief_scores_log_ei_alone_whatever_it_is_given(rng):
    mean, sd, ref, _, log_belief, top = _inputs(rng)
    ours = get("no-belief").score(mean, sd, ref, np.zeros(3), log_belief, top)
    z = (ref[:, None] - mean) / sd
    ei = (ref[:, None] - mean) * stats.norm.cdf(z) + sd * stats.norm.pdf(z)
    np.testing.assert_allclose(ours, np.log(ei), rtol=1e-10)


def test_pseudo_posterior_reference_is_each_campaigns_own_quantile(rng):
    y = rng.normal(size=(4, 15))
    q = np.array([0.25, 0.5, 0.25, 0.1])
    got = get("pseudo-posterior").reference(y, q)
    np.testing.assert_array_equal(got, [np.quantile(y[i], q[i]) for i in range(4)])
    np.testing.assert_array_equal(get("prior-weighted").reference(y, q), y.min(axis=1))


def test_the_belief_odds_are_floored_and_largest_at_the_mode():
    log_b = np.array([0.0, -1.0, -1e6])
    odds = pp.belief_log_odds(log_b, 0.0)
    assert odds[0] == pytest.approx(np.log((1 - 1e-12) / 1e-12))
    assert odds[2] == pytest.approx(np.log(1e-12 / (1 - 1e-12)))
    assert odds[0] > odds[1] > odds[2]


def test_a_vanishing_belief_density_is_floored_so_the_model_still_ranks(rng):
    mean, sd, ref, lam, _, top = _inputs(rng)
    ours = get("prior-weighted").score(mean, sd, ref, lam, np.full(mean.shape, -np.inf), top)
    assert np.isfinite(ours).all()
    floor = get("prior-weighted").score(mean, sd, ref, lam, np.full(mean.shape, -1e4), top)
    np.testing.assert_array_equal(ours, floor)
    assert LOG_BELIEF_FLOOR == -690.0


@pytest.fixture(scope="module")
def fitted():
    """A stack of two GPs fitted to a smooth function on the unit square."""
    rng = np.random.default_rng(7)
    X = rng.random((2, 14, 2))
    Y = np.sin(5 * X[..., 0]) + (X[..., 1] - 0.3) ** 2
    return sg.fit(X, Y, [None, None], [np.random.default_rng(k) for k in range(2)], restarts=1)


def _full_score(strategy, stack, belief, U, ref, lam, top):
    mean, sd = stack.predict(U)
    log_belief = belief.logpdf(U.reshape(-1, 2)).reshape(U.shape[:2])
    return strategy.score(mean, sd, ref, lam, log_belief, top)


@pytest.mark.parametrize("name", MODEL_BASED)
def test_the_polish_gradient_matches_central_differences_of_the_score(name, fitted):
    rng = np.random.default_rng(3)
    strategy = get(name)
    belief = gaussian_at([0.6, 0.4], 0.2)
    top = np.full(2, float(belief.logpdf(np.array([[0.6, 0.4]]))[0]))
    ref, lam = np.array([-0.2, 0.1]), np.array([0.0, 0.8]) * strategy.uses_belief
    U = rng.uniform(0.1, 0.9, (2, 6, 2))
    mean, sd, dmean, dsd = fitted.predict(U, gradient=True)
    h = 1e-6  # the engine's forward step (campaign.FD_STEP)
    probes = U[:, :, None, :] + h * np.eye(2)
    lp = belief.logpdf(probes.reshape(-1, 2)).reshape(2, 6, 2)
    derivatives = Derivatives(
        dmean, dsd, np.broadcast_to(np.eye(2), (2, 2, 2)), lp, np.full(lp.shape, h)
    )
    log_belief = belief.logpdf(U.reshape(-1, 2)).reshape(2, 6)
    value, grad = strategy.score(mean, sd, ref, lam, log_belief, top, derivatives)
    np.testing.assert_array_equal(value, strategy.score(mean, sd, ref, lam, log_belief, top))
    # Central differences of the whole score, step 1e-5: error O(h²) plus the forward
    # difference's O(h) in the belief term, both far below the tolerance.
    fd = np.empty_like(grad)
    for j in range(2):
        e = np.zeros(2)
        e[j] = 1e-5
        up = _full_score(strategy, fitted, belief, U + e, ref, lam, top)
        down = _full_score(strategy, fitted, belief, U - e, ref, lam, top)
        fd[..., j] = (up - down) / 2e-5
    np.testing.assert_allclose(grad, fd, rtol=1e-4, atol=1e-5)


@settings(max_examples=25, deadline=None)
@given(seed=hs.integers(0, 2**32 - 1), name=hs.sampled_from(MODEL_BASED))
def test_one_campaign_scores_as_its_row_of_a_batch(seed, name):
    # One implementation serves a campaign and a batch: leading dimensions only.
    rng = np.random.default_rng(seed)
    mean, sd, ref, lam, log_belief, top = _inputs(rng)
    d = 2
    dmean, dsd = rng.normal(size=(3, 40, 5)), rng.normal(size=(3, 40, 5))
    inputs, lp = rng.normal(size=(3, 5, d)), rng.normal(-2, 1, (3, 40, d))
    step = np.full((3, 40, d), 1e-6)
    strategy = get(name)
    v, g = strategy.score(
        mean, sd, ref, lam, log_belief, top, Derivatives(dmean, dsd, inputs, lp, step)
    )
    for i in range(3):
        vi, gi = strategy.score(
            mean[i],
            sd[i],
            ref[i],
            lam[i],
            log_belief[i],
            top[i],
            Derivatives(dmean[i], dsd[i], inputs[i], lp[i], step[i]),
        )
        np.testing.assert_array_equal(vi, v[i])
        np.testing.assert_array_equal(gi, g[i])


def _campaign(name, decay="constant:1000000", budget=7, space=None, quantile=0.25):
    space = space or Space.unit_cube(2)
    placement = ls.get("branin").placed(at=[0.3, 0.6])
    belief = gaussian_at([0.8, 0.2], 0.05)
    return Campaign(name, placement, space, belief, budget, decay=parse(decay), quantile=quantile)


@pytest.mark.parametrize("name", ["pseudo-posterior", "prior-weighted"])
def test_with_a_huge_weight_a_guided_strategy_proposes_at_the_belief_mode(name):
    c = _campaign(name)
    (trace,) = run_batch([c], [campaign_streams(derive(4, 0))])
    n0 = c.n_initial
    assert np.abs(trace.points[n0:] - [0.8, 0.2]).max() < 0.05
    assert (trace.weight[n0:] == 1e6).all()
    if st.uses_quantile(name):
        np.testing.assert_array_equal(trace.threshold[n0], np.quantile(trace.observed[:n0], 0.25))
    else:
        assert np.isnan(trace.threshold).all()


@pytest.mark.parametrize("name", list(st.STRATEGIES))
def test_every_strategy_proposes_new_points_inside_the_cube(name):
    c = _campaign(name, decay="hyperbolic:2", budget=12)
    (trace,) = run_batch([c], [campaign_streams(derive(5, 0))])
    P = trace.points
    assert np.all((P >= 0) & (P <= 1))
    gaps = np.abs(P[:, None, :] - P[None, :, :]).max(axis=2) + np.eye(len(P))
    assert gaps.min() > 0


def test_proposals_on_discrete_coordinates_sit_on_bin_centres():
    space = Space((Continuous("t", 0, 1), Categorical("flour", ("rye", "wheat", "spelt"))))
    c = _campaign("pseudo-posterior", decay="hyperbolic:2", budget=10, space=space)
    (trace,) = run_batch([c], [campaign_streams(derive(6, 0))])
    np.testing.assert_allclose(trace.points[:, 1] * 3 - 0.5, np.round(trace.points[:, 1] * 3 - 0.5))


def test_an_unknown_strategy_lists_the_valid_ones():
    with pytest.raises(InputError, match="pseudo-posterior") as err:
        get("pseudo_posterior")
    assert "did you mean 'pseudo-posterior'" in str(err.value)


def test_the_registry_splits_strategies_into_guided_and_baselines_with_one_reference():
    assert set(st.belief_strategies()) | set(st.baselines()) == set(st.STRATEGIES)
    assert not set(st.belief_strategies()) & set(st.baselines())
    ref = st.get(st.reference())
    assert ref.is_baseline and ref.uses_model and not ref.uses_belief
    assert [n for n in st.STRATEGIES if st.uses_quantile(n)] == ["pseudo-posterior"]
    assert all(st.description(n) for n in st.STRATEGIES)


def test_candidate_sets_of_many_steps_are_each_steps_candidates_alone():
    # Steps sharing one belief object share its transform; a step with a Beta belief samples
    # on its own. Either way each set is the one its own stream gives alone, value for value.
    shared = gaussian_at([0.8, 0.2], 0.05)
    space = Space.unit_cube(2)
    steps = []
    for k, b in enumerate([shared, shared, Product((Beta(2.0, 3.0), Beta(3.0, 2.0))), shared]):
        X = np.random.default_rng(k).random((12, 2))
        steps.append(Step(space, X, np.sin(5 * X[:, 0]), b, 0.5))
    together = candidate_sets(steps, [np.random.default_rng(100 + k) for k in range(4)])
    for k, step in enumerate(steps):
        (alone,) = candidate_sets([step], [np.random.default_rng(100 + k)])
        np.testing.assert_array_equal(together[k], alone)
    assert not np.array_equal(together[0], together[1])
