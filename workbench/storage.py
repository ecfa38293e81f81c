"""Files on disk: every result is written to a temporary file first, then renamed into place,
so an interrupted run never leaves a half-written result behind."""

from __future__ import annotations

import contextlib
import errno
import hashlib
import os
import tempfile
from collections.abc import Callable, Iterator
from pathlib import Path

from .validation import InputError, raw

__all__ = [
    "FolderBusy",
    "atomic_path",
    "folder_lock",
    "read_input",
    "remove_parts",
    "sha256_of",
    "write_text",
]


@contextlib.contextmanager
def atomic_path(path: str | Path) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path`` atomically."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".part", dir=path.parent)
    os.close(fd)
    # mkstemp makes the file private (0600); a result should get the usual permissions.
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(tmp, 0o666 & ~umask)
    try:
        yield Path(tmp)
        os.replace(tmp, path)
    finally:
        with contextlib.suppress(FileNotFoundError):
            os.unlink(tmp)


def read_input(path: str | Path, key: str, what: str, max_bytes: int) -> bytes:
    """The bytes of the user's file at ``path`` (``what`` names it: "a CSV file"), refused
    with an ``InputError`` under ``key`` naming the file unless it is a regular file of at most
    ``max_bytes``: a device such as /dev/zero or /dev/urandom never ends, and a folder or a
    pipe is not a file to read."""
    path = Path(path)
    where = str(path)
    try:
        if not path.exists():
            raise InputError(key, "an existing file", raw(f"no file at {where}"), where)
        if not path.is_file():
            raise InputError(
                key, f"{what} (a regular file)", raw("a device, pipe or folder"), where
            )
        with open(path, "rb") as fh:
            data = fh.read(max_bytes + 1)
    except OSError as err:
        got = raw(err.strerror or str(err))
        raise InputError(key, f"{what} that can be read", got, where) from None
    if len(data) > max_bytes:
        raise InputError(
            key,
            f"{what} of at most {max_bytes / 2**20:g} MiB (the limit on an input file)",
            raw(f"a larger file ({path.stat().st_size / 2**20:.3g} MiB)"),
            where,
        )
    return data


def write_text(path: str | Path, text: str) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically."""
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(path)


def sha256_of(path: str | Path) -> str:
    """The SHA-256 of a file's bytes, as hex (read in 1 MiB pieces, memory stays flat)."""
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for piece in iter(lambda: fh.read(1 << 20), b""):
            digest.update(piece)
    return digest.hexdigest()


def remove_parts(folder: str | Path, match: Callable[[str], bool]) -> int:
    """Remove the temporary files of :func:`atomic_path` in ``folder`` whose final name
    satisfies ``match``: what a killed run left behind. Returns how many went; a file that
    cannot be removed (a read-only folder) stays."""
    folder = Path(folder)
    if not folder.is_dir():
        return 0
    gone = 0
    for entry in folder.iterdir():
        name = entry.name
        if not (name.startswith(".") and name.endswith(".part")) or not entry.is_file():
            continue
        # ".NAME.RANDOM.part": the final name is what lies between the dots around RANDOM.
        final = name[1 : name.rfind(".", 0, len(name) - len(".part"))]
        if match(final):
            with contextlib.suppress(OSError):
                entry.unlink()
                gone += 1
    return gone


class FolderBusy(RuntimeError):
    """Another process holds the lock of a folder; ``pid`` is its process id (None if it
    did not write one)."""

    def __init__(self, path: Path, pid: int | None):
        self.path = path
        self.pid = pid
        super().__init__(f"{path} is locked by process {pid}")


@contextlib.contextmanager
def folder_lock(path: str | Path) -> Iterator[bool]:
    """Hold an exclusive, non-blocking ``flock`` on the lock file ``path`` for the block.

    Yields True when locked. The lock file is created if missing (and then holds the
    holder's process id); where it cannot be created (a read-only folder) nothing can write
    there either, and the block runs unlocked (yields False). The kernel releases the lock
    when the holder exits, however it ends, so a killed run never leaves a stale lock. The
    file itself stays: removing it would let two runs lock two different files.

    Raises :class:`FolderBusy` when another process holds it.
    """
    import fcntl

    path = Path(path)
    try:
        fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o666)
    except OSError as err:
        if err.errno not in (errno.EACCES, errno.EPERM, errno.EROFS):
            raise
        try:
            # flock needs no write access: an existing lock file still locks.
            fd = os.open(path, os.O_RDONLY)
        except FileNotFoundError:
            yield False
            return
    try:
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise FolderBusy(path, _holder(fd)) from None
        with contextlib.suppress(OSError):
            pid = f"{os.getpid()}\n".encode()
            os.pwrite(fd, pid, 0)
            os.ftruncate(fd, len(pid))
        yield True
    finally:
        os.close(fd)


def _holder(fd: int) -> int | None:
    try:
        text = os.pread(fd, 32, 0).decode("ascii", "replace").strip()
    except OSError:
        return None
    return int(text) if text.isdigit() else None
