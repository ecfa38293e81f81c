"""Running a study: chunks in parallel, each written to disk as it finishes; then one grid.nc.

Layout of an output folder::

    manifest.json     format, study name, digest (SHA-256 of the study text), package
                      version; what the chunks were computed with (``provenance``: library
                      versions, BLAS, kernel choice); per finished chunk the SHA-256 of its
                      file and its compute seconds; the SHA-256 of the grid it was last
                      assembled into
    chunks/*.npz      one file per finished chunk (written to a temporary name, then renamed);
                      besides the results it records its study's digest and its key
                      (landscape, distortion, replicates, block size)
    grid.nc           the assembled grid (see :mod:`workbench.study.gridfile`)
    .workbench.lock   the lock file: one run at a time per folder (it holds the run's pid)

Running again resumes: every chunk on disk is checked (its checksum against the manifest, its
record against the study and its key) and a damaged, foreign or unlisted one is computed
again; a run with nothing to do writes nothing. A run that would add chunks to chunks computed
with other libraries, BLAS or kernels (:mod:`workbench.study.provenance`) is refused: the grid
would mix values computed differently. A folder holding another study's results is
refused unless ``fresh`` is set, which deletes what the workbench wrote there (the chunks its
manifest lists, grid.nc, manifest.json) and nothing else; a folder with results but no
readable manifest is never assumed to be this study's, and ``fresh`` refuses a folder holding
files the workbench did not write. Temporary files of a killed run are removed by the next.

Parallel work goes through joblib: its process backend on one machine, or its Dask backend
given a scheduler address. Each worker process on this machine exits when the run's process
dies (a watchdog thread polls its parent's pid), so a killed run leaves no workers behind.
"""

from __future__ import annotations

import contextlib
import errno
import hashlib
import io
import json
import logging
import os
import re
import time
import warnings
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..storage import FolderBusy, atomic_path, folder_lock, remove_parts, sha256_of, write_text
from ..validation import InputError, raw
from .cost import chunk_cost
from .grid import Chunk, chunks, run_chunk
from .provenance import differences, provenance
from .spec import Study
from .workers import tune_allocator, watch_parent

__all__ = ["RunSummary", "execute", "run_study"]

log = logging.getLogger(__name__)

MANIFEST = "manifest.json"
CHUNKS = "chunks"
GRID = "grid.nc"
LOCK = ".workbench.lock"
# How long to wait for a Dask scheduler to answer before the run is refused.
SCHEDULER_TIMEOUT = "10s"
FORMAT = "workbench results 1"
# What a chunk file records about itself, beside its results: one entry per replicate, so
# that the grid's split over replicates passes it through like every other array.
RECORD = ("chunk_study", "chunk_key", "chunk_landscape", "chunk_distortion", "chunk_replicate")
CHUNK_NAME = re.compile(r"L\d{3}-D\d{3}-R\d{4}-\d{4}\.npz")
# Normalized regret below minus this means a campaign beat the computed minimum.
BELOW_MINIMUM = 1e-9
# joblib's warning when a stopped run cancels the tasks still running.
_CANCELLED = r".*tasks (which were still being processed|have been successfully executed)"


@dataclass(frozen=True)
class RunSummary:
    """What a run did: chunks and campaigns in all, how many were already on disk (and
    verified), how many chunk files failed their check and were computed again, the grid
    file, and the wall time of this run."""

    chunks: int
    campaigns: int
    resumed: int
    grid: Path
    seconds: float
    below_minimum: dict[str, float] = field(default_factory=dict)
    recomputed: int = 0
    # Per landscape label with failed evaluations: (failed, evaluations, first message or "").
    failed: dict[str, tuple[int, int, str]] = field(default_factory=dict)

    def warnings(self) -> list[str]:
        """One line per landscape on which a campaign beat the computed minimum, and one per
        landscape with failed evaluations (how many, and the first one's message)."""
        lines = [
            f"landscape {label}: a campaign found a value below the computed minimum "
            f"(normalized regret {low:.3g}); the minimum search missed the optimum"
            for label, low in self.below_minimum.items()
        ]
        for label, (n, total, first) in self.failed.items():
            why = f" (first: {first})" if first else ""
            lines.append(f"{label}: {n:,} of {total:,} evaluations failed{why}")
        return lines


def _failures(study: Study, manifest: dict, every: list[Chunk]) -> dict[str, tuple[int, int, str]]:
    """Failed evaluations per landscape label with any: (failed, all its evaluations, the
    first message), from the manifest's chunk entries (a chunk computed by a version that did
    not count them counts as none failed)."""
    failed: dict[str, int] = {}
    total: dict[str, int] = {}
    first: dict[str, str] = {}
    for chunk in every:
        label = study.landscapes[chunk.landscape].label
        total[label] = total.get(label, 0) + chunk.campaigns * study.budget
        entry = manifest["chunks"].get(chunk.key, {})
        if entry.get("failed"):
            failed[label] = failed.get(label, 0) + int(entry["failed"])
            first[label] = first.get(label) or entry.get("first_failure", "")
    return {label: (n, total[label], first[label]) for label, n in failed.items()}


# --------------------------------------------------------------------------- the folder


def _refuse(out: Path, expected: str, got: str, where: str = "command line") -> InputError:
    return InputError("--out", expected, raw(f"{out} {got}"), where)


@contextlib.contextmanager
def _disk(out: Path) -> Iterator[None]:
    """Turn a disk or folder error (read-only, full, not a folder) into one line naming it."""
    try:
        yield
    except OSError as err:
        if err.errno == errno.ENOSPC:
            expected = "a folder on a disk with free space"
        elif err.errno in (errno.ENOTDIR, errno.EEXIST):
            expected = "a folder (or a path where one can be made)"
        else:
            expected = "a writable folder"
        name = Path(err.filename) if err.filename else out
        if name.name.endswith(".part"):
            name = name.parent  # a temporary file: the folder is what the user knows
        reason = err.strerror or str(err)
        raise _refuse(
            out, expected, f"({reason})" if name == out else f"({name}: {reason})"
        ) from None


def _read_manifest(out: Path) -> tuple[str, dict | None]:
    """The manifest and its state: 'none' (no file), 'ours' (a workbench manifest),
    'damaged' (not JSON, or truncated) or 'foreign' (JSON some other program wrote)."""
    path = out / MANIFEST
    if not path.exists():
        return "none", None
    with _disk(out):
        data = path.read_bytes()
    try:
        manifest = json.loads(data.decode("utf-8"))
    except (UnicodeDecodeError, json.JSONDecodeError):
        return "damaged", None
    if not isinstance(manifest, dict):
        return "foreign", None
    if not isinstance(manifest.get("digest"), str) or "study" not in manifest:
        return "foreign", None
    listed = manifest.get("chunks")
    if not isinstance(listed, dict):
        # An older manifest lists chunk seconds only: its chunks are unlisted (recomputed).
        listed = {}
    manifest["chunks"] = {
        k: v for k, v in listed.items() if isinstance(v, dict) and isinstance(v.get("sha256"), str)
    }
    manifest.pop("chunk_seconds", None)
    manifest.setdefault("format", FORMAT)
    return "ours", manifest


def _new_manifest(study: Study) -> dict:
    return {
        "format": FORMAT,
        "study": study.name,
        "digest": study.digest,
        "version": __version__,
        "chunks": {},
    }


def _our_grid(path: Path) -> bool:
    """Whether ``path`` is a grid file the workbench wrote (a NetCDF file with its attributes)."""
    import netCDF4

    try:
        with netCDF4.Dataset(path) as ds:
            return {"study", "study_name", "root_seed"} <= set(ds.ncattrs())
    except Exception:  # any failure to read it means: not provably ours
        return False


def _ours(name: str) -> bool:
    """Whether a file name in the folder is one the workbench writes (or its temporary)."""
    return name in (MANIFEST, GRID, LOCK) or any(
        name.startswith(f".{n}.") and name.endswith(".part") for n in (MANIFEST, GRID)
    )


def _foreign_files(out: Path, state: str) -> list[str]:
    """The files in ``out`` that the workbench did not write (as far as can be told without
    a manifest): chunk files by their name pattern, grid.nc by its attributes."""
    foreign = []
    for entry in sorted(out.iterdir()):
        name = entry.name
        if name == CHUNKS and entry.is_dir():
            for inner in sorted(entry.iterdir()):
                chunkish = CHUNK_NAME.fullmatch(inner.name) or (
                    inner.name.startswith(".L") and inner.name.endswith(".part")
                )
                if not (chunkish and inner.is_file()):
                    foreign.append(f"{CHUNKS}/{inner.name}")
        elif not _ours(name) or entry.is_dir():
            foreign.append(name)
        elif name == GRID and not _our_grid(entry):
            foreign.append(name)
        elif name == MANIFEST and state == "foreign":
            foreign.append(name)
    return foreign


def _results_present(out: Path) -> list[str]:
    """What in ``out`` looks like results: chunk files, grid.nc, manifest.json."""
    present = [n for n in (MANIFEST, GRID) if (out / n).exists()]
    folder = out / CHUNKS
    if folder.is_dir() and any(folder.iterdir()):
        present.insert(0, f"{CHUNKS}/")
    return present


def _clear(out: Path, manifest: dict | None) -> int:
    """Delete what the workbench wrote in ``out``: the chunks the manifest lists (every chunk
    file by name when there is no manifest, the folder having been checked to hold nothing
    else), grid.nc and manifest.json. Other files stay. Returns how many chunk files went."""
    folder = out / CHUNKS
    if manifest is not None:
        names = [f"{k}.npz" for k in manifest["chunks"]]
    elif folder.is_dir():
        names = [p.name for p in folder.iterdir() if CHUNK_NAME.fullmatch(p.name)]
    else:
        names = []
    gone = 0
    for name in names:
        with contextlib.suppress(FileNotFoundError):
            (folder / name).unlink()
            gone += 1
    for name in (GRID, MANIFEST):
        with contextlib.suppress(FileNotFoundError):
            (out / name).unlink()
    with contextlib.suppress(OSError):
        folder.rmdir()  # only when nothing else is left in it
    return gone


def prepare(study: Study, out: Path, fresh: bool) -> tuple[dict, bool]:
    """Check ``out`` for ``study`` (the lock held); returns the manifest and whether it is
    new (not yet on disk). With ``fresh``, first deletes what the workbench wrote there."""
    state, manifest = _read_manifest(out)
    if state == "ours" and manifest["digest"] != study.digest and not fresh:
        raise _refuse(
            out,
            "a folder of this study (its study file changed; use --fresh to start over)",
            f"holding results of another version of study '{manifest.get('study')}'",
            study.path,
        )
    if state != "ours":
        if fresh:
            foreign = _foreign_files(out, state)
            if foreign:
                shown = ", ".join(foreign[:4]) + (", ..." if len(foreign) > 4 else "")
                raise _refuse(
                    out,
                    "a folder of workbench results for --fresh to clear (use another --out)",
                    f"holding files the workbench did not write ({shown}) and no manifest",
                )
        else:
            present = _results_present(out)
            if present:
                what = {"none": "no", "damaged": "a damaged", "foreign": "a foreign"}[state]
                hint = "another --out" if _foreign_files(out, state) else "--fresh to start over"
                raise _refuse(
                    out,
                    f"a results folder with its {MANIFEST}, or a new folder (use {hint})",
                    f"holding {', '.join(present)} but {what} {MANIFEST}",
                )
    if fresh:
        with _disk(out):
            gone = _clear(out, manifest if state == "ours" else None)
        if gone:
            log.info("--fresh: removed %d chunk files of the earlier run", gone)
        manifest = None
    if manifest is None:
        return _new_manifest(study), True
    return manifest, False


def _check_provenance(
    study: Study, out: Path, manifest: dict, todo: list[Chunk], current: dict[str, str]
) -> None:
    """Refuse to compute chunks beside chunks computed with other libraries (kept chunks
    are those still listed after :func:`_sort`); otherwise record what the new ones use."""
    if not todo:
        return  # nothing computed: the grid is assembled with the recorded provenance
    if manifest["chunks"]:
        differ = differences(manifest.get("provenance"), current)
        if differ:
            shown = "; ".join(differ[:3]) + ("; ..." if len(differ) > 3 else "")
            raise _refuse(
                out,
                "a folder whose chunks were computed with these libraries "
                "(use --fresh to start over)",
                f"holding chunks computed with {shown}",
                study.path,
            )
    manifest["provenance"] = current


def _remove_stale_parts(out: Path) -> None:
    """Temporary files of a run that was killed mid-write (only this folder's lock holder
    can be writing them, and that is this run)."""
    gone = remove_parts(out, lambda n: n in (GRID, MANIFEST))
    gone += remove_parts(out / CHUNKS, lambda n: CHUNK_NAME.fullmatch(n) is not None)
    if gone:
        log.info("removed %d temporary files a killed run left in %s", gone, out)


def _record(study: Study, chunk: Chunk) -> dict[str, np.ndarray]:
    n = len(chunk.replicates)
    return {
        "chunk_study": np.full(n, study.digest),
        "chunk_key": np.full(n, chunk.key),
        "chunk_landscape": np.full(n, chunk.landscape),
        "chunk_distortion": np.full(n, chunk.distortion),
        "chunk_replicate": np.array(chunk.replicates),
    }


def _check_chunk(study: Study, out: Path, chunk: Chunk, listed: dict | None) -> str | None:
    """Why the chunk file on disk cannot be used (None when it can): 'unlisted' (the
    manifest does not know it), 'changed' (its bytes are not those listed), 'unreadable',
    or 'foreign' (it records another study or another chunk)."""
    path = _chunk_path(out, chunk)
    if listed is None:
        return "unlisted"
    with _disk(out):
        if sha256_of(path) != listed.get("sha256"):
            return "changed"
    try:
        with np.load(path, allow_pickle=False) as npz:
            record = {name: npz[name] for name in RECORD}
            width = npz["normalized_regret"].shape[:2]
    except Exception:  # a file that cannot be read is damaged, whatever the error
        return "unreadable"
    expected = _record(study, chunk)
    same = all(
        record[k].shape == v.shape and bool(np.all(record[k] == v)) for k, v in expected.items()
    )
    if not same or width != (len(chunk.replicates), len(chunk.settings)):
        return "foreign"
    return None


def _sort(study: Study, out: Path, manifest: dict, every: list[Chunk]) -> tuple[list[Chunk], int]:
    """The chunks to compute: missing ones, and those whose file fails its check (logged, and
    dropped from the manifest); and how many files failed."""
    todo, failed = [], {}
    for chunk in every:
        if not _chunk_path(out, chunk).is_file():
            todo.append(chunk)
            manifest["chunks"].pop(chunk.key, None)
            continue
        why = _check_chunk(study, out, chunk, manifest["chunks"].get(chunk.key))
        if why is not None:
            todo.append(chunk)
            failed[why] = failed.get(why, 0) + 1
            manifest["chunks"].pop(chunk.key, None)
    if failed:
        n = sum(failed.values())
        parts = ", ".join(f"{k} {v}" for k, v in sorted(failed.items()))
        log.warning(
            "%d chunk file%s in %s failed the check (%s) and %s computed again",
            n,
            "s" if n > 1 else "",
            out / CHUNKS,
            parts,
            "are" if n > 1 else "is",
        )
    return todo, sum(failed.values())


def _chunk_path(out: Path, chunk: Chunk) -> Path:
    return out / CHUNKS / f"{chunk.key}.npz"


def _work(
    study: Study, group: list[Chunk], parent: int | None = None, extras: bool = False
) -> tuple[list[tuple[Chunk | None, object, float]], Exception | None]:
    """Run a group's chunks in turn: what finished, and the error that stopped the rest (so
    that the chunks finished before it are still written). ``parent``: the run's pid, which a
    local worker watches (None on Dask). ``extras``: compute the grid file's extras instead
    (:func:`~workbench.study.gridfile.grid_extras`), finished as ``(None, extras, seconds)``."""
    from threadpoolctl import threadpool_limits

    if parent is not None:
        watch_parent(parent)
    tune_allocator()  # a Dask worker's environment would map every large temporary
    out = []
    # One BLAS thread, as the engine's batch has: the placements run here too, and on a busy
    # machine threaded BLAS makes them many times slower.
    with threadpool_limits(limits=1, user_api="blas"):
        if extras:
            from .gridfile import grid_extras

            start = time.perf_counter()
            try:
                return [(None, grid_extras(study), time.perf_counter() - start)], None
            except Exception as err:
                return [], err
        for chunk in group:
            start = time.perf_counter()
            try:
                result = run_chunk(study, chunk)
            except Exception as err:
                return out, err
            out.append((chunk, result, time.perf_counter() - start))
    return out, None


def _groups(study: Study, todo: list[Chunk]) -> list[list[Chunk]]:
    """The tasks: on a landscape built per replicate (drawn, fitted, function), the chunks of
    one block of replicates, whatever their distortion, so that one worker builds each
    replicate's surface and searches its minimum once for all of them
    (:mod:`workbench.study.cells` keeps it); a textbook landscape's chunks one by one, which
    spreads small studies over more workers.

    Largest first (by :func:`~workbench.study.cost.chunk_cost`; ties in study order): a worker
    that takes the last task then finishes near the others, instead of one worker running a
    large task alone at the end (longest-processing-time-first scheduling, Graham 1969, within
    4/3 of the shortest possible wall time)."""
    groups: dict[tuple, list[Chunk]] = {}
    for c in todo:
        shared = study.landscapes[c.landscape].kind != "textbook"
        key = (c.landscape, c.replicates) if shared else (c.landscape, c.replicates, c.distortion)
        groups.setdefault(key, []).append(c)
    cost = {id(g): sum(chunk_cost(study, c) for c in g) for g in groups.values()}
    return sorted(groups.values(), key=lambda g: -cost[id(g)])


@contextlib.contextmanager
def _backend(scheduler: str | None) -> Iterator[None]:
    if scheduler is None:
        yield
        return
    try:
        from dask.distributed import Client
    except ImportError:
        raise InputError(
            "--scheduler",
            "dask.distributed installed (pip install 'workbench[cluster]')",
            raw("no dask.distributed"),
            "command line",
        ) from None
    import joblib

    try:
        client = Client(scheduler, timeout=SCHEDULER_TIMEOUT)
    except OSError as err:
        raise InputError(
            "--scheduler", "a reachable Dask scheduler", raw(str(err)), "command line"
        ) from None
    try:
        with joblib.parallel_config(backend="dask"):
            yield
    finally:
        client.close()


def execute(
    study: Study, todo: list[Chunk], *, jobs: int | None = None, scheduler: str | None = None
) -> Iterator[tuple[Chunk, dict, float]]:
    """Run ``todo`` in parallel; yield (chunk, arrays, seconds) as each chunk finishes (on a
    drawn, fitted or function landscape, the chunks of one block finish together)."""
    with _backend(scheduler):
        yield from _parallel(study, todo, jobs, scheduler is not None)


def _workers(groups: list, jobs: int | None, distributed: bool) -> int:
    """joblib's ``n_jobs`` for ``groups``: -1 on a cluster; here no more local workers than
    tasks, so that each one gets a task at once, and with it the watch on the run's process
    (an idle worker ends after loky's idle timeout). 1 runs the tasks in this process."""
    return -1 if distributed else min(jobs or os.cpu_count() or 1, len(groups))


def _parallel(
    study: Study, todo: list[Chunk], jobs: int | None, distributed: bool, extras: bool = False
) -> Iterator[tuple[Chunk | None, object, float]]:
    """Yield (chunk, arrays, seconds) as tasks finish; ``extras`` adds a last task (small: it
    fills a worker's idle end; it may find replicate 0's placements cached there)."""
    import joblib

    if not todo:
        return
    groups = _groups(study, todo)
    n_jobs = _workers([*groups, *([None] if extras else [])], jobs, distributed)
    parallel = joblib.Parallel(
        n_jobs=n_jobs, return_as="generator_unordered", batch_size=1, pre_dispatch="2*n_jobs"
    )
    parent = None if distributed else os.getpid()
    tasks = [joblib.delayed(_work)(study, g, parent) for g in groups]
    if extras:
        tasks.append(joblib.delayed(_work)(study, [], parent, True))
    results = parallel(tasks)
    try:
        for finished, err in results:
            yield from finished
            if err is not None:
                raise err
    finally:
        # A run stopped early (an error, an interrupt) cancels the tasks still running: that
        # is the intent, so joblib's warning about them is not the user's news.
        with warnings.catch_warnings():
            warnings.filterwarnings("ignore", _CANCELLED, UserWarning)
            results.close()


def _chunk_failures(result: dict) -> dict:
    """A chunk's failed evaluations for its manifest entry: how many of how many, and the
    first one's message (nothing when none failed)."""
    failed = int(np.count_nonzero(result["failed"]))
    if not failed:
        return {}
    first = next((str(w) for w in result.get("first_failure", ()) if w), "")
    return {"failed": failed, "evaluations": int(result["failed"].size), "first_failure": first}


def _write_chunk(study: Study, out: Path, chunk: Chunk, result: dict) -> str:
    """Write a chunk file (results and record) atomically; returns its SHA-256."""
    buffer = io.BytesIO()
    np.savez(buffer, **result, **_record(study, chunk))
    data = buffer.getvalue()
    with atomic_path(_chunk_path(out, chunk)) as tmp:
        tmp.write_bytes(data)
    return hashlib.sha256(data).hexdigest()


def _grid_current(out: Path, manifest: dict) -> bool:
    """Whether grid.nc is the one last assembled from the listed chunks."""
    grid = manifest.get("grid")
    if not isinstance(grid, dict) or not (out / GRID).is_file():
        return False
    with _disk(out):
        return sha256_of(out / GRID) == grid.get("sha256")


def _save(out: Path, manifest: dict) -> None:
    with _disk(out):
        write_text(out / MANIFEST, json.dumps(manifest, indent=1))


def _open_folder(out: Path) -> None:
    if out.exists() and not out.is_dir():
        raise _refuse(out, "a folder", "(a file)")
    with _disk(out):
        out.mkdir(parents=True, exist_ok=True)


@contextlib.contextmanager
def _locked(out: Path) -> Iterator[None]:
    """Hold the folder's lock; a refusal inside removes a lock file this run created."""
    lock = out / LOCK
    created = not lock.exists()
    with contextlib.ExitStack() as stack:
        try:
            with _disk(out):
                stack.enter_context(folder_lock(lock))
        except FolderBusy as busy:
            holder = f"process {busy.pid}" if busy.pid else "another process"
            raise _refuse(
                out, "a folder no other run is using", f"locked by {holder} (its lock: {lock})"
            ) from None
        try:
            yield
        except InputError:
            if created:
                with contextlib.suppress(OSError):
                    lock.unlink()
            raise


def run_study(
    study: Study,
    out: str | Path,
    *,
    jobs: int | None = None,
    scheduler: str | None = None,
    fresh: bool = False,
    progress: Callable[[int, int], None] | None = None,
) -> RunSummary:
    """Run every chunk not yet on disk (or whose file fails its check), then assemble
    ``grid.nc`` unless the one there is already assembled from these chunks.

    The scheduler (when given) is reached before anything is written, so a wrong address
    leaves the output folder untouched. ``progress(done, total)`` is called with campaign
    counts as chunks finish. Raises :class:`InputError` (one line naming the folder) for a
    folder that is busy, foreign, damaged, read-only or not a folder.
    """
    from .cost import check_grid_size
    from .gridfile import assemble

    check_grid_size(study)  # before the folder is touched: a grid too large to load
    start = time.perf_counter()
    out = Path(out)
    with _backend(scheduler):
        _open_folder(out)
        with _locked(out):
            manifest, new = prepare(study, out, fresh)
            every = chunks(study)
            todo, recomputed = _sort(study, out, manifest, every)
            _check_provenance(study, out, manifest, todo, provenance())
            total = sum(c.campaigns for c in every)
            done = resumed = total - sum(c.campaigns for c in todo)
            current = not todo and not new and _grid_current(out, manifest)
            _remove_stale_parts(out)
            if current:
                # Nothing to do: nothing is written (a finished folder may be read-only).
                lowest = {k: float(v) for k, v in manifest["grid"].get("lowest", {}).items()}
                if progress:
                    progress(done, total)
            else:
                with _disk(out):
                    (out / CHUNKS).mkdir(exist_ok=True)
                manifest.pop("grid", None)
                _save(out, manifest)
                if progress:
                    progress(done, total)
                extras = None  # the grid's belief figures and resemblance table
                for chunk, result, seconds in _parallel(
                    study, todo, jobs, scheduler is not None, extras=True
                ):
                    if chunk is None:
                        extras = result
                        continue
                    with _disk(out):
                        sha = _write_chunk(study, out, chunk, result)
                    manifest["chunks"][chunk.key] = {"sha256": sha, "seconds": round(seconds, 4)}
                    manifest["chunks"][chunk.key] |= _chunk_failures(result)
                    _save(out, manifest)
                    done += chunk.campaigns
                    if progress:
                        progress(done, total)
                with _disk(out):
                    lowest = assemble(
                        study,
                        out / CHUNKS,
                        out / GRID,
                        every,
                        manifest.get("provenance"),
                        extras,
                    )
                    manifest["grid"] = {"sha256": sha256_of(out / GRID), "lowest": lowest}
                _save(out, manifest)
    below = {k: v for k, v in lowest.items() if v < -BELOW_MINIMUM}
    failed = _failures(study, manifest, every)
    seconds = time.perf_counter() - start
    return RunSummary(len(every), total, resumed, out / GRID, seconds, below, recomputed, failed)
