"""The user's function evaluated in a child process of its own, under a time limit.

A function is the user's code: it may raise anything (``SystemExit`` and
``KeyboardInterrupt`` included), end its process (``os._exit``, a segmentation fault) or never
return. Each of these is one failed evaluation, never the end of a run, so the function runs in
a long-lived child process per calling process (a worker of the run, or ``check``):

- the child imports the file once, then evaluates batches of points sent over a pipe and
  answers one result per point as it finishes: ``(True, value)`` for a real finite number,
  ``(False, message)`` otherwise (an exception; a string, None, a bool, a complex number, an
  array of more than one value; NaN or infinity);
- the caller waits at most ``time_limit`` seconds for each result; a child that runs over it
  is killed, a child whose process ends is noted, and either is started again for the points
  left;
- the child ignores the terminal's interrupt, so a Ctrl-C reaches the run as the user's
  interrupt while a ``KeyboardInterrupt`` raised inside the function is a failure; it ends
  when its caller's process ends.

The child is a fresh interpreter (``python -m workbench.world.isolation``) talking pickles
over its standard input and output (the function's own prints go to standard error), so
nothing of the caller's ``__main__`` is run again and a daemonic worker may start it too.
Only the standard library is imported here: a restart costs an interpreter's start-up and
the import of the user's file.
"""

from __future__ import annotations

import atexit
import contextlib
import inspect
import math
import numbers
import os
import pickle
import queue
import signal
import struct
import subprocess
import sys
import threading
import time
from dataclasses import dataclass
from functools import cache
from pathlib import Path

__all__ = ["DEFAULT_TIME_LIMIT", "Evaluator", "Signature", "evaluator"]

# Seconds one evaluation of the user's function may take before it counts as failed.
DEFAULT_TIME_LIMIT = 10.0
# How often a child looks whether its caller is alive (seconds).
_WATCH = 0.5
# Seconds a child may take to start and import the user's file (beside the time limit).
_START = 60.0


@dataclass(frozen=True)
class Signature:
    """How the user's function takes a point: ``text`` its signature as written,
    ``one_dict`` whether it takes one dict, ``binds`` whether it accepts the space's
    parameter names as keywords (or one dict)."""

    text: str
    one_dict: bool
    binds: bool


def _describe(err: BaseException) -> str:
    text = str(err).strip().splitlines()
    return f"{type(err).__name__}: {text[0]}" if text else type(err).__name__


def _number(value) -> tuple[bool, float | str]:
    """A result as ``(True, float)`` if it is a real finite number (a Python or NumPy real,
    or a 0-d or one-element real array), else ``(False, why)``."""
    if getattr(value, "shape", None) in ((), (1,)) and getattr(value, "dtype", None) is not None:
        if value.dtype.kind in "iuf":
            value = value.reshape(()).item()
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        shown = repr(value)
        shown = shown if len(shown) <= 40 else shown[:37] + "..."
        return False, f"returned {shown} ({type(value).__name__}), not a real number"
    number = float(value)
    if not math.isfinite(number):
        return False, f"returned {number}"
    return True, number


def _signature(function, names: tuple[str, ...]) -> Signature:
    try:
        sig = inspect.signature(function)
    except (TypeError, ValueError):
        return Signature("(...)", False, True)
    params = sig.parameters
    one_dict = len(params) == 1 and next(iter(params)) not in names
    if one_dict:
        kind = next(iter(params.values())).kind
        one_dict = kind in (inspect.Parameter.POSITIONAL_ONLY, kind.POSITIONAL_OR_KEYWORD)
    try:
        sig.bind(**dict.fromkeys(names))
        binds = True
    except TypeError:
        binds = one_dict
    return Signature(str(sig), one_dict, binds)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:
        return True
    return True


def _watch(caller: int) -> None:
    """End this child when its caller's process is gone (POSIX; elsewhere the pipe's end
    does it once the current evaluation returns)."""
    if os.name != "posix":
        return

    def watch() -> None:
        while _alive(caller):
            time.sleep(_WATCH)
        os._exit(1)

    threading.Thread(target=watch, name="workbench-function-watch", daemon=True).start()


def _write(stream, message) -> None:
    data = pickle.dumps(message, protocol=pickle.HIGHEST_PROTOCOL)
    stream.write(struct.pack("<Q", len(data)) + data)
    stream.flush()


def _read(stream):
    """One message, or raise EOFError when the other end is gone."""
    head = stream.read(8)
    if len(head) < 8:
        raise EOFError
    size = struct.unpack("<Q", head)[0]
    data = stream.read(size)
    if len(data) < size:
        raise EOFError
    return pickle.loads(data)


def _serve(path: str, name: str, names: tuple[str, ...], caller: int) -> None:
    """The child: import, answer the signature, then evaluate batches until the pipe ends."""
    signal.signal(signal.SIGINT, signal.SIG_IGN)
    _watch(caller)
    source, sink = sys.stdin.buffer, os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)  # the function's prints go to standard error, not into the answers
    import importlib.util

    try:
        spec = importlib.util.spec_from_file_location("workbench_function", path)
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        function = getattr(module, name)
        sig = _signature(function, names)
    except BaseException as err:  # the user's import may raise anything
        _write(sink, (False, f"importing {Path(path).name} failed: {_describe(err)}"))
        return
    _write(sink, (True, (sig.text, sig.one_dict, sig.binds)))  # plain: __main__ here
    while True:
        try:
            batch = _read(source)
        except (EOFError, OSError):
            return
        for point in batch:
            try:
                value = function(point) if sig.one_dict else function(**point)
                answer = _number(value)
            except BaseException as err:  # SystemExit, KeyboardInterrupt too
                answer = (False, f"raised {_describe(err)}")
            try:
                _write(sink, answer)
            except (BrokenPipeError, OSError):
                return


def _ended(code: int | None) -> str:
    if code is None:
        return "its process stopped answering"
    if code < 0:
        try:
            return f"its process was killed by {signal.Signals(-code).name}"
        except ValueError:
            return f"its process was killed by signal {-code}"
    return f"its process exited with code {code}"


def _reader(stream, answers: queue.Queue) -> None:
    """Move the child's answers to a queue (so waiting for one can time out); None at EOF."""
    while True:
        try:
            answers.put(_read(stream))
        except Exception:  # EOF, a broken pipe or message: the child is gone
            answers.put(None)
            return


class Evaluator:
    """The function ``name`` of the file ``path`` in a child process, each evaluation within
    ``time_limit`` seconds; ``names`` the space's parameter names.

    :meth:`evaluate` returns one ``(value, message)`` per point: a float and None, or None and
    why the evaluation failed. The child is started on first use and again after it dies or
    runs over the limit; :meth:`close` ends it (it also ends with the calling process)."""

    def __init__(self, path: str, name: str, names: tuple[str, ...], time_limit: float):
        self.path, self.name, self.names = path, name, tuple(names)
        self.time_limit = float(time_limit)
        self._process: subprocess.Popen | None = None
        self._answers: queue.Queue | None = None
        self._owner = os.getpid()
        self.signature: Signature | None = None

    def _wait(self, seconds: float):
        """The next answer; "timeout" after ``seconds``; None when the child has ended."""
        try:
            return self._answers.get(timeout=seconds)
        except queue.Empty:
            return "timeout"

    def _start(self) -> str | None:
        """Start the child; None, or why it could not start (its import failed or crashed)."""
        if self._owner != os.getpid():  # a copy made by fork: the child is not ours
            self._process, self._answers, self._owner = None, None, os.getpid()
        if self._process is not None:
            return None
        package = str(Path(__file__).resolve().parents[2])
        env = dict(os.environ)
        env["PYTHONPATH"] = os.pathsep.join(filter(None, [package, env.get("PYTHONPATH")]))
        process = subprocess.Popen(
            [sys.executable, "-m", __name__, self.path, self.name, str(os.getpid()), *self.names],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            env=env,
        )
        self._process, self._answers = process, queue.Queue()
        threading.Thread(target=_reader, args=(process.stdout, self._answers), daemon=True).start()
        answer = self._wait(_START + self.time_limit)
        if answer is None or answer == "timeout":
            code = self._end()
            return f"importing {Path(self.path).name}: {_ended(code)}"
        ok, answer = answer
        if not ok:
            self._end()
            return answer
        self.signature = Signature(*answer)
        return None

    def _end(self) -> int | None:
        """End the child (if any); its exit code."""
        process = self._process
        self._process = self._answers = None
        if process is None or self._owner != os.getpid():
            return None
        with contextlib.suppress(OSError):
            process.stdin.close()  # the child's loop ends at the end of its input
        try:
            code = process.wait(0.2)
        except subprocess.TimeoutExpired:
            process.kill()
            code = process.wait()
        with contextlib.suppress(OSError):
            process.stdout.close()
        return code

    def close(self) -> None:
        """End the child (if any)."""
        self._end()

    def evaluate(self, points: list[dict]) -> list[tuple[float | None, str | None]]:
        """The function at each point (``{name: value}`` in user units), in order."""
        out: list[tuple[float | None, str | None]] = []
        while len(out) < len(points):
            failed = self._start()
            if failed is not None:
                return out + [(None, failed)] * (len(points) - len(out))
            out.extend(self._batch(points[len(out) :]))
        return out

    def _batch(self, points: list[dict]) -> list[tuple[float | None, str | None]]:
        """Send the points; collect results until all are in, or the child dies or runs over
        the limit (that point failed, the child is ended; the caller sends the rest)."""
        out: list[tuple[float | None, str | None]] = []
        try:
            _write(self._process.stdin, points)
        except OSError:
            return [(None, _ended(self._end()))]
        for _ in points:
            answer = self._wait(self.time_limit)
            if answer == "timeout":
                self._process.kill()
                self._end()
                return [*out, (None, f"took longer than the time limit of {self.time_limit:g} s")]
            if answer is None:
                return [*out, (None, _ended(self._end()))]
            ok, value = answer
            out.append((value, None) if ok else (None, value))
        return out


@cache
def _cached(path: str, name: str, names: tuple[str, ...], time_limit: float, _mtime: int):
    made = Evaluator(path, name, names, time_limit)
    atexit.register(made.close)  # end the child (and close its pipes) with this process
    return made


def evaluator(path: str, name: str, names: tuple[str, ...], time_limit: float) -> Evaluator:
    """This process's evaluator of the function (one child per process and function; a
    changed file gets a new one)."""
    return _cached(path, name, tuple(names), float(time_limit), Path(path).stat().st_mtime_ns)


if __name__ == "__main__":
    _serve(sys.argv[1], sys.argv[2], tuple(sys.argv[4:]), int(sys.argv[3]))
