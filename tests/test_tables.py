"""The measured tables in benchmarks/tables: complete, readable as data, and reproducible.

Data sets (scikit-learn's bundled copies; benchmarks/tables/README.md names them in full):
- svc-cancer.csv: Breast Cancer Wisconsin (Diagnostic), UCI Machine Learning Repository;
  Street, Wolberg & Mangasarian (1993), "Nuclear feature extraction for breast tumor
  diagnosis", IS&T/SPIE Electronic Imaging 1905, 861-870.
- spline-diabetes.csv: diabetes; Efron, Hastie, Johnstone & Tibshirani (2004), "Least Angle
  Regression", Annals of Statistics 32(2), 407-499.
"""

from __future__ import annotations

import importlib
import importlib.util
import math
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
from sklearn.datasets import load_breast_cancer, load_diabetes
from sklearn.linear_model import LinearRegression
from sklearn.model_selection import cross_val_score

from workbench.study.spec import load
from workbench.world.history import read_history

TABLES = Path(__file__).resolve().parents[1] / "benchmarks" / "tables"


def _script(name: str):
    """``benchmarks/tables/<name>.py`` as a module; the build scripts import ``tablekit`` from
    their own folder, as they do when run there."""
    if str(TABLES) not in sys.path:
        sys.path.insert(0, str(TABLES))
    if name == "tablekit":
        return importlib.import_module(name)
    spec = importlib.util.spec_from_file_location(name, TABLES / f"{name}.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


kit = _script("tablekit")


@pytest.fixture(scope="module", params=["build_svc_cancer", "build_spline_diabetes"])
def table(request):
    module = _script(request.param)
    header, rows = kit.read_table(TABLES / f"{module.NAME}.csv")
    return module, header, rows


def _key(module, row: list[str]) -> tuple:
    """A row's configuration, parsed to the grid's types."""
    out = []
    for name, cell in zip(module.GRID, row, strict=False):
        level = module.GRID[name][0]
        out.append(cell if isinstance(level, str) else type(level)(cell))
    return tuple(out)


def test_every_configuration_of_the_grid_is_measured_exactly_once(table):
    module, header, rows = table
    assert header == [*module.GRID, module.RESPONSE]
    keys = [_key(module, row) for row in rows]
    grid = {tuple(c.values()) for c in kit.configurations(module.GRID)}
    assert len(keys) == len(set(keys)) == math.prod(len(v) for v in module.GRID.values())
    assert set(keys) == grid
    values = np.array([float(row[-1]) for row in rows])
    assert np.all(np.isfinite(values))
    assert np.ptp(values) > 0


def test_table_reads_as_the_team_study_data_file(table):
    module, _, rows = table
    space = load(TABLES / f"{module.NAME}-team.toml").space
    history = read_history(TABLES / f"{module.NAME}.csv", space, module.RESPONSE)
    assert history.rows == len(rows)
    # A geometric grid is evenly spaced on the log-scale cube coordinate (common practice:
    # that is what a log scale means); the encoding puts its ends at 0 and 1.
    for j, p in enumerate(space.parameters):
        if getattr(p, "log", False):
            u = np.unique(history.X[:, j])
            assert u[0] == pytest.approx(0.0, abs=1e-6) and u[-1] == pytest.approx(1.0, abs=1e-6)
            assert np.diff(u) == pytest.approx(np.full(len(u) - 1, u[1] - u[0]), abs=1e-6)


def test_rows_file_holds_the_seeded_rows_of_the_table(table):
    module, _, rows = table
    _, chosen = kit.read_table(TABLES / f"{module.NAME}-rows.csv")
    expected = kit.pick_rows(len(rows), module.ROWS_SEED)
    assert chosen == [rows[i] for i in expected]
    assert len({tuple(r) for r in chosen}) == kit.ROWS


def _defaults_row(module, rows):
    defaults = {
        "build_svc_cancer": ("1", "0.0333333"),
        "build_spline_diabetes": ("1", "5", "3", "constant"),
    }[module.__name__]
    return next(r for r in rows if tuple(r[: len(defaults)]) == defaults)


def test_rows_reproduce_to_the_digits_written_when_measured_again(table):
    module, _, rows = table
    values = np.array([float(r[-1]) for r in rows])
    picks = [_defaults_row(module, rows), rows[int(np.argmin(values))], rows[len(rows) // 3]]
    for row in picks:
        config = dict(zip(module.GRID, _key(module, row), strict=False))
        again = module.measure(config)
        written = float(row[-1])
        digits = kit.RESPONSE_DIGITS
        # The same text, or (a value on a rounding boundary) one unit in the last digit.
        assert f"{again:.{digits}g}" == row[-1] or math.isclose(
            again, written, rel_tol=10.0 ** (1 - digits)
        ), (row, again)


def test_failing_support_vector_classifier_errs_on_the_minority_class():
    _, rows = kit.read_table(TABLES / "svc-cancer.csv")
    worst = max(float(r[-1]) for r in rows)
    # A classifier that predicts the majority class errs on every malignant sample: 212 of 569
    # (class distribution printed in scikit-learn's load_breast_cancer description). Fold
    # sizes differ by one sample, so the fold average is close to, not exactly, the ratio.
    _, y = load_breast_cancer(return_X_y=True)
    assert np.sum(y == 0) == 212 and len(y) == 569
    assert worst == pytest.approx(212 / 569, abs=2e-4)


def test_linear_splines_without_penalty_match_least_squares():
    module = _script("build_spline_diabetes")
    _, rows = kit.read_table(TABLES / "spline-diabetes.csv")
    row = next(r for r in rows if r[:4] == ["0.001", "2", "1", "linear"])
    # Degree-1 splines with 2 knots extrapolated linearly span {1, x} per variable, so with a
    # negligible penalty the model is ordinary least squares (scikit-learn's LinearRegression
    # as the reference) on the same folds.
    X, y = load_diabetes(return_X_y=True)
    scores = cross_val_score(
        LinearRegression(), X, y, cv=module._cv(), scoring="neg_root_mean_squared_error"
    )
    assert float(row[-1]) == pytest.approx(float(np.mean(-scores)), rel=1e-4)


@given(
    anchor=st.floats(1e-6, 1e6),
    low=st.integers(-4, -1),
    high=st.integers(0, 4),
    per_decade=st.integers(1, 5),
)
def test_geometric_grid_has_equal_ratios_and_holds_its_anchor(anchor, low, high, per_decade):
    values = np.array(kit.geometric(anchor, low, high, per_decade))
    assert len(values) == (high - low) * per_decade + 1
    # Rounding to 6 significant digits moves each value by at most 5e-6 of itself.
    ratios = values[1:] / values[:-1]
    assert ratios == pytest.approx(np.full(len(ratios), 10 ** (1 / per_decade)), rel=1.1e-5)
    assert values[-low * per_decade] == pytest.approx(anchor, rel=5.1e-6)
