"""Earlier evaluations read from CSV: what is read, and every kind of bad file refused with one
line naming the file, row and column, exit code 2 and nothing written."""

import textwrap

import numpy as np
import pytest

from workbench.cli import main
from workbench.study.spec import parse_text
from workbench.world.history import read_history

SPACE = """
title = "history"
budget = 6
replicates = 1
[space.temperature]
lower = 180
upper = 250
[space.proving]
lower = 30
upper = 180
scale = "log"
[space.flour]
choices = ["rye", "wheat"]
[belief.temperature]
centre = 220
spread = 0.2
[belief.proving]
centre = 75
spread = 0.2
[belief.flour]
probabilities = { rye = 0.5, wheat = 0.5 }
[strategy.prior-weighted]
decay = ["hyperbolic:4"]
"""
GOOD = """# invented for the test
temperature,proving,flour,crumb
200,60,rye,6.1
210,70,wheat,7.0
220,80,rye,7.9
230,90,wheat,7.2
240,100,rye,5.8
"""


def _space():
    return parse_text(SPACE + '[[landscape]]\nname = "hartmann3"\n').space


def test_the_table_becomes_cube_points_and_values_to_minimise(tmp_path):
    path = tmp_path / "h.csv"
    path.write_text(GOOD)
    h = read_history(path, _space(), "crumb", "maximise")
    assert h.rows == 5
    np.testing.assert_allclose(h.y, [-6.1, -7.0, -7.9, -7.2, -5.8])
    np.testing.assert_allclose(h.user_values(), [6.1, 7.0, 7.9, 7.2, 5.8])
    # temperature 220 on [180, 250] is (220 - 180) / 70 of the range; rye is bin 0 of 2
    assert h.X[2, 0] == pytest.approx(40 / 70)
    assert h.X[0, 2] == pytest.approx(0.25)
    # proving on a log scale: log(80/30) / log(180/30)
    assert h.X[2, 1] == pytest.approx(np.log(80 / 30) / np.log(180 / 30))


BAD = [
    (GOOD.replace("flour,crumb", "flour,crust"), "column 'crumb'"),
    (GOOD.replace("flour,crumb", "flour,crumb,colour").replace("\n2", ",1\n2"), "column 'colour'"),
    (GOOD.replace("210,70,wheat", "210,seventy,wheat"), "line 4, column 'proving'"),
    # the line as an editor counts it: the comment, the header and blank lines count
    (GOOD.replace("210,70,wheat", "\n\n210,seventy,wheat"), "line 6, column 'proving'"),
    (GOOD.replace("7.9", "nan"), "line 5, column 'crumb'"),
    (GOOD.replace("240,100", "260,100"), "line 7, column 'temperature'"),
    (GOOD.replace("230,90,wheat", "230,90,spelt"), "line 6, column 'flour'"),
    ("temperature,proving,flour,crumb\n200,60,rye,6\n210,70,wheat,7\n", "'data'"),
    (
        GOOD.replace("6.1", "7")
        .replace("7.0", "7")
        .replace("7.9", "7")
        .replace("7.2", "7")
        .replace("5.8", "7"),
        "column 'crumb'",
    ),
]


@pytest.mark.parametrize(("text", "names"), BAD)
def test_a_bad_data_file_is_one_line_naming_file_line_and_column(text, names, tmp_path, capsys):
    (tmp_path / "h.csv").write_text(text)
    study = tmp_path / "s.toml"
    study.write_text(textwrap.dedent(SPACE) + '[[landscape]]\ndata = "h.csv"\nresponse = "crumb"\n')
    out = tmp_path / "out"
    code = main(["run", str(study), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err.strip()
    assert code == 2
    assert len(err.splitlines()) == 1 and "Traceback" not in err
    assert "h.csv" in err and names in err
    assert not out.exists()


@pytest.mark.parametrize(
    ("reference", "words"),
    [
        ("missing.py:score", "no file at"),
        ("process.py:nothing", "no function 'nothing'"),
        ("process.py", "'FILE.py:FUNCTION'"),
        ("broken.py:score", "a file that imports"),
    ],
)
def test_a_missing_function_file_or_function_name_is_one_line(reference, words, tmp_path, capsys):
    (tmp_path / "process.py").write_text("def score(temperature, proving, flour):\n    return 1\n")
    (tmp_path / "broken.py").write_text("import a_module_that_is_not_there\n")
    study = tmp_path / "s.toml"
    study.write_text(textwrap.dedent(SPACE) + f'[[landscape]]\nfunction = "{reference}"\n')
    out = tmp_path / "out"
    code = main(["run", str(study), "--out", str(out), "--quiet"])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1
    assert "s.toml" in err and "landscape[0].function" in err and words in err
    assert not out.exists()
