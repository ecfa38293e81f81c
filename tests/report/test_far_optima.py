"""Fitted replicates whose optimum lies far from the data they were fitted to: measured when
the grid is run, stored in it, and named by the report and the audit."""

import textwrap

import numpy as np
import pytest
from scipy.spatial import cKDTree

from workbench import analysis as an
from workbench.cli import main
from workbench.report.text import far_optimum_lines
from workbench.world.history import FAR_FROM_DATA, distance_to_data

STUDY = """
title = "Proofing cabinet, invented"
budget = 5
replicates = 6
seed = 11
baselines = ["no-belief"]
[initial]
size = 3
[space.temperature]
lower = 20
upper = 40
unit = "°C"
[space.humidity]
lower = 50
upper = 90
unit = "%"
[belief.temperature]
centre = 22
within = 1
[belief.humidity]
centre = 53
within = 2
[[landscape]]
data = "proofs.csv"
response = "rise"
goal = "maximise"
label = "proofs"
[distortion]
shifted = { shift = 0.2 }
[strategy.prior-weighted]
decay = ["hyperbolic:4"]
"""


# Not the shared grid (tests/conftest.py): the optima far from the data need a landscape fitted
# to data crowded in one corner of the space.
@pytest.fixture(scope="module")
def grid(tmp_path_factory):
    """Eight proofs crowded in the cool, dry corner, the rise still climbing towards its edge:
    the fitted draws put their optimum out in the unmeasured part of the space."""
    root = tmp_path_factory.mktemp("far")
    rng = np.random.default_rng(2)
    u = 0.25 * rng.random((8, 2))
    rows = [f"{20 + 20 * a:.3f},{50 + 40 * b:.3f},{3 * a + 2 * b:.4f}" for a, b in u]
    (root / "proofs.csv").write_text("temperature,humidity,rise\n" + "\n".join(rows) + "\n")
    (root / "s.toml").write_text(textwrap.dedent(STUDY))
    argv = ["run", str(root / "s.toml"), "--out", str(root / "g"), "--quiet", "--jobs", "1"]
    assert main(argv) == 0
    return root, u, an.open_grid(root / "g")


def test_distance_to_data_is_the_nearest_neighbour_distance():
    rng = np.random.default_rng(0)
    X, points = rng.random((30, 3)), rng.random((10, 3))
    # Reference: scipy's k-d tree nearest-neighbour query (Euclidean).
    np.testing.assert_allclose(distance_to_data(points, X), cKDTree(X).query(points)[0])


def test_the_grid_stores_each_fitted_optimums_distance_to_the_data(grid):
    _, u, ds = grid
    optima = ds["optimum_cube"].values[0]
    stored = ds["optimum_data_distance"].values[0]
    # The data as the run read them (rounded to the CSV's three decimals, on the cube).
    X = np.column_stack([np.round(20 * u[:, 0], 3) / 20, np.round(40 * u[:, 1], 3) / 40])
    np.testing.assert_allclose(stored, cKDTree(X).query(optima)[0], atol=1e-6)
    assert ds.attrs["far_from_data"] == FAR_FROM_DATA


def test_the_report_and_the_audit_name_fitted_optima_far_from_the_data(grid, capsys):
    root, _, ds = grid
    far = an.far_optima(ds)
    distance = ds["optimum_data_distance"].values[0]
    n_far = int(np.sum(distance > FAR_FROM_DATA))
    assert n_far >= 1 and far[0].far == n_far and far[0].replicates == 6
    (line,) = far_optimum_lines(ds)
    r = far[0].indices[0]
    t, h = ds["optimum"].values[0, r]
    assert line.startswith(f"{n_far} of 6 fitted replicates of 'proofs' ")
    assert f"temperature = {t:.4g} °C, humidity = {h:.4g} %" in line
    assert main(["report", str(root / "g")]) == 0
    summary = (root / "g" / "summary.md").read_text()
    assert line[0].upper() + line[1:] in summary.replace("\\", "")
    argv = ["audit", str(root / "s.toml"), "--data", str(root / "proofs.csv")]
    assert main([*argv, "--grid", str(root / "g"), "--out", str(root / "audit")]) == 0
    assert line in capsys.readouterr().out.splitlines()
