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
