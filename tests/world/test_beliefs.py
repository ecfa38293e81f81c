"""Beliefs against scipy.stats (reference library) and numerical integration."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate, stats

from workbench.validation import InputError
from workbench.world import beliefs as bl
from workbench.world.space import Categorical, Continuous, Integer, Space

U = np.linspace(0.0, 1.0, 101)


def _integral_1d(b):
    return integrate.quad(lambda x: np.exp(b.logpdf(np.array([x]))[0]), 0, 1, limit=200)[0]


def _integral_2d(b, n=400):
    # Midpoint rule on an n × n grid; error O(1/n²) for smooth densities.
    g = (np.arange(n) + 0.5) / n
    X, Y = np.meshgrid(g, g)
    return float(np.exp(b.logpdf(np.column_stack([X.ravel(), Y.ravel()]))).mean())


@pytest.mark.parametrize("centre, spread", [(0.3, 0.2), (0.0, 0.05), (0.95, 0.5), (0.5, 3.0)])
def test_truncated_gaussian_matches_scipy_truncnorm(centre, spread):
    b = bl.TruncatedGaussian(centre, spread)
    a, c = -centre / spread, (1 - centre) / spread
    # scipy.stats.truncnorm is the reference implementation.
    np.testing.assert_allclose(
        b.logpdf(U),
        stats.truncnorm.logpdf(U, a, c, loc=centre, scale=spread),
        rtol=1e-10,
        atol=1e-10,
    )
    np.testing.assert_allclose(
        b.cdf(U), stats.truncnorm.cdf(U, a, c, loc=centre, scale=spread), atol=1e-10
    )
    lost = 1 - (stats.norm.cdf(c) - stats.norm.cdf(a))
    assert b.truncated_mass == pytest.approx(lost, abs=1e-12)
    assert _integral_1d(b) == pytest.approx(1.0, abs=1e-3)


def test_truncated_gaussian_sample_moments_match_scipy():
    b = bl.TruncatedGaussian(0.2, 0.15)
    x = b.sample(200_000, np.random.default_rng(1))
    ref = stats.truncnorm(-0.2 / 0.15, 0.8 / 0.15, loc=0.2, scale=0.15)
    assert x.mean() == pytest.approx(ref.mean(), abs=3e-3)
    assert x.std() == pytest.approx(ref.std(), abs=3e-3)
    assert x.min() >= 0 and x.max() <= 1


def test_gaussian_on_a_log_parameter_is_a_truncated_lognormal_in_user_units():
    p = Continuous("learning_rate", 1e-5, 1e-1, log=True)
    b = bl.gaussian_for(p, 3e-4, factor=3)
    # "within a factor of 3": 90 % of the untruncated mass in [c/3, 3c], so σ_log = ln 3 / 1.645.
    sigma = np.log(3) / stats.norm.ppf(0.95)
    ref = stats.lognorm(s=sigma, scale=3e-4)
    x = np.geomspace(2e-5, 5e-2, 50)
    du_dx = 1.0 / (x * np.log(1e-1 / 1e-5))
    ours = np.exp(b.logpdf(p.to_unit(x))) * du_dx
    inside = ref.cdf(1e-1) - ref.cdf(1e-5)
    np.testing.assert_allclose(ours, ref.pdf(x) / inside, rtol=1e-10)


def test_within_means_ninety_percent_of_the_mass_on_a_linear_parameter():
    p = Continuous("temperature", 100, 300)
    b = bl.gaussian_for(p, 200, within=20)
    lo, hi = p.to_unit(np.array([180.0, 220.0]))
    assert b.cdf(hi) - b.cdf(lo) == pytest.approx(0.9, abs=1e-6)


@pytest.mark.parametrize("a, b", [(2.0, 5.0), (0.7, 0.7), (3.0, 1.5)])
def test_beta_matches_scipy_beta(a, b):
    belief = bl.Beta(a, b)
    inner = U[1:-1]
    np.testing.assert_allclose(belief.logpdf(inner), stats.beta.logpdf(inner, a, b), rtol=1e-10)
    x = belief.sample(100_000, np.random.default_rng(2))
    assert x.mean() == pytest.approx(stats.beta.mean(a, b), abs=3e-3)
    assert x.var() == pytest.approx(stats.beta.var(a, b), abs=2e-3)


def test_uniform_matches_scipy_uniform():
    np.testing.assert_allclose(bl.Uniform().logpdf(U), stats.uniform.logpdf(U), atol=1e-12)


def test_categorical_probabilities_are_bin_masses_and_match_a_scipy_discrete():
    p = Categorical("optimiser", ("adam", "sgd", "rmsprop"))
    b = bl.probabilities_for(p, {"adam": 0.8, "sgd": 0.2})
    centres = (np.arange(3) + 0.5) / 3
    ref = stats.rv_discrete(values=([0, 1, 2], [0.8, 0.2, 0.0]))
    with np.errstate(divide="ignore"):
        expected = np.log(ref.pmf([0, 1, 2]) * 3)
    np.testing.assert_allclose(b.logpdf(centres), expected, rtol=1e-10)
    draws = p.from_unit(b.sample(50_000, np.random.default_rng(3)))
    assert np.mean(draws == 0) == pytest.approx(0.8, abs=0.01)
    assert _integral_1d(b) == pytest.approx(1.0, abs=1e-3)


def test_probabilities_that_do_not_sum_to_one_are_normalised_with_a_warning():
    p = Categorical("flour", ("rye", "wheat"))
    with pytest.warns(UserWarning, match="sum to 2"):
        b = bl.probabilities_for(p, [1.0, 1.0])
    assert b.probabilities == (0.5, 0.5)


@pytest.mark.parametrize("probs", [[-0.1, 1.1], [0.0, 0.0], [0.5]])
def test_impossible_probability_lists_are_rejected_with_a_plain_error(probs):
    # The constructors know no study keys: the parser names the key (tests/study/test_spec.py).
    with pytest.raises(ValueError) as info:
        bl.probabilities_for(Categorical("flour", ("rye", "wheat")), probs)
    assert not isinstance(info.value, InputError)


def test_integer_gaussian_is_the_normal_mass_of_each_value():
    p = Integer("racks", 1, 8)
    b = bl.gaussian_for(p, 4, within=2)
    sd = 2 / (stats.norm.ppf(0.95) * 8)
    ref = stats.norm(loc=p.to_unit(4), scale=sd)
    edges = np.linspace(0, 1, 9)
    mass = np.diff(ref.cdf(edges))
    np.testing.assert_allclose(b.probabilities, mass / mass.sum(), rtol=1e-10)


def test_product_density_is_the_product_of_marginals_and_integrates_to_one():
    b = bl.Product((bl.TruncatedGaussian(0.3, 0.2), bl.Beta(2.0, 3.0)))
    X = np.random.default_rng(4).random((20, 2))
    ref = stats.truncnorm.logpdf(X[:, 0], -1.5, 3.5, loc=0.3, scale=0.2) + stats.beta.logpdf(
        X[:, 1], 2, 3
    )
    np.testing.assert_allclose(b.logpdf(X), ref, rtol=1e-10)
    assert _integral_2d(b) == pytest.approx(1.0, abs=1e-3)
    assert b.truncated_mass == pytest.approx(bl.TruncatedGaussian(0.3, 0.2).truncated_mass)


def test_mixture_density_is_the_weighted_sum_and_its_mode_is_the_higher_peak():
    m = bl.Mixture((bl.TruncatedGaussian(0.2, 0.05), bl.TruncatedGaussian(0.7, 0.1)), (0.3, 0.7))

    def tn(c, s):
        return stats.truncnorm.pdf(U, (0 - c) / s, (1 - c) / s, loc=c, scale=s)

    ref = 0.3 * tn(0.2, 0.05) + 0.7 * tn(0.7, 0.1)
    np.testing.assert_allclose(np.exp(m.logpdf(U)), ref, rtol=1e-10)
    assert m.mode() == pytest.approx(0.7, abs=1e-3)
    assert _integral_1d(m) == pytest.approx(1.0, abs=1e-3)
    q = m.ppf(np.array([0.05, 0.5, 0.95]))
    np.testing.assert_allclose(m.cdf(q), [0.05, 0.5, 0.95], atol=1e-3)


def test_joint_mixture_integrates_to_one_in_two_dimensions():
    a = bl.gaussian_at([0.2, 0.3], 0.1)
    b = bl.gaussian_at([0.8, 0.6], 0.2)
    m = bl.Mixture((a, b), (1.0, 3.0))
    assert _integral_2d(m) == pytest.approx(1.0, abs=1e-3)
    np.testing.assert_allclose(m.sample(7, np.random.default_rng(0)).shape, (7, 2))


def test_density_from_good_points_matches_scipy_gaussian_kde_away_from_the_bounds():
    rng = np.random.default_rng(5)
    pts = 0.5 + 0.05 * rng.standard_normal((40, 2))
    space = Space.unit_cube(2)
    kde = bl.from_points(pts, space)
    assert _integral_2d(kde) == pytest.approx(1.0, abs=1e-3)
    # scipy.stats.gaussian_kde with Scott's factor n^(-1/(d+4)) and a diagonal covariance
    # (our kernel is a product of per-coordinate Gaussians with the same bandwidths).
    n, d = pts.shape
    h = pts.std(axis=0, ddof=1) * n ** (-1 / (d + 4))
    X = 0.5 + 0.05 * rng.standard_normal((10, 2))
    ref = np.mean(
        [stats.multivariate_normal.pdf(X, mean=p, cov=np.diag(h**2)) for p in pts], axis=0
    )
    np.testing.assert_allclose(np.exp(kde.logpdf(X)), ref, rtol=1e-6)


def test_density_from_points_handles_categorical_coordinates():
    space = Space((Continuous("t", 0, 1), Categorical("flour", ("rye", "wheat", "spelt"))))
    pts = np.array([[0.4, 0.5], [0.45, 0.5], [0.5, 0.1]])
    kde = bl.from_points(pts, space)
    assert space.format_point(kde.mode())["flour"] == "wheat"
    assert _integral_2d(kde, n=600) == pytest.approx(1.0, abs=2e-3)


@settings(max_examples=30, deadline=None)
@given(c=st.floats(0, 1), s=st.floats(0.02, 2), target=st.floats(0, 1), f=st.floats(0.2, 3))
def test_centred_moves_the_mode_and_scaled_multiplies_the_spread(c, s, target, f):
    b = bl.TruncatedGaussian(c, s)
    assert b.centred(target).mode() == pytest.approx(target)
    assert b.scaled(f).spread == pytest.approx(s * f)


def test_summary_reports_intervals_in_user_units_and_volume():
    space = Space(
        (Continuous("temperature", 100, 300, unit="°C"), Categorical("flour", ("rye", "wheat")))
    )
    belief = bl.Product(
        (bl.gaussian_for(space["temperature"], 200, within=20), bl.Discrete((0.9, 0.1)))
    )
    s = bl.summarise(belief, space)
    t = s.parameters[0]
    assert t.mode == pytest.approx(200)
    assert t.central90[0] == pytest.approx(180, abs=0.01) and t.central90[1] == pytest.approx(
        220, abs=0.01
    )
    assert s.parameters[1].central50 == ("rye",)
    assert s.parameters[1].central90 == ("rye",)


def test_a_gaussian_product_samples_by_scipy_truncnorm_quantiles_of_its_uniform_draws():
    # Reference: scipy.stats.truncnorm.ppf (inverse-cdf sampling, common practice).
    b = bl.Product((bl.TruncatedGaussian(0.3, 0.2), bl.Uniform(), bl.TruncatedGaussian(0.9, 0.1)))
    assert b.by_inverse_cdf
    Q = b.uniforms(50, np.random.default_rng(8))
    np.testing.assert_array_equal(Q, np.random.default_rng(8).random((3, 50)))
    X = b.from_uniforms(Q)
    ref0 = stats.truncnorm.ppf(Q[0], -1.5, 3.5, loc=0.3, scale=0.2)
    ref2 = stats.truncnorm.ppf(Q[2], -9.0, 1.0, loc=0.9, scale=0.1)
    np.testing.assert_allclose(X[:, 0], ref0, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(X[:, 2], ref2, rtol=1e-9, atol=1e-12)
    np.testing.assert_array_equal(X[:, 1], Q[1])
    # sample() is the same two steps on the same stream; stacked draws transform row by row.
    np.testing.assert_array_equal(b.sample(50, np.random.default_rng(8)), X)
    np.testing.assert_array_equal(b.from_uniforms(np.stack([Q, Q[::-1]]))[0], X)
    assert not bl.Product((bl.Beta(2.0, 3.0),)).by_inverse_cdf
