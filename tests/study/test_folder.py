"""The results folder: verified chunks, an owned and locked folder, workers that die with their
run, and folder or disk errors as one line with exit code 2.

Each case damages a copy of one finished folder of a tiny study, reruns, and checks the exit
code, the message and what is on disk afterwards. A recomputed folder must give a grid
identical to the clean run's (``xarray.testing.assert_identical``).
"""

from __future__ import annotations

import contextlib
import hashlib
import json
import os
import shutil
import signal
import subprocess
import sys
import tempfile
import textwrap
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.analysis import open_grid
from workbench.cli import main
from workbench.study import runner
from workbench.study.grid import chunks
from workbench.study.spec import load
from workbench.validation import InputError

TINY = """
title = "folder check"
budget = 8
replicates = 2
seed = 5
block = 1
baselines = ["no-belief"]
[[landscape]]
name = "branin"
[belief]
spread = 0.15
[distortion]
shifted = { shift = 0.25 }
[strategy.prior-weighted]
decay = ["hyperbolic:3"]
"""
# Long enough that a run is still busy seconds after its workers start.
SLOW = TINY.replace("budget = 8", "budget = 40").replace("replicates = 2", "replicates = 8")
# Chunk files of the same shape (two settings each: the exact distortion's two replicates).
FIRST, SECOND = "L000-D000-R0000-0000.npz", "L000-D000-R0001-0001.npz"
ROOT = Path(__file__).resolve().parents[2]


@pytest.fixture(scope="session")
def studies(tmp_path_factory):
    folder = tmp_path_factory.mktemp("studies")
    paths = {}
    for name, text in (
        ("tiny", TINY),
        ("changed", TINY.replace("shift = 0.25", "shift = 0.45")),
        ("slow", SLOW),
    ):
        paths[name] = folder / f"{name}.toml"
        paths[name].write_text(textwrap.dedent(text), encoding="utf-8")
    return paths


# Not the shared grid (tests/conftest.py): these tests run, kill, change and resume their study
# (block = 1, a slow and a changed variant) and name its chunk files.
@pytest.fixture(scope="session")
def clean(studies, tmp_path_factory):
    """A finished folder of the tiny study and its grid."""
    out = tmp_path_factory.mktemp("clean") / "out"
    summary = runner.run_study(load(studies["tiny"]), out, jobs=1)
    assert summary.resumed == 0 and summary.recomputed == 0
    return out, _grid(out)


@pytest.fixture
def folder(clean, tmp_path):
    out = tmp_path / "out"
    shutil.copytree(clean[0], out)
    return out


def _grid(out: Path) -> xr.Dataset:
    with xr.open_dataset(out / "grid.nc") as ds:
        return ds.load()


def _files(out: Path) -> dict[str, bytes]:
    """Every file under ``out`` but the lock file (whose content is the holder's pid)."""
    return {
        str(p.relative_to(out)): p.read_bytes()
        for p in sorted(out.rglob("*"))
        if p.is_file() and p.name != runner.LOCK
    }


def _manifest(out: Path) -> dict:
    return json.loads((out / "manifest.json").read_text())


def _cli(argv: list[str], capsys) -> tuple[int, str]:
    code = main(argv)
    return code, capsys.readouterr().err


# --------------------------------------------------------------------------- damaged chunks


def _swap(out: Path) -> None:
    shutil.copyfile(out / "chunks" / FIRST, out / "chunks" / SECOND)


def _truncate(out: Path) -> None:
    path = out / "chunks" / SECOND
    path.write_bytes(path.read_bytes()[:1000])


def _zero(out: Path) -> None:
    path = out / "chunks" / SECOND
    path.write_bytes(bytes(path.stat().st_size))


def _empty(out: Path) -> None:
    (out / "chunks" / SECOND).write_bytes(b"")


def _unlist(out: Path) -> None:
    manifest = _manifest(out)
    del manifest["chunks"][SECOND[:-4]]
    (out / "manifest.json").write_text(json.dumps(manifest))


def _swap_and_relist(out: Path) -> None:
    """A foreign chunk with a matching checksum: only its record tells."""
    _swap(out)
    manifest = _manifest(out)
    manifest["chunks"][SECOND[:-4]]["sha256"] = manifest["chunks"][FIRST[:-4]]["sha256"]
    (out / "manifest.json").write_text(json.dumps(manifest))


@pytest.mark.parametrize(
    "damage, why",
    [
        (_swap, "changed"),
        (_truncate, "changed"),
        (_zero, "changed"),
        (_empty, "changed"),
        (_unlist, "unlisted"),
        (_swap_and_relist, "foreign"),
    ],
    ids=["swapped", "truncated", "zero-filled", "empty", "unlisted", "foreign-record"],
)
def test_a_damaged_or_foreign_chunk_is_computed_again_and_the_grid_matches_a_clean_run(
    damage, why, folder, clean, studies, caplog
):
    damage(folder)
    summary = runner.run_study(load(studies["tiny"]), folder, jobs=1)
    assert summary.recomputed == 1
    assert summary.resumed == summary.campaigns - 2  # the damaged chunk holds 2 campaigns
    assert f"1 chunk file in {folder / 'chunks'} failed the check ({why} 1)" in caplog.text
    xr.testing.assert_identical(_grid(folder), clean[1])
    # The rerun of a finished folder has nothing to do, and touches nothing.
    before = _files(folder)
    again = runner.run_study(load(studies["tiny"]), folder, jobs=1)
    assert again.recomputed == 0 and again.resumed == again.campaigns
    assert _files(folder) == before


def test_the_manifest_lists_each_chunk_by_the_sha256_of_its_bytes(clean):
    # Reference: hashlib's SHA-256 (FIPS 180-4), over the file's bytes as stored.
    out = clean[0]
    listed = _manifest(out)["chunks"]
    assert sorted(listed) == sorted(p.stem for p in (out / "chunks").glob("*.npz"))
    for key, entry in listed.items():
        data = (out / "chunks" / f"{key}.npz").read_bytes()
        assert entry["sha256"] == hashlib.sha256(data).hexdigest()
    assert (
        _manifest(out)["grid"]["sha256"]
        == hashlib.sha256((out / "grid.nc").read_bytes()).hexdigest()
    )


@settings(max_examples=25, deadline=None)
@given(data=st.data())
def test_any_changed_byte_of_a_chunk_file_fails_its_check(clean, studies, data):
    study = load(studies["tiny"])
    chunk = next(c for c in chunks(study) if f"{c.key}.npz" == SECOND)
    listed = _manifest(clean[0])["chunks"][chunk.key]
    original = (clean[0] / "chunks" / SECOND).read_bytes()
    at = data.draw(st.integers(0, len(original) - 1))
    flip = data.draw(st.integers(1, 255))
    changed = bytearray(original)
    changed[at] ^= flip
    with tempfile.TemporaryDirectory() as tmp:
        (Path(tmp) / "chunks").mkdir()
        (Path(tmp) / "chunks" / SECOND).write_bytes(bytes(changed))
        assert runner._check_chunk(study, Path(tmp), chunk, listed) == "changed"
        (Path(tmp) / "chunks" / SECOND).write_bytes(original)
        assert runner._check_chunk(study, Path(tmp), chunk, listed) is None


# --------------------------------------------------------------------------- refusals


@dataclass(frozen=True)
class Refusal:
    """A folder the run must refuse: how to make it, the study and options, and words of the
    one-line message."""

    make: Callable[[Path], None]
    study: str
    fresh: bool
    words: tuple[str, ...]


def _no_manifest(out: Path) -> None:
    (out / "manifest.json").unlink()


def _corrupt_manifest(out: Path) -> None:
    (out / "manifest.json").write_bytes(b'{"format": "workbench res')


def _foreign_manifest(out: Path) -> None:
    (out / "manifest.json").write_text('{"name": "a web app", "icons": []}')


def _someone_elses(out: Path) -> None:
    shutil.rmtree(out)
    (out / "chunks").mkdir(parents=True)
    (out / "chunks" / "thesis.txt").write_text("chapter one")
    (out / "grid.nc").write_bytes(b"CDF\x01 a grid of another program")


REFUSALS = {
    "manifest deleted": Refusal(_no_manifest, "tiny", False, ("no manifest.json", "--fresh")),
    "manifest deleted, study changed": Refusal(
        _no_manifest, "changed", False, ("no manifest.json", "--fresh")
    ),
    "manifest corrupt": Refusal(
        _corrupt_manifest, "tiny", False, ("a damaged manifest.json", "--fresh")
    ),
    "manifest corrupt, study changed": Refusal(
        _corrupt_manifest, "changed", False, ("a damaged manifest.json",)
    ),
    "manifest of another program": Refusal(
        _foreign_manifest, "tiny", False, ("a foreign manifest.json", "another --out")
    ),
    "--fresh on another program's folder": Refusal(
        _someone_elses, "tiny", True, ("chunks/thesis.txt", "grid.nc", "another --out")
    ),
    "--fresh on a folder whose manifest is another program's": Refusal(
        _foreign_manifest, "tiny", True, ("manifest.json", "did not write")
    ),
}


@pytest.mark.parametrize("case", REFUSALS.values(), ids=REFUSALS.keys())
def test_a_folder_that_is_not_provably_this_studys_is_refused_and_nothing_deleted(
    case, folder, studies, capsys
):
    case.make(folder)
    lock_before = (folder / runner.LOCK).exists()
    before = _files(folder)
    argv = ["run", str(studies[case.study]), "--out", str(folder), "--jobs", "1", "--quiet"]
    code, err = _cli(argv + (["--fresh"] if case.fresh else []), capsys)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "'--out'" in lines[0] and str(folder) in lines[0], err
    for word in case.words:
        assert word in lines[0]
    assert _files(folder) == before
    assert (folder / runner.LOCK).exists() == lock_before  # no lock file left behind either


def test_fresh_over_a_damaged_manifest_starts_over_and_matches_a_clean_run(folder, clean, studies):
    _corrupt_manifest(folder)
    summary = runner.run_study(load(studies["tiny"]), folder, jobs=1, fresh=True)
    assert summary.resumed == 0
    xr.testing.assert_identical(_grid(folder), clean[1])


def test_fresh_deletes_only_what_the_workbench_wrote(folder, studies):
    (folder / "notes.txt").write_text("keep me")
    (folder / "chunks" / "thesis.txt").write_text("keep me too")
    summary = runner.run_study(load(studies["changed"]), folder, jobs=1, fresh=True)
    assert summary.resumed == 0
    assert (folder / "notes.txt").read_text() == "keep me"
    assert (folder / "chunks" / "thesis.txt").read_text() == "keep me too"
    assert _manifest(folder)["digest"] == load(studies["changed"]).digest


def test_stale_temporary_files_of_a_killed_run_are_removed(folder, clean, studies):
    parts = [
        folder / ".grid.nc.k1ll3d0a.part",
        folder / ".manifest.json.x7y8z9ab.part",
        folder / "chunks" / f".{FIRST}.q2w3e4r5.part",
    ]
    for p in parts:
        p.write_bytes(b"half written")
    (folder / ".notes.txt.mine.part").write_text("not ours")
    runner.run_study(load(studies["tiny"]), folder, jobs=1)
    assert not any(p.exists() for p in parts)
    assert (folder / ".notes.txt.mine.part").exists()
    xr.testing.assert_identical(_grid(folder), clean[1])


def test_out_that_is_a_file_is_one_line_and_exit_2(studies, tmp_path, capsys):
    target = tmp_path / "grid-notes.txt"
    target.write_text("a file")
    for out in (target, target / "inside"):
        code, err = _cli(["run", str(studies["tiny"]), "--out", str(out), "--quiet"], capsys)
        assert code == 2 and len(err.strip().splitlines()) == 1
        assert "'--out' must be a folder" in err and str(out) in err
    assert target.read_text() == "a file"


@pytest.mark.parametrize(
    "damage, words",
    [
        (lambda p: p.write_bytes(p.read_bytes()[:4000]), "damaged or not NetCDF"),
        (lambda p: p.write_bytes(bytes(4000)), "not a NetCDF file"),
        (lambda p: p.write_bytes(b""), "not a NetCDF file"),
        (
            lambda p: xr.Dataset({"value": ("x", np.arange(3.0))}).to_netcdf(p),
            "not a workbench grid",
        ),
    ],
    ids=["truncated", "zero-filled", "empty", "another netcdf"],
)
def test_a_damaged_or_foreign_grid_is_one_line_and_exit_2(damage, words, folder, capsys):
    damage(folder / "grid.nc")
    with pytest.raises(InputError, match=words):
        open_grid(folder)
    code, err = _cli(["decide", str(folder)], capsys)
    assert code == 2 and len(err.strip().splitlines()) == 1
    assert words in err and str(folder / "grid.nc") in err


# --------------------------------------------------------------------------- read-only folders


def _run_read_only(folder: Path, study: Path) -> subprocess.CompletedProcess:
    """The CLI run on ``folder`` made read-only: a read-only bind mount in a private mount
    namespace as root (root ignores permissions), the write bits removed otherwise."""
    cli = [sys.executable, "-m", "workbench.cli", "run", str(study), "--out", str(folder)]
    cli += ["--jobs", "1", "--quiet"]
    if os.geteuid() == 0:
        if shutil.which("unshare") is None:
            pytest.skip("needs unshare to make a read-only folder as root")
        quoted = " ".join(f"'{a}'" for a in cli)
        cmd = ["unshare", "-m", "sh", "-c", f"mount --bind -o ro '{folder}' '{folder}' && {quoted}"]
        done = subprocess.run(cmd, capture_output=True, text=True, cwd=ROOT)
        if "mount" in done.stderr and done.returncode not in (0, 2):
            pytest.skip(f"no read-only bind mount here: {done.stderr.strip()}")
        return done
    for p in [folder, *folder.rglob("*")]:
        p.chmod(p.stat().st_mode & ~0o222)
    try:
        return subprocess.run(cli, capture_output=True, text=True, cwd=ROOT)
    finally:
        for p in [folder, *folder.rglob("*")]:
            p.chmod(p.stat().st_mode | 0o200)


def _stamps(out: Path) -> dict[str, tuple[int, int]]:
    return {str(p): (p.stat().st_mtime_ns, p.stat().st_size) for p in out.rglob("*")}


def test_a_finished_read_only_folder_reruns_without_writing(folder, studies):
    before, stamps = _files(folder), _stamps(folder)
    done = _run_read_only(folder, studies["tiny"])
    assert done.returncode == 0, done.stderr
    assert "(6 already done)" in done.stdout
    assert _files(folder) == before and _stamps(folder) == stamps


def test_a_read_only_folder_with_work_left_is_one_line_and_exit_2(folder, studies):
    (folder / "chunks" / SECOND).unlink()
    before = _files(folder)
    done = _run_read_only(folder, studies["tiny"])
    assert done.returncode == 2, done.stderr
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and "'--out' must be a writable folder" in lines[0]
    assert str(folder) in lines[0]
    assert _files(folder) == before


def test_a_full_disk_while_the_grid_is_written_is_one_line_and_exit_2(clean, studies, tmp_path):
    # A real full disk: a tmpfs (in a private mount namespace, as root) just large enough for
    # the finished chunks and the manifest, so only the grid file cannot be written; netCDF4
    # reports that as 'NetCDF: HDF error', without the errno.
    if os.geteuid() != 0 or shutil.which("unshare") is None:
        pytest.skip("needs root and unshare to mount a small tmpfs")
    kept = [p for p in clean[0].rglob("*") if p.is_file() and p.name != "grid.nc"]
    pages = sum(-(-p.stat().st_size // 4096) for p in kept) + 2  # tmpfs counts whole pages
    disk = tmp_path / "disk"
    disk.mkdir()
    out = disk / "out"
    run = [sys.executable, "-m", "workbench.cli", "run", str(studies["tiny"]), "--out", str(out)]
    script = (
        f"mount -t tmpfs -o size={4 * pages}k tmpfs '{disk}' && mkdir '{out}' && "
        f"cp -r '{clean[0]}/chunks' '{clean[0]}/manifest.json' '{out}' && "
        f"{' '.join(repr(a) for a in run)} --jobs 1 --quiet; "
        f"code=$?; ls -A '{out}'; exit $code"
    )
    done = subprocess.run(["unshare", "-m", "sh", "-c", script], capture_output=True, text=True)
    if "mount" in done.stderr and done.returncode != 2:
        pytest.skip(f"no tmpfs mount here: {done.stderr.strip()}")
    lines = done.stderr.strip().splitlines()
    assert done.returncode == 2 and len(lines) == 1, done.stderr
    assert "'--out' must be a folder on a disk with free space" in lines[0]
    assert f"{out} (No space left on device)" in lines[0]
    left = done.stdout.split()
    assert "grid.nc" not in left and not [n for n in left if n.endswith(".part")]


# --------------------------------------------------------------------------- processes


def _start(study: Path, out: Path, jobs: int = 2) -> subprocess.Popen:
    cmd = [sys.executable, "-m", "workbench.cli", "run", str(study), "--out", str(out)]
    return subprocess.Popen(
        [*cmd, "--jobs", str(jobs), "--quiet"],
        cwd=ROOT,
        start_new_session=True,
        stderr=subprocess.DEVNULL,
    )


def _workers(psutil, pid: int) -> list:
    return [c for c in psutil.Process(pid).children() if "LokyProcess" in " ".join(c.cmdline())]


def _wait_for(what: Callable[[], bool], proc: subprocess.Popen, seconds: float = 120) -> None:
    deadline = time.time() + seconds
    while not what():
        assert proc.poll() is None, "the run ended before the check could be made"
        assert time.time() < deadline, "the run did not get there in time"
        time.sleep(0.05)


def test_a_second_run_on_a_busy_folder_is_refused_naming_the_holder(studies, tmp_path, capsys):
    out = tmp_path / "busy"
    proc = _start(studies["slow"], out, jobs=1)
    try:
        lock = out / runner.LOCK
        manifest = out / runner.MANIFEST
        # The lock is taken before the manifest is written: wait for both, so that the
        # refused runs below could only have changed a manifest that is already there.
        _wait_for(
            lambda: (
                lock.exists() and lock.read_text().strip() == str(proc.pid) and manifest.exists()
            ),
            proc,
        )
        for fresh in ([], ["--fresh"]):
            argv = ["run", str(studies["changed"]), "--out", str(out), "--quiet", *fresh]
            code, err = _cli(argv, capsys)
            assert code == 2 and len(err.strip().splitlines()) == 1
            assert f"locked by process {proc.pid}" in err and str(out) in err
        assert proc.poll() is None
        assert _manifest(out)["digest"] == load(studies["slow"]).digest
    finally:
        os.killpg(proc.pid, signal.SIGKILL)
        proc.wait()


@pytest.mark.parametrize("sig", [signal.SIGKILL, signal.SIGTERM], ids=["SIGKILL", "SIGTERM"])
def test_workers_exit_when_the_run_is_killed(sig, studies, tmp_path):
    psutil = pytest.importorskip("psutil")
    proc = _start(studies["slow"], tmp_path / "killed")
    try:
        chunk_dir = tmp_path / "killed" / "chunks"
        # A finished chunk: the workers have started and are busy with the next ones.
        _wait_for(lambda: chunk_dir.is_dir() and any(chunk_dir.glob("*.npz")), proc)
        assert len(_workers(psutil, proc.pid)) == 2
        children = psutil.Process(proc.pid).children(recursive=True)
        os.kill(proc.pid, sig)  # the run alone, not its process group
        proc.wait()
        deadline = time.time() + 5

        def alive():
            return [c for c in children if c.is_running() and c.status() != psutil.STATUS_ZOMBIE]

        while alive() and time.time() < deadline:
            time.sleep(0.1)
        assert not alive(), f"still running after the run died: {alive()}"
    finally:
        with contextlib.suppress(ProcessLookupError):
            os.killpg(proc.pid, signal.SIGKILL)
