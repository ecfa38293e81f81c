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
