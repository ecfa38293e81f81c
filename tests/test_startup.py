"""The command line starts without loading the heavy libraries: they load where they are used.

`workbench --help`, `workbench landscapes` and every argument error import only numpy and
workbench's light modules; scipy.stats alone takes about a second to import.
"""

import json
import subprocess
import sys
from pathlib import Path

import pytest
import scipy.stats

import workbench
from workbench.cli import main
from workbench.lazy import LazyModule
from workbench.world import beliefs

ROOT = Path(workbench.__file__).resolve().parents[1]

# Each would cost from 0.1 s (joblib) to over a second (scipy.stats) before a command's first line.
HEAVY = ("scipy.stats", "matplotlib", "xarray", "sklearn", "netCDF4", "joblib")
ENGINE = ("workbench.engine.batch", "workbench.study.runner")


def _loaded_after(code: str) -> tuple[list[str], dict]:
    """The modules a fresh interpreter holds after running ``code`` (which leaves a JSON
    object on the last line of stdout) and that object."""
    script = f"import json, sys\n{code}\nprint(json.dumps([sorted(sys.modules), result]))"
    done = subprocess.run(
        [sys.executable, "-c", script], capture_output=True, text=True, cwd=ROOT, check=True
    )
    modules, result = json.loads(done.stdout.strip().splitlines()[-1])
    return modules, result


def _heavy(modules: list[str]) -> list[str]:
    return [
        m for m in modules if m in ENGINE or any(m == h or m.startswith(h + ".") for h in HEAVY)
    ]


def test_importing_the_command_line_loads_no_heavy_library_and_no_engine():
    modules, _ = _loaded_after("import workbench.cli\nresult = None")
    assert "workbench.cli" in modules
    assert _heavy(modules) == []


@pytest.mark.parametrize(
    ("argv", "code"),
    [
        (["landscapes"], 0),
        (["run"], 2),  # argparse: the study is missing
        (["simulate", "--landscape", "branin"], 2),  # argparse: --strategy is missing
        (["check", "missing.toml"], 2),  # the study file does not exist
        (["run", "missing.toml"], 2),
        (["belief", "missing.toml"], 2),
        (["simulate", "--landscape", "nowhere", "--strategy", "random"], 2),  # unknown landscape
        (["simulate", "--landscape", "branin", "--strategy", "random", "--budget", "0"], 2),
    ],
)
def test_listing_landscapes_and_argument_errors_load_no_heavy_library(argv, code):
    modules, result = _loaded_after(
        "from workbench.cli import main\n"
        "try:\n"
        f"    result = main({argv!r})\n"
        "except SystemExit as stop:\n"
        "    result = stop.code\n"
    )
    assert result == code
    assert _heavy(modules) == []


# The command that picks a setting of a grid (renamed from recommend to decide, issue 25).
DECIDE = "decide"
DEMO = "studies/demo.toml"


@pytest.mark.parametrize(
    ("argv", "says"),
    [
        (["plan", "missing.toml"], "got no file at missing.toml"),
        (["plan", DEMO, "--power", "2"], "'--power' must be"),
        (["transfer", "missing.toml"], "got no file at missing.toml"),
        (["audit", "missing.toml", "--data", "x.csv"], "got no file at missing.toml"),
        (["audit", DEMO, "--data", "missing.csv"], "missing.csv"),
        (["monitor", DEMO, "--observations", "x.csv", "--grid", "nowhere"], "nowhere"),
        (["report", "nowhere"], "got no file at nowhere/grid.nc"),
        ([DECIDE, "nowhere"], "got no file at nowhere/grid.nc"),
    ],
)
def test_every_commands_missing_file_exits_2_before_the_heavy_libraries_load(argv, says):
    # The analysis, plan and evidence commands import xarray, SciPy, matplotlib or scikit-learn
    # only once their files and options have passed their checks.
    modules, result = _loaded_after(
        "import contextlib, io\n"
        "from workbench.cli import main\n"
        "err = io.StringIO()\n"
        "with contextlib.redirect_stderr(err):\n"
        f"    code = main({argv!r})\n"
        "result = [code, err.getvalue()]\n"
    )
    code, stderr = result
    assert code == 2
    assert says in stderr
    assert len(stderr.strip().splitlines()) == 1
    assert _heavy(modules) == []


def test_the_analysis_package_gives_its_functions_whichever_module_loaded_first():
    # `transfer` and `effects` are both a module and the function it defines; the package's
    # names are imported lazily, and must still be the functions (as the README's `an.` uses).
    _, result = _loaded_after(
        "import workbench.analysis.transfer, workbench.analysis.effects\n"
        "from workbench import analysis as an\n"
        "result = [callable(an.transfer), an.transfer.__name__, an.effects.__name__,\n"
        "          sorted(set(an.__all__) - set(dir(an)))]\n"
    )
    assert result == [True, "transfer", "effects", []]


def test_a_lazy_module_imports_at_its_first_attribute_read_and_gives_the_modules_objects():
    _, result = _loaded_after(
        "from workbench.lazy import LazyModule\n"
        "stats = LazyModule('scipy.stats')\n"
        "unwrapped = hasattr(stats, '__wrapped__')\n"
        "before = 'scipy.stats' in sys.modules\n"
        "import scipy.stats as real\n"
        "result = [unwrapped, before, stats.norm is real.norm, stats.norm is stats.norm]\n"
    )
    # Introspection (copy, pickle, inspect.unwrap) asks for dunder names: they do not import.
    assert result == [False, False, True, True]


def test_a_lazy_module_refuses_what_the_module_lacks_and_forwards_what_it_has():
    stats = LazyModule("scipy.stats")
    with pytest.raises(AttributeError):
        stats.no_such_distribution  # noqa: B018
    with pytest.raises(AttributeError):
        stats.__wrapped__  # noqa: B018
    # scipy.stats.rankdata: ranks 1..n (ties would average), as the SciPy documentation gives.
    assert stats.rankdata([3.0, 1.0, 2.0]).tolist() == [3.0, 1.0, 2.0]


def test_the_written_out_normal_quantile_is_scipys_to_the_last_bit():
    # beliefs writes z_0.95 out so that its import does not load scipy.stats; the reference is
    # scipy.stats.norm.ppf (z_0.95 = 1.6448536269514722, the textbook 1.645).
    assert beliefs._Z90 == float(scipy.stats.norm.ppf(0.95))


def test_a_failed_campaign_still_ends_with_exit_code_1_and_the_resume_note(monkeypatch, capsys):
    from workbench.study import grid

    def failing(args):
        raise grid.CampaignError("campaign failed at branin, exact, replicate 0")

    monkeypatch.setattr("workbench.cli.cmd_landscapes", failing)
    assert main(["landscapes"]) == 1
    err = capsys.readouterr().err
    assert err.strip() == (
        "workbench: campaign failed at branin, exact, replicate 0; "
        "finished chunks are kept, a rerun resumes"
    )
