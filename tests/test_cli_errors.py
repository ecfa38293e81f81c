"""Bad input: one line naming the file and the key, exit code 2, nothing written."""

import textwrap

import pytest

from workbench.cli import main

GOOD = """
title = "errors"
budget = 10
replicates = 2
[[landscape]]
name = "branin"
[belief]
spread = 0.1
[distortion]
shifted = { shift = 0.2 }
[strategy.pseudo-posterior]
decay = ["hyperbolic:5"]
quantile = [0.25]
"""


def _run(argv, capsys):
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.mark.parametrize(
    "edit, key",
    [
        (lambda s: s.replace("budget = 10", 'budget = "ten"'), "'budget'"),
        (lambda s: s.replace("budget = 10", "budget = 10\nbudgit = 3"), "did you mean 'budget'"),
        (lambda s: s.replace("spread = 0.1", "spread = -0.1"), "'belief.spread'"),
        (lambda s: s.replace("quantile = [0.25]", "quantile = [1.5]"), "quantile"),
        (lambda s: s.replace("quantile = [0.25]", "quantile = [0.25, 0.25]"), "quantile"),
        (lambda s: s.replace('name = "branin"', 'name = "branon"'), "did you mean 'branin'"),
        (lambda s: s.replace('decay = ["hyperbolic:5"]', 'decay = ["hyperbolic:0"]'), "decay"),
        (
            lambda s: s.replace("[strategy.pseudo-posterior]", "[strategy.pseudo-posteriors]"),
            "strategy",
        ),
        (lambda s: s.replace('title = "errors"\n', ""), "'title'"),
        (lambda s: s.replace('[[landscape]]\nname = "branin"\n', ""), "'landscape'"),
        (lambda s: s.replace("budget = 10", "budget = 3"), "'budget'"),
        (lambda s: s.replace("shift = 0.2", "shift = 0.2, misplace = 'worse'"), "misplace"),
        (lambda s: s + "\n[decision]\nrule = 'maximin'\n", "decision.rule"),
        (lambda s: s.replace("[belief]", "[belief\n"), "valid TOML"),
    ],
)
def test_malformed_studies_give_one_line_naming_file_and_key(edit, key, tmp_path, capsys):
    path = tmp_path / "bad.toml"
    path.write_text(edit(textwrap.dedent(GOOD)), encoding="utf-8")
    out = tmp_path / "out"
    code, _, err = _run(["run", str(path), "--out", str(out), "--quiet"], capsys)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err
    assert str(path) in lines[0] and key in lines[0]
    assert not out.exists()


def test_empty_and_non_utf8_and_missing_files_are_refused(tmp_path, capsys):
    empty = tmp_path / "empty.toml"
    empty.write_text("")
    binary = tmp_path / "binary.toml"
    binary.write_bytes(b'title = "\xff\xfe"\n')
    for path, words in ((empty, "empty"), (binary, "UTF-8"), (tmp_path / "none.toml", "no file")):
        code, _, err = _run(["check", str(path)], capsys)
        assert code == 2 and words in err and len(err.strip().splitlines()) == 1


@pytest.mark.parametrize(
    "argv, words",
    [
        (["--strategy", "pseudo-posterior", "--quantile", "0"], "'--quantile'"),
        (["--strategy", "pseudo-posterior", "--decay", "hyperbolic:-2"], "'--decay'"),
        (["--strategy", "prior-weighted", "--exploration", "1.5"], "'--exploration'"),
        (["--strategy", "no-belief", "--budget", "3"], "'--budget'"),
        (["--strategy", "no-belief", "--belief-spread", "0"], "'--belief-spread'"),
        (["--strategy", "guess"], "'--strategy'"),
        (["--strategy", "random", "--decay", "cubic:2"], "hyperbolic"),
    ],
)
def test_impossible_simulation_settings_are_rejected(argv, words, capsys):
    code, _, err = _run(["simulate", "--landscape", "branin", *argv], capsys)
    assert code == 2 and words in err and "command line" in err
    assert len(err.strip().splitlines()) == 1


def test_an_unknown_landscape_lists_the_valid_ones(capsys):
    code, _, err = _run(["simulate", "--landscape", "bran", "--strategy", "random"], capsys)
    assert code == 2 and "branin" in err and "six-hump-camel" in err


def test_a_decoy_misplacement_without_a_decoy_stops_the_run_with_one_line(tmp_path, capsys):
    # Branin on its native domain has only its three global minima (Dixon & Szegő 1978): no
    # decoy. Found during the run, in a worker process (--jobs 2), still one line and exit 2.
    study = textwrap.dedent(GOOD).replace("shift = 0.2", "misplace = 'decoy'")
    path = tmp_path / "decoy.toml"
    path.write_text(study.replace("replicates = 2", 'replicates = 2\nplacement = "native"'))
    argv = ["run", str(path), "--out", str(tmp_path / "out"), "--quiet", "--jobs", "2"]
    code, _, err = _run(argv, capsys)
    assert code == 2
    assert err.strip().splitlines() == [
        f"workbench: {path}: 'distortion.shifted.misplace' must be a landscape with a local "
        "optimum apart from its global ones (use 'worst' instead); got 'branin'"
    ]


@pytest.mark.parametrize(
    ("argv", "words"),
    [
        (["run"], "the following arguments are required: study"),
        (
            ["simulate", "--landscape", "branin", "--strategy", "random", "--budget", "x"],
            "--budget",
        ),
        (["frobnicate"], "invalid choice: 'frobnicate'"),
        (["check", "s.toml", "--no-such-option"], "unrecognized arguments: --no-such-option"),
    ],
)
def test_a_usage_error_is_one_line_pointing_to_help(argv, words, capsys):
    with pytest.raises(SystemExit) as stop:
        main(argv)
    err = capsys.readouterr().err
    assert stop.value.code == 2
    assert err.count("\n") == 1 and "usage:" not in err
    assert err.startswith("workbench: error: ") and words in err and "--help" in err


@pytest.mark.parametrize("argv", [["recommend", "results/demo"], ["--debug", "recommend"]])
def test_the_old_recommend_command_is_refused_naming_decide(argv, capsys):
    with pytest.raises(SystemExit) as stop:
        main(argv)
    assert stop.value.code == 2
    assert capsys.readouterr().err == "workbench: the command 'recommend' is now 'decide'\n"


SPACE_STUDY = """
title = "renamed"
budget = 10
replicates = 2
[space.x1]
lower = 0
upper = 1
[space.x2]
lower = 0
upper = 1
[[landscape]]
function = "f.py:f"
[strategy.prior-weighted]
decay = ["hyperbolic:5"]
"""


@pytest.mark.parametrize(
    ("edit", "key"),
    [
        (lambda s: s.replace("function = ", "objective = "), "landscape[0].objective"),
        (lambda s: s + '[truth]\nobjective = "f.py:f"\n', "truth.objective"),
    ],
)
def test_the_old_objective_key_is_refused_naming_function(edit, key, tmp_path, capsys):
    (tmp_path / "f.py").write_text("def f(x1, x2):\n    return (x1 - 0.3) ** 2 + x2\n")
    path = tmp_path / "s.toml"
    path.write_text(edit(textwrap.dedent(SPACE_STUDY)))
    code, _, err = _run(["check", str(path)], capsys)
    assert code == 2
    expected = "must be written 'function' (the key's new name); got 'objective'"
    assert err == f"workbench: {path}: '{key}' {expected}\n"
    # the new key is read: the same study with 'function' is checked and timed
    path.write_text(textwrap.dedent(SPACE_STUDY))
    code, out, _ = _run(["check", str(path), "--jobs", "1"], capsys)
    assert code == 0 and "function-f:" in out


@pytest.mark.parametrize("command", ["check", "plan", "run"])
def test_jobs_below_one_is_refused_in_one_line(command, tmp_path, capsys):
    path = tmp_path / "s.toml"
    path.write_text(textwrap.dedent(GOOD))
    out = [] if command == "check" else ["--out", str(tmp_path / "o")]
    code, _, err = _run([command, str(path), "--jobs", "0", *out], capsys)
    assert code == 2
    assert err == "workbench: command line: '--jobs' must be an integer in [1, inf); got 0\n"
    assert not (tmp_path / "o").exists()
