"""What a command shows on stderr while it works, in a terminal only.

- :class:`CampaignBar`: a progress bar over campaigns (run, demo, transfer, simulate). Its
  rate and time left count only the campaigns computed in this call: those resumed from an
  earlier run are its starting point, not speed.
- :func:`status`: one line that says what a command without a bar is doing and for how long
  (plan's pilot, report, audit, monitor's first training), cleared when the command prints.

Nothing is shown when stderr is not a terminal (a pipe, a log file, a test), so output that
is read by programs is unchanged.
"""

from __future__ import annotations

import contextlib
import sys
import threading
import time
from collections.abc import Iterator
from typing import TextIO

__all__ = ["STATUS", "CampaignBar", "status"]

# What each command is doing until it prints (a bar or its result takes over the line).
STATUS = {
    "belief": "describing the belief",
    "simulate": "starting the campaigns",
    "check": "reading the study and timing a probe",
    "plan": "running the pilot and writing the plan",
    "run": "reading the study and its results folder",
    "demo": "reading the demo study and its results folder",
    "transfer": "reading the study and its results folder",
    "audit": "checking the belief against the earlier evaluations",
    "monitor": "reading the campaign against the grid (its first reading trains the monitor)",
    "decide": "bootstrapping the decision",
    "report": "computing the report: bootstrap intervals, figures",
}


def _terminal(stream: TextIO) -> bool:
    return bool(getattr(stream, "isatty", lambda: False)())


class CampaignBar:
    """``update(done, total)``, the runner's progress callback, drawn as a tqdm bar.

    The first call's ``done`` (campaigns resumed from disk) is the bar's ``initial``: tqdm's
    rate is then (n - initial) / elapsed, smoothed over this call's updates only.
    """

    def __init__(self, quiet: bool = False, stream: TextIO | None = None, unit="campaign"):
        self.stream = sys.stderr if stream is None else stream
        self.shown = not quiet and _terminal(self.stream)
        self.unit = unit
        self.bar = None

    def update(self, done: int, total: int) -> None:
        if not self.shown:
            return
        if self.bar is None:
            from tqdm import tqdm

            self.bar = tqdm(
                total=total,
                initial=done,
                unit=self.unit,
                desc=f"{self.unit}s",
                file=self.stream,
            )
            return
        self.bar.total = total
        if done > self.bar.n:
            self.bar.update(done - self.bar.n)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
            self.bar = None

    def __enter__(self) -> CampaignBar:
        return self

    def __exit__(self, *exc) -> None:
        self.close()


class _Ticker:
    """The status line: ``workbench: TEXT … 12 s``, redrawn every second in a thread."""

    def __init__(self, text: str, stream: TextIO, every: float = 1.0):
        self.text, self.stream, self.every = text, stream, every
        self.start = time.monotonic()
        self.stopped = threading.Event()
        self.lock = threading.Lock()
        self.drawn = False
        self.thread = threading.Thread(target=self._loop, name="workbench-status", daemon=True)

    def _loop(self) -> None:
        while not self.stopped.wait(self.every):
            with self.lock:
                if self.stopped.is_set():
                    return
                seconds = time.monotonic() - self.start
                self.stream.write(f"\r\x1b[Kworkbench: {self.text} … {seconds:.0f} s")
                self.stream.flush()
                self.drawn = True

    def stop(self) -> None:
        """End the line for good (idempotent): erase it so the command's output starts clean."""
        with self.lock:
            if self.stopped.is_set():
                return
            self.stopped.set()
            if self.drawn:
                self.stream.write("\r\x1b[K")
                self.stream.flush()


class _Watched:
    """A text stream that ends the status line before its first write."""

    def __init__(self, stream: TextIO, ticker: _Ticker):
        self._stream, self._ticker = stream, ticker

    def write(self, text: str) -> int:
        self._ticker.stop()
        return self._stream.write(text)

    def __getattr__(self, name: str):
        return getattr(self._stream, name)


@contextlib.contextmanager
def status(text: str | None, stream: TextIO | None = None, every: float = 1.0) -> Iterator[None]:
    """Show ``text`` and the seconds elapsed on one line of ``stream`` (stderr) while the block
    runs, in a terminal only; the line goes away when the block ends or first writes to
    stdout or stderr (a bar or a result takes over)."""
    stream = sys.stderr if stream is None else stream
    if text is None or not _terminal(stream):
        yield
        return
    ticker = _Ticker(text, stream, every)
    out, err = sys.stdout, sys.stderr
    sys.stdout = _Watched(out, ticker)
    if stream is err:
        sys.stderr = _Watched(err, ticker)
    ticker.thread.start()
    try:
        yield
    finally:
        ticker.stop()
        sys.stdout, sys.stderr = out, err
