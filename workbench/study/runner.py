"""Running a study: chunks in parallel, each written to disk as it finishes; then one grid.nc.

Layout of an output folder::

    manifest.json     study name, digest (SHA-256 of the study text), package version,
                      and each finished chunk's compute seconds
    chunks/*.npz      one file per finished chunk (written to a temporary name, then renamed)
    grid.nc           the assembled grid (see :mod:`workbench.study.gridfile`)

Running again resumes: chunks already on disk are skipped. A folder holding another study's
chunks is refused unless ``fresh`` is set, which clears it first. Parallel work goes through
joblib: its process backend on one machine, or its Dask backend given a scheduler address.
"""

from __future__ import annotations

import contextlib
import json
import logging
import os
import shutil
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .. import __version__
from ..storage import atomic_path, write_text
from ..validation import InputError, raw
from .grid import Chunk, chunks, run_chunk
from .spec import Study

__all__ = ["RunSummary", "execute", "run_study"]

log = logging.getLogger(__name__)

MANIFEST = "manifest.json"
CHUNKS = "chunks"
GRID = "grid.nc"
# Normalized regret below minus this means a campaign beat the computed minimum.
BELOW_MINIMUM = 1e-9


@dataclass(frozen=True)
class RunSummary:
    """What a run did: chunks and campaigns in all, how many were already on disk, the grid
    file, and the wall time of this run."""

    chunks: int
    campaigns: int
    resumed: int
    grid: Path
    seconds: float
    below_minimum: dict[str, float] = field(default_factory=dict)

    def warnings(self) -> list[str]:
        """One line per landscape on which a campaign beat the computed minimum."""
        return [
            f"landscape {label}: a campaign found a value below the computed minimum "
            f"(normalized regret {low:.3g}); the minimum search missed the optimum"
            for label, low in self.below_minimum.items()
        ]


def _manifest(out: Path) -> dict | None:
    path = out / MANIFEST
    if not path.exists():
        return None
    try:
        return json.loads(path.read_text(encoding="utf-8"))
    except (OSError, json.JSONDecodeError):
        return None


def prepare(study: Study, out: Path, fresh: bool) -> dict:
    """Check (or create) the output folder for ``study``; returns the manifest."""
    manifest = _manifest(out)
    if manifest is not None and manifest.get("digest") != study.digest:
        if not fresh:
            raise InputError(
                "--out",
                "a folder of this study (its study file changed; use --fresh to start over)",
                raw(f"{out} holding results of another version of study '{manifest.get('study')}'"),
                study.path,
            )
    if fresh and out.exists():
        for name in (CHUNKS, GRID, MANIFEST):
            target = out / name
            if target.is_dir():
                shutil.rmtree(target)
            elif target.exists():
                target.unlink()
        manifest = None
    if manifest is None:
        manifest = {
            "study": study.name,
            "digest": study.digest,
            "version": __version__,
            "chunk_seconds": {},
        }
    (out / CHUNKS).mkdir(parents=True, exist_ok=True)
    write_text(out / MANIFEST, json.dumps(manifest, indent=1))
    return manifest


def _chunk_path(out: Path, chunk: Chunk) -> Path:
    return out / CHUNKS / f"{chunk.key}.npz"


def _work(
    study: Study, group: list[Chunk]
) -> tuple[list[tuple[Chunk, dict, float]], Exception | None]:
    """Run a group's chunks in turn: what finished, and the error that stopped the rest (so
    that the chunks finished before it are still written)."""
    out = []
    for chunk in group:
        start = time.perf_counter()
        try:
            result = run_chunk(study, chunk)
        except Exception as err:
            return out, err
        out.append((chunk, result, time.perf_counter() - start))
    return out, None


def _groups(study: Study, todo: list[Chunk]) -> list[list[Chunk]]:
    """The tasks: on a landscape built per replicate (drawn, fitted, objective), the chunks of
    one block of replicates, whatever their distortion, so that one worker builds each
    replicate's surface and searches its minimum once for all of them
    (:mod:`workbench.study.cells` keeps it); a textbook landscape's chunks one by one, which
    spreads small studies over more workers."""
    groups: dict[tuple, list[Chunk]] = {}
    for c in todo:
        shared = study.landscapes[c.landscape].kind != "textbook"
        key = (c.landscape, c.replicates) if shared else (c.landscape, c.replicates, c.distortion)
        groups.setdefault(key, []).append(c)
    return list(groups.values())


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
        client = Client(scheduler, timeout="10s")
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
    drawn, fitted or objective landscape, the chunks of one block finish together)."""
    with _backend(scheduler):
        yield from _parallel(study, todo, jobs, scheduler is not None)


def _parallel(
    study: Study, todo: list[Chunk], jobs: int | None, distributed: bool
) -> Iterator[tuple[Chunk, dict, float]]:
    import joblib

    if not todo:
        return
    n_jobs = -1 if distributed else (jobs or os.cpu_count() or 1)
    parallel = joblib.Parallel(
        n_jobs=n_jobs, return_as="generator_unordered", batch_size=1, pre_dispatch="2*n_jobs"
    )
    for finished, err in parallel(joblib.delayed(_work)(study, g) for g in _groups(study, todo)):
        yield from finished
        if err is not None:
            raise err


def run_study(
    study: Study,
    out: str | Path,
    *,
    jobs: int | None = None,
    scheduler: str | None = None,
    fresh: bool = False,
    progress: Callable[[int, int], None] | None = None,
) -> RunSummary:
    """Run every chunk not yet on disk, then assemble ``grid.nc``.

    The scheduler (when given) is reached before anything is written, so a wrong address
    leaves the output folder untouched. ``progress(done, total)`` is called with campaign
    counts as chunks finish.
    """
    from .gridfile import assemble

    start = time.perf_counter()
    out = Path(out)
    with _backend(scheduler):
        manifest = prepare(study, out, fresh)
        every = chunks(study)
        todo = [c for c in every if not _chunk_path(out, c).exists()]
        total = sum(c.campaigns for c in every)
        done = resumed = total - sum(c.campaigns for c in todo)
        if progress:
            progress(done, total)
        for chunk, result, seconds in _parallel(study, todo, jobs, scheduler is not None):
            with atomic_path(_chunk_path(out, chunk)) as tmp:
                with open(tmp, "wb") as fh:
                    np.savez(fh, **result)
            manifest["chunk_seconds"][chunk.key] = round(seconds, 4)
            write_text(out / MANIFEST, json.dumps(manifest, indent=1))
            done += chunk.campaigns
            if progress:
                progress(done, total)
    lowest = assemble(study, out / CHUNKS, out / GRID, every)
    below = {k: v for k, v in lowest.items() if v < -BELOW_MINIMUM}
    return RunSummary(len(every), total, resumed, out / GRID, time.perf_counter() - start, below)
