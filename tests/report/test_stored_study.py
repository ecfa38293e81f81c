"""After `run`, nothing parses the study: `report` and `decide` read grid.nc alone, so a grid
whose stored study text names a function beside it never imports that file."""

import json
import textwrap

import netCDF4
import pytest

from workbench.cli import main

STUDY = textwrap.dedent(
    """
    title = "Proofing cabinet (invented)"
    budget = 7
    replicates = 2
    baselines = ["no-belief"]

    [initial]
    size = 3

    [space.humidity]
    lower = 60
    upper = 90
    unit = "%"

    [space.minutes]
    lower = 20
    upper = 120
    scale = "log"
    unit = "min"

    [belief.humidity]
    centre = 75
    within = 8

    [belief.minutes]
    centre = 45
    factor = 2

    [[landscape]]
    name = "branin"

    [distortion]
    shifted = { shift = 0.2 }

    [strategy.pseudo-posterior]
    decay = ["hyperbolic:2", "hyperbolic:8"]
    quantile = [0.25]

    [decision]
    rule = "minimax"
    """
)

EVIL = """
from pathlib import Path
Path(__file__).with_name("imported.marker").write_text("the grid's study was parsed")

def f(x):
    return 0.0
"""


@pytest.fixture(scope="module")
def crafted(tmp_path_factory):
    """A real grid whose stored study text is replaced by one naming evil.py:f beside it."""
    folder = tmp_path_factory.mktemp("crafted")
    study = folder / "study.toml"
    study.write_text(STUDY, encoding="utf-8")
    out = folder / "out"
    assert main(["run", str(study), "--out", str(out), "--quiet", "--jobs", "1"]) == 0
    (folder / "evil.py").write_text(EVIL, encoding="utf-8")
    evil = STUDY.replace('name = "branin"', 'function = "evil.py:f"').replace("minimax", "cvar")
    with netCDF4.Dataset(out / "grid.nc", "a") as ds:
        ds.study = evil
        ds.study_path = str(study)
    return folder, out


def test_report_and_decide_never_import_a_function_named_in_the_grid(crafted, capsys):
    folder, out = crafted
    assert main(["decide", str(out), "--draws", "50", "--json"]) == 0
    rec = json.loads(capsys.readouterr().out)
    assert main(["report", str(out), "--draws", "50"]) == 0
    assert not (folder / "imported.marker").exists()
    # The rule is the one stored at run time, not the (altered) text's.
    assert rec["rule"] == "minimax"
    # The belief figure comes from the stored curves.
    assert (out / "figures" / "belief_marginals.png").is_file()


def test_the_grid_stores_the_belief_marginals_it_was_run_with(crafted):
    from scipy import stats

    _, out = crafted
    with netCDF4.Dataset(out / "grid.nc") as ds:
        params = json.loads(ds.belief_parameters)[0]
        x = ds["belief_x"][0, 0, :].filled()
        density = ds["belief_density"][0, 0, 0, :].filled()
    assert [p["name"] for p in params] == ["humidity", "minutes"]
    assert params[1]["log"] and params[0]["unit"] == "%"
    # Exact belief on humidity: a normal of sd 8 / (1.645 · 30) in cube units, truncated to the
    # cube (scipy.stats.truncnorm as the reference), centred on 75 % → cube 0.5.
    sd = 8 / (stats.norm.ppf(0.95) * 30)
    u = (x - 60) / 30
    ref = stats.truncnorm(-0.5 / sd, 0.5 / sd, loc=0.5, scale=sd).pdf(u)
    assert density == pytest.approx(ref, rel=1e-9)
