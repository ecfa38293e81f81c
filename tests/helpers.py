"""Helpers shared by the tests."""

import textwrap

from workbench.study.spec import parse_text


def make_study(body: str, name: str = "test"):
    """A study from TOML text (dedented)."""
    return parse_text(textwrap.dedent(body), name=name, where=f"{name}.toml")


def oven(units: bool = False) -> str:
    """The test bakery's space and belief (invented, as in studies/demo.toml) as study text, for
    test studies to put between their own tables; ``units`` adds °C and min."""
    temperature_unit = 'unit = "°C"\n' if units else ""
    proving_unit = 'unit = "min"\n' if units else ""
    return (
        "\n[space.temperature]\nlower = 180\nupper = 260\n"
        + temperature_unit
        + '\n[space.proving]\nlower = 20\nupper = 240\nscale = "log"\n'
        + proving_unit
        + "\n[belief.temperature]\ncentre = 220\nwithin = 15\n"
        + "\n[belief.proving]\ncentre = 75\nfactor = 2\n\n"
    )


# Branin's native domain (Dixon & Szegő 1978) as a study's space, with a belief at (3, 3).
BRANIN_SPACE = """
[space.x1]
lower = -5
upper = 10
[space.x2]
lower = 0
upper = 15
[belief.x1]
centre = 3
spread = 0.2
[belief.x2]
centre = 3
spread = 0.2
"""


# Five belief-guided settings (four pseudo-posterior, one prior-weighted): the shared grid's,
# and those of the report tests' own study (tests/report/test_report.py).
GUIDED_SETTINGS = textwrap.dedent(
    """
    [strategy.pseudo-posterior]
    decay = ["hyperbolic:2", "hyperbolic:8"]
    quantile = [0.1, 0.5]

    [strategy.prior-weighted]
    decay = ["hyperbolic:2"]
    """
)


# The shared grid's study (the `shared_grid` session fixture of tests/conftest.py): two
# landscapes and three distortions, both belief-guided strategies (five settings), the
# no-belief baseline, 4 replicates of 8 evaluations; its report uses SHARED_DRAWS resamples.
SHARED_TITLE = "Oven <b>decision</b> page (invented)"
SHARED_DRAWS = 200
SHARED_STUDY = (
    textwrap.dedent(
        f"""
    title = "{SHARED_TITLE}"
    budget = 8
    replicates = 4
    seed = 11
    baselines = ["no-belief"]

    [initial]
    size = 3
    """
    )
    + oven(units=True)
    + textwrap.dedent(
        """
    [[landscape]]
    name = "branin"

    [[landscape]]
    name = "six-hump-camel"

    [distortion]
    shifted = { shift = 0.25 }
    misplaced = { misplace = "worst" }
    """
    )
    + GUIDED_SETTINGS
    + textwrap.dedent(
        """
    [decision]
    weights = { exact = 0.6, shifted = 0.3, misplaced = 0.1 }
    """
    )
)


# The monitor tests' small study (tests/evidence/conftest.py: `monitor_grid`, seed 1): one
# landscape on the square [0, 10]², one misplaced distortion, the prior-weighted strategy with
# two decays, 4 replicates of 9 evaluations (a classifier at evaluations 4, 8 and 9).
MONITOR_STUDY = """
title = "monitor"
budget = 9
replicates = 4
seed = {seed}
baselines = ["no-belief"]
[initial]
size = 3
[space.x1]
lower = 0
upper = 10
[space.x2]
lower = 0
upper = 10
[belief.x1]
centre = 5
spread = 0.15
[belief.x2]
centre = 5
spread = 0.15
[[landscape]]
name = "branin"
[distortion]
misplaced = {{ misplace = "worst" }}
[strategy.prior-weighted]
decay = ["hyperbolic:2", "hyperbolic:8"]
"""
