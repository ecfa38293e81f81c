"""The commands' output on good input."""

import json

from workbench.cli import main


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
