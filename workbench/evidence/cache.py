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

The file is a pickle (``joblib``), and unpickling runs code: so every file is signed with an
HMAC-SHA256 under a key private to the user (``$XDG_CACHE_HOME/workbench/monitor-key``, else
``~/.cache/workbench/monitor-key``, 32 random bytes, mode 0600), and a file whose signature does
not verify (written by someone else, or altered) is never unpickled: it is retrained.
"""

from __future__ import annotations

import hashlib
import hmac
import io
import json
import logging
import os
import secrets
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


def _signing_key() -> bytes:
    """The user's private signing key, created on first use."""
    home = Path(os.environ.get("XDG_CACHE_HOME") or Path.home() / ".cache")
    path = home / "workbench" / "monitor-key"
    if not path.is_file():
        path.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "wb") as f:
            f.write(secrets.token_bytes(32))
    return path.read_bytes()


def _signature(payload: bytes) -> bytes:
    return hmac.new(_signing_key(), payload, hashlib.sha256).digest()


def load(grid: str | Path, key: MonitorKey) -> Monitor | None:
    """The cached monitor of ``key`` beside ``grid``, or None (absent, damaged, or another
    key's)."""
    import joblib

    path = _path(grid, key)
    if not path.is_file():
        return None
    try:
        data = path.read_bytes()
        signature, payload = data[:32], data[32:]
        if not hmac.compare_digest(signature, _signature(payload)):
            log.warning("monitor cache %s is not signed by this user; training again", path)
            return None
        stored = joblib.load(io.BytesIO(payload))
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
        buffer = io.BytesIO()
        joblib.dump({"key": key.fields(), "monitor": monitor}, buffer)
        payload = buffer.getvalue()
        with atomic_path(path) as tmp:
            tmp.write_bytes(_signature(payload) + payload)
        for other in path.parent.glob("*.joblib"):
            if not other.name.startswith(key.prefix):
                other.unlink(missing_ok=True)
    except OSError as err:
        log.warning("monitor cache not written to %s (%s)", path.parent, err.strerror or err)
        return None
    return path
