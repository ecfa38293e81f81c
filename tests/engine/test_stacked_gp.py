"""The stacked GP against workbench.gp, slice by slice, and its gradients against finite
differences."""

import numpy as np
import pytest

from workbench import gp
from workbench.engine import stacked_gp as sg


def _data(seed, R=4, n=18, p=3):
    rng = np.random.default_rng(seed)
    F = rng.random((R, n, p))
    y = np.sin(3 * F).sum(axis=2) + 0.1 * rng.standard_normal((R, n))
    theta = np.column_stack(
        [
            np.log(rng.uniform(0.1, 2.0, (R, p))),
            np.log(rng.uniform(0.3, 3.0, R)),
            np.log(rng.uniform(1e-4, 0.1, R)),
        ]
    )
    return rng, F, y, theta


@pytest.mark.parametrize("p", [1, 3, 6])
def test_likelihood_and_gradient_match_the_single_gp(p):
    _, F, y, theta = _data(p, p=p)
    ys = sg.standardise(y)[2]
    value, grad = sg.lml_and_grad(theta, F, ys)
    for r in range(len(F)):
        v, g = gp.log_marginal_likelihood(theta[r], F[r], ys[r])
        assert value[r] == pytest.approx(v, rel=1e-10)
        np.testing.assert_allclose(grad[r], g, rtol=1e-8, atol=1e-10 * np.abs(g).max())


def test_likelihood_gradient_matches_central_differences():
    # Rasmussen & Williams (2006), eq. 5.9, checked by central differences (step 1e-5).
    _, F, y, theta = _data(21)
    ys = sg.standardise(y)[2]
    _, grad = sg.lml_and_grad(theta, F, ys)
    h = 1e-5
    for j in range(theta.shape[1]):
        e = np.zeros_like(theta)
        e[:, j] = h
        numeric = (sg.lml_and_grad(theta + e, F, ys)[0] - sg.lml_and_grad(theta - e, F, ys)[0]) / (
            2 * h
        )
        np.testing.assert_allclose(grad[:, j], numeric, rtol=1e-5, atol=1e-6)


def test_predictions_match_the_single_gp():
    rng, F, y, theta = _data(4)
    stack, ok = sg.build(F, y, theta)
    assert ok.all()
    C = rng.random((len(F), 50, F.shape[2]))
    mean, sd = stack.predict(C)
    for r in range(len(F)):
        model = gp.posterior(F[r], y[r], gp.Hyperparameters.from_log(theta[r]))
        m, s = model.predict(C[r])
        np.testing.assert_allclose(mean[r], m, rtol=1e-10, atol=1e-10)
        np.testing.assert_allclose(sd[r], s, rtol=1e-8, atol=1e-10)
        assert stack.log_marginal_likelihood[r] == pytest.approx(model.log_marginal_likelihood)


def test_prediction_gradients_match_central_differences():
    # Derivative of the Matérn 5/2 kernel (Rasmussen & Williams 2006, eq. 4.17) through the
    # posterior mean and sd, checked by central differences (step 1e-6).
    rng, F, y, theta = _data(9)
    stack, _ = sg.build(F, y, theta)
    C = rng.random((len(F), 20, F.shape[2]))
    _, _, dmean, dsd = stack.predict(C, gradient=True)
    h = 1e-6
    for k in range(F.shape[2]):
        e = np.zeros_like(C)
        e[:, :, k] = h
        mp, sp = stack.predict(C + e)
        mm, sm = stack.predict(C - e)
        np.testing.assert_allclose(dmean[:, :, k], (mp - mm) / (2 * h), rtol=1e-5, atol=1e-6)
        np.testing.assert_allclose(dsd[:, :, k], (sp - sm) / (2 * h), rtol=1e-4, atol=1e-6)


def test_the_fit_reaches_the_optimum_of_the_scipy_fit():
    # Reference: workbench.gp.fit, which runs scipy.optimize.fmin_l_bfgs_b from the same starts
    # (the default and one draw from the same stream). Run to convergence, the best optimum
    # must agree within 1e-3 nats, or be better.
    _, F, y, _ = _data(13, R=4, n=25)
    stack = sg.fit(F, y, [None] * 4, [np.random.default_rng(r) for r in range(4)], maxiter=200)
    for r in range(4):
        ref = gp.fit(F[r], y[r], rng=np.random.default_rng(r), restarts=1, maxiter=200)
        assert stack.log_marginal_likelihood[r] >= ref.log_marginal_likelihood - 1e-3
        box = gp.DEFAULT_BOUNDS.log_box(F.shape[2])
        assert np.all(stack.theta[r] >= box[:, 0]) and np.all(stack.theta[r] <= box[:, 1])


def test_duplicated_rows_are_factorised_with_the_single_gps_jitter():
    rng = np.random.default_rng(2)
    X = rng.random((10, 2))
    X[5] = X[4]
    theta = gp.Hyperparameters(np.array([0.3, 0.3]), 1.0, 1e-8).to_log()
    K = sg._kernel_stack(theta[None, :], X[None])[-1]
    L, jitter, ok = sg.cholesky(np.concatenate([K, np.eye(10)[None]]))
    _, expected = gp._jittered_cholesky(K[0])
    assert ok.all() and jitter[0] == pytest.approx(expected) and jitter[1] == 0.0
    np.testing.assert_allclose(L[0] @ L[0].T, K[0] + jitter[0] * np.eye(10), atol=1e-12)
