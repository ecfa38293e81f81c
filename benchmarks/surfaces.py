"""Surface benchmark: microseconds per evaluated point of a drawn Matérn surface.

A prior draw with 1000 random Fourier features in 6-D, and a posterior draw of the same size
conditioned on 25 evaluations, each evaluated on a batch of 10^4 uniform candidates, with BLAS
limited to one thread; best of several repeats. For reference it also times the same prior
features with numpy's cos, which the surface replaces by a polynomial. Prints, does not assert.

    python benchmarks/surfaces.py [--repeats R]
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np
from threadpoolctl import threadpool_limits

from workbench.world.surfaces import draw_posterior, draw_prior, fourier_features

DIM = 6
FEATURES = 1000
CANDIDATES = 10_000
DATA = 25
GOAL_US = 20.0


def best_time(function, points: np.ndarray, repeats: int) -> float:
    """Best wall time of ``function(points)`` over ``repeats`` runs, in µs per point."""
    function(points)  # warm-up: first-call allocations are not the steady state
    best = math.inf
    for _ in range(repeats):
        start = time.perf_counter()
        function(points)
        best = min(best, time.perf_counter() - start)
    return best / len(points) * 1e6


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7)
    args = parser.parse_args()

    rng = np.random.default_rng(2024)
    candidates = rng.random((CANDIDATES, DIM))
    prior = draw_prior(DIM, 2.5, 0.2, rng, n_features=FEATURES)
    X = rng.random((DATA, DIM))
    posterior = draw_posterior(
        X,
        np.sin(X.sum(axis=1)),
        length_scale=0.2,
        amplitude=1.0,
        noise_variance=1e-4,
        mean=0.0,
        rng=rng,
        n_features=FEATURES,
    )

    def numpy_cos(points: np.ndarray) -> np.ndarray:
        features = fourier_features(points, prior.frequencies, prior.phases)
        return prior.mean + prior.amplitude * features @ prior.weights

    cases = (
        (f"prior draw, {FEATURES} features", prior),
        (f"posterior draw, {FEATURES} features + {DATA} data", posterior),
        ("reference: prior features with numpy cos", numpy_cos),
    )
    print(
        f"{DIM}-D surface, batches of {CANDIDATES} candidates, 1 BLAS thread, "
        f"best of {args.repeats}"
    )
    with threadpool_limits(1):
        for label, function in cases:
            us = best_time(function, candidates, args.repeats)
            print(
                f"  {label:<45} {us:6.2f} µs per point  (goal <= {GOAL_US:.0f} µs: "
                f"{us / GOAL_US:.2f} of it)"
            )


if __name__ == "__main__":
    main()
