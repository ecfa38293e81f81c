"""A tiny grid shared by the report's page tests (session scope: run once)."""

import textwrap

import pytest
from helpers import oven

from workbench import cli

# Two landscapes and three distortions: the weights have something to move.
DECISION_STUDY = (
    textwrap.dedent(
        """
    title = "Oven <b>decision</b> page (invented)"
    budget = 8
    replicates = 4
    seed = 11
    baselines = ["no-belief"]

    [initial]
    size = 3

    """
    )
    + oven()
    + textwrap.dedent(
        """
    [[landscape]]
    name = "branin"

    [[landscape]]
    name = "six-hump-camel"

    [distortion]
    shifted = { shift = 0.25 }
    misplaced = { misplace = "worst" }

    [strategy.pseudo-posterior]
    decay = ["hyperbolic:2", "hyperbolic:8"]
    quantile = [0.1, 0.5]

    [strategy.prior-weighted]
    decay = ["hyperbolic:2"]

    [decision]
    weights = { exact = 0.6, shifted = 0.3, misplaced = 0.1 }
    """
    )
)


@pytest.fixture(scope="session")
def decision_grid(tmp_path_factory):
    """A results folder with grid.nc and report.html of :data:`DECISION_STUDY`."""
    root = tmp_path_factory.mktemp("decision")
    study = root / "oven.toml"
    study.write_text(DECISION_STUDY, encoding="utf-8")
    out = root / "out"
    assert cli.main(["run", str(study), "--out", str(out), "--quiet", "--jobs", "1"]) == 0
    assert cli.main(["report", str(out), "--draws", "200"]) == 0
    return out
