"""Table B: cross-validated RMSE of an additive spline ridge regression on diabetes.

Data: scikit-learn's bundled copy of the diabetes data set (B. Efron, T. Hastie, I. Johnstone
and R. Tibshirani (2004), "Least Angle Regression", Annals of Statistics 32(2), 407-499),
442 patients, 10 baseline variables, disease progression after one year as the target.

Model: every variable but the binary ``sex`` through ``SplineTransformer(n_knots, degree,
knots="uniform", extrapolation)`` (``sex`` passed through as it is: a two-valued column has no
spline), then ``Ridge(alpha)``: an additive model with one penalised spline per variable.
Space: ``alpha`` on a geometric grid of 2 steps per decade from 10^-3 to 10^3 (default 1),
``n_knots`` every integer 2-9 (default 5), ``degree`` every integer 1-4 (default 3),
``extrapolation`` one of constant (default), linear, continue. 13 × 8 × 4 × 3 = 1,248
configurations. Response ``rmse``, averaged over the 10 folds of
``RepeatedKFold(n_splits=5, n_repeats=2, random_state=0)``.

    python benchmarks/tables/build_spline_diabetes.py [--out DIR]
"""

from __future__ import annotations

import argparse
import functools
import logging
import warnings
from pathlib import Path

import numpy as np
import sklearn
from sklearn.compose import ColumnTransformer
from sklearn.datasets import load_diabetes
from sklearn.linear_model import Ridge
from sklearn.model_selection import RepeatedKFold, cross_val_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import SplineTransformer
from tablekit import build, geometric
from threadpoolctl import threadpool_limits

NAME = "spline-diabetes"
RESPONSE = "rmse"
CV_SEED = 0
ROWS_SEED = 20261204
SEX = 1  # column of the binary variable
GRID = {
    "alpha": geometric(1.0, -3, 3, 2),
    "n_knots": tuple(range(2, 10)),
    "degree": tuple(range(1, 5)),
    "extrapolation": ("constant", "linear", "continue"),
}
HERE = Path(__file__).resolve().parent


@functools.cache
def _data() -> tuple[np.ndarray, np.ndarray]:
    return load_diabetes(return_X_y=True)


def _cv() -> RepeatedKFold:
    return RepeatedKFold(n_splits=5, n_repeats=2, random_state=CV_SEED)


def measure(config: dict) -> float:
    """Mean root-mean-square error over the fixed folds, for one configuration of ``GRID``."""
    X, y = _data()
    splines = SplineTransformer(
        n_knots=int(config["n_knots"]),
        degree=int(config["degree"]),
        knots="uniform",
        extrapolation=config["extrapolation"],
    )
    features = ColumnTransformer([("sex", "passthrough", [SEX])], remainder=splines)
    model = make_pipeline(features, Ridge(alpha=config["alpha"]))
    with threadpool_limits(1), warnings.catch_warnings():
        warnings.simplefilter("ignore")  # near-singular solves at the smallest alpha
        scores = cross_val_score(
            model, X, y, cv=_cv(), scoring="neg_root_mean_squared_error", n_jobs=1
        )
    return float(np.mean(-scores))


def comments(date: str) -> list[str]:
    return [
        "Cross-validated RMSE (to minimise) of an additive spline ridge regression on the",
        "diabetes data set as bundled with scikit-learn (sklearn.datasets.load_diabetes;",
        "Efron, Hastie, Johnstone & Tibshirani 2004, Least Angle Regression, Annals of",
        "Statistics 32(2): 407-499). 442 patients, 10 variables.",
        "Model: SplineTransformer(n_knots, degree, knots='uniform', extrapolation) on every",
        "variable but the binary sex (passed through), then sklearn.linear_model.Ridge(alpha).",
        "alpha: 10^-3 to 10^3 geometric, 2 steps per decade; n_knots: 2-9; degree: 1-4;",
        "extrapolation: constant, linear, continue. Defaults alpha=1, n_knots=5, degree=3,",
        "extrapolation=constant.",
        "Folds: RepeatedKFold(n_splits=5, n_repeats=2, random_state=0); rmse is the mean over",
        "the 10 folds. Every configuration measured once.",
        f"Built {date} with scikit-learn {sklearn.__version__}, 1 thread:",
        "python benchmarks/tables/build_spline_diabetes.py",
    ]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=HERE)
    parser.add_argument("--date", default=str(np.datetime64("today")))
    args = parser.parse_args()
    logging.basicConfig(level=logging.INFO, format="%(message)s")
    build(args.out, NAME, GRID, RESPONSE, measure, comments(args.date), ROWS_SEED)


if __name__ == "__main__":
    main()
