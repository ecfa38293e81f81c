"""Hostile input: every case is one line naming the file or option, exit code 2 and nothing
written; user text that looks like markup stays text in every output, and figures draw it."""

import math
import re
import textwrap
from dataclasses import replace

import pytest
from helpers import make_study, oven

from workbench import cli
from workbench.report.markup import md_text, mpl_text
from workbench.seeding import MAX_SEED
from workbench.study.cost import MAX_GRID_BYTES, check_grid_size
from workbench.validation import InputError
from workbench.world import history

STUDY = (
    """
title = "hostile"
budget = 6
replicates = 2
baselines = ["no-belief"]
[initial]
size = 3
"""
    + oven(units=True)
    + """[[landscape]]
name = "branin"
[distortion]
shifted = { shift = 0.25 }
[strategy.pseudo-posterior]
decay = ["hyperbolic:2"]
quantile = [0.25]
"""
)
FITTED = '[[landscape]]\nname = "branin"'
CSV_HEAD = "temperature,proving,crumb\n"
CSV_ROWS = "200,50,1.0\n210,60,0.5\n220,70,0.2\n230,80,0.4\n240,90,0.9\n"


def _fitted(csv: str) -> str:
    return f'[[landscape]]\ndata = "{csv}"\nresponse = "crumb"'


def _edit(old: str, new: str):
    def apply(text: str) -> str:
        assert old in text
        return text.replace(old, new)

    return apply


def _append(more: str):
    return lambda text: text + more


# (id, edit of the study text, CSV files beside it, extra arguments, message pattern)
CHECK_CASES = [
    ("huge budget", _edit("budget = 6", "budget = 1000000000"), {}, [],
     r"'budget' must be an integer in \[2, 1000\] \(the limit on a budget\); got 1000000000"),
    ("huge replicates", _edit("replicates = 2", "replicates = 1000000"), {}, [],
     r"'replicates' must be an integer in \[1, 100000\] \(the limit on replicates\)"),
    ("huge random multiple", _edit("budget = 6", "budget = 6\nrandom_multiple = 100000"), {}, [],
     r"'random_multiple' must be an integer in \[1, 10000\] \(the limit on the random"),
    ("grid too large to load",
     _edit("budget = 6\nreplicates = 2", "budget = 999\nreplicates = 99999"),
     {}, [], r"'replicates' must be at most [\d,]+ for a grid\.nc of at most 4\.0 GB \(the "
     r"limit on a grid, which decide and report load into memory\); got 99,999, a grid of about"),
    ("huge block", _edit("replicates = 2", "replicates = 2\nblock = 100000"), {}, [],
     r"'block' must be an integer in \[1, 256\]"),
    ("huge features", _edit(FITTED, "[[landscape]]\ndrawn = { features = 100000000 }"), {}, [],
     r"'landscape\[0\]\.drawn\.features' must be an integer in \[16, 65536\] \(the limit"),
    ("integer with a billion values",
     _edit('lower = 20\nupper = 240\nscale = "log"',
           'lower = 0\nupper = 1000000000\ntype = "integer"'), {}, [],
     r"'space\.proving\.upper' must be at most 9999 above lower"),
    ("negative seed", _edit("budget = 6", "budget = 6\nseed = -1"), {}, [],
     rf"'seed' must be an integer in \[0, {MAX_SEED}\] \(the seeding helper's range\)"),
    ("float seed", _edit("budget = 6", "budget = 6\nseed = 1e32"), {}, [], r"'seed' must be"),
    ("direction as a word", _edit("shift = 0.25", 'shift = 0.25, direction = "north"'), {}, [],
     r"'distortion\.shifted\.direction' must be a list"),
    ("factorial of strings",
     _edit("shifted = { shift = 0.25 }", 'factorial = { shift = ["a"], scale = ["b"] }'), {}, [],
     r"'distortion\.factorial\.shift' must be a number"),
    ("weights all zero", _append("[decision]\nweights = { exact = 0, shifted = 0 }\n"), {}, [],
     r"'decision\.weights' must be weights that are not all 0"),
    ("belief wider than the range", _edit("within = 15", "within = 1e300"), {}, [],
     r"'belief\.temperature\.within' must be a number in \(0, 8000\]"),
    ("one decay written twice",
     _edit('decay = ["hyperbolic:2"]', 'decay = ["hyperbolic:2", "hyperbolic:2.0"]'), {}, [],
     r"'strategy\.pseudo-posterior\.decay' must be a list of different schedules; got "
     r"'hyperbolic:2\.0', the same schedule as 'hyperbolic:2'"),
    ("negative jobs", lambda s: s, {}, ["--jobs", "-3"],
     r"command line: '--jobs' must be an integer in \[1, inf\); got -3"),
    ("data is /dev/zero", _edit(FITTED, _fitted("/dev/zero")), {}, [],
     r"/dev/zero: 'data' must be a CSV file \(a regular file\); got a device, pipe or folder"),
    ("data is /dev/urandom", _edit(FITTED, _fitted("/dev/urandom")), {}, [],
     r"/dev/urandom: 'data' must be a CSV file \(a regular file\)"),
    ("underscore in a number", _edit(FITTED, _fitted("d.csv")),
     {"d.csv": CSV_HEAD + "2_00,50,1.0\n" + CSV_ROWS}, [],
     r"'line 2, column 'temperature'' must be a number such as 12, -0\.5 or 1e3; got '2_00'"),
    ("nan response", _edit(FITTED, _fitted("d.csv")),
     {"d.csv": CSV_HEAD + "200,50,nan\n" + CSV_ROWS}, [], r"column 'crumb'' must be a number"),
    ("infinite response", _edit(FITTED, _fitted("d.csv")),
     {"d.csv": CSV_HEAD + "200,50,inf\n" + CSV_ROWS}, [], r"column 'crumb'' must be a number"),
    ("overflowing response", _edit(FITTED, _fitted("d.csv")),
     {"d.csv": CSV_HEAD + "200,50,1e999\n" + CSV_ROWS}, [], r"must be a finite number"),
    ("duplicated column", _edit(FITTED, _fitted("d.csv")),
     {"d.csv": "temperature,proving,crumb,proving\n" + CSV_ROWS.replace("\n", ",1\n")}, [],
     r"'column 'proving'' must be named once in the header; got twice"),
    ("too many rows", _edit(FITTED, _fitted("d.csv")),
     {"d.csv": CSV_HEAD + "200,50,1.0\n" * (history.MAX_ROWS + 1)}, [],
     rf"'data' must be at most {history.MAX_ROWS} data rows \(the limit on a table\)"),
    ("file too large", _edit(FITTED, _fitted("d.csv")), {"d.csv": None}, [],
     r"'data' must be a CSV file of at most 50 MiB \(the limit on an input file\)"),
    ("a password file", _edit(FITTED, _fitted("d.csv")),
     {"d.csv": "root:x:0:0:SECRET:/root:/bin/bash\n" * 8}, [],
     r"'column 'temperature'' must be present in the header; got 1 column\(s\)"),
]  # fmt: skip


@pytest.mark.parametrize(
    "edit, files, extra, pattern", [c[1:] for c in CHECK_CASES], ids=[c[0] for c in CHECK_CASES]
)
def test_hostile_study_is_refused_in_one_line_before_anything_is_written(
    edit, files, extra, pattern, tmp_path, capsys
):
    for name, text in files.items():
        if text is None:  # a sparse file just over the limit: no time spent writing it
            with open(tmp_path / name, "wb") as fh:
                fh.truncate(history.MAX_FILE_BYTES + 1)
        else:
            (tmp_path / name).write_text(text, encoding="utf-8")
    study = tmp_path / "study.toml"
    study.write_text(edit(textwrap.dedent(STUDY)), encoding="utf-8")
    before = sorted(p.name for p in tmp_path.iterdir())
    out = tmp_path / "out"
    assert cli.main(["check", str(study), *extra]) == 2
    assert cli.main(["run", str(study), "--out", str(out), "--quiet", *extra]) == 2
    err = capsys.readouterr().err
    lines = err.strip().splitlines()
    assert len(lines) == 2 and lines[0] == lines[1], err
    assert re.search(pattern, lines[0]), lines[0]
    assert "SECRET" not in err and "Traceback" not in err and "Warning" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_the_replicates_the_grid_limit_names_fit_and_one_more_does_not():
    study = make_study(
        _edit("budget = 6\nreplicates = 2", "budget = 999\nreplicates = 99999")(STUDY)
    )
    with pytest.raises(InputError) as refused:
        check_grid_size(study)
    fit = int(re.search(r"at most ([\d,]+) for", str(refused.value)).group(1).replace(",", ""))
    assert 0 < fit < study.replicates
    assert check_grid_size(replace(study, replicates=fit)) <= MAX_GRID_BYTES
    with pytest.raises(InputError, match="'replicates' must be at most"):
        check_grid_size(replace(study, replicates=fit + 1))


@pytest.mark.parametrize(
    "argv, pattern",
    [
        (
            ["--seed", str(MAX_SEED + 1)],
            r"'--seed' must be an integer in \[0, 9223372036854775807\]",
        ),
        (["--budget", "5000"], r"'--budget' must be an integer in \[2, 1000\]"),
        (["--replicates", "1000000"], r"'--replicates' must be an integer in \[1, 100000\]"),
        (
            ["--random-multiple", "100000"],
            r"'--random-multiple' must be an integer in \[1, 10000\]",
        ),
    ],
)
def test_simulate_options_beyond_their_limits_are_refused(argv, pattern, capsys):
    code = cli.main(["simulate", "--landscape", "branin", "--strategy", "random", *argv])
    err = capsys.readouterr().err
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert re.search(pattern, err), err


# --------------------------------------------------------------------------- escaping

EVIL = "<script>alert(1)</script> [x](javascript:alert(1)) # heading $x$"
EVIL_STUDY = r"""
title = "<script>alert(1)</script> [x](javascript:alert(1)) # heading $x$"
budget = 6
replicates = 2
baselines = ["no-belief"]
[initial]
size = 3
[space.temperature]
lower = 180
upper = 260
unit = "$x$ <b>bold</b>"
[space."[p](javascript:alert(1))"]
lower = 20
upper = 240
unit = "# heading"
[belief.temperature]
centre = 220
within = 15
[belief."[p](javascript:alert(1))"]
centre = 75
within = 30
[[landscape]]
name = "branin"
label = "# heading <script>alert(1)</script>"
[distortion]
'$\x$ # heading' = { shift = 0.25 }
[strategy.pseudo-posterior]
decay = ["hyperbolic:2"]
quantile = [0.25]
"""
EVIL_CSV = (
    "# invented evaluations\n"
    "temperature,[p](javascript:alert(1)),y\n"
    "200,50,1.0\n210,60,0.5\n220,70,0.2\n230,80,0.4\n240,90,0.9\n250,100,1.3\n"
)


# Not the shared grid (tests/conftest.py): the study's own names and text are the hostile input.
@pytest.fixture(scope="session")
def hostile_outputs(tmp_path_factory):
    """The hostile study run tiny (budget 6, 2 replicates), its report, plan, audit and
    monitor; every command must succeed."""
    folder = tmp_path_factory.mktemp("hostile")
    study = folder / "study.toml"
    study.write_text(EVIL_STUDY, encoding="utf-8")
    (folder / "data.csv").write_text(EVIL_CSV, encoding="utf-8")
    (folder / "live.csv").write_text(EVIL_CSV.replace("250,100,1.3\n", ""), encoding="utf-8")
    grid = folder / "grid"
    commands = [
        ["run", str(study), "--out", str(grid), "--quiet", "--jobs", "1"],
        ["report", str(grid), "--draws", "50"],
        ["plan", str(study), "--out", str(folder / "plan"), "--pilot-replicates", "2"],
        ["audit", str(study), "--data", str(folder / "data.csv"), "--response", "y",
         "--goal", "minimise", "--out", str(folder / "audit")],
        ["monitor", str(study), "--observations", str(folder / "live.csv"), "--response", "y",
         "--goal", "minimise", "--grid", str(grid), "--out", str(folder / "monitor")],
    ]  # fmt: skip
    for argv in commands:
        assert cli.main(argv) == 0, argv
    return folder


MARKDOWN = ["grid/summary.md", "plan/plan.md", "audit/audit.md", "monitor/monitor.md"]
HTML = ["grid/report.html", "plan/plan.html", "audit/audit.html", "monitor/monitor.html"]


def _unescaped(text: str, char: str) -> int:
    """Occurrences of ``char`` not preceded by a backslash (which Markdown shows as text)."""
    return len(re.findall(rf"(?<!\\){re.escape(char)}", text))


@pytest.mark.parametrize("name", MARKDOWN)
def test_markdown_outputs_show_user_markup_as_text(hostile_outputs, name):
    text = (hostile_outputs / name).read_text(encoding="utf-8")
    assert md_text(EVIL) in text or name != "grid/summary.md"  # the title, escaped
    # CommonMark: a backslash before ASCII punctuation makes it literal, and HTML is live
    # only from a raw '<' (spec.commonmark.org, sections 2.4 and 6.6).
    assert "<script" not in text and "<b>" not in text
    assert not re.search(r"(?<!\\)\[[^\]]*(?<!\\)\]\(javascript", text)
    assert not re.search(r"^\s*(- )?# heading", text, flags=re.MULTILINE)
    assert "$x$" not in text and "\\$x\\$" in text


@pytest.mark.parametrize("name", HTML)
def test_html_pages_escape_user_markup(hostile_outputs, name):
    page = (hostile_outputs / name).read_text(encoding="utf-8")
    # The report's only scripts are its decision box's own (data and code, inline); user text
    # inside the data has every '<' escaped, so it cannot close the element.
    ours = ['<script type="application/json" id="decision-data">', "<script>"]
    assert re.findall(r"<script[^>]*>", page) == (ours if name == "grid/report.html" else [])
    assert "<script>alert" not in page and "<b>bold" not in page
    data = re.search(r'id="decision-data">(.*?)</script>', page, re.S)
    assert data is None or "<" not in data.group(1)
    assert "&lt;script&gt;" in page
    assert 'href="javascript' not in page


def test_figures_render_user_text_with_dollars(hostile_outputs):
    figures = sorted((hostile_outputs / "grid" / "figures").glob("*.png"))
    assert {p.stem for p in figures} >= {"regret_curves", "belief_marginals"}
    for png in [
        *figures,
        hostile_outputs / "audit/audit.png",
        hostile_outputs / "monitor/monitor.png",
    ]:
        assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_mpl_text_draws_dollars_literally():
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots()
    # An odd pair like '$\x$' is not valid math text and fails when drawn unescaped.
    text = ax.set_title(mpl_text(r"cost $\x$ in $ and $y$"))
    fig.canvas.draw()
    assert text._preprocess_math(text.get_text()) == (r"cost $\x$ in $ and $y$", False)
    plt.close(fig)


def test_monitor_refuses_more_observations_than_the_budget(hostile_outputs, tmp_path, capsys):
    rows = "".join(f"{200 + i},{50 + i},{i / 10}\n" for i in range(7))
    live = tmp_path / "long.csv"
    live.write_text("temperature,[p](javascript:alert(1)),y\n" + rows, encoding="utf-8")
    out = tmp_path / "monitor"
    study, grid = hostile_outputs / "study.toml", hostile_outputs / "grid"
    argv = [
        "monitor",
        str(study),
        "--observations",
        str(live),
        "--response",
        "y",
        "--goal",
        "minimise",
    ]
    argv += ["--grid", str(grid), "--out", str(out)]
    assert cli.main(argv) == 2
    err = capsys.readouterr().err
    assert "'--observations' must be at most 6 evaluations (the grid's budget); got 7 rows" in err
    assert not out.exists()


def test_a_gp_fit_sees_at_most_the_row_cap_chosen_by_the_subset_rule(tmp_path):
    from workbench.world.kinds import Fitted
    from workbench.world.space import Continuous, Space

    space = Space((Continuous("a", 0.0, 1.0), Continuous("b", 0.0, 1.0)))
    n = history.MAX_FIT_ROWS * 3
    rows = "".join(f"{(i % 97) / 97:.4f},{(i % 89) / 89:.4f},{i}\n" for i in range(n))
    path = tmp_path / "many.csv"
    path.write_text("a,b,y\n" + rows, encoding="utf-8")
    data = history.read_history(path, space, "y")
    fit = data.fitting_rows()
    assert fit.rows == history.MAX_FIT_ROWS and data.rows == n
    # Distinct rows of the file, in file order, the same on every call (no seed), the best
    # quarter of the cap among them (y = row number here: the first rows are the best).
    assert len(set(fit.y.tolist())) == fit.rows and set(fit.y) <= set(data.y)
    assert (fit.y == data.fitting_rows().y).all() and (fit.y == sorted(fit.y)).all()
    best = math.ceil(history.BEST_SHARE * history.MAX_FIT_ROWS)
    assert fit.y[:best].tolist() == sorted(data.y)[:best]
    spec = Fitted.from_history(data)
    assert len(spec.y) == history.MAX_FIT_ROWS
    assert f"{history.MAX_FIT_ROWS} of the {n} evaluations" in spec.source
    few = history.History(data.X[:10], data.y[:10], "y", "minimise", str(path), data.digest)
    assert few.fitting_rows() is few  # below the cap, every row
