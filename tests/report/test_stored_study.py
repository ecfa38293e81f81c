"""After `run`, nothing parses the study: `report` and `decide` read grid.nc alone, so a grid
whose stored study text names a function beside it never imports that file."""

import json
import shutil

import netCDF4
import pytest

from workbench.cli import main

EVIL = """
from pathlib import Path
Path(__file__).with_name("imported.marker").write_text("the grid's study was parsed")

def f(x):
    return 0.0
"""


@pytest.fixture(scope="module")
def crafted(shared_grid, tmp_path_factory):
    """A copy of the shared grid.nc (alone: no report beside it) whose stored study text is
    replaced by one naming evil.py:f beside it, under another rule than the one stored at run
    time (that rule is returned)."""
    folder = tmp_path_factory.mktemp("crafted")
    out = folder / "out"
    out.mkdir()
    shutil.copy(shared_grid / "grid.nc", out / "grid.nc")
    with netCDF4.Dataset(out / "grid.nc") as ds:
        stored, text = ds.decision_rule, ds.study
    other = "minimax" if stored != "minimax" else "cvar"
    study = folder / "study.toml"
    study.write_text(text, encoding="utf-8")
    (folder / "evil.py").write_text(EVIL, encoding="utf-8")
    evil = text.replace('name = "branin"', 'function = "evil.py:f"')
    evil = evil.replace("[decision]\n", f'[decision]\nrule = "{other}"\n')
    assert 'function = "evil.py:f"' in evil and f'rule = "{other}"' in evil
    with netCDF4.Dataset(out / "grid.nc", "a") as ds:
        ds.study = evil
        ds.study_path = str(study)
    return folder, out, stored


def test_report_and_decide_never_import_a_function_named_in_the_grid(crafted, capsys):
    folder, out, stored = crafted
    assert main(["decide", str(out), "--draws", "50", "--json"]) == 0
    rec = json.loads(capsys.readouterr().out)
    assert main(["report", str(out), "--draws", "50"]) == 0
    assert not (folder / "imported.marker").exists()
    # The rule is the one stored at run time, not the (altered) text's.
    assert rec["rule"] == stored
    # The belief figure comes from the stored curves.
    assert (out / "figures" / "belief_marginals.png").is_file()


def test_the_grid_stores_the_belief_marginals_it_was_run_with(crafted):
    from scipy import stats

    _, out, _ = crafted
    with netCDF4.Dataset(out / "grid.nc") as ds:
        params = json.loads(ds.belief_parameters)[0]
        x = ds["belief_x"][0, 0, :].filled()
        density = ds["belief_density"][0, 0, 0, :].filled()
    # The shared study's space and belief (tests/helpers.py: oven, with units).
    assert [p["name"] for p in params] == ["temperature", "proving"]
    assert params[1]["log"] and not params[0]["log"] and params[0]["unit"] == "°C"
    # Exact belief on temperature (180–260 °C, 220 within 15): a normal of sd 15 / (1.645 · 80)
    # in cube units, truncated to the cube (scipy.stats.truncnorm as the reference), centred on
    # 220 °C → cube 0.5.
    sd = 15 / (stats.norm.ppf(0.95) * 80)
    u = (x - 180) / 80
    ref = stats.truncnorm(-0.5 / sd, 0.5 / sd, loc=0.5, scale=sd).pdf(u)
    assert density == pytest.approx(ref, rel=1e-9)
