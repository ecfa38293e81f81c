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


def test_a_decoy_misplacement_without_a_decoy_stops_the_run_with_one_line(
    tmp_path, capsys, recwarn
):
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
    # The stopped run cancels its other task quietly: no warning reaches the user.
    assert [str(w.message) for w in recwarn] == []
