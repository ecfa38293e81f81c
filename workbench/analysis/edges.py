"""The edge of what was studied: a chosen setting at the lowest or highest level of a factor.

When the choice sits on the edge of the levels a study ran, the best value may lie beyond it;
the next study should go further. One function, :func:`study_edges`, serves the command line,
the report page, ``--json`` and the study plan.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

__all__ = ["Edge", "edge_lines", "edge_snippet", "study_edges"]

# Words for the ends of a decay schedule's value: a larger value keeps the belief longer
# (β/t, exp(−t/τ), a step at k, a line to T, a constant c), so the lowest is the fastest decay.
_DECAY_ENDS = {"lowest": "the fastest decay", "highest": "the slowest decay"}


@dataclass(frozen=True)
class Edge:
    """One factor whose chosen level is the lowest or highest the study ran (among the
    settings of the chosen strategy, and of its decay family for ``decay``).

    ``beyond`` are the next levels to study, halving (below the lowest) or doubling (above
    the highest) twice; a level that would leave the factor's range is left out."""

    strategy: str
    factor: str
    level: str
    side: str
    studied: tuple[str, ...]
    beyond: tuple[str, ...]

    @property
    def words(self) -> str:
        what = (
            _DECAY_ENDS[self.side] if self.factor == "decay" else f"the {self.side} {self.factor}"
        )
        return (
            f"{self.factor} {self.level} is {what} studied ({', '.join(self.studied)}): "
            f"the best may lie beyond it; next levels to study: {', '.join(self.beyond)}"
        )

    def to_dict(self) -> dict:
        return {
            "strategy": self.strategy,
            "factor": self.factor,
            "level": self.level,
            "side": self.side,
            "studied": list(self.studied),
            "next_levels": list(self.beyond),
        }


def _number(value) -> float | None:
    try:
        v = float(value)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _decay_parts(text: str) -> tuple[str, float]:
    family, _, value = str(text).partition(":")
    return family, float(value)


def _beyond(factor: str, family: str, value: float, side: str) -> tuple[float, ...]:
    """Two levels past ``value``: halving below, doubling above, kept inside the factor's
    range (quantile and exploration in (0, 1): above, half the way to 1 instead of doubling;
    a step's value is a whole number of evaluations ≥ 1)."""
    out = []
    v = value
    for _ in range(2):
        if side == "lowest":
            v = v / 2
        elif factor in ("quantile", "exploration"):
            v = (v + 1) / 2 if 2 * v >= 1 else 2 * v
        else:
            v = 2 * v
        if family == "step":
            v = float(round(v))
            if v < 1 or (out and v == out[-1]) or v == value:
                break
        if factor in ("quantile", "exploration") and not 0 < v < 1:
            break
        if v <= 0:
            break
        out.append(v)
    return tuple(out)


def _text(factor: str, family: str, v: float) -> str:
    number = f"{v:.3g}"
    return f"{family}:{number}" if factor == "decay" else number


def study_edges(settings: Iterable[Mapping], choice: Mapping) -> tuple[Edge, ...]:
    """The factors of ``choice`` at the edge of the levels the study ran.

    ``settings`` are the studied belief-guided settings and ``choice`` the chosen one, each a
    mapping with ``strategy``, ``decay`` (``family:value``), ``quantile`` and ``exploration``
    (NaN or None where a strategy does not use it). Only the chosen strategy's settings are
    compared; decay values only within the chosen family; a factor studied at one level has no
    edge (nothing was compared)."""
    strategy = choice["strategy"]
    same = [s for s in settings if s["strategy"] == strategy]
    out = []
    family, value = _decay_parts(choice["decay"])
    decays = sorted({v for f, v in (_decay_parts(s["decay"]) for s in same) if f == family})
    candidates = [("decay", family, value, decays)]
    for factor in ("quantile", "exploration"):
        chosen = _number(choice.get(factor))
        if chosen is None:
            continue
        levels = sorted({v for v in (_number(s.get(factor)) for s in same) if v is not None})
        candidates.append((factor, "", chosen, levels))
    for factor, fam, chosen, levels in candidates:
        if len(levels) < 2:
            continue
        side = "lowest" if chosen <= levels[0] else "highest" if chosen >= levels[-1] else None
        if side is None:
            continue
        beyond = _beyond(factor, fam, chosen, side)
        if not beyond:
            continue
        out.append(
            Edge(
                strategy=strategy,
                factor=factor,
                level=_text(factor, fam, chosen),
                side=side,
                studied=tuple(_text(factor, fam, v) for v in levels),
                beyond=tuple(_text(factor, fam, v) for v in sorted(beyond)),
            )
        )
    return tuple(out)


def edge_snippet(edges: Iterable[Edge]) -> str:
    """A study snippet to paste in place of the chosen strategy's table: each factor on the
    edge studied at the next levels beyond it, the chosen level and its studied neighbour,
    so that the next study brackets the choice."""
    edges = list(edges)
    if not edges:
        return ""
    lines = [f"[strategy.{edges[0].strategy}]"]
    for e in edges:
        near = e.studied[:2] if e.side == "lowest" else e.studied[-2:]
        ordered = [*e.beyond, *near] if e.side == "lowest" else [*near, *e.beyond]
        levels = list(dict.fromkeys(ordered))
        if e.factor == "decay":
            text = ", ".join(f'"{v}"' for v in levels)
        else:
            text = ", ".join(levels)
        lines.append(f"{e.factor} = [{text}]")
    return "\n".join(lines)


def edge_lines(edges: Iterable[Edge], indent: str = "  ") -> list[str]:
    """The edges as terminal lines: one per factor, then the snippet to paste."""
    edges = list(edges)
    if not edges:
        return []
    out = [f"{indent}edge of the study: {e.words}" for e in edges]
    out.append(f"{indent}to study beyond it, set in the study file (other keys of the table stay):")
    out += [f"{indent}  {line}" for line in edge_snippet(edges).splitlines()]
    return out
