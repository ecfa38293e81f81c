"""The study plan: written from a study before it runs, for a methodologist to file.

:func:`run_pilot` (:mod:`.pilot`) runs a small pilot for real; :mod:`.estimate` turns it into
replicates (with the formulas of :mod:`.sample_size`) and compute; :func:`build_plan` is pure
and :func:`write_plan` writes ``plan.md`` and ``plan.html`` (:mod:`.document`).
The names are imported at their first use, so that ``workbench plan`` checks its options and
its study before the engine loads.
"""

from __future__ import annotations

import importlib
from typing import Any

_WHERE = {
    "duration": "..study.cost",
    "size": "..study.cost",
    "cell_counts": "..study.cost",
    "Plan": ".document",
    "build_plan": ".document",
    "reasons": ".document",
    "replicates_edit": ".document",
    "write_plan": ".document",
    "Compute": ".estimate",
    "Replicates": ".estimate",
    "compute_estimate": ".estimate",
    "grid_bytes": ".estimate",
    "replicates_needed": ".estimate",
    "check_lines": ".estimate",
    "edge_lines": ".estimate",
    "pilot_difference": ".estimate",
    "pilot_edges": ".estimate",
    "pilot_means": ".estimate",
    "Pilot": ".pilot",
    "PilotDesign": ".pilot",
    "pilot_chunks": ".pilot",
    "pilot_design": ".pilot",
    "run_pilot": ".pilot",
    "PlanOptions": ".options",
}

__all__ = [
    "Compute",
    "Pilot",
    "PilotDesign",
    "Plan",
    "PlanOptions",
    "Replicates",
    "build_plan",
    "cell_counts",
    "check_lines",
    "compute_estimate",
    "duration",
    "edge_lines",
    "grid_bytes",
    "pilot_chunks",
    "pilot_design",
    "pilot_difference",
    "pilot_edges",
    "pilot_means",
    "reasons",
    "replicates_edit",
    "replicates_needed",
    "run_pilot",
    "size",
    "write_plan",
]


def __getattr__(name: str) -> Any:
    """A public name, imported from its module at its first read (PEP 562)."""
    if name not in _WHERE:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(_WHERE[name], __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
