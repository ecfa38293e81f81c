"""`workbench monitor` from the command line: it prints its validation with the answer, and bad
observation files or a grid of another study end in one line, exit code 2, nothing written."""

import shutil
import textwrap

import pytest
from helpers import MONITOR_STUDY as STUDY

from workbench.cli import main

GOOD = "x1,x2,y\n5,5,3.1\n4,6,2.0\n6,4,2.5\n5.5,5.2,1.1\n4.8,5.1,0.9\n"


@pytest.fixture(scope="module")
def grid(monitor_grid, tmp_path_factory):
    """s1.toml and g1: a copy of the monitor tests' grid (the monitor writes its cache beside
    the grid); s2.toml: the same study with another seed, whose grid g1 is not (another study
    that differs from the grid's in nothing else)."""
    root = tmp_path_factory.mktemp("monitor")
    shutil.copy(monitor_grid / "s.toml", root / "s1.toml")
    shutil.copytree(monitor_grid / "g", root / "g1")
    (root / "s2.toml").write_text(textwrap.dedent(STUDY.format(seed=2)))
    return root


def _monitor(root, out, observations: str, grid: str = "g1", study: str = "s1.toml"):
    path = out.parent / "live.csv"
    path.write_text(observations)
    argv = ["monitor", str(root / study), "--observations", str(path), "--grid", str(root / grid)]
    return main([*argv, "--response", "y", "--goal", "minimise", "--out", str(out)]), out


@pytest.mark.slow
def test_monitor_prints_its_validation_with_the_advice_and_writes_its_pages(grid, tmp_path, capsys):
    code, out = _monitor(grid, tmp_path / "out", GOOD)
    printed = capsys.readouterr().out
    assert code == 0
    assert "validation on held-out replicates" in printed and "base" in printed
    assert "advice:" in printed and "safety limits" in printed
    assert (out / "monitor.html").exists() and (out / "monitor.md").exists()


@pytest.mark.slow
@pytest.mark.parametrize(
    ("text", "words"),
    [
        (GOOD.replace("x1,x2,y", "x1,x3,y"), "column"),
        (GOOD.replace("6,4,2.5", "16,4,2.5"), "line 4, column 'x1'"),  # header: line 1
        ("x1,x2,y\n5,5,3.1\n", "at least 4 rows"),
    ],
)
def test_a_bad_observations_file_is_one_line_and_writes_nothing(
    grid, text, words, tmp_path, capsys
):
    code, out = _monitor(grid, tmp_path / "out", text)
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1 and "live.csv" in err and words in err
    assert not out.exists()


@pytest.mark.slow
def test_a_grid_of_another_study_is_refused(grid, tmp_path, capsys):
    code, out = _monitor(grid, tmp_path / "out", GOOD, study="s2.toml")
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1 and "'--grid'" in err
    assert "run from another study" in err
    assert not out.exists()


@pytest.mark.parametrize("command", ["audit", "monitor"])
@pytest.mark.parametrize(
    "damage", [b"", bytes(4000), b"CDF\x01 truncated"], ids=["empty", "zero-filled", "truncated"]
)
def test_a_damaged_grid_is_one_line_naming_the_grid_option(command, damage, tmp_path, capsys):
    study, data, folder = tmp_path / "s.toml", tmp_path / "live.csv", tmp_path / "g"
    study.write_text(textwrap.dedent(STUDY.format(seed=1)))
    data.write_text(GOOD)
    folder.mkdir()
    (folder / "grid.nc").write_bytes(damage)
    option = "--data" if command == "audit" else "--observations"
    argv = [command, str(study), option, str(data), "--grid", str(folder)]
    argv += ["--response", "y", "--goal", "minimise", "--out", str(tmp_path / "out")]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "command line: '--grid' must be a folder holding a grid.nc" in err[0]
    assert str(folder / "grid.nc") in err[0] and "Traceback" not in err[0]
    assert not (tmp_path / "out").exists()
