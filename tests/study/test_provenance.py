"""Every result names what it was computed with; a resume under other libraries is refused."""

from __future__ import annotations

import json
import shutil
import textwrap
from pathlib import Path

import netCDF4
import numpy
import pytest
import scipy
import sklearn
import threadpoolctl
import xarray

import workbench
from workbench.cli import main
from workbench.study import runner
from workbench.study.provenance import LIBRARIES, provenance
from workbench.study.spec import load

TINY = """
title = "provenance check"
budget = 6
replicates = 2
seed = 9
block = 1
baselines = ["no-belief"]
[[landscape]]
name = "branin"
[belief]
spread = 0.15
[strategy.prior-weighted]
decay = ["hyperbolic:3"]
"""
RECORDED = ("version", *LIBRARIES, "blas", "kernels", "lbfgsb")


# Not the shared grid (tests/conftest.py): the study file lies in a sibling folder (the stored
# path is relative), and the copies below are run again (with --fresh: the whole study).
@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    """A finished folder of the tiny study, the study file in a sibling folder."""
    root = tmp_path_factory.mktemp("provenance")
    study = root / "studies" / "tiny.toml"
    study.parent.mkdir()
    study.write_text(textwrap.dedent(TINY), encoding="utf-8")
    out = root / "results" / "tiny"
    runner.run_study(load(study), out, jobs=1)
    return study, out


@pytest.fixture
def folder(finished, tmp_path):
    study, out = finished
    copy = tmp_path / "results" / "tiny"
    shutil.copytree(out, copy)
    return study, copy


def _attributes(out: Path) -> dict:
    with netCDF4.Dataset(out / "grid.nc") as ds:
        return {k: ds.getncattr(k) for k in ds.ncattrs()}


def _manifest(out: Path) -> dict:
    return json.loads((out / "manifest.json").read_text())


def _files(out: Path) -> dict[str, bytes]:
    return {
        str(p.relative_to(out)): p.read_bytes()
        for p in sorted(out.rglob("*"))
        if p.is_file() and p.name != runner.LOCK
    }


def test_the_grid_and_the_manifest_name_the_libraries_blas_and_kernels(finished):
    _, out = finished
    attrs = _attributes(out)
    recorded = _manifest(out)["provenance"]
    # Reference: each library's own __version__, and threadpoolctl's view of the loaded BLAS.
    expected = {
        "version": workbench.__version__,
        "numpy_version": numpy.__version__,
        "scipy_version": scipy.__version__,
        "scikit_learn_version": sklearn.__version__,
        "xarray_version": xarray.__version__,
        "netcdf4_version": netCDF4.__version__,
    }
    for key, value in expected.items():
        assert attrs[key] == value and recorded[key] == value
    blas = [i for i in threadpoolctl.threadpool_info() if i["user_api"] == "blas"]
    assert blas, "numpy and scipy load a BLAS"
    for info in blas:
        assert f"{info['internal_api']} {info['version']}" in attrs["blas"]
    assert {k: attrs[k] for k in RECORDED} == recorded == provenance()


def test_the_study_path_is_stored_relative_to_the_output_folder(finished):
    study, out = finished
    stored = _attributes(out)["study_path"]
    assert not Path(stored).is_absolute()
    assert stored == str(Path("..", "..", "studies", "tiny.toml"))
    assert (out / stored).resolve() == study.resolve()


@pytest.mark.parametrize(
    "key, recorded",
    [("scipy_version", "0.9.0"), ("blas", "libopenblas openblas 0.2.20 Prescott")],
)
def test_resuming_chunks_of_other_libraries_is_refused_with_exit_2_and_nothing_deleted(
    folder, key, recorded, capsys
):
    study, out = folder
    manifest = _manifest(out)
    manifest["provenance"][key] = recorded
    (out / "manifest.json").write_text(json.dumps(manifest))
    # One chunk lost: the run has work to do beside chunks of the other libraries.
    lost = sorted((out / "chunks").iterdir())[-1]
    lost.unlink()
    before, lock_before = _files(out), (out / runner.LOCK).exists()
    code = main(["run", str(study), "--out", str(out), "--jobs", "1", "--quiet"])
    err = capsys.readouterr().err.strip().splitlines()
    assert code == 2
    assert len(err) == 1 and "'--out'" in err[0] and "--fresh" in err[0], err
    assert f"{key} {recorded}, here {provenance()[key]}" in err[0]
    assert _files(out) == before
    assert (out / runner.LOCK).exists() == lock_before


def test_a_finished_folder_of_other_libraries_is_read_but_never_mixed(folder, capsys):
    # Nothing to compute: nothing is mixed, nothing written, and the record stays as it was.
    study, out = folder
    manifest = _manifest(out)
    manifest["provenance"]["numpy_version"] = "1.9.0"
    (out / "manifest.json").write_text(json.dumps(manifest))
    before = _files(out)
    assert main(["run", str(study), "--out", str(out), "--jobs", "1", "--quiet"]) == 0
    assert _files(out) == before


def test_fresh_starts_over_and_records_the_current_libraries(folder, capsys):
    study, out = folder
    manifest = _manifest(out)
    manifest["provenance"]["numpy_version"] = "1.9.0"
    (out / "manifest.json").write_text(json.dumps(manifest))
    next((out / "chunks").iterdir()).unlink()
    argv = ["run", str(study), "--out", str(out), "--jobs", "1", "--quiet"]
    assert main(argv) == 2
    assert main([*argv, "--fresh"]) == 0
    assert _manifest(out)["provenance"] == provenance()
    assert _attributes(out)["numpy_version"] == numpy.__version__
