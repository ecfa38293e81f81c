"""Helpers shared by the tests."""

import textwrap

from workbench.study.spec import parse_text


def make_study(body: str, name: str = "test"):
    """A study from TOML text (dedented)."""
    return parse_text(textwrap.dedent(body), name=name, where=f"{name}.toml")
