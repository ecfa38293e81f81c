"""The study plan: written from a study before it runs, for a methodologist to file.

:func:`run_pilot` (:mod:`.pilot`) runs a small pilot for real; :mod:`.estimate` turns it into
replicates (with the formulas of :mod:`.sample_size`) and compute; :func:`build_plan` is pure
and :func:`write_plan` writes ``plan.md`` and ``plan.html`` (:mod:`.document`).
"""

from ..study.cost import cell_counts, duration, size
from .document import (
    Plan,
    build_plan,
    reasons,
    replicates_edit,
    write_plan,
)
from .estimate import (
    Compute,
    Replicates,
    check_lines,
    compute_estimate,
    edge_lines,
    grid_bytes,
    pilot_difference,
    pilot_edges,
    pilot_means,
    replicates_needed,
)
from .pilot import (
    CHECK_PILOT,
    Pilot,
    PilotDesign,
    PlanOptions,
    pilot_chunks,
    pilot_design,
    run_pilot,
)

__all__ = [
    "CHECK_PILOT",
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
