"""The one validation helper for every user-facing value.

Every check raises :class:`InputError`, whose message always has the same shape::

    studies/demo.toml: 'belief.temperature.spread' must be a number in (0, 1]; got -0.1

The CLI turns an ``InputError`` into that single line on stderr and exit code 2.
"""

from __future__ import annotations

import difflib
import math
from collections.abc import Iterable, Mapping
from numbers import Integral, Real
from typing import Any

__all__ = [
    "InputError",
    "check_choice",
    "check_keys",
    "check_number",
    "check_sequence",
    "check_size",
    "check_string",
    "check_table",
    "raw",
]


class InputError(ValueError):
    """A user-facing value is wrong.

    Parameters
    ----------
    key : str
        Dotted key (``belief.temperature.spread``) or option (``--quantile``).
    expected : str
        What was expected, in words.
    got : Any
        What was given; shown with ``repr`` unless ``got_text`` is given.
    where : str, optional
        The file or ``command line``; filled in by the edge that knows it.
    """

    def __init__(self, key: str, expected: str, got: Any = None, where: str | None = None):
        self.key = key
        self.expected = expected
        self.got = got
        self.where = where
        super().__init__(str(self))

    def __reduce__(self):
        # Rebuilt from its fields, so that an error raised in a worker process reaches the run.
        return type(self), (self.key, self.expected, self.got, self.where)

    def located(self, where: str) -> InputError:
        """The same error, naming the file or source it came from (kept if already set)."""
        return InputError(self.key, self.expected, self.got, self.where or where)

    def __str__(self) -> str:
        head = f"{self.where}: " if self.where else ""
        got = _show(self.got)
        return f"{head}'{self.key}' must be {self.expected}; got {got}"


def _show(value: Any) -> str:
    if isinstance(value, _Raw):
        return value.text
    text = repr(value)
    return text if len(text) <= 80 else text[:77] + "..."


class _Raw:
    """A 'got' text shown verbatim (for example 'nothing' or a list of unknown keys)."""

    def __init__(self, text: str):
        self.text = text


def raw(text: str) -> _Raw:
    """Mark a 'got' description to be shown as is, without quotes."""
    return _Raw(text)


def _bound(v: float) -> str:
    """A bound as written: an integer in full (a seed's limit has 19 digits), a float short."""
    return str(v) if isinstance(v, int) else f"{v:g}"


def _interval(low: float | None, high: float | None, closed: str) -> str:
    left = "[" if closed in ("both", "left") else "("
    right = "]" if closed in ("both", "right") else ")"
    lo = "-inf" if low is None else _bound(low)
    hi = "inf" if high is None else _bound(high)
    if low is None:
        left = "("
    if high is None:
        right = ")"
    return f"{left}{lo}, {hi}{right}"


def check_number(
    value: Any,
    key: str,
    *,
    low: float | None = None,
    high: float | None = None,
    closed: str = "both",
    integer: bool = False,
    where: str | None = None,
) -> float | int:
    """Return ``value`` as a float (or int) if it is a finite number in the interval.

    ``closed`` is one of ``both``, ``left``, ``right``, ``neither`` and says which ends
    of ``[low, high]`` are allowed.
    """
    noun = "an integer" if integer else "a number"
    if low is not None or high is not None:
        noun += f" in {_interval(low, high, closed)}"
    ok_type = isinstance(value, Integral) if integer else isinstance(value, Real)
    if isinstance(value, bool) or not ok_type:
        raise InputError(key, noun, value, where)
    number = int(value) if integer else float(value)
    if not math.isfinite(number):
        raise InputError(key, noun, value, where)
    if low is not None:
        if number < low or (number == low and closed in ("right", "neither")):
            raise InputError(key, noun, value, where)
    if high is not None:
        if number > high or (number == high and closed in ("left", "neither")):
            raise InputError(key, noun, value, where)
    return number


def check_size(
    value: Any, key: str, *, low: int, high: int, limit: str, where: str | None = None
) -> int:
    """Return ``value`` if it is an integer in ``[low, high]``, where ``high`` is a size limit
    that ``limit`` names in words (the message states both)."""
    try:
        return int(check_number(value, key, low=low, high=high, integer=True, where=where))
    except InputError as err:
        raise InputError(key, f"{err.expected} ({limit})", value, where) from None


def check_string(value: Any, key: str, *, where: str | None = None) -> str:
    """Return ``value`` if it is a non-empty string."""
    if not isinstance(value, str) or not value.strip():
        raise InputError(key, "a non-empty string", value, where)
    return value


def closest(name: str, valid: Iterable[str]) -> str | None:
    """The valid name closest to ``name``, if any is close."""
    match = difflib.get_close_matches(name, list(valid), n=1, cutoff=0.5)
    return match[0] if match else None


def check_choice(value: Any, key: str, choices: Iterable[str], *, where: str | None = None) -> str:
    """Return ``value`` if it is one of ``choices``; the message lists them and the closest."""
    options = list(choices)
    if isinstance(value, str) and value in options:
        return value
    hint = closest(value, options) if isinstance(value, str) else None
    expected = "one of " + ", ".join(repr(o) for o in options)
    if hint:
        expected += f" (did you mean {hint!r}?)"
    raise InputError(key, expected, value, where)


def check_table(value: Any, key: str, *, where: str | None = None) -> Mapping[str, Any]:
    """Return ``value`` if it is a table (a mapping)."""
    if not isinstance(value, Mapping):
        raise InputError(key, "a table", value, where)
    return value


def check_sequence(
    value: Any, key: str, *, min_length: int = 1, unique: bool = False, where: str | None = None
) -> list:
    """Return ``value`` as a list if it is a list of at least ``min_length`` items."""
    if isinstance(value, (str, bytes)) or not isinstance(value, (list, tuple)):
        raise InputError(key, f"a list of at least {min_length} item(s)", value, where)
    items = list(value)
    if len(items) < min_length:
        raise InputError(key, f"a list of at least {min_length} item(s)", value, where)
    if unique:
        seen = []
        for item in items:
            if item in seen:
                raise InputError(
                    key, "a list without repeated items", raw(f"{item!r} twice"), where
                )
            seen.append(item)
    return items


def check_keys(
    table: Mapping[str, Any],
    prefix: str,
    allowed: Iterable[str],
    *,
    required: Iterable[str] = (),
    where: str | None = None,
) -> None:
    """Reject unknown keys (naming the closest valid one) and missing required keys."""
    allowed = list(allowed)
    for name in table:
        if name not in allowed:
            key = f"{prefix}.{name}" if prefix else name
            hint = closest(name, allowed)
            expected = f"a known key under '{prefix or 'the top level'}'"
            expected += f" (did you mean {hint!r}?)" if hint else f" (one of {', '.join(allowed)})"
            raise InputError(key, expected, raw("an unknown key"), where)
    for name in required:
        if name not in table:
            key = f"{prefix}.{name}" if prefix else name
            raise InputError(key, "present", raw("nothing"), where)
