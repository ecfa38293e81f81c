"""What the table builders share: geometric grids, the table file and its random rows.

A table is a data CSV that ``workbench.world.history.read_history`` accepts: comment lines
starting with ``#`` (where the numbers come from and how to rebuild them), a header with one
column per parameter in user units and one response column, then one row per configuration.
"""

from __future__ import annotations

import csv
import itertools
import logging
import time
from collections.abc import Callable, Sequence
from pathlib import Path

import numpy as np

from workbench.storage import write_text

__all__ = [
    "RESPONSE_DIGITS",
    "build",
    "configurations",
    "geometric",
    "pick_rows",
    "read_table",
    "render",
]

log = logging.getLogger(__name__)

RESPONSE_DIGITS = 10  # significant digits of a written response
ROWS = 20  # rows of a table handed to a study's fitted landscape


def geometric(anchor: float, low: int, high: int, per_decade: int) -> tuple[float, ...]:
    """``anchor · 10^(k / per_decade)`` for ``k = low·per_decade … high·per_decade``.

    Values are rounded to 6 significant digits, and the rounded value is what gets measured,
    so the table's user units are exact; the grid stays geometric to 1 part in 10^6.
    """
    ks = range(low * per_decade, high * per_decade + 1)
    return tuple(float(f"{anchor * 10 ** (k / per_decade):.6g}") for k in ks)


def configurations(grid: dict[str, Sequence]) -> list[dict]:
    """Every combination of the grid's levels, the last parameter varying fastest."""
    names = list(grid)
    return [dict(zip(names, values, strict=True)) for values in itertools.product(*grid.values())]


def _cell(value) -> str:
    if isinstance(value, str):
        return value
    if isinstance(value, (int, np.integer)):
        return str(int(value))
    return f"{value:.6g}"


def render(comments: Sequence[str], names: Sequence[str], response: str, rows) -> str:
    """The table as text: ``# comment`` lines, the header, one line per row."""
    lines = [f"# {c}".rstrip() for c in comments]
    lines.append(",".join([*names, response]))
    for config, value in rows:
        cells = [_cell(config[n]) for n in names]
        lines.append(",".join([*cells, f"{value:.{RESPONSE_DIGITS}g}"]))
    return "\n".join(lines) + "\n"


def pick_rows(n: int, seed: int, size: int = ROWS) -> np.ndarray:
    """Indices of ``size`` distinct rows out of ``n``, drawn with ``seed``, in table order."""
    return np.sort(np.random.default_rng(seed).choice(n, size=size, replace=False))


def build(
    out: Path,
    name: str,
    grid: dict[str, Sequence],
    response: str,
    measure: Callable[[dict], float],
    comments: Sequence[str],
    rows_seed: int,
) -> Path:
    """Measure every configuration once; write ``<name>.csv`` and ``<name>-rows.csv``."""
    configs = configurations(grid)
    start = time.perf_counter()
    rows = []
    for i, config in enumerate(configs, start=1):
        rows.append((config, measure(config)))
        if i % 100 == 0 or i == len(configs):
            log.info("%s: %d of %d (%.0f s)", name, i, len(configs), time.perf_counter() - start)
    names = list(grid)
    table = write_text(out / f"{name}.csv", render(comments, names, response, rows))
    chosen = pick_rows(len(rows), rows_seed)
    head = [
        f"{ROWS} rows of {name}.csv drawn without replacement with seed {rows_seed}",
        "(numpy.random.default_rng(seed).choice); see that file for how they were measured.",
        *comments,
    ]
    write_text(out / f"{name}-rows.csv", render(head, names, response, [rows[i] for i in chosen]))
    return table


def read_table(path: str | Path) -> tuple[list[str], list[list[str]]]:
    """Header and rows of a table, as text, comment lines skipped."""
    text = Path(path).read_text(encoding="utf-8")
    lines = [line for line in text.splitlines() if line.strip() and not line.startswith("#")]
    reader = csv.reader(lines)
    return next(reader), list(reader)
