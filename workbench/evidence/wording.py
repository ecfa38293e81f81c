"""The words the audit and the monitor share: where both name the simulated distortion the
evidence is most like, they say it in the same words, and each says in one line why the other
may name another one (they read different evidence).

- the audit reads **where the earlier data put the optimum**: the median of the optimum draws
  of a GP fitted to the data, against each distortion's mean severity (distance from the
  belief's mode, belief mass near the optimum);
- the monitor reads **how a live campaign has moved**: its features after t evaluations,
  against the grid's simulated campaigns under each distortion.
"""

from __future__ import annotations

__all__ = ["MOST_LIKE", "READINGS", "WHY_THEY_DIFFER", "most_like"]

MOST_LIKE = "most like the simulated distortion"
# What each command reads, in the words both print.
READINGS = {
    "audit": "where the earlier data put the optimum",
    "monitor": "how the live campaign has moved",
}
WHY_THEY_DIFFER = (
    "the audit and the monitor may name different distortions: the audit reads "
    f"{READINGS['audit']} (against each distortion's distance from the belief's mode and "
    f"belief mass near the optimum), the monitor {READINGS['monitor']} (against the grid's "
    "campaigns under each distortion)"
)


def most_like(distortion: str, reading: str, detail: str) -> str:
    """``most like the simulated distortion 'NAME' by READING (DETAIL)``, ``reading`` one of
    :data:`READINGS`' keys."""
    return f"{MOST_LIKE} '{distortion}' by {READINGS[reading]} ({detail})"
