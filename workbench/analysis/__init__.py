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
"""

from .dataset import (
    METRIC_NAMES,
    METRICS,
    NO_BELIEF,
    RULES,
    SETTING_FACTORS,
    FarOptima,
    far_optima,
    open_grid,
    series,
)
from .edges import Edge, edge_lines, edge_snippet, study_edges
from .effects import effects
from .figure_data import frontier, regret_bands, sensitivity
from .grid_metrics import (
    belief_cost,
    campaign_metric,
    evaluations_to_beat_mode,
    evaluations_to_target,
    final_normalized_regret,
    log_regret_area,
    normalized_regret_at,
    speedup,
)
from .recommendation import Recommendation, Rule, decision_rule, parse_weights, recommend, score
from .statistics import (
    Resampling,
    bootstrap,
    kaplan_meier,
    kaplan_meier_median,
    median_evaluations_to_target,
    recovery,
    summarise,
    wilson_interval,
)
from .transfer import landscape_kinds, transfer

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
