"""Metrics of campaigns, as pure functions over arrays whose last axis is ``evaluation``.

The xarray versions over the grid Dataset live in :mod:`workbench.analysis`.
"""

from __future__ import annotations

import numpy as np

__all__ = ["evaluations_to_target", "log_regret_area"]

# Normalized regret is floored here before taking logs (a found optimum has regret 0).
LOG_FLOOR = 1e-8


def evaluations_to_target(normalized_regret, target: float) -> tuple[np.ndarray, np.ndarray]:
    """First evaluation t (1-based) at which normalized regret ≤ ``target``, and whether it was
    reached; where it was not, the value is the budget (censored there)."""
    nr = np.asarray(normalized_regret, dtype=float)
    hit = np.nan_to_num(nr, nan=np.inf) <= target
    reached = hit.any(axis=-1)
    first = np.where(reached, hit.argmax(axis=-1) + 1, nr.shape[-1])
    return first.astype(float), reached


def log_regret_area(normalized_regret) -> np.ndarray:
    """Mean over evaluations of log10(max(normalized regret, 1e-8)): the area under the log
    normalized-regret curve divided by the budget (lower is better)."""
    nr = np.asarray(normalized_regret, dtype=float)
    return np.nanmean(np.log10(np.maximum(nr, LOG_FLOOR)), axis=-1)
