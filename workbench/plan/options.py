"""The plan's options, read and checked before anything heavy loads (``workbench plan``
refuses a bad option without importing the engine)."""

from __future__ import annotations

import os
from dataclasses import dataclass

from ..study.spec import Study
from ..validation import check_number

WHERE = "command line"
# Resampled studies per candidate replicate count in the power search.
RESAMPLES = 1000


@dataclass(frozen=True)
class PlanOptions:
    """What the plan aims for; every value is checked with the one validation helper.

    ``half_width`` of the recovery interval, ``power`` to tell apart two settings whose
    evaluations to target differ by ``difference`` evaluations (None: derived from the pilot,
    :func:`workbench.plan.estimate.pilot_difference`), at ``confidence`` (the test's
    level is 1 − confidence); ``pilot_replicates`` per pilot cell; ``cap`` on the replicates;
    ``workers`` Dask workers for the cluster estimate; ``jobs`` local workers (None: all cores).
    """

    half_width: float = 0.1
    power: float = 0.8
    difference: float | None = None
    confidence: float = 0.95
    pilot_replicates: int = 4
    cap: int = 64
    workers: int = 4
    jobs: int | None = None
    resamples: int = RESAMPLES

    def __post_init__(self):
        check_number(self.half_width, "--half-width", low=0, high=0.5, closed="right", where=WHERE)
        check_number(self.power, "--power", low=0, high=1, closed="neither", where=WHERE)
        if self.difference is not None:
            check_number(self.difference, "--difference", low=0, closed="right", where=WHERE)
        check_number(self.confidence, "--confidence", low=0, high=1, closed="neither", where=WHERE)
        check_number(self.pilot_replicates, "--pilot-replicates", low=2, integer=True, where=WHERE)
        check_number(self.cap, "--cap", low=1, integer=True, where=WHERE)
        check_number(self.workers, "--workers", low=1, integer=True, where=WHERE)
        if self.jobs is not None:
            check_number(self.jobs, "--jobs", low=1, integer=True, where=WHERE)
        check_number(self.resamples, "resamples", low=10, integer=True, where=WHERE)

    @classmethod
    def from_text(cls, **values: str | None) -> PlanOptions:
        """Options from command-line text: numbers are read here, checked in ``__init__``
        (text that is no number is passed on as is, so the message names it)."""
        return cls(**{k: _number(v) for k, v in values.items() if v is not None})

    def check(self, study: Study) -> None:
        """The checks that need the study: a difference the budget can show."""
        if self.difference is None:
            return
        check_number(
            self.difference,
            "--difference",
            low=0,
            high=study.budget - 1,
            closed="right",
            where=WHERE,
        )

    @property
    def alpha(self) -> float:
        return 1 - self.confidence


def _number(text):
    if not isinstance(text, str):
        return text
    for kind in (int, float):
        try:
            return kind(text)
        except ValueError:
            continue
    return text


def parallel_processes(jobs: int | None, cores: int | None = None) -> int:
    """Processes that run at once: the jobs asked for, at most the cores."""
    cores = cores or os.cpu_count() or 1
    return max(1, min(jobs or cores, cores))
