"""Does the answer transfer? The setting each kind of landscape alone recommends, and what the
setting chosen on the textbook landscapes costs on the others.

A landscape's kind (textbook, drawn, fitted, function) is the grid's ``landscape_kind``
(textbook when the grid has none). For each kind present, the rule picks a setting using only
that kind's landscapes. On every kind but textbook, the cost of the textbook choice is the
rule's score of that choice minus the score of the kind's own choice, both on the kind's
landscapes, with a paired bootstrap interval over replicates (0 when the choices agree).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import xarray as xr

from .dataset import TEXTBOOK, guided_only, landscape_kinds
from .grid_metrics import campaign_metric
from .recommendation import Rule, recommend, setting_scores
from .statistics import Resampling, bootstrap

__all__ = ["landscape_kinds", "transfer"]


def transfer(ds: xr.Dataset, rule: Rule, resampling: Resampling | None = None) -> xr.Dataset:
    """One row per landscape kind: ``setting`` chosen on that kind alone, its ``value`` under
    the rule, and ``cost`` (with ``low``, ``high``) of using the textbook choice there instead
    (NaN for the textbook row, and everywhere when the grid has no textbook landscape)."""
    rs = resampling or Resampling()
    # The cost of the textbook choice is counted in the metric itself (evaluations, say).
    plain = replace(rule, score="raw")
    kinds = landscape_kinds(ds)
    present = list(dict.fromkeys(kinds))
    values = guided_only(campaign_metric(ds, rule.metric))
    chosen, value = {}, {}
    for kind in present:
        sub = ds.isel(landscape=[i for i, k in enumerate(kinds) if k == kind])
        rec = recommend(sub, rule, rs)
        chosen[kind], value[kind] = rec.setting, rec.value
    cost = {k: (np.nan, np.nan, np.nan) for k in present}
    if TEXTBOOK in present:
        for kind in present:
            if kind == TEXTBOOK:
                continue
            pair = [chosen[TEXTBOOK], chosen[kind]]
            sub = values.isel(landscape=[i for i, k in enumerate(kinds) if k == kind])
            sub = sub.sel(setting=pair) if pair[0] != pair[1] else sub.sel(setting=pair[:1])

            def difference(v):
                s = setting_scores(v, plain)
                return s.isel(setting=0) - s.isel(setting=-1)

            boot = bootstrap(sub, difference, resampling=rs)
            cost[kind] = (float(boot["estimate"]), float(boot["low"]), float(boot["high"]))
    return xr.Dataset(
        {
            "setting": ("kind", [chosen[k] for k in present]),
            "value": ("kind", [value[k] for k in present]),
            "landscapes": ("kind", [kinds.count(k) for k in present]),
            "cost": ("kind", [cost[k][0] for k in present]),
            "low": ("kind", [cost[k][1] for k in present]),
            "high": ("kind", [cost[k][2] for k in present]),
        },
        coords={"kind": present},
        attrs={"textbook_setting": chosen.get(TEXTBOOK, ""), "level": rs.level},
    )
