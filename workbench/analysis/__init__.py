"""Analysis of a grid: metrics as labelled xarray objects, bootstrap intervals, the decision
rules and the recommendation. Pure: no printing, no files written.

Every function takes the grid Dataset (``xarray.open_dataset(".../grid.nc")``, or
:func:`open_grid`) and returns labelled xarray objects. The modules, in the order of the
pipeline:

- :mod:`.metrics`: metrics of campaigns over arrays;
- :mod:`.dataset`: opening the grid and its ``setting`` axis;
- :mod:`.grid_metrics`: the metrics of every campaign of the grid;
- :mod:`.statistics`: Wilson, Kaplan–Meier, recovery and the paired bootstrap;
- :mod:`.recommendation`: decision rules and the recommendation;
- :mod:`.edges`: a choice at the edge of the levels studied, and the next levels to study;
- :mod:`.figure_data`: what the figures plot;
- :mod:`.effects`: the effects table;
- :mod:`.transfer`: whether the choice holds across kinds of landscapes.

The names are imported at their first use (``an.recommend`` imports :mod:`.recommendation`
then), so that a command checks its arguments before xarray and SciPy load.
"""

from __future__ import annotations

import importlib
import sys
import types
from typing import Any

_WHERE = {
    "METRICS": "dataset",
    "METRIC_NAMES": "dataset",
    "NO_BELIEF": "dataset",
    "RULES": "dataset",
    "SETTING_FACTORS": "dataset",
    "open_grid": "dataset",
    "series": "dataset",
    "FarOptima": "dataset",
    "far_optima": "dataset",
    "Edge": "edges",
    "edge_lines": "edges",
    "edge_snippet": "edges",
    "study_edges": "edges",
    "effects": "effects",
    "frontier": "figure_data",
    "regret_bands": "figure_data",
    "sensitivity": "figure_data",
    "belief_cost": "grid_metrics",
    "campaign_metric": "grid_metrics",
    "evaluations_to_beat_mode": "grid_metrics",
    "evaluations_to_target": "grid_metrics",
    "final_normalized_regret": "grid_metrics",
    "log_regret_area": "grid_metrics",
    "normalized_regret_at": "grid_metrics",
    "speedup": "grid_metrics",
    "Recommendation": "recommendation",
    "Rule": "recommendation",
    "decision_rule": "recommendation",
    "parse_weights": "recommendation",
    "recommend": "recommendation",
    "score": "recommendation",
    "Resampling": "statistics",
    "bootstrap": "statistics",
    "kaplan_meier": "statistics",
    "kaplan_meier_median": "statistics",
    "median_evaluations_to_target": "statistics",
    "recovery": "statistics",
    "summarise": "statistics",
    "wilson_interval": "statistics",
    "landscape_kinds": "transfer",
    "transfer": "transfer",
}

__all__ = [
    "METRICS",
    "METRIC_NAMES",
    "NO_BELIEF",
    "RULES",
    "SETTING_FACTORS",
    "Edge",
    "FarOptima",
    "Recommendation",
    "Resampling",
    "Rule",
    "belief_cost",
    "bootstrap",
    "campaign_metric",
    "decision_rule",
    "edge_lines",
    "edge_snippet",
    "effects",
    "evaluations_to_beat_mode",
    "evaluations_to_target",
    "far_optima",
    "final_normalized_regret",
    "frontier",
    "kaplan_meier",
    "kaplan_meier_median",
    "landscape_kinds",
    "log_regret_area",
    "median_evaluations_to_target",
    "normalized_regret_at",
    "open_grid",
    "parse_weights",
    "recommend",
    "recovery",
    "regret_bands",
    "score",
    "sensitivity",
    "series",
    "speedup",
    "study_edges",
    "summarise",
    "transfer",
    "wilson_interval",
]


class _Package(types.ModuleType):
    """This package, which keeps its public ``transfer`` and ``effects`` functions when their
    modules of the same names are imported (the import system binds each submodule on its
    package; the eager imports this package once had rebound the functions after it)."""

    def __setattr__(self, name: str, value: Any) -> None:
        if name in _WHERE and isinstance(value, types.ModuleType):
            return
        super().__setattr__(name, value)


sys.modules[__name__].__class__ = _Package


def __getattr__(name: str) -> Any:
    """A public name, imported from its module at its first read (PEP 562)."""
    if name not in _WHERE:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{_WHERE[name]}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
