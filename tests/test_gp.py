"""Behaviour of the GP surrogate: kernel, likelihood, gradient, fit, predict, refit cadence."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays
from numpy.linalg import LinAlgError
from sklearn.gaussian_process import GaussianProcessRegressor
from sklearn.gaussian_process.kernels import ConstantKernel, Matern, WhiteKernel

from workbench.gp import (
    DEFAULT_BOUNDS,
    GP,
    LENGTHSCALE_BOUNDS,
    NOISE_VARIANCE_BOUNDS,
    SIGNAL_VARIANCE_BOUNDS,
    Bounds,
    Hyperparameters,
    _jittered_cholesky,
    condition,
    fit,
    log_marginal_likelihood,
    matern52,
    posterior,
    refit_due,
)


def _smooth(x: np.ndarray) -> np.ndarray:
    return np.sin(6.0 * x[:, 0]) + 0.5 * np.cos(11.0 * x[:, 0])


def _data(rng: np.random.Generator, n: int, p: int) -> tuple[np.ndarray, np.ndarray]:
    X = rng.random((n, p))
    y = 3.0 * np.sin(4.0 * X.sum(axis=1)) + 10.0 + 0.1 * rng.standard_normal(n)
    return X, y


def _sklearn_reference(hp: Hyperparameters, white: bool) -> GaussianProcessRegressor:
    base = ConstantKernel(hp.signal_variance, "fixed") * Matern(
        length_scale=hp.lengthscales.copy(), length_scale_bounds="fixed", nu=2.5
    )
    if white:
        kernel = base + WhiteKernel(hp.noise_variance, "fixed")
        return GaussianProcessRegressor(kernel, alpha=0.0, optimizer=None, normalize_y=True)
    return GaussianProcessRegressor(base, alpha=hp.noise_variance, optimizer=None, normalize_y=True)


@pytest.mark.parametrize("p", [1, 2, 3, 4, 6])
def test_matern52_matches_sklearn_matern_kernel(p):
    # Rasmussen & Williams (2006), Gaussian Processes for Machine Learning, eq. 4.17;
    # scikit-learn Matern(nu=2.5) as reference implementation.
    rng = np.random.default_rng(p)
    A, B = rng.random((17, p)), rng.random((23, p))
    ls, s2 = rng.uniform(0.05, 2.0, p), 2.7
    reference = s2 * Matern(length_scale=ls, nu=2.5)(A, B)
    np.testing.assert_allclose(matern52(A, B, ls, s2), reference, rtol=1e-10, atol=1e-14)
    np.testing.assert_allclose(matern52(A, A, ls, s2), s2 * Matern(ls, nu=2.5)(A), atol=1e-12)


@pytest.mark.parametrize("p", [1, 2, 3, 5])
@pytest.mark.parametrize("white", [False, True])
def test_fixed_kernel_predictions_and_likelihood_match_sklearn(p, white):
    rng = np.random.default_rng(10 + p)
    X, y = _data(rng, 25, p)
    hp = Hyperparameters(rng.uniform(0.2, 1.0, p), 1.3, 0.02)
    gp = posterior(X, y, hp)
    Xc = rng.random((40, p))
    mean, sd = gp.predict(Xc)

    # Rasmussen & Williams (2006), Gaussian Processes for Machine Learning, Algorithm 2.1;
    # scikit-learn GaussianProcessRegressor as reference implementation.
    ref = _sklearn_reference(hp, white).fit(X, y)
    ref_mean, ref_sd = ref.predict(Xc, return_std=True)
    # sklearn's normalize_y uses np.std (ddof=0), and its sd includes a WhiteKernel's noise.
    variance = sd**2 + (hp.noise_variance * gp.y_scale**2 if white else 0.0)
    assert gp.y_scale == pytest.approx(np.std(y), rel=1e-15)
    np.testing.assert_allclose(mean, ref_mean, rtol=1e-8)
    np.testing.assert_allclose(np.sqrt(variance), ref_sd, rtol=1e-8)
    # Both likelihoods are of the standardised targets.
    assert gp.log_marginal_likelihood == pytest.approx(ref.log_marginal_likelihood_value_, rel=1e-8)
    assert gp.jitter == 0.0


def test_log_marginal_likelihood_function_agrees_with_fitted_model():
    rng = np.random.default_rng(3)
    X, y = _data(rng, 30, 2)
    hp = Hyperparameters(np.array([0.3, 0.6]), 0.8, 1e-3)
    gp = posterior(X, y, hp)
    value, _ = log_marginal_likelihood(hp.to_log(), X, (y - y.mean()) / y.std())
    assert value == pytest.approx(gp.log_marginal_likelihood, rel=1e-10)


@pytest.mark.parametrize("p", [1, 2, 3, 4])
def test_likelihood_gradient_matches_central_differences(p):
    # Rasmussen & Williams (2006), Gaussian Processes for Machine Learning, eq. 5.9.
    rng = np.random.default_rng(100 + p)
    X = rng.random((20, p))
    y = rng.standard_normal(20)
    h = 1e-5
    for _ in range(3):
        theta = np.concatenate(
            [
                np.log(rng.uniform(0.1, 2.0, p)),
                np.log(rng.uniform(0.3, 3.0, 1)),
                np.log(rng.uniform(1e-3, 0.3, 1)),
            ]
        )
        _, grad = log_marginal_likelihood(theta, X, y)
        numeric = np.array(
            [
                (
                    log_marginal_likelihood(theta + h * e, X, y)[0]
                    - log_marginal_likelihood(theta - h * e, X, y)[0]
                )
                / (2 * h)
                for e in np.eye(p + 2)
            ]
        )
        np.testing.assert_allclose(grad, numeric, rtol=1e-5, atol=1e-7 * np.abs(grad).max())


def test_hyperparameters_round_trip_through_log_space():
    hp = Hyperparameters(np.array([0.1, 2.0, 7.5]), 3.0, 1e-6)
    theta = hp.to_log()
    assert theta.shape == (5,)
    back = Hyperparameters.from_log(theta)
    np.testing.assert_allclose(back.lengthscales, hp.lengthscales, rtol=1e-14)
    assert back.signal_variance == pytest.approx(3.0, rel=1e-14)
    assert back.noise_variance == pytest.approx(1e-6, rel=1e-14)
    with pytest.raises(ValueError, match="'lengthscales' must be"):
        Hyperparameters(np.array([0.1, -1.0]), 1.0, 1e-4)
    with pytest.raises(ValueError, match="'noise_variance' must be"):
        Hyperparameters(np.array([0.1]), 1.0, 0.0)


def test_fit_beats_the_mean_predictor_on_a_smooth_function():
    X = np.linspace(0.02, 0.98, 12)[:, None]
    y = _smooth(X)
    gp = fit(X, y, rng=np.random.default_rng(0))
    held_out = np.linspace(0.0, 1.0, 201)[:, None]
    truth = _smooth(held_out)
    mean, sd = gp.predict(held_out)
    mse = np.mean((mean - truth) ** 2)
    mse_mean_only = np.mean((y.mean() - truth) ** 2)
    assert mse < 0.02 * mse_mean_only
    assert np.all(sd > 0)


def test_fit_stays_within_the_bounds():
    rng = np.random.default_rng(4)
    X, y = _data(rng, 20, 3)
    hp = fit(X, y, rng=rng).hyperparameters
    assert np.all(hp.lengthscales >= LENGTHSCALE_BOUNDS[0] * (1 - 1e-12))
    assert np.all(hp.lengthscales <= LENGTHSCALE_BOUNDS[1] * (1 + 1e-12))
    assert SIGNAL_VARIANCE_BOUNDS[0] * (1 - 1e-12) <= hp.signal_variance
    assert hp.signal_variance <= SIGNAL_VARIANCE_BOUNDS[1] * (1 + 1e-12)
    assert NOISE_VARIANCE_BOUNDS[0] * (1 - 1e-12) <= hp.noise_variance
    assert hp.noise_variance <= NOISE_VARIANCE_BOUNDS[1] * (1 + 1e-12)


def test_fit_is_deterministic_for_a_given_rng_and_with_a_warm_start():
    rng = np.random.default_rng(5)
    X, y = _data(rng, 18, 2)
    a = fit(X, y, rng=np.random.default_rng(7))
    b = fit(X, y, rng=np.random.default_rng(7))
    np.testing.assert_array_equal(a.hyperparameters.to_log(), b.hyperparameters.to_log())

    X2, y2 = _data(rng, 25, 2)
    warm_a = fit(X2, y2, previous=a.hyperparameters)
    warm_b = fit(X2, y2, previous=a.hyperparameters)
    np.testing.assert_array_equal(warm_a.hyperparameters.to_log(), warm_b.hyperparameters.to_log())
    assert warm_a.log_marginal_likelihood == warm_b.log_marginal_likelihood
    # The warm start never ends worse than where it started.
    assert warm_a.log_marginal_likelihood >= condition(a, X2, y2).log_marginal_likelihood


def test_warm_start_ends_near_a_cold_fit():
    rng = np.random.default_rng(6)
    X, y = _data(rng, 30, 2)
    cold = fit(X, y, rng=np.random.default_rng(0))
    warm = fit(X[:-3], y[:-3], rng=np.random.default_rng(0))
    warm = fit(X, y, previous=warm.hyperparameters)
    assert warm.log_marginal_likelihood >= cold.log_marginal_likelihood - 0.5


def test_condition_keeps_hyperparameters_and_matches_posterior():
    rng = np.random.default_rng(8)
    X, y = _data(rng, 15, 2)
    gp = fit(X, y, rng=rng)
    X2, y2 = _data(rng, 22, 2)
    again = condition(gp, X2, y2)
    assert isinstance(again, GP)
    assert again.hyperparameters is gp.hyperparameters
    assert again.n == 22
    assert again.y_mean == pytest.approx(y2.mean())
    direct = posterior(X2, y2, gp.hyperparameters)
    Xc = rng.random((50, 2))
    for ours, ref in zip(again.predict(Xc), direct.predict(Xc), strict=True):
        np.testing.assert_array_equal(ours, ref)


def test_duplicated_rows_are_handled_by_jitter():
    rng = np.random.default_rng(9)
    X, y = _data(rng, 10, 2)
    X = np.vstack([X, X, X[:3]])
    y = np.concatenate([y, y + 0.01, y[:3]])
    # Noise far below machine precision: K is singular and needs jitter.
    gp = posterior(X, y, Hyperparameters(np.array([0.5, 0.5]), 1.0, 1e-30))
    assert gp.jitter > 0.0
    mean, sd = gp.predict(rng.random((30, 2)))
    assert np.all(np.isfinite(mean)) and np.all(np.isfinite(sd)) and np.all(sd > 0)
    fitted = fit(X, y, rng=rng)
    mean, sd = fitted.predict(X)
    assert np.all(np.isfinite(mean)) and np.all(sd > 0)


def test_jittered_cholesky_escalates_then_gives_up_with_a_clear_message():
    v = np.array([1.0, 1.0, 1.0]) / np.sqrt(3.0)
    slightly_indefinite = np.eye(3) - (1.0 + 1e-12) * np.outer(v, v)
    L, jitter = _jittered_cholesky(slightly_indefinite)
    assert jitter > 0.0
    np.testing.assert_allclose(L @ L.T, slightly_indefinite + jitter * np.eye(3), atol=1e-12)
    with pytest.raises(LinAlgError, match="not positive definite even with jitter"):
        _jittered_cholesky(np.diag([1.0, -1.0, 1.0]))


def test_predict_raises_rather_than_return_nan():
    rng = np.random.default_rng(11)
    X, y = _data(rng, 8, 2)
    gp = posterior(X, y, Hyperparameters(np.array([0.3, 0.3]), 1.0, 1e-4))
    with pytest.raises(FloatingPointError, match="not finite"):
        gp.predict(np.array([[0.5, np.nan], [0.1, 0.2]]))
    with pytest.raises(ValueError, match="'Xc' must be"):
        gp.predict(np.zeros((3, 3)))


def test_predict_is_vectorised_over_thousands_of_candidates():
    rng = np.random.default_rng(12)
    X, y = _data(rng, 60, 3)
    gp = posterior(X, y, Hyperparameters(np.array([0.3, 0.4, 0.5]), 1.0, 1e-3))
    Xc = rng.random((3000, 3))
    mean, sd = gp.predict(Xc)
    assert mean.shape == sd.shape == (3000,)
    one_mean, one_sd = gp.predict(Xc[1234:1235])
    assert one_mean[0] == pytest.approx(mean[1234], rel=1e-12)
    assert one_sd[0] == pytest.approx(sd[1234], rel=1e-12)


def test_bounds_are_validated_and_give_a_log_box():
    box = DEFAULT_BOUNDS.log_box(2)
    assert box.shape == (4, 2)
    np.testing.assert_allclose(np.exp(box[0]), LENGTHSCALE_BOUNDS)
    np.testing.assert_allclose(np.exp(box[-1]), NOISE_VARIANCE_BOUNDS)
    with pytest.raises(ValueError, match=r"'bounds\.noise_variance' must be"):
        Bounds(noise_variance=(0.0, 1.0))


def test_refit_cadence_is_every_step_early_then_sparser():
    assert refit_due(1, 0)
    assert all(refit_due(n, n - 1) for n in range(2, 8))
    assert not refit_due(7, 7)
    assert not refit_due(10, 9) and refit_due(11, 9)
    assert not refit_due(16, 14) and refit_due(17, 14)
    assert not refit_due(104, 100) and refit_due(105, 100)
    assert refit_due(10, 20)  # data shrank: a new campaign

    last, fits = 0, 0
    for n in range(1, 151):
        if refit_due(n, last):
            last, fits = n, fits + 1
    assert 30 <= fits <= 60


_small_designs = st.integers(1, 3).flatmap(
    lambda p: st.integers(1, 9).flatmap(
        lambda n: st.tuples(
            arrays(float, (n, p), elements=st.floats(0.0, 1.0)),
            arrays(float, (n,), elements=st.floats(-1e3, 1e3)),
        )
    )
)


@settings(max_examples=40, deadline=None)
@given(_small_designs, st.integers(0, 2**32 - 1))
def test_fitted_sd_is_positive_and_finite(design, seed):
    X, y = design
    rng = np.random.default_rng(seed)
    gp = fit(X, y, rng=rng, restarts=1, maxiter=15)
    candidates = np.vstack([X, rng.random((20, X.shape[1]))])
    mean, sd = gp.predict(candidates)
    assert np.all(np.isfinite(mean))
    assert np.all(np.isfinite(sd)) and np.all(sd > 0)


@settings(max_examples=40, deadline=None)
@given(st.integers(1, 3), st.integers(2, 8), st.integers(0, 2**32 - 1))
def test_tiny_noise_interpolates_the_training_data(p, n, seed):
    rng = np.random.default_rng(seed)
    X = rng.random((n, p))
    # Keep the points apart so that K is well conditioned at this length scale.
    gaps = np.linalg.norm(X[:, None, :] - X[None, :, :], axis=-1) + np.eye(n)
    if gaps.min() < 0.15:
        X = (np.arange(n)[:, None] + 0.5) / n * np.ones((1, p))
    y = rng.normal(5.0, 2.0, n)
    gp = posterior(X, y, Hyperparameters(np.full(p, 0.2), 1.0, 1e-8))
    mean, sd = gp.predict(X)
    scale = max(np.std(y), 1e-12)
    np.testing.assert_allclose(mean, y, atol=1e-4 * scale)
    assert np.all(sd < 1e-2 * scale) and np.all(sd > 0)
