"""Decay schedules: the belief exponent λ(t) ≥ 0 as a function of evaluations spent t.

Written ``family:value`` on the command line and in studies, for example ``hyperbolic:10``:

=============  ==================  ================================================
family         λ(t)                value
=============  ==================  ================================================
hyperbolic     β / t               β > 0: the belief counts as β evaluations' worth
exponential    exp(−t / τ)         τ > 0: evaluations for the weight to fall by e
step           1 if t ≤ k else 0   k ≥ 1: evaluations the belief is trusted for
linear         max(0, 1 − t / T)   T > 0: evaluations until the belief is ignored
constant       c                   c ≥ 0: the belief never washes out
=============  ==================  ================================================
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..validation import InputError, check_choice, check_number, raw

__all__ = ["FAMILIES", "Schedule", "parse"]

FAMILIES = ("hyperbolic", "exponential", "step", "linear", "constant")


@dataclass(frozen=True)
class Schedule:
    """One decay schedule: a family and its single parameter."""

    family: str
    value: float

    def __post_init__(self):
        check_choice(self.family, "decay", FAMILIES)
        if self.family == "constant":
            check_number(self.value, "decay", low=0.0)
        elif self.family == "step":
            check_number(self.value, "decay", low=1.0, integer=True)
        else:
            check_number(self.value, "decay", low=0.0, closed="right")
        object.__setattr__(self, "value", float(self.value))

    def __call__(self, t) -> np.ndarray:
        """λ at evaluations spent ``t`` (scalar or array, t ≥ 1)."""
        t = np.asarray(t, dtype=float)
        v = self.value
        if self.family == "hyperbolic":
            out = v / np.maximum(t, 1.0)
        elif self.family == "exponential":
            out = np.exp(-t / v)
        elif self.family == "step":
            out = (t <= v).astype(float)
        elif self.family == "linear":
            out = np.maximum(0.0, 1.0 - t / v)
        else:
            out = np.full_like(t, v)
        return out

    def __str__(self) -> str:
        return f"{self.family}:{self.value:g}"


def parse(text, key: str = "decay") -> Schedule:
    """A schedule from ``family:value``; errors name ``key`` and list the families."""
    if isinstance(text, Schedule):
        return text
    if not isinstance(text, str) or text.count(":") != 1:
        raise InputError(key, "'family:value', for example 'hyperbolic:10'", text)
    family, _, value = text.partition(":")
    family = family.strip()
    check_choice(family, key, FAMILIES)
    try:
        number = float(value)
    except ValueError:
        raise InputError(key, f"a number after '{family}:'", raw(repr(value))) from None
    if family == "step" and number.is_integer():
        number = int(number)
    try:
        return Schedule(family, number)
    except InputError as err:
        raise InputError(key, err.expected + f" after '{family}:'", number) from None
