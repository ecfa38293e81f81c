"""Table A: cross-validated error rate of an RBF support vector classifier on breast cancer.

Data: scikit-learn's bundled copy of the Breast Cancer Wisconsin (Diagnostic) data set (UCI
Machine Learning Repository; W.N. Street, W.H. Wolberg and O.L. Mangasarian, "Nuclear feature
extraction for breast tumor diagnosis", IS&T/SPIE 1993 International Symposium on Electronic
Imaging, vol. 1905, pp. 861-870), 569 samples, 30 features, 2 classes.

Model: ``StandardScaler`` then ``SVC(kernel="rbf", C, gamma)``. Space, both on geometric grids
of 4 steps per decade: ``C`` from 10^-2 to 10^4 (default 1), ``gamma`` from 10^-4 to 10^2 times
1/30 (default ``gamma="scale"`` = 1 / (n_features · Var X) = 1/30 on standardized features).
25 × 25 = 625 configurations. Response ``error`` = 1 − accuracy, averaged over the 10 folds of
``RepeatedStratifiedKFold(n_splits=5, n_repeats=2, random_state=0)``.

    python benchmarks/tables/build_svc_cancer.py [--out DIR]
"""

from __future__ import annotations

import argparse
import functools
import logging
import warnings
from pathlib import Path

import numpy as np
import sklearn
from sklearn.datasets import load_breast_cancer
from sklearn.model_selection import RepeatedStratifiedKFold, cross_val_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.svm import SVC
from tablekit import build, geometric
from threadpoolctl import threadpool_limits

NAME = "svc-cancer"
RESPONSE = "error"
CV_SEED = 0
ROWS_SEED = 20261203
DEFAULT_GAMMA = 1 / 30  # gamma="scale" on 30 standardized features
GRID = {
    "C": geometric(1.0, -2, 4, 4),
    "gamma": geometric(DEFAULT_GAMMA, -4, 2, 4),
}
HERE = Path(__file__).resolve().parent


def _cv() -> RepeatedStratifiedKFold:
    return RepeatedStratifiedKFold(n_splits=5, n_repeats=2, random_state=CV_SEED)


@functools.cache
def _data() -> tuple[np.ndarray, np.ndarray]:
    return load_breast_cancer(return_X_y=True)


def measure(config: dict) -> float:
    """Mean error rate 1 − accuracy over the fixed folds, for ``{"C": …, "gamma": …}``."""
    X, y = _data()
    model = make_pipeline(StandardScaler(), SVC(C=config["C"], gamma=config["gamma"]))
    with threadpool_limits(1), warnings.catch_warnings():
        warnings.simplefilter("ignore")
        accuracy = cross_val_score(model, X, y, cv=_cv(), scoring="accuracy", n_jobs=1)
    return float(np.mean(1.0 - accuracy))


def comments(date: str) -> list[str]:
    return [
        "Cross-validated error rate (1 - accuracy, to minimise) of an RBF support vector",
        "classifier on the Breast Cancer Wisconsin (Diagnostic) data set as bundled with",
        "scikit-learn (sklearn.datasets.load_breast_cancer; UCI Machine Learning Repository;",
        "Street, Wolberg & Mangasarian 1993, Nuclear feature extraction for breast tumor",
        "diagnosis, IS&T/SPIE Electronic Imaging 1905: 861-870). 569 samples, 30 features.",
        "Model: StandardScaler then sklearn.svm.SVC(kernel='rbf', C, gamma).",
        "C: 10^-2 to 10^4, gamma: (1/30) * 10^-4 to (1/30) * 10^2, both geometric with 4",
        "steps per decade (6 significant digits); defaults C=1, gamma='scale'=1/30.",
        "Folds: RepeatedStratifiedKFold(n_splits=5, n_repeats=2, random_state=0); error is",
        "the mean over the 10 folds. Every configuration measured once.",
        f"Built {date} with scikit-learn {sklearn.__version__}, 1 thread:",
        "python benchmarks/tables/build_svc_cancer.py",
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
