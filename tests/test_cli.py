"""The commands' output on good input."""

import argparse
import json
from importlib import metadata

import pytest

from workbench.cli import main
from workbench.cli_args import build_parser
from workbench.world import landscapes as ls


def test_simulate_prints_json_with_one_row_per_replicate(capsys):
    argv = [
        "simulate",
        "--landscape",
        "branin",
        "--strategy",
        "pseudo-posterior",
        "--budget",
        "12",
        "--replicates",
        "3",
        "--seed",
        "4",
        "--jobs",
        "1",
        "--decay",
        "hyperbolic:5",
        "--quantile",
        "0.3",
        "--initial",
        "sobol:4",
        "--json",
    ]
    assert main(argv) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["settings"]["decay"] == "hyperbolic:5" and out["settings"]["initial_size"] == 4
    rows = out["replicates"]
    assert [r["replicate"] for r in rows] == [0, 1, 2]
    for r in rows:
        assert {"final_regret", "final_normalized_regret", "evaluations_to_target"} <= set(r)
        assert r["final_regret"] >= 0
        ett = r["evaluations_to_target"]
        assert ett is None or 1 <= ett <= 12
        assert (ett is not None) == (r["final_normalized_regret"] <= out["settings"]["target"])


def test_simulate_is_reproducible_and_baselines_run_without_a_model(capsys):
    argv = [
        "simulate",
        "--landscape",
        "hartmann3",
        "--strategy",
        "random",
        "--budget",
        "10",
        "--replicates",
        "2",
        "--jobs",
        "1",
        "--random-multiple",
        "3",
        "--json",
    ]
    assert main(argv) == 0
    first = json.loads(capsys.readouterr().out)["replicates"]
    assert main(argv) == 0
    assert json.loads(capsys.readouterr().out)["replicates"] == first


def test_check_prints_counts_and_an_estimate(capsys):
    assert main(["check", "studies/demo.toml", "--jobs", "2"]) == 0
    out = capsys.readouterr().out
    # 4 landscapes × 4 distortions × 32 replicates × (12 guided + belief-sampling)
    # + 4 landscapes × 32 replicates × (no-belief + random) = 6912 campaigns of 20 evaluations.
    assert "campaigns: 6912 (216 cells x 32 replicates)" in out
    assert "evaluations in total: 138240" in out
    assert "estimated wall time: about" in out and "on 2 process(es)" in out


def test_the_landscape_table_names_the_landscapes(capsys):
    assert main(["landscapes"]) == 0
    out = capsys.readouterr().out
    for name in ("branin", "hartmann6", "shekel10", "forrester", "michalewicz"):
        assert name in out


def test_an_unexpected_failure_is_one_line_without_a_traceback(monkeypatch, capsys):
    import workbench.cli as cli

    def broken(args):
        raise RuntimeError("disk on fire")

    monkeypatch.setattr(cli, "cmd_landscapes", broken)
    assert cli.main(["landscapes"]) == 1
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "disk on fire" in err and "Traceback" not in err


def test_version_prints_the_installed_packages_version(capsys):
    with pytest.raises(SystemExit) as stop:
        main(["--version"])
    assert stop.value.code == 0
    assert capsys.readouterr().out.strip() == f"workbench {metadata.version('workbench')}"


def _options():
    """(command, option action) for every option of every command but --help."""
    parser = build_parser()
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    for name, command in sub.choices.items():
        for action in command._actions:
            if action.option_strings and not isinstance(action, argparse._HelpAction):
                yield name, command, action


def test_every_option_of_every_command_says_its_default_or_that_it_is_required(capsys):
    seen = set()
    for name, command, action in _options():
        seen.add(name)
        text = command.formatter_class(prog=command.prog)._expand_help(action)
        flag = isinstance(action, argparse._StoreTrueAction)
        assert flag or action.required or "default" in text, (name, action.option_strings)
    # each command's --help shows the defaults (the simulate one of the issue, for one)
    with pytest.raises(SystemExit):
        main(["simulate", "--help"])
    out = capsys.readouterr().out
    assert "(default: 30)" in out and "{random,native}" in out and "pseudo-posterior" in out
    assert {"simulate", "decide", "report", "run", "plan", "audit", "monitor"} <= seen


def test_debug_is_accepted_before_and_after_the_command():
    parser = build_parser()
    assert parser.parse_args(["run", "x.toml", "--debug"]).debug is True
    assert parser.parse_args(["--debug", "run", "x.toml"]).debug is True
    assert parser.parse_args(["run", "x.toml"]).debug is False


def test_the_landscape_table_marks_the_landscapes_that_accept_dim(capsys):
    assert main(["landscapes"]) == 0
    lines = capsys.readouterr().out.splitlines()
    shown = [line.split() for line in lines[1:-1] if not line.startswith(" ")]  # no minimisers
    marked = {cells[0] for cells in shown if cells[2] == "*"}
    assert lines[-1].startswith("* accepts dim")
    assert main(["landscapes", "--json"]) == 0
    rows = {r["name"]: r for r in json.loads(capsys.readouterr().out)}
    assert marked == {name for name, r in rows.items() if r["accepts_dim"]}
    assert {"ackley", "rastrigin", "rosenbrock"} <= marked and "branin" not in marked
    for name in rows:
        # the mark says what get() does: a marked landscape builds in 3-D, the others refuse
        if name in marked:
            assert ls.get(name, 3).dim == 3
        elif rows[name]["dimension"] != 3:
            with pytest.raises(ValueError):
                ls.get(name, 3)


def test_check_names_the_parameters_without_a_belief_as_uniform(tmp_path, capsys):
    study = tmp_path / "four.toml"
    study.write_text(
        'title = "four"\nbudget = 8\nreplicates = 2\n'
        '[space.lr]\nlower = 1e-5\nupper = 1e-1\nscale = "log"\n'
        '[space.batch]\nlower = 16\nupper = 512\ntype = "integer"\nscale = "log"\n'
        '[space.optimizer]\nchoices = ["adam", "sgd"]\n'
        "[space.dropout]\nlower = 0.0\nupper = 0.5\n"
        "[belief.lr]\ncentre = 1e-3\nfactor = 10\n"
        '[[landscape]]\nname = "shekel5"\n'
        '[strategy.prior-weighted]\ndecay = ["hyperbolic:4"]\n'
    )
    assert main(["check", str(study), "--jobs", "1"]) == 0
    out = capsys.readouterr().out
    assert "without a belief (uniform over the range): batch, optimizer, dropout" in out
