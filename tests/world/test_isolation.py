"""The user's function in a child process: misbehaving functions are failed evaluations."""

import math
import textwrap

import numpy as np
import pytest
import xarray as xr
from helpers import BRANIN_SPACE

from workbench.cli import main
from workbench.study.spec import load
from workbench.world.isolation import Evaluator

# Each function misbehaves only at x1 > 9.9 (a 150th of the range [-5, 10]: few restarts), else it
# is the paraboloid (x1 - 2)^2 + (x2 - 4)^2.
MISBEHAVIOURS = {
    "os-exit": "import os; os._exit(1)",
    "segfault": "import ctypes; ctypes.string_at(0)",
    "sys-exit": "import sys; sys.exit(3)",
    "keyboard-interrupt": "raise KeyboardInterrupt",
    "string": "return '1.5'",
    "none": "return None",
    "complex": "return 1j",
}


def _user_function(tmp_path, bad: str, where: str = "x1 > 9.9") -> None:
    (tmp_path / "process.py").write_text(
        "import time\n"
        "def score(x1, x2):\n"
        f"    if {where}:\n"
        f"        {bad}\n"
        "    return (x1 - 2) ** 2 + (x2 - 4) ** 2\n"
    )


def _study(tmp_path, extra: str = "") -> str:
    text = textwrap.dedent(
        f"""
        title = "isolation"
        budget = 6
        replicates = 1
        seed = 3
        baselines = ["random"]
        {BRANIN_SPACE}
        [[landscape]]
        function = "process.py:score"
        {extra}
        [distortion]
        shifted = {{ shift = 0.2 }}
        [strategy.prior-weighted]
        decay = ["hyperbolic:4"]
        """
    )
    path = tmp_path / "study.toml"
    path.write_text(text, encoding="utf-8")
    return str(path)


@pytest.mark.parametrize("kind", sorted(MISBEHAVIOURS))
def test_a_misbehaving_point_is_a_failed_evaluation_and_the_run_finishes(tmp_path, kind):
    _user_function(tmp_path, MISBEHAVIOURS[kind])
    child = Evaluator(str(tmp_path / "process.py"), "score", ("x1", "x2"), 5.0)
    try:
        results = child.evaluate([{"x1": 9.95, "x2": 1.0}, {"x1": 1.0, "x2": 1.0}])
    finally:
        child.close()
    (bad, why), (good, none) = results
    assert bad is None and why and none is None
    assert good == 10.0  # (1 - 2)^2 + (1 - 4)^2, by hand
    # In a run the point misbehaves once (a marker file), so that a crash's restart of the
    # child is paid once: the run must still finish with a grid.
    marker = tmp_path / "misbehaved"
    _user_function(
        tmp_path,
        f"open({str(marker)!r}, 'w').close(); {MISBEHAVIOURS[kind]}",
        where=f"x1 > 9.9 and not __import__('os').path.exists({str(marker)!r})",
    )
    out = tmp_path / "out"
    assert main(["run", _study(tmp_path), "--out", str(out), "--jobs", "1", "--quiet"]) == 0
    assert marker.exists()
    assert np.isfinite(xr.open_dataset(out / "grid.nc")["normalized_regret"].values).all()


def test_a_point_past_the_time_limit_fails_and_the_next_is_evaluated(tmp_path):
    _user_function(tmp_path, "time.sleep(30)")
    child = Evaluator(str(tmp_path / "process.py"), "score", ("x1", "x2"), 1.0)
    try:
        (slow, why), (good, _) = child.evaluate([{"x1": 9.95, "x2": 1.0}, {"x1": 2, "x2": 4}])
    finally:
        child.close()
    assert slow is None and "time limit of 1 s" in why
    assert good == 0.0


def test_a_sleeping_function_is_cut_off_in_a_run_with_a_one_second_limit(tmp_path):
    # Sleeps at one point only (the first call anywhere makes a marker), so the run stays fast.
    marker = tmp_path / "slept"
    _user_function(
        tmp_path,
        f"open({str(marker)!r}, 'w').close(); time.sleep(30)",
        where=f"not __import__('os').path.exists({str(marker)!r})",
    )
    out = tmp_path / "out"
    study = _study(tmp_path, "time_limit = 1")
    assert main(["run", study, "--out", str(out), "--jobs", "1", "--quiet"]) == 0
    assert marker.exists() and (out / "grid.nc").exists()


def test_a_function_failing_everywhere_stops_the_run_with_one_line(tmp_path, capsys):
    _user_function(tmp_path, "raise ValueError('the oven is cold')", where="True")
    out = tmp_path / "out"
    assert main(["run", _study(tmp_path), "--out", str(out), "--jobs", "1", "--quiet"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1
    assert "process.py" in err and "function-score" in err and "the oven is cold" in err
    assert not (out / "grid.nc").exists()


def test_check_names_the_parameters_a_misnamed_function_does_not_take(tmp_path, capsys):
    (tmp_path / "process.py").write_text("def score(x1, temperature):\n    return x1\n")
    assert main(["check", _study(tmp_path)]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    line = captured.err.strip()
    assert len(line.splitlines()) == 1
    assert "process.py" in line and "score(x1, temperature)" in line and "x1, x2" in line


@pytest.mark.parametrize("bad", ["import os; os._exit(1)", "return 'x'", "time.sleep(30)"])
def test_check_reports_a_function_failing_at_the_belief_mode(tmp_path, capsys, bad):
    _user_function(tmp_path, bad, where="True")
    assert main(["check", _study(tmp_path, "time_limit = 1")]) == 2
    line = capsys.readouterr().err.strip()
    assert len(line.splitlines()) == 1 and "process.py" in line and "belief's mode" in line


def test_check_times_a_well_behaved_function(tmp_path, capsys):
    _user_function(tmp_path, "pass", where="False")
    assert main(["check", _study(tmp_path)]) == 0
    assert "ms per call at the belief's mode" in capsys.readouterr().out


def test_isolated_values_equal_direct_evaluation(tmp_path):
    _user_function(tmp_path, "pass", where="False")
    study = load(_study(tmp_path))
    spec = study.landscapes[0].spec
    U = np.random.default_rng(0).random((64, 2))
    x = study.space.to_user_array(U)
    # Direct evaluation of the same paraboloid, here in the test process.
    direct = [(a - 2) ** 2 + (b - 4) ** 2 for a, b in x]
    np.testing.assert_array_equal(spec.function()(U), direct)
    # Its minimum 0 at (2, 4) (by hand), found through the child as well.
    land = spec.landscape("function-score", 2, np.random.default_rng(1))
    assert math.isclose(land.minimum, 0.0, abs_tol=1e-6)


@pytest.mark.parametrize(
    ("crash", "shown"),
    [
        ("raise ValueError('the oven is cold')", "ValueError: the oven is cold"),
        ("import sys; sys.exit(3)", "SystemExit: 3"),
        ("import os; os._exit(1)", "exited with code 1"),
    ],
)
def test_a_file_that_crashes_at_import_ends_the_load_with_one_line(tmp_path, capsys, crash, shown):
    # The file is imported in a child process: a crash there cannot end the command itself.
    (tmp_path / "process.py").write_text(f"{crash}\ndef score(x1, x2):\n    return x1\n")
    out = tmp_path / "out"
    assert main(["run", _study(tmp_path), "--out", str(out), "--jobs", "1", "--quiet"]) == 2
    captured = capsys.readouterr()
    line = captured.err.strip()
    assert captured.out == "" and len(line.splitlines()) == 1
    assert "process.py" in line and shown in line and "a file that imports" in line
    assert not out.exists()


def test_a_file_without_the_named_function_is_one_line(tmp_path, capsys):
    (tmp_path / "process.py").write_text("def other(x1, x2):\n    return x1\n")
    assert main(["check", _study(tmp_path)]) == 2
    line = capsys.readouterr().err.strip()
    assert len(line.splitlines()) == 1 and "no function 'score'" in line


def test_the_run_summary_counts_failed_evaluations_and_names_the_first(tmp_path, capsys):
    # Half the space (x2 > 7.5 of [0, 15]) raises: the campaigns' designs land there too.
    _user_function(tmp_path, "raise ValueError('the oven is too hot')", where="x2 > 7.5")
    out = tmp_path / "out"
    study = _study(tmp_path)
    assert main(["run", study, "--out", str(out), "--jobs", "1", "--quiet"]) == 0
    first = capsys.readouterr().err.strip().splitlines()
    ds = xr.open_dataset(out / "grid.nc")
    label = str(ds["landscape"].values[0])
    # Each campaign once: the baseline repeats across distortions (counted in the first).
    guided = ds["failed"].values
    baseline = ds["baseline_failed"].isel(distortion=0).values
    failed = int((guided == 1).sum() + (baseline == 1).sum())
    total = int((guided >= 0).sum() + (baseline >= 0).sum())
    ds.close()
    assert failed > 0
    line = (
        f"warning: {label}: {failed:,} of {total:,} evaluations failed "
        "(first: raised ValueError: the oven is too hot)"
    )
    assert first == [line]
    # A rerun with nothing left to do says the same, from the folder's record.
    assert main(["run", study, "--out", str(out), "--jobs", "1", "--quiet"]) == 0
    assert capsys.readouterr().err.strip().splitlines() == [line]
