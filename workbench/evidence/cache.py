"""The monitor's cache: a trained monitor kept beside its grid, so that reading a live campaign
again after each new evaluation takes seconds instead of a training.

One file per monitor, ``DIR/monitor-cache/<grid>-v<format>-<key>.joblib`` (``DIR`` the grid's
results folder), written atomically. The key is the SHA-256 of everything the training
depends on (:class:`MonitorKey`): the grid file's own SHA-256 (so a rerun or edited grid is
never read with an old monitor), the strategy whose campaigns it learns from, the steps, the
threshold quantile of the features, the seed, :data:`MONITOR_FORMAT`, the feature names and
the scikit-learn version (a pickled classifier is only read by the version that wrote it).
Writing one removes the files of other grids or formats from the folder; a damaged or
unreadable file is ignored and retrained.

The file is a pickle (``joblib``): read only caches that this tool wrote into your own results
folder.
"""

from __future__ import annotations

import hashlib
import json
import logging
from dataclasses import asdict, dataclass
from pathlib import Path

from ..analysis.dataset import GRID
from ..storage import atomic_path, sha256_of
from .features import FEATURES
from .training import Monitor

__all__ = ["CACHE_FOLDER", "MONITOR_FORMAT", "MonitorKey", "grid_file", "load", "save"]

log = logging.getLogger(__name__)

# Raise when the training, the features or the Monitor's fields change meaning.
MONITOR_FORMAT = 2
CACHE_FOLDER = "monitor-cache"


def grid_file(path: str | Path) -> Path:
    """The grid file of a results folder (or the file itself when given)."""
    path = Path(path)
    return path / GRID if path.is_dir() or path.suffix != ".nc" else path


@dataclass(frozen=True)
class MonitorKey:
    """What a trained monitor depends on (see the module docstring)."""

    grid_sha256: str
    strategy: str
    steps: tuple[int, ...]
    quantile: float
    seed: int

    @classmethod
    def of(cls, grid: str | Path, strategy: str, steps, quantile: float, seed: int) -> MonitorKey:
        steps = tuple(int(s) for s in steps)
        return cls(sha256_of(grid_file(grid)), strategy, steps, float(quantile), int(seed))

    def fields(self) -> dict:
        import sklearn

        return asdict(self) | {
            "steps": list(self.steps),
            "format": MONITOR_FORMAT,
            "features": list(FEATURES),
            "sklearn": sklearn.__version__,
        }

    @property
    def prefix(self) -> str:
        return f"{self.grid_sha256[:16]}-v{MONITOR_FORMAT}-"

    @property
    def name(self) -> str:
        text = json.dumps(self.fields(), sort_keys=True)
        return self.prefix + hashlib.sha256(text.encode("utf-8")).hexdigest()[:24] + ".joblib"


def _path(grid: str | Path, key: MonitorKey) -> Path:
    return grid_file(grid).parent / CACHE_FOLDER / key.name


def load(grid: str | Path, key: MonitorKey) -> Monitor | None:
    """The cached monitor of ``key`` beside ``grid``, or None (absent, damaged, or another
    key's)."""
    import joblib

    path = _path(grid, key)
    if not path.is_file():
        return None
    try:
        stored = joblib.load(path)
    except Exception as err:  # a damaged or foreign pickle: retrain rather than fail
        log.warning("monitor cache %s unreadable (%s); training again", path, type(err).__name__)
        return None
    if (
        not isinstance(stored, dict)
        or stored.get("key") != key.fields()
        or not isinstance(stored.get("monitor"), Monitor)
    ):
        return None
    return stored["monitor"]


def save(grid: str | Path, key: MonitorKey, monitor: Monitor) -> Path | None:
    """Write ``monitor`` under ``key`` beside ``grid`` (atomically) and remove the cached
    monitors of other grids or formats; None, with a warning, if the folder is not writable."""
    import joblib

    path = _path(grid, key)
    try:
        with atomic_path(path) as tmp:
            joblib.dump({"key": key.fields(), "monitor": monitor}, tmp)
        for other in path.parent.glob("*.joblib"):
            if not other.name.startswith(key.prefix):
                other.unlink(missing_ok=True)
    except OSError as err:
        log.warning("monitor cache not written to %s (%s)", path.parent, err.strerror or err)
        return None
    return path
