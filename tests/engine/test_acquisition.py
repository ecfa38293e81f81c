import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from scipy import special, stats

from workbench.engine.acquisition import (
    expected_improvement,
    log_expected_improvement,
    log_odds_good,
)


@pytest.mark.parametrize("mean, sd, best", [(0.0, 1.0, 0.5), (1.0, 0.3, 0.2), (-2.0, 2.0, -1.0)])
def test_closed_form_ei_matches_a_monte_carlo_average(mean, sd, best):
    # Jones, Schonlau & Welch (1998), J. Global Optimization 13: EI = E[max(f_min − Y, 0)],
    # Y ~ N(μ, σ²); the closed form must agree with the Monte-Carlo mean within 4 standard errors.
    y = np.random.default_rng(7).normal(mean, sd, 2_000_000)
    gain = np.maximum(best - y, 0.0)
    se = gain.std() / np.sqrt(gain.size)
    assert expected_improvement(mean, sd, best) == pytest.approx(gain.mean(), abs=4 * se)


@given(
    st.floats(-50, 50),
    st.floats(1e-3, 10),
    st.floats(-50, 50),
)
def test_log_ei_is_the_log_of_ei_wherever_ei_is_representable(mean, sd, best):
    ei = float(expected_improvement(mean, sd, best))
    log_ei = float(log_expected_improvement(np.array([mean]), np.array([sd]), best)[0])
    assert np.isfinite(log_ei)
    if ei > 1e-250:
        assert log_ei == pytest.approx(np.log(ei), rel=1e-6, abs=1e-9)


def test_log_ei_follows_the_asymptote_far_below_the_incumbent():
    # For z → −∞, z Φ(z) + φ(z) ~ φ(z)/z² (Mills-ratio expansion; common practice).
    z = np.array([-40.0, -200.0, -1e4])
    expected = stats.norm.logpdf(z) - 2 * np.log(-z)
    np.testing.assert_allclose(log_expected_improvement(-z, np.ones(3), 0.0), expected, rtol=1e-3)


def test_log_odds_of_good_is_log_phi_over_one_minus_phi():
    # Kushner (1964): probability of falling below the threshold is Φ((τ − μ)/σ).
    mean, sd, tau = np.array([0.0, 1.0, -1.0]), np.array([1.0, 0.5, 2.0]), 0.3
    p = stats.norm.cdf((tau - mean) / sd)
    np.testing.assert_allclose(log_odds_good(mean, sd, tau), np.log(p / (1 - p)), rtol=1e-12)
    # Stable where Φ underflows.
    assert np.isfinite(log_odds_good(np.array([100.0]), np.array([1.0]), 0.0)).all()
    assert log_odds_good(np.array([100.0]), np.array([1.0]), 0.0)[0] == pytest.approx(
        special.log_ndtr(-100.0), rel=1e-6
    )


@pytest.mark.parametrize("z", [-30.0, -12.0, -3.0, 0.0, 2.5, 8.0])
def test_log_ei_and_log_odds_gradients_match_central_differences(z):
    # Derivatives in μ and σ checked by central differences (step 1e-6 relative), from deep in
    # the lower tail (z = −30) to far above the incumbent.
    from workbench.engine.acquisition import log_expected_improvement_grad, log_odds_good_grad

    sd, ref = 0.7, 0.3
    mean = ref - z * sd
    for value_fn, grad_fn in (
        (log_expected_improvement, log_expected_improvement_grad),
        (log_odds_good, log_odds_good_grad),
    ):
        v, dm, ds = grad_fn(np.array([mean]), np.array([sd]), ref)
        assert v[0] == pytest.approx(float(value_fn(mean, sd, ref)), rel=1e-12, abs=1e-12)
        h = 1e-6 * max(1.0, abs(mean))
        num_m = (value_fn(mean + h, sd, ref) - value_fn(mean - h, sd, ref)) / (2 * h)
        k = 1e-6 * sd
        num_s = (value_fn(mean, sd + k, ref) - value_fn(mean, sd - k, ref)) / (2 * k)
        assert dm[0] == pytest.approx(float(num_m), rel=1e-5, abs=1e-7)
        assert ds[0] == pytest.approx(float(num_s), rel=1e-5, abs=1e-7)
