"""Earlier evaluations of the real process: a CSV table read and checked against the study.

One column per parameter of the study's ``[space]`` (user units; categorical levels by name),
one response column, and nothing else; lines starting with ``#`` are comments (say there where
the data come from, or that they are invented). Every cell is checked: a missing or unknown
column, a cell that is not a number (or is NaN), a value outside the parameter's bounds, an
unknown categorical level, too few rows or a constant response give one line naming the file,
the line of the file (1 = the header) and the column, and nothing is read.

The table becomes cube points and values in the minimising orientation (``goal = "maximise"``
negates the response), ready for the GP. :func:`read_table` reads any table of parameter
columns plus named numeric columns with the same checks (a table of measured configurations,
for example).
"""

from __future__ import annotations

import csv
import hashlib
import math
import re
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from .. import gp
from ..storage import read_input

# InputError here on purpose: read_history reads the user's own CSV file, so it is a reader at
# the edge (it names the file, line and column), not a constructor of cube-level values.
from ..validation import InputError, closest, raw
from .space import Categorical, Integer, Space

__all__ = [
    "BEST_SHARE",
    "FAR_FROM_DATA",
    "GOALS",
    "HYPER_ROWS",
    "MAX_FILE_BYTES",
    "MAX_FIT_ROWS",
    "MAX_ROWS",
    "History",
    "Table",
    "distance_to_data",
    "fit_to_rows",
    "fitting_fields",
    "fitting_source",
    "fitting_subset",
    "read_history",
    "read_table",
]

GOALS = ("minimise", "maximise")
# An optimum farther than this (Euclidean, in cube units: fractions of each parameter's range)
# from every earlier evaluation lies far outside the data: a GP fitted to them extrapolates
# there, so its optimum is the model's guess, not the data's.
FAR_FROM_DATA = 0.2
# Size limits of a CSV table, checked as it is read: its bytes and its data rows.
MAX_FILE_BYTES = 50 * 2**20
MAX_ROWS = 100_000
# A GP fitted to the data (fitted and likedata landscapes, the audit, resemblance) conditions on
# up to this many rows; above it, on this many chosen by a rule (:func:`fitting_subset`): its
# cost grows as n³ and its memory as n², and a few hundred evaluations pin a smooth response
# down.
MAX_FIT_ROWS = 500
# A GP's hyper-parameters are fitted by maximum likelihood to at most this many of those rows
# (:func:`fit_to_rows`): the fit takes hundreds of n × n factorisations, the conditioning one
# (at 250 rows the fit alone took about 12 s of a busy 2-core machine; at 128, one eighth).
HYPER_ROWS = 128
# The share of a subset taken as the best rows by response (where the optimum is decided); the
# rest fill the space.
BEST_SHARE = 0.25
# A number as a CSV cell writes it: digits, an optional point and exponent (no '1_000', 'nan',
# 'inf', hex or non-ASCII digits, all of which float() accepts).
_NUMBER = re.compile(r"[+-]?([0-9]+(\.[0-9]*)?|\.[0-9]+)([eE][+-]?[0-9]+)?")
# How much of a cell or header a message quotes.
_EXCERPT = 40


@dataclass(frozen=True)
class History:
    """Evaluations as the model sees them.

    ``X`` cube points (n, d); ``y`` values to minimise (n,); ``response`` the column's name and
    ``goal`` its direction; ``path`` the file; ``digest`` a hash of its bytes (so a grid can say
    which data it was built on); ``lines`` each row's line in the file (1 = the header), for
    messages.
    """

    X: np.ndarray = field(repr=False)
    y: np.ndarray = field(repr=False)
    response: str
    goal: str
    path: str
    digest: str
    lines: tuple[int, ...] = field(default=(), repr=False)

    def __hash__(self) -> int:
        return hash((self.path, self.digest, self.response, self.goal))

    def __eq__(self, other) -> bool:
        return isinstance(other, History) and (
            (self.path, self.digest, self.response, self.goal)
            == (other.path, other.digest, other.response, other.goal)
        )

    @property
    def rows(self) -> int:
        return len(self.y)

    def user_values(self) -> np.ndarray:
        """The response in the file's own orientation."""
        return -self.y if self.goal == "maximise" else self.y.copy()

    def fitting_rows(self, limit: int = MAX_FIT_ROWS) -> History:
        """At most ``limit`` rows for a GP fit: all of them, or those :func:`fitting_subset`
        chooses, in file order. The ``digest`` stays the file's."""
        if self.rows <= limit:
            return self
        keep = fitting_subset(self.X, self.y, limit)
        lines = tuple(self.lines[i] for i in keep) if self.lines else ()
        return replace(self, X=self.X[keep], y=self.y[keep], lines=lines)


def fit_to_rows(X: np.ndarray, y: np.ndarray, **options) -> gp.GP:
    """A GP fitted to earlier evaluations ``(X, y)`` (at most ``MAX_FIT_ROWS`` rows, as
    :meth:`History.fitting_rows` leaves them): with at most ``HYPER_ROWS`` rows,
    :func:`workbench.gp.fit` on all of them, exactly; with more, the hyper-parameters fitted
    (``gp.fit(..., **options)``) to the ``HYPER_ROWS`` rows :func:`fitting_subset` chooses, and
    the GP with them conditioned on every row (:func:`workbench.gp.posterior`)."""
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    keep = fitting_subset(X, y, HYPER_ROWS)
    if len(keep) == len(y):
        return gp.fit(X, y, **options)
    return gp.posterior(X, y, gp.fit(X[keep], y[keep], **options).hyperparameters)


def fitting_subset(
    X: np.ndarray, y: np.ndarray, limit: int = MAX_FIT_ROWS, best: float = BEST_SHARE
) -> np.ndarray:
    """The rows a GP is fitted to, as sorted indices: every row when there are at most
    ``limit``; otherwise the ``k = ⌈best · limit⌉`` rows of lowest ``y`` (ties by file order)
    and ``limit − k`` of the others chosen greedily by max-min distance: each next row is the
    one farthest (Euclidean, on the cube) from every row chosen so far, ties to the first.

    The best rows keep the model exact where the optimum is decided; the max-min rows bound the
    distance from any row to a chosen one (the fill distance), which bounds how far the
    posterior mean strays from the exact one elsewhere. Deterministic: no seed, the same in
    every process.
    """
    X = np.asarray(X, dtype=float)
    y = np.asarray(y, dtype=float)
    n = len(y)
    if n <= limit:
        return np.arange(n)
    k = min(limit, max(1, math.ceil(best * limit)))
    order = np.argsort(y, kind="stable")
    chosen, rest = list(order[:k]), order[k:]
    points = X[rest]
    # Squared distance from each remaining row to its nearest chosen row, in blocks of rows.
    nearest = np.full(len(rest), np.inf)
    for start in range(0, k, 256):
        block = X[order[start : min(k, start + 256)]]
        d = np.sum((points[:, None, :] - block[None, :, :]) ** 2, axis=-1)
        nearest = np.minimum(nearest, d.min(axis=1))
    for _ in range(limit - k):
        j = int(np.argmax(nearest))
        chosen.append(rest[j])
        nearest = np.minimum(nearest, np.sum((points - points[j]) ** 2, axis=1))
        nearest[j] = -1.0
    return np.sort(np.array(chosen))


def _excerpt(text: str) -> str:
    """A short, escaped quotation of file text for a message (``repr``: no control
    characters or line breaks reach the terminal; at most ``_EXCERPT`` characters)."""
    shown = repr(text[:_EXCERPT])
    return shown + "…" if len(text) > _EXCERPT else shown


def _header_words(header: list[str], name: str) -> str:
    """What a header without column ``name`` holds, in words: its size and the closest column
    name (only a name like the missing one is quoted, never the line itself)."""
    hint = closest(name, header)
    words = f"{len(header)} column(s), none of them {name!r}"
    return words + (f" (the closest is {_excerpt(hint)})" if hint else "")


def _number(text: str, where: str, key: str) -> float:
    text = text.strip()
    if not _NUMBER.fullmatch(text):
        raise InputError(key, "a number such as 12, -0.5 or 1e3", raw(_excerpt(text)), where)
    value = float(text)
    if not math.isfinite(value):
        raise InputError(key, "a finite number", raw(_excerpt(text)), where)
    return value


def _cell(param, text: str, where: str, key: str) -> float:
    """One parameter value, checked, as its cube coordinate."""
    text = text.strip()
    if isinstance(param, Categorical):
        if text not in param.choices:
            raise InputError(key, f"one of {', '.join(param.choices)}", raw(_excerpt(text)), where)
        return float(param.to_unit(np.array([text]))[0])
    value = _number(text, where, key)
    if isinstance(param, Integer) or param.integer:
        if value != int(value):
            raise InputError(key, "a whole number", raw(_excerpt(text)), where)
    if not param.lower <= value <= param.upper:
        raise InputError(
            key, f"a value in [{param.lower:g}, {param.upper:g}]", raw(_excerpt(text)), where
        )
    return float(param.to_unit(np.array([value]))[0])


@dataclass(frozen=True)
class Table:
    """A checked CSV table: ``X`` the parameter columns as cube points (n, d), ``columns`` each
    named numeric column (n,), ``path`` the file, ``digest`` a hash of its bytes and ``lines``
    each row's line in the file (1 = the header; comments and blank lines count)."""

    X: np.ndarray = field(repr=False)
    columns: dict[str, np.ndarray] = field(repr=False)
    path: str
    digest: str
    lines: tuple[int, ...] = field(default=(), repr=False)

    @property
    def rows(self) -> int:
        return len(self.X)


def read_table(
    path: str | Path,
    space: Space,
    columns: Sequence[str],
    *,
    min_rows: int = 1,
    rows_meaning: str = "data rows",
) -> Table:
    """Read the CSV table at ``path``: one column per parameter of ``space`` (user units,
    categorical levels by name), the numeric ``columns``, and nothing else; lines starting with
    ``#`` are comments.

    Every cell is checked; a wrong one raises :class:`InputError` naming the file, the line
    (as an editor counts: 1 = the first line, usually the header) and the column, and nothing
    is read. At least ``min_rows`` rows
    (``rows_meaning`` says why, in the message) must be there.
    """
    path = Path(path)
    where = str(path)
    raw_bytes = read_input(path, "data", "a CSV file", MAX_FILE_BYTES)
    try:
        text = raw_bytes.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError("data", "a UTF-8 text file", raw("undecodable bytes"), where) from None
    numbered = [
        (n, line)
        for n, line in enumerate(text.splitlines(), start=1)
        if line.strip() and not line.lstrip().startswith("#")
    ]
    lines = [line for _, line in numbered]
    if not lines:
        raise InputError("data", "a header row and data rows", raw("nothing"), where)
    if len(lines) - 1 > MAX_ROWS:
        raise InputError(
            "data",
            f"at most {MAX_ROWS} data rows (the limit on a table)",
            raw(f"{len(lines) - 1} rows"),
            where,
        )
    reader = csv.reader(lines)
    header = [h.strip() for h in next(reader)]
    expected = [*space.names, *columns]
    for name in expected:
        if name not in header:
            raise InputError(
                f"column '{name}'",
                "present in the header",
                raw(_header_words(header, name)),
                where,
            )
    for name in header:
        if header.count(name) > 1:
            raise InputError(
                f"column {_excerpt(name)}", "named once in the header", raw("twice"), where
            )
        if name not in expected:
            what = "the response" if len(columns) == 1 else "the named columns"
            raise InputError(
                f"column {_excerpt(name)}",
                f"one of the space's parameters or {what} ({', '.join(expected)})",
                raw("an unknown column"),
                where,
            )
    index = {name: header.index(name) for name in expected}
    X: list[list[float]] = []
    values: dict[str, list[float]] = {name: [] for name in columns}
    # One record per kept line: a table's cells do not span lines.
    for (n, _), row in zip(numbered[1:], reader, strict=False):
        if len(row) != len(header):
            raise InputError(f"line {n}", f"{len(header)} cells", raw(f"{len(row)} cells"), where)
        X.append(
            [
                _cell(p, row[index[p.name]], where, f"line {n}, column '{p.name}'")
                for p in space.parameters
            ]
        )
        for name in columns:
            values[name].append(_number(row[index[name]], where, f"line {n}, column '{name}'"))
    if len(X) < min_rows:
        raise InputError(
            "data", f"at least {min_rows} rows ({rows_meaning})", raw(f"{len(X)} rows"), where
        )
    return Table(
        X=np.array(X, dtype=float).reshape(len(X), space.dim),
        columns={name: np.array(v, dtype=float) for name, v in values.items()},
        path=where,
        digest=hashlib.sha256(raw_bytes).hexdigest()[:16],
        lines=tuple(n for n, _ in numbered[1 : len(X) + 1]),
    )


def read_history(
    path: str | Path,
    space: Space,
    response: str,
    goal: str = "minimise",
    min_rows: int | None = None,
) -> History:
    """Read and check the table at ``path`` against ``space`` (:func:`read_table` with one
    response column); see the module docstring.

    At least ``min_rows`` rows (default: the dimension plus two, what a GP fit needs) must be
    there; a GP's table must have a response that varies.
    """
    need = space.dim + 2 if min_rows is None else min_rows
    words = "the dimension plus two" if min_rows is None else "evaluations so far"
    table = read_table(path, space, [response], min_rows=need, rows_meaning=words)
    y = table.columns[response]
    if min_rows is None and np.ptp(y) == 0.0:  # a GP cannot be fitted to a constant
        raise InputError(
            f"column '{response}'", "a response that varies", raw(f"every row {y[0]:g}"), table.path
        )
    return History(
        X=table.X,
        y=-y if goal == "maximise" else y,
        response=response,
        goal=goal,
        path=table.path,
        digest=table.digest,
        lines=table.lines,
    )


def fitting_source(history: History, fit: History) -> str:
    """Where a GP's data came from, in words, saying when it saw a subsample of the rows."""
    name = Path(history.path).name
    if fit.rows <= HYPER_ROWS:
        return f"{history.rows} evaluations in {name}"
    hyper = f"hyper-parameters fitted to {HYPER_ROWS} of them"
    if fit.rows == history.rows:
        spread = "the best by response and the rest spread by max-min distance"
        return f"{history.rows} evaluations in {name} ({hyper}: {spread})"
    best = math.ceil(BEST_SHARE * fit.rows)
    return (
        f"{fit.rows} of the {history.rows} evaluations in {name} (a GP conditions on at most "
        f"{MAX_FIT_ROWS} rows: the {best} best and {fit.rows - best} spread by max-min "
        f"distance; {hyper})"
    )


def fitting_fields(history: History) -> dict:
    """What a landscape built on earlier evaluations keeps of them: the rows a GP is fitted to
    (cube points ``X``, values to minimise ``y``), where they came from, and the file's digest,
    response and goal."""
    fit = history.fitting_rows()
    return {
        "X": tuple(map(tuple, fit.X.tolist())),
        "y": tuple(fit.y.tolist()),
        "source": fitting_source(history, fit),
        "digest": history.digest,
        "response": history.response,
        "goal": history.goal,
    }


def distance_to_data(points: np.ndarray, X: np.ndarray) -> np.ndarray:
    """Distance from each cube point of ``points`` (m, d) to the nearest row of ``X`` (n, d):
    d_j = min_i ‖p_j − x_i‖ (Euclidean, cube units); compare with :data:`FAR_FROM_DATA`."""
    points, X = np.atleast_2d(points), np.atleast_2d(X)
    return np.min(np.linalg.norm(points[:, None, :] - X[None, :, :], axis=-1), axis=1)
