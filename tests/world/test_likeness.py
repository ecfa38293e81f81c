"""Surfaces drawn like the user's data: likelihood, slice sampling, warp, placement."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import integrate
from scipy.stats import qmc
from sklearn.gaussian_process import GaussianProcessRegressor
from sklearn.gaussian_process.kernels import ConstantKernel, Matern, WhiteKernel

from workbench import gp
from workbench.world import kinds, likeness, surfaces

# ----------------------------------------------------------------------------- fixtures


def _gp_data(lengthscales, n, seed, smoothness=2.5):
    """n points of one GP-prior draw (random Fourier features) at uniform cube points."""
    rng = np.random.default_rng(seed)
    dim = len(lengthscales)
    surface = surfaces.draw_prior(dim, smoothness, np.array(lengthscales), rng, 2048)
    X = rng.uniform(size=(n, dim))
    return X, surface(X)


def _plateau_data():
    """A bowl whose worst 40 % saturate at one value, as a failing model's error does."""
    rng = np.random.default_rng(7)
    X = qmc.Sobol(2, seed=rng).random(32)
    bowl = 4 * (X[:, 0] - 0.35) ** 2 + 2 * (X[:, 1] - 0.6) ** 2
    cap = float(np.quantile(bowl, 0.6))
    return X, np.minimum(bowl, cap), cap


@pytest.fixture(scope="session")
def ordered_posterior():
    """Posterior given 2-D data from a GP that is long on axis 0 and short on axis 1."""
    X, y = _gp_data([1.0, 0.12], 40, seed=3)
    return likeness.hyper_posterior(X, likeness.normal_scores(y), np.random.default_rng(1), 32)


@pytest.fixture(scope="session")
def plateau_spec():
    X, y, cap = _plateau_data()
    spec = likeness.LikeData(
        tuple(map(tuple, X.tolist())), tuple(y.tolist()), "plateau data", draws=32
    )
    spec.posterior()  # computed once, cached for the session
    return spec, cap


# ----------------------------------------------------------------------------- likelihood


@pytest.mark.parametrize("nu", surfaces.SMOOTHNESS_VALUES)
def test_log_marginal_likelihood_and_gradient_agree_with_scikit_learn(nu):
    X, y = _gp_data([0.4, 0.7], 15, seed=11)
    y = (y - y.mean()) / y.std()
    ls, signal, noise = np.array([0.3, 0.5]), 1.3, 0.02
    theta = np.log([*ls, signal, noise])
    value, grad = likeness.log_marginal_likelihood(theta, X, y, nu)
    # Reference library: scikit-learn's GaussianProcessRegressor with a fixed kernel (see
    # docs/REFERENCES.md); its theta is log(s², ℓ_1, ℓ_2, σ²) in kernel order.
    kernel = ConstantKernel(signal) * Matern(ls, nu=nu) + WhiteKernel(noise)
    reference = GaussianProcessRegressor(kernel, alpha=0.0, optimizer=None).fit(X, y)
    ref_value, ref_grad = reference.log_marginal_likelihood(reference.kernel_.theta, True)
    assert value == pytest.approx(ref_value, rel=1e-9)
    np.testing.assert_allclose(grad, ref_grad[[1, 2, 0, 3]], rtol=1e-6, atol=1e-8)


def test_smoothness_five_halves_agrees_with_the_engine_surrogate():
    X, y = _gp_data([0.4, 0.7, 0.2], 20, seed=2)
    theta = np.log([0.3, 0.5, 0.2, 0.8, 1e-3])
    ours = likeness.log_marginal_likelihood(theta, X, y, 2.5)
    theirs = gp.log_marginal_likelihood(theta, X, y)
    assert ours[0] == pytest.approx(theirs[0], rel=1e-10)
    np.testing.assert_allclose(ours[1], theirs[1], rtol=1e-7, atol=1e-9)


# ----------------------------------------------------------------------------- slice sampling


def _batch_means_se(draws, batches=40):
    """Standard error of a chain's mean by batch means (common practice for MCMC output)."""
    means = np.asarray(draws)[: len(draws) // batches * batches].reshape(batches, -1).mean(axis=1)
    return float(means.std(ddof=1) / math.sqrt(batches))


def test_slice_draws_of_a_length_scale_match_the_numerically_integrated_posterior():
    # 1-D data, ν = 5/2, signal and noise variance fixed: only log ℓ is free.
    X, y = _gp_data([0.25], 10, seed=5)
    y = (y - y.mean()) / y.std()
    fixed = np.log([1.0, 1e-2])

    def logp(t):
        return likeness.log_posterior(np.r_[t, fixed], X, y, 2.5)

    draws = likeness.slice_sample(logp, [math.log(0.3)], np.random.default_rng(2), 4000)[:, 0]

    # Reference: prior × marginal likelihood integrated on the bounded log-ℓ interval by
    # scipy.integrate.quad (adaptive Gauss–Kronrod).
    low, high = np.log(gp.LENGTHSCALE_BOUNDS)
    peak = max(logp([t]) for t in np.linspace(low, high, 400))

    def moment(k):
        return integrate.quad(lambda t: t**k * math.exp(logp([t]) - peak), low, high, limit=200)[0]

    mass = moment(0)
    mean = moment(1) / mass
    variance = moment(2) / mass - mean**2
    assert abs(draws.mean() - mean) < 4 * _batch_means_se(draws)
    square = (draws - mean) ** 2
    assert abs(square.mean() - variance) < 4 * _batch_means_se(square)


def test_slice_sampler_stays_within_a_bounded_support():
    def logp(t):
        return 0.0 if 0.0 <= t[0] <= 1.0 else -math.inf

    draws = likeness.slice_sample(logp, [0.5], np.random.default_rng(0), 2000)[:, 0]
    assert draws.min() >= 0.0 and draws.max() <= 1.0
    # Uniform on [0, 1]: mean 1/2, variance 1/12 (textbook moments).
    assert abs(draws.mean() - 0.5) < 4 * _batch_means_se(draws)


def test_posterior_median_length_scales_order_the_axes(ordered_posterior):
    long_axis, short_axis = ordered_posterior.median_lengthscales()
    assert long_axis > 2 * short_axis
    assert ordered_posterior.weights.sum() == pytest.approx(1.0)


# ----------------------------------------------------------------------------- warp


values = st.lists(
    st.floats(-1e3, 1e3, allow_nan=False).map(lambda v: round(v, 3)), min_size=2, max_size=40
).filter(lambda v: len(set(v)) > 1)


@settings(max_examples=60, deadline=None)
@given(values)
def test_warp_maps_the_normal_scores_back_to_the_data(y):
    warp = likeness.Warp.from_data(y)
    np.testing.assert_allclose(warp(likeness.normal_scores(y)), y, rtol=0, atol=1e-9)


@settings(max_examples=60, deadline=None)
@given(values)
def test_warp_is_monotone_and_leaves_the_data_range_modestly(y):
    warp = likeness.Warp.from_data(y)
    z = np.linspace(-12, 12, 4001)
    out = warp(z)
    assert np.all(np.diff(out) >= -1e-9 * (1 + np.abs(out[1:])))
    span = max(y) - min(y)
    assert out.min() >= min(y) - likeness.TAIL_FRACTION * span - 1e-9
    assert out.max() <= max(y) + likeness.TAIL_FRACTION * span + 1e-9


def test_warp_is_flat_beyond_a_tied_worst_value():
    warp = likeness.Warp.from_data([0.1, 0.2, 0.3, 0.9, 0.9, 0.9])
    assert np.all(warp(np.linspace(1.0, 8.0, 50)) == 0.9)
    # The best value is unique: the tail below it keeps descending.
    assert warp(-3.0) < warp(-2.0) < 0.1


def test_drawn_surfaces_show_the_datas_saturated_plateau(plateau_spec):
    spec, cap = plateau_spec
    rng = np.random.default_rng(4)
    U = qmc.Sobol(2, seed=rng).random(2**12)
    values = np.concatenate([spec.surface(rng)(U) for _ in range(8)])
    assert values.max() == cap  # saturation: never worse than the data's plateau
    on_plateau = np.mean(values == cap)
    # 40 % of the data sit on the plateau; the drawn surfaces put a similar share of the cube
    # there (loosely: the surfaces are random).
    assert 0.1 < on_plateau < 0.8


def test_warped_fitted_draws_keep_the_data_and_its_plateau():
    X, y, cap = _plateau_data()
    spec = kinds.Fitted(tuple(map(tuple, X.tolist())), tuple(y.tolist()), "plateau", warp=True)
    surface = spec.surface(np.random.default_rng(3))
    assert np.max(surface(qmc.Sobol(2, seed=1).random(2**10))) == cap
    assert np.median(np.abs(surface(X) - y)) < 0.05 * (y.max() - y.min())


# ----------------------------------------------------------------------------- placement


@pytest.mark.parametrize(
    ("at", "levels", "categorical"),
    [((0.3, 0.8), (), ()), ((0.3, 0.625), (0, 4), (False, True))],
)
def test_likedata_minimum_sits_at_the_placement(plateau_spec, at, levels, categorical):
    base, _ = plateau_spec
    spec = likeness.LikeData(base.X, base.y, base.source, levels, categorical, draws=32)
    land = spec.landscape("like", 2, np.random.default_rng(9), at=at)
    lower = np.array(land.lower)
    np.testing.assert_allclose(np.array(land.minimisers[0]) - lower, at, atol=1e-9)
    assert land.function((lower + np.array(at))[None, :])[0] == pytest.approx(land.minimum)
    dense = land.function(lower + qmc.Sobol(2, seed=2).random(2**12))
    assert dense.min() >= land.minimum - 1e-9 * max(1.0, abs(land.minimum))


def test_a_categorical_axis_is_a_step_function_of_nearly_independent_choices(plateau_spec):
    base, _ = plateau_spec
    spec = likeness.LikeData(base.X, base.y, base.source, (0, 4), (False, True), draws=32)
    surface = spec.surface(np.random.default_rng(5))
    assert surface.surface.length_scale[1] <= 1 / (likeness.CATEGORICAL_SPACING * 4) + 1e-15
    within_bin = np.column_stack([np.full(9, 0.4), np.linspace(0.5, 0.74, 9)])
    assert np.ptp(surface(within_bin)) < 1e-12
