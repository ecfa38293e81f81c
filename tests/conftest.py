import sys

# workbench first: before NumPy loads, it picks the floating-point kernels that the command
# line (run in subprocesses by some tests) also gets, so in-process and subprocess grids agree.
assert "numpy" not in sys.modules, "a pytest plugin imported NumPy before workbench"
import workbench  # noqa: E402, F401, I001

import numpy as np  # noqa: E402
import pytest  # noqa: E402


@pytest.fixture
def rng():
    return np.random.default_rng(12345)


# --------------------------------------------------------------------------- the demo grid
# The README's quoted recommendation is checked against the full demo grid (about a minute on
# 2 cores). It is run in the background from the start of the session, in one process (the
# grid's values do not depend on --jobs: tests/study/test_runner.py), while the rest of the
# suite uses the other core; the `demo_grid_folder` fixture waits for it.

_DEMO: dict = {}


def pytest_collection_modifyitems(session, config, items):
    if not any("demo_grid" in getattr(item, "fixturenames", ()) for item in items):
        return
    import subprocess
    import tempfile
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    folder = Path(tempfile.mkdtemp(prefix="workbench-demo-"))
    argv = [sys.executable, "-m", "workbench.cli", "run", str(root / "studies" / "demo.toml")]
    argv += ["--out", str(folder / "demo"), "--jobs", "1", "--quiet"]
    log = open(folder / "log.txt", "wb")
    _DEMO.update(
        folder=folder,
        log=log,
        process=subprocess.Popen(argv, cwd=root, stdout=log, stderr=subprocess.STDOUT),
    )


def pytest_sessionfinish(session, exitstatus):
    if not _DEMO:
        return
    import shutil

    process = _DEMO["process"]
    if process.poll() is None:
        process.kill()
        process.wait()
    _DEMO["log"].close()
    shutil.rmtree(_DEMO["folder"], ignore_errors=True)


@pytest.fixture(scope="session")
def demo_grid_folder():
    """The folder of the demo study's grid, run in the background since collection."""
    if not _DEMO:
        pytest.skip("the demo grid was not started (no test asked for it at collection)")
    process = _DEMO["process"]
    code = process.wait()
    log = (_DEMO["folder"] / "log.txt").read_text(errors="replace")
    assert code == 0, f"the demo run failed ({code}):\n{log}"
    return _DEMO["folder"] / "demo"


# --------------------------------------------------------------------------- the shared grid
# One tiny study (tests/helpers.py: SHARED_STUDY), run once per session through the command
# line with its report: the grid of every test that needs a real run but not a study of its
# own (the report's pages and decision box, the grid's stored study and belief). Two
# landscapes and three distortions (the weights have something to move), both belief-guided
# strategies, the no-belief baseline, 4 replicates of 8 evaluations. The folder is read-only
# to the tests: a test that writes into it (a report for another rule, an altered attribute)
# copies it first (shutil.copytree into its tmp_path). A grid that stays separate says why
# beside its fixture.


@pytest.fixture(scope="session")
def shared_grid(tmp_path_factory):
    """The shared results folder of ``helpers.SHARED_STUDY`` (grid.nc; report.html, figures
    and summary.md of ``helpers.SHARED_DRAWS`` resamples); its study file is
    ``shared_grid.parent / "study.toml"``."""
    from helpers import SHARED_DRAWS, SHARED_STUDY

    from workbench import cli

    root = tmp_path_factory.mktemp("shared")
    study = root / "study.toml"
    study.write_text(SHARED_STUDY, encoding="utf-8")
    out = root / "out"
    assert cli.main(["run", str(study), "--out", str(out), "--quiet", "--jobs", "1"]) == 0
    assert cli.main(["report", str(out), "--draws", str(SHARED_DRAWS)]) == 0
    return out
