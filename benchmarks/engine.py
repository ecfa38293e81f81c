"""Engine benchmark: our no-belief campaign against a plain scikit-learn loop, in one run.

The baseline refits scikit-learn's GaussianProcessRegressor (Matérn 5/2 with one length scale
per dimension times a constant, plus a white-noise term, ``normalize_y=True``, two optimizer
restarts) at every step and maximises expected improvement over 2,000 uniform random
candidates. Both run the same landscapes (Branin with budget 50, Hartmann 6-D with budget 100),
the same seeds and the same Sobol initial design, in this process (start-up excluded), with
BLAS single-threaded for both.

Prints seconds per campaign, their ratio, the median final regret of each, and a one-sided
Mann–Whitney test of "ours is worse" (p < 0.05 would say it is).

    python benchmarks/engine.py [--replicates R]
"""

from __future__ import annotations

import argparse
import time
import warnings

import numpy as np
from scipy import stats
from scipy.stats import qmc
from sklearn.exceptions import ConvergenceWarning
from sklearn.gaussian_process import GaussianProcessRegressor
from sklearn.gaussian_process.kernels import ConstantKernel, Matern, WhiteKernel
from threadpoolctl import threadpool_limits

from workbench import seeding
from workbench.engine import campaign
from workbench.engine.acquisition import expected_improvement
from workbench.world import landscapes
from workbench.world.beliefs import gaussian_at
from workbench.world.space import Space

CASES = (("branin", 50), ("hartmann6", 100))


def baseline(placement, budget: int, n0: int, streams) -> float:
    """Final regret of the plain scikit-learn loop."""
    d = placement.minimisers.shape[1]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        X = qmc.Sobol(d, scramble=True, seed=streams["design"]).random(n0)
    y = placement.value(X)
    rng = streams["strategy"]
    kernel = ConstantKernel(1.0) * Matern(length_scale=np.full(d, 0.5), nu=2.5) + WhiteKernel(1e-4)
    for _ in range(n0, budget):
        gp = GaussianProcessRegressor(
            kernel, normalize_y=True, n_restarts_optimizer=2, random_state=int(rng.integers(2**31))
        )
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            gp.fit(X, y)
        C = rng.random((2000, d))
        mean, sd = gp.predict(C, return_std=True)
        x = C[np.argmax(expected_improvement(mean, np.maximum(sd, 1e-12), y.min()))]
        X = np.vstack([X, x])
        y = np.append(y, placement.value(x[None, :]))
    return float(y.min() - placement.minimum)


def ours(placement, budget: int, n0: int, streams) -> float:
    d = placement.minimisers.shape[1]
    space = Space.unit_cube(d)
    spec = campaign.Campaign(
        "no-belief", placement, space, gaussian_at(np.full(d, 0.5), 0.2), budget, "sobol", n0
    )
    return float(campaign.run(spec, streams).regret[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--replicates", type=int, default=8)
    args = parser.parse_args()
    print(
        f"{'landscape':<10} {'budget':>6} {'ours s':>8} {'sklearn s':>10} {'ratio':>7} "
        f"{'ours regret':>12} {'sklearn regret':>15} {'p(ours worse)':>14}"
    )
    for name, budget in CASES:
        placement = landscapes.get(name).placed()
        d = placement.minimisers.shape[1]
        times = {"ours": [], "base": []}
        regret = {"ours": [], "base": []}
        for r in range(args.replicates):
            for label, fn in (("ours", ours), ("base", baseline)):
                streams = seeding.campaign_streams(seeding.derive(2026, name, r))
                start = time.perf_counter()
                with threadpool_limits(limits=1, user_api="blas"):
                    regret[label].append(fn(placement, budget, d + 1, streams))
                times[label].append(time.perf_counter() - start)
        t_ours, t_base = np.mean(times["ours"]), np.mean(times["base"])
        # One-sided: is our final regret stochastically greater than the baseline's?
        p = stats.mannwhitneyu(regret["ours"], regret["base"], alternative="greater").pvalue
        print(
            f"{name:<10} {budget:>6} {t_ours:>8.3f} {t_base:>10.3f} {t_base / t_ours:>7.1f} "
            f"{np.median(regret['ours']):>12.3g} {np.median(regret['base']):>15.3g} {p:>14.3f}"
        )


if __name__ == "__main__":
    main()
