"""The grid runner: identical results whatever the workers, resume after a hard kill, storage."""

import os
import shutil
import signal
import subprocess
import sys
import textwrap
import time

import numpy as np
import pytest
import xarray as xr

from workbench.study import grid
from workbench.study.runner import run_study
from workbench.study.spec import load

STUDY = """
title = "runner check"
budget = 8
replicates = 3
seed = 7
block = 1
baselines = ["no-belief", "belief-sampling"]
[[landscape]]
name = "branin"
[belief]
spread = 0.15
[distortion]
shifted = { shift = 0.3 }
[strategy.pseudo-posterior]
decay = ["hyperbolic:3", "constant:1"]
quantile = [0.2, 0.5]
[strategy.prior-weighted]
decay = ["hyperbolic:3"]
"""


# Not the shared grid (tests/conftest.py): these tests run their study again and again (two
# workers, another block size, a dask cluster, a killed run), so it is the smallest that still
# has many chunks (block = 1), a constant decay and a baseline that reads the belief.


@pytest.fixture
def study_file(tmp_path):
    path = tmp_path / "check.toml"
    path.write_text(textwrap.dedent(STUDY), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """The study's folder run once in process with one worker, and its grid: the reference
    of every comparison below (read-only; copy the folder to change it). As in each test,
    the study file lies beside the folder (the grid stores its path relative to the folder)."""
    root = tmp_path_factory.mktemp("runner")
    (root / "check.toml").write_text(textwrap.dedent(STUDY), encoding="utf-8")
    summary = run_study(load(root / "check.toml"), root / "out", jobs=1)
    return root / "out", _grid(summary.grid)


def _grid(path):
    with xr.open_dataset(path) as ds:
        return ds.load()


def test_grid_has_the_named_dimensions_and_attributes(reference):
    ds = reference[1]
    for dim in (
        "landscape",
        "distortion",
        "decay",
        "quantile",
        "replicate",
        "evaluation",
        "exploration",
        "initial",
        "strategy",
        "baseline",
    ):
        assert dim in ds.dims
    assert list(ds.decay.values) == ["hyperbolic:3", "constant:1"]
    assert ds.attrs["root_seed"] == 7 and "runner check" in ds.attrs["study"]
    nr = ds.normalized_regret.sel(strategy="pseudo-posterior", decay="hyperbolic:3", quantile=0.2)
    assert np.isfinite(nr).all()
    # Prior-weighted ignores the quantile: repeated across levels; it has no constant:1 level.
    pw = ds.normalized_regret.sel(strategy="prior-weighted")
    np.testing.assert_array_equal(pw.sel(quantile=0.2), pw.sel(quantile=0.5))
    assert np.isnan(pw.sel(decay="constant:1")).all()
    # no-belief ignores the belief: the same campaign stands for every distortion.
    nb = ds.baseline_best.sel(baseline="no-belief")
    np.testing.assert_array_equal(nb.sel(distortion="exact"), nb.sel(distortion="shifted"))


def test_one_and_two_workers_give_identical_grids(study_file, reference, tmp_path):
    one = reference[1]
    two = _grid(run_study(load(study_file), tmp_path / "two", jobs=2).grid)
    xr.testing.assert_identical(one, two)


def test_the_block_size_changes_the_chunks_but_not_the_grid(study_file, reference, tmp_path):
    import dataclasses

    study = load(study_file)
    blocked = dataclasses.replace(study, block=2)
    assert [c.replicates for c in grid.chunks(blocked)][:2] == [(0, 1), (2,)]
    two = _grid(run_study(blocked, tmp_path / "two", jobs=1).grid)
    xr.testing.assert_identical(reference[1], two)


def test_a_dask_cluster_gives_the_same_grid(study_file, reference, tmp_path):
    distributed = pytest.importorskip("dask.distributed")
    with distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None
    ) as cluster:
        dask = _grid(
            run_study(load(study_file), tmp_path / "dask", scheduler=cluster.scheduler_address).grid
        )
    xr.testing.assert_identical(reference[1], dask)


def test_a_killed_run_resumes_and_ends_with_the_same_grid(study_file, reference, tmp_path):
    out = tmp_path / "killed"
    cmd = [
        sys.executable,
        "-m",
        "workbench.cli",
        "run",
        str(study_file),
        "--out",
        str(out),
        "--jobs",
        "1",
        "--quiet",
    ]
    proc = subprocess.Popen(cmd, start_new_session=True)
    deadline = time.time() + 120
    while time.time() < deadline and len(list((out / "chunks").glob("*.npz"))) < 2:
        time.sleep(0.05)
    os.killpg(proc.pid, signal.SIGKILL)
    proc.wait()
    done = len(list((out / "chunks").glob("*.npz")))
    assert 2 <= done < len(grid.chunks(load(study_file))), "the kill should land midway"
    assert not (out / "grid.nc").exists()
    summary = run_study(load(study_file), out, jobs=2)
    assert summary.resumed > 0
    xr.testing.assert_identical(_grid(summary.grid), reference[1])


def test_a_changed_study_is_refused_unless_fresh(study_file, reference, tmp_path):
    from workbench.validation import InputError

    shutil.copytree(reference[0], tmp_path / "out")  # the finished folder of seed 7
    study_file.write_text(textwrap.dedent(STUDY).replace("seed = 7", "seed = 8"), encoding="utf-8")
    with pytest.raises(InputError, match="--fresh"):
        run_study(load(study_file), tmp_path / "out", jobs=1)
    ds = _grid(run_study(load(study_file), tmp_path / "out", jobs=1, fresh=True).grid)
    assert ds.attrs["root_seed"] == 8


def test_a_campaign_that_raises_keeps_the_finished_chunks_and_names_the_cell(
    study_file, tmp_path, monkeypatch
):
    import dataclasses

    study = load(study_file)
    original = grid.campaign_of

    class Broken:
        """A belief whose density raises: an error inside the engine, not a failed evaluation."""

        def __init__(self, belief):
            self.belief = belief

        def __getattr__(self, name):
            return getattr(self.belief, name)

        def logpdf(self, U):
            raise RuntimeError("belief server down")

    def failing(cell, setting):
        c = original(cell, setting)
        if cell.distortion == 1 and cell.replicate == 1 and setting.strategy == "prior-weighted":
            return dataclasses.replace(c, belief=Broken(c.belief))
        return c

    monkeypatch.setattr(grid, "campaign_of", failing)
    with pytest.raises(grid.CampaignError) as err:
        run_study(study, tmp_path / "out", jobs=1)
    message = str(err.value)
    assert "distortion shifted" in message and "replicate 1" in message
    assert "prior-weighted" in message
    kept = list((tmp_path / "out" / "chunks").glob("*.npz"))
    assert len(kept) >= 3  # the chunks before the failing one are on disk
    assert not (tmp_path / "out" / "grid.nc").exists()


def test_an_unreachable_scheduler_is_one_error_and_writes_nothing(
    study_file, tmp_path, monkeypatch
):
    pytest.importorskip("dask.distributed")
    from workbench.study import runner
    from workbench.validation import InputError

    monkeypatch.setattr(runner, "SCHEDULER_TIMEOUT", "1s")  # nothing listens on port 1

    out = tmp_path / "never"
    with pytest.raises(InputError, match="--scheduler"):
        run_study(load(study_file), out, scheduler="tcp://127.0.0.1:1")
    assert not out.exists()


SURFACE_STUDY = """
title = "surface tasks"
budget = 6
replicates = 2
seed = 3
baselines = ["no-belief"]
[space.x1]
lower = 0
upper = 1
[space.x2]
lower = 0
upper = 1
[belief.x1]
centre = 0.4
spread = 0.2
[belief.x2]
centre = 0.6
spread = 0.2
[[landscape]]
name = "branin"
[[landscape]]
drawn = { smoothness = 2.5, length_scale = 0.3 }
label = "drawn"
[distortion]
shifted = { shift = 0.2 }
[strategy.prior-weighted]
decay = ["hyperbolic:3"]
"""


def test_a_drawn_surface_is_one_task_per_block_and_a_failure_keeps_its_finished_chunks(
    tmp_path, monkeypatch
):
    from workbench.study import runner

    path = tmp_path / "surface.toml"
    path.write_text(textwrap.dedent(SURFACE_STUDY), encoding="utf-8")
    study = load(path)
    tasks = runner._groups(study, grid.chunks(study))
    # Textbook chunks one by one; the drawn landscape's two distortions of its one block
    # together, and that task, the largest, first.
    assert [[(c.landscape, c.distortion) for c in g] for g in tasks] == [
        [(1, 0), (1, 1)],
        [(0, 0)],
        [(0, 1)],
    ]
    original = grid.campaign_of

    def failing(cell, setting):
        if cell.landscape == 1 and cell.distortion == 1:
            raise RuntimeError("surface lost")
        return original(cell, setting)

    monkeypatch.setattr(grid, "campaign_of", failing)
    with pytest.raises(RuntimeError, match="surface lost"):
        run_study(study, tmp_path / "out", jobs=1)
    kept = sorted(p.name for p in (tmp_path / "out" / "chunks").glob("*.npz"))
    # The drawn landscape's exact chunk finished before its task failed: it is on disk (the
    # textbook tasks, queued after it, never started).
    assert kept == ["L001-D000-R0000-0001.npz"]
    assert not (tmp_path / "out" / "grid.nc").exists()


def test_the_largest_chunks_go_out_first_so_no_worker_finishes_alone():
    import dataclasses
    from pathlib import Path

    from workbench.study import runner
    from workbench.study.cost import chunk_cost

    reference = Path(__file__).resolve().parents[2] / "studies" / "reference.toml"
    study = dataclasses.replace(load(reference), replicates=12)  # blocks of 8 and of 4
    tasks = runner._groups(study, grid.chunks(study))
    costs = [sum(chunk_cost(study, c) for c in g) for g in tasks]
    assert costs == sorted(costs, reverse=True)
    assert sorted(c.key for g in tasks for c in g) == sorted(c.key for c in grid.chunks(study))
    # Hartmann 6-D's full blocks first (the highest dimension), the 4-replicate blocks of the
    # 2-D Branin last; the exact distortion's chunk, which also runs the belief-free
    # baselines, leads its landscape and block.
    first, last = tasks[0][0], tasks[-1][0]
    assert study.landscapes[first.landscape].name == "hartmann6" and len(first.replicates) == 8
    assert first.distortion == 0
    assert study.landscapes[last.landscape].name == "branin" and len(last.replicates) == 4
