"""The monitor tests' grid, run once per session (read-only: copy it to write beside it)."""

import textwrap

import pytest
from helpers import MONITOR_STUDY

from workbench.cli import main


# Not the shared grid (tests/conftest.py): the monitor tests' observation files, settings and
# classifier steps are written for this study (the square [0, 10]², budget 9: steps 4, 8, 9),
# and its first training (16 prior-weighted campaigns) takes about half the time of one on the
# shared grid (24 campaigns, another step count; 0.4 s against 0.8 s, measured once).
@pytest.fixture(scope="session")
def monitor_grid(tmp_path_factory):
    """A folder with s.toml (MONITOR_STUDY, seed 1) and its grid folder g."""
    root = tmp_path_factory.mktemp("monitor-grid")
    (root / "s.toml").write_text(textwrap.dedent(MONITOR_STUDY.format(seed=1)))
    argv = ["run", str(root / "s.toml"), "--out", str(root / "g"), "--quiet", "--jobs", "1"]
    assert main(argv) == 0
    return root
