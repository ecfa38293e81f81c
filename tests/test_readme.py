"""The README says what the program prints: its quoted demo recommendation is the demo grid's,
and its description of the acquisition search states the engine's constants.

The demo study runs here for real (about a minute on 2 cores); `make readme` rewrites the
quoted blocks when this fails after an intended change.
"""

import importlib.util
import re
from pathlib import Path

import pytest

from workbench import analysis as an
from workbench.engine import campaign

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _readme_tool():
    spec = importlib.util.spec_from_file_location("readme_tool", ROOT / "docs" / "readme.py")
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


@pytest.fixture(scope="module")
def demo_grid(demo_grid_folder):
    # Run by `workbench run studies/demo.toml` in the background (tests/conftest.py).
    return an.open_grid(demo_grid_folder / "grid.nc")


@pytest.mark.slow
def test_the_quoted_recommendation_is_what_the_demo_grid_gives(demo_grid):
    tool = _readme_tool()
    quoted = tool.block(README, "demo-output").strip("`\n").splitlines()
    quoted = [line for line in quoted if line.startswith(tool.RECOMMENDATION)]
    rec = an.recommend(demo_grid, an.decision_rule(demo_grid), an.Resampling())
    # setting, rule, value and interval, runner-up, stability, leave-one-landscape-out
    assert quoted == rec.lines()


@pytest.mark.slow
def test_the_quoted_summary_names_the_recommended_and_the_best_pseudo_posterior_setting(
    demo_grid,
):
    quoted = _readme_tool().block(README, "demo-summary")
    rs = an.Resampling()
    rule = an.decision_rule(demo_grid)
    rec = an.recommend(demo_grid, rule, rs)
    pp = an.recommend(demo_grid, rule, rs, strategy="pseudo-posterior")
    assert f"decay schedule {rec.choice['decay']}" in quoted.splitlines()[0]
    best = next(line for line in quoted.splitlines() if "best pseudo-posterior" in line)
    assert f"decay schedule {pp.choice['decay']}" in best
    assert f"γ = {pp.choice['quantile']:g}" in best


def test_blocks_are_replaced_between_their_markers_and_nowhere_else():
    tool = _readme_tool()
    text = "a\n<!-- begin: x -->\nold\n<!-- end: x -->\nb\n"
    assert (
        tool.replace_block(text, "x", "new\n") == "a\n<!-- begin: x -->\nnew\n<!-- end: x -->\nb\n"
    )
    with pytest.raises(SystemExit, match="no block 'y'"):
        tool.block(text, "y")


def test_the_search_described_in_the_readme_uses_the_engine_constants():
    found = re.search(
        r"scores (\d+) rotated\s+Sobol points, (\d+) belief draws and (\d+) perturbations around "
        r"each of the (\d+) best observations,\s+then polishes the best (\d+) together with one "
        r"L-BFGS-B run of at most (\d+) evaluations",
        README,
    )
    assert found, "README: the acquisition search sentence is missing"
    assert tuple(int(g) for g in found.groups()) == (
        campaign.SOBOL_CANDIDATES,
        campaign.BELIEF_CANDIDATES,
        campaign.LOCAL_CANDIDATES,
        campaign.INCUMBENTS,
        campaign.POLISHES,
        campaign.POLISH_ITERATIONS,
    )
