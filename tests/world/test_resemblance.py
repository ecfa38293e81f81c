"""Resemblance of a landscape to earlier evaluations: rank agreement, likelihood under the
landscape's GP, and leave-one-out predictions of a GP fitted to the data."""

import math

import numpy as np
import pytest
import scipy.stats
from hypothesis import given, settings
from hypothesis import strategies as st
from sklearn.gaussian_process import GaussianProcessRegressor
from sklearn.gaussian_process.kernels import ConstantKernel, Matern
from threadpoolctl import threadpool_limits

from workbench import gp
from workbench.world import resemblance as rs
from workbench.world import surfaces

N = 40


def generator(U):
    """The data's generator: smooth, two bumps, on the unit square."""
    return np.sin(6.0 * U[:, 0]) + np.cos(4.0 * U[:, 1])


@pytest.fixture(scope="module", autouse=True)
def one_blas_thread():
    # Many small GP fits: multi-threaded BLAS only slows them on a shared machine.
    with threadpool_limits(1):
        yield


@pytest.fixture(scope="module")
def data():
    rng = np.random.default_rng(7)
    X = rng.random((N, 2))
    return X, generator(X), generator(X) + 0.05 * rng.standard_normal(N)


def test_rank_agreement_per_replicate_is_scipy_spearman_and_estimate_their_median(data):
    X, _, y = data
    rng = np.random.default_rng(1)
    # Integer values: ties, which spearmanr ranks by their average as we do.
    values = np.vstack([np.round(generator(X) * 2), rng.integers(0, 5, N), -X[:, 0], X[:, 1]])
    result = rs.rank_agreement(values, y, draws=200)
    # Reference library: scipy.stats.spearmanr.
    reference = [scipy.stats.spearmanr(v, y).statistic for v in values]
    np.testing.assert_allclose(result.replicates, reference, rtol=0, atol=1e-12)
    assert result.estimate == pytest.approx(np.median(reference), abs=1e-12)
    assert result.n == N and result.measure == "rank_agreement"


def test_generator_agrees_fully_its_reverse_not_at_all_and_a_random_landscape_near_zero(data):
    _, f, _ = data
    rng = np.random.default_rng(3)
    exact = rs.rank_agreement(f, f, draws=200)
    reversed_ = rs.rank_agreement(-f, f, draws=200)
    random_ = rs.rank_agreement(rng.random((8, N)), f, draws=500)
    # Hand-computed: identical orderings give ρ = 1, reversed orderings ρ = −1.
    assert exact.estimate == pytest.approx(1.0) and exact.low == pytest.approx(1.0)
    assert reversed_.estimate == pytest.approx(-1.0) and reversed_.high == pytest.approx(-1.0)
    # Unrelated values: ρ has sd about 1/sqrt(n − 1) ≈ 0.16 per replicate (common practice).
    assert abs(random_.estimate) < 0.2
    assert random_.low < 0.0 < random_.high
    assert exact.estimate > random_.estimate > reversed_.estimate


def test_rank_agreement_interval_matches_scipy_paired_percentile_bootstrap(data):
    X, _, y = data
    values = generator(X) + 0.8 * np.random.default_rng(5).standard_normal(N)
    result = rs.rank_agreement(values, y, draws=4000, seed=11)
    # Reference library: scipy.stats.bootstrap, percentile method, rows resampled in pairs
    # (Efron & Tibshirani 1993). Different random draws: agreement to Monte-Carlo error.
    ref = scipy.stats.bootstrap(
        (values, y),
        lambda a, b, axis=-1: rs.spearman(a, b),
        paired=True,
        vectorized=True,
        method="percentile",
        n_resamples=4000,
        random_state=np.random.default_rng(2),  # rng= only from scipy 1.15; this from 1.11
    ).confidence_interval
    assert result.low == pytest.approx(ref.low, abs=0.03)
    assert result.high == pytest.approx(ref.high, abs=0.03)
    assert result.low < result.estimate < result.high


@settings(max_examples=30, deadline=None)
@given(
    # Whole numbers, so that the transforms keep distinct values distinct in floating point.
    st.lists(st.integers(-1000, 1000), min_size=5, max_size=20, unique=True),
    st.sampled_from([np.exp, np.arctan, lambda v: v**3]),
)
def test_rank_agreement_is_unchanged_by_increasing_transforms(values, transform):
    values = np.array(values, dtype=float)
    y = np.sin(values) + 0.01 * values
    a = rs.rank_agreement(values, y, draws=50)
    b = rs.rank_agreement(transform(values / 1000.0), y, draws=50)
    assert a.estimate == pytest.approx(b.estimate, abs=1e-12)


# --------------------------------------------------------------------------- likelihood


@pytest.fixture(scope="module")
def points():
    return rs.design(2, 64)


def test_likelihood_is_the_log_marginal_likelihood_per_point_of_scikit_learn(data, points):
    X, _, y = data
    values = surfaces.draw_prior(2, 2.5, [0.3, 0.3], np.random.default_rng(4))(points)
    noise = 1e-3
    result = rs.likelihood_agreement(points, values, X, y, noise_variance=noise)
    h = gp.fit(points, values, rng=np.random.default_rng(0)).hyperparameters
    z = (y - y.mean()) / y.std()
    # Reference library: scikit-learn's GaussianProcessRegressor with the kernel fixed
    # (optimizer=None); the noise variance goes on the diagonal through alpha.
    kernel = ConstantKernel(h.signal_variance, "fixed") * Matern(h.lengthscales, "fixed", nu=2.5)
    reference = GaussianProcessRegressor(
        kernel, alpha=max(noise, h.noise_variance), optimizer=None, normalize_y=False
    ).fit(X, z)
    assert result.estimate == pytest.approx(reference.log_marginal_likelihood_value_ / N, rel=1e-8)
    assert result.low == result.high == result.estimate


def test_likelihood_ranks_the_generator_above_landscapes_of_very_different_length_scale(
    data, points
):
    X, _, y = data
    rng = np.random.default_rng(8)
    # The generator varies over about a third of the square; draws with length scales of
    # 0.02 (rough) and 5 (nearly flat) are very different shapes.
    rough = surfaces.draw_prior(2, 2.5, [0.02, 0.02], rng)
    flat = surfaces.draw_prior(2, 2.5, [5.0, 5.0], rng)
    scores = {
        name: rs.likelihood_agreement(points, f(points), X, y).estimate
        for name, f in (("generator", generator), ("rough", rough), ("flat", flat))
    }
    assert scores["generator"] > scores["rough"]
    assert scores["generator"] > scores["flat"]


def test_likelihood_interval_spans_the_replicate_placements(data, points):
    X, _, y = data
    shifted = np.vstack([generator(points + s) for s in (0.0, 0.1, 0.3)])
    result = rs.likelihood_agreement(points, shifted, X, y, noise_variance=1e-2, level=1.0)
    assert len(result.replicates) == 3
    assert result.low == pytest.approx(min(result.replicates))
    assert result.high == pytest.approx(max(result.replicates))
    assert result.estimate == pytest.approx(np.median(result.replicates))


# --------------------------------------------------------------------------- leave-one-out


def test_closed_form_leave_one_out_matches_refits_without_each_point(data):
    X, _, y = data
    model = gp.fit(X, y, rng=np.random.default_rng(0))
    mean, var = rs.loo_predictive(model)
    h = model.hyperparameters
    z = (y - model.y_mean) / model.y_scale
    kernel = ConstantKernel(h.signal_variance, "fixed") * Matern(h.lengthscales, "fixed", nu=2.5)
    noise = h.noise_variance + model.jitter
    for i in range(N):
        keep = np.arange(N) != i
        # Brute force with the same hyper-parameters: scikit-learn's GaussianProcessRegressor
        # (reference library) conditioned on the other n − 1 points, in the model's units.
        refit = GaussianProcessRegressor(kernel, alpha=noise, optimizer=None).fit(X[keep], z[keep])
        mu, sd = refit.predict(X[i : i + 1], return_std=True)
        expected_mean = mu[0] * model.y_scale + model.y_mean
        expected_var = (sd[0] ** 2 + noise) * model.y_scale**2
        assert mean[i] == pytest.approx(expected_mean, rel=1e-6, abs=1e-8)
        assert var[i] == pytest.approx(expected_var, rel=1e-6)


def test_leave_one_out_scores_a_smooth_response_high_and_pure_noise_as_a_standard_normal(data):
    X, _, y = data
    smooth = rs.loo_agreement(gp.fit(X, y, rng=np.random.default_rng(0)), landscape="history")
    noise = np.random.default_rng(9).standard_normal(N)
    flat = rs.loo_agreement(gp.fit(X, noise, rng=np.random.default_rng(0)))
    assert smooth[0].measure == "loo_rank_agreement" and smooth[1].measure == "loo_log_density"
    assert smooth[0].estimate > 0.9 and smooth[0].low > 0.8
    # Pure noise predicted by its mean and sd: the log density of a standard normal averages
    # −½ log(2π e) ≈ −1.419 (textbook: the normal's differential entropy).
    assert flat[1].estimate == pytest.approx(-0.5 * math.log(2 * math.pi * math.e), abs=0.2)
    assert smooth[1].estimate > flat[1].estimate + 1.0
    assert flat[0].estimate < smooth[0].low
    row = smooth[0].row()
    assert row["landscape"] == "history" and row["kind"] == "fitted" and row["n"] == N
