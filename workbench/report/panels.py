"""The report's figures, drawn from the computed content and, for the belief marginals, from
the curves the grid file stores (nothing here reads the study or its files).
"""

from __future__ import annotations

import io
import json
import math

from .. import analysis as an
from .content import DPI, Content, pct
from .markup import mpl_text


def _png(fig) -> bytes:
    import matplotlib.pyplot as plt

    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=DPI)
    plt.close(fig)
    return buffer.getvalue()


def _grid_axes(n: int, ncols: int, width: float, height: float, bottom: float = 0.0):
    """A figure of ``n`` panels on a grid of at most ``ncols`` columns, as few rows as that
    allows and the columns spread evenly over them (5 panels on 3 columns: 3 + 2); the slots
    left over are removed, not left blank."""
    import matplotlib.pyplot as plt

    nrows = math.ceil(n / max(1, min(ncols, n)))
    ncols = math.ceil(n / nrows)
    fig, axes = plt.subplots(
        nrows,
        ncols,
        figsize=(width * ncols, height * nrows + bottom),
        squeeze=False,
        layout="constrained",
    )
    flat = list(axes.ravel())
    for ax in flat[n:]:
        ax.remove()
    return fig, flat[:n]


def report_figures(c: Content) -> list[tuple[str, str, str, bytes]]:
    """(file stem, title, caption, PNG bytes) of every figure."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from . import figures as fg

    out = []
    metric_name, unit = an.METRIC_NAMES[c.rule.metric]
    level = pct(c.rs.level)
    roles = {c.rec.setting: "recommended"}
    if c.rec.runner_up is not None:
        roles[c.rec.runner_up["setting"]] = "runner-up"

    sets = list(c.sensitivities) or ([c.sensitivity] if c.sensitivity is not None else [])
    if sets:
        panels = [str(p) for p in sets[0]["panel"].values]
        titles = {p: f"distortion: {p}" for p in panels[:-1]}
        titles[panels[-1]] = f"under the rule ({c.rule.rule})"
        # One row of panels per belief-guided strategy, one column per distortion and rule.
        fig, axes = plt.subplots(
            len(sets),
            len(panels),
            figsize=(3.6 * len(panels) + 1.0, 3.4 * len(sets) + 0.6),
            squeeze=False,
            layout="constrained",
        )
        fg.sensitivity_heatmap(list(axes.ravel()), sets, metric_name, titles)
        title = f"Sensitivity of {metric_name} to decay and quantile"
        fig.suptitle(title, fontsize="large")
        names = ", ".join(str(d.attrs["strategy"]) for d in sets)
        out.append(
            (
                "sensitivity",
                title,
                f"Mean {metric_name} ({unit}; lower is better) of each belief-guided strategy "
                f"({names}; one row each) for each decay schedule and threshold quantile "
                f"(a strategy that does not use the quantile has one column, 'not used'), one "
                f"panel per distortion and one for the decision rule, on one colour scale. "
                f"Brackets: {level} bootstrap interval over replicates. The outlined cell is "
                f"the lowest of its panel; hatched cells cannot be told apart from it (the "
                f"paired {level} interval of their difference with it includes 0).",
                _png(fig),
            )
        )

    distortions = [str(d) for d in c.bands["distortion"].values]
    fig, axes = _grid_axes(len(distortions), 2, 5.6, 3.8, bottom=0.9)
    fg.regret_curves(axes, c.bands, roles, float(c.ds.attrs["target"]))
    fig.suptitle("Regret curves", fontsize="large")
    out.append(
        (
            "regret_curves",
            "Regret curves",
            f"Median normalized regret over landscapes and replicates after each evaluation, "
            f"with the {level} bootstrap band, for the recommended setting, the runner-up and "
            f"the baselines; one panel per distortion. The dotted line is the target.",
            _png(fig),
        )
    )

    if c.frontier is not None:
        fig, ax = plt.subplots(figsize=(8.5, 5.6), layout="constrained")
        fg.robustness_frontier(ax, c.frontier, unit, roles)
        ax.set_title("Robustness frontier", fontsize="large")
        out.append(
            (
                "robustness_frontier",
                "Robustness frontier",
                f"Each belief-guided setting: what it saves against no belief when the belief "
                f"is exact (x) and what it costs against no belief at its worst distortion (y), "
                f"in {unit} of {metric_name}, with {level} paired bootstrap intervals. Filled "
                "and labelled in black: settings that no other setting beats on both axes; "
                "open, with grey labels: settings another beats on both.",
                _png(fig),
            )
        )

    marginals = _belief_figure(c)
    if marginals is not None:
        out.append(marginals)
    return out


def _stored_curves(ds) -> list[tuple[str, list]]:
    """(landscape label, marginal curves) of every landscape whose beliefs the grid stores
    (written at run time; a grid without them gives none)."""
    from ..world.marginals import GRID_POINTS, MarginalCurve

    if "belief_parameters" not in ds.attrs or "belief_density" not in ds:
        return []
    out = []
    distortions = [str(d) for d in ds["distortion"].values]
    for li, parameters in enumerate(json.loads(ds.attrs["belief_parameters"])):
        if parameters is None:
            continue
        curves = []
        for j, p in enumerate(parameters):
            n = len(p["labels"]) or min(GRID_POINTS, ds.sizes["belief_grid"])
            x = ds["belief_x"].values[li, j, :n]
            densities = {
                name: ds["belief_density"].values[li, d, j, :n]
                for d, name in enumerate(distortions)
            }
            at = float(ds["belief_optimum"].values[li, j])
            curves.append(
                MarginalCurve(
                    p["name"],
                    p["unit"],
                    bool(p["log"]),
                    tuple(p["labels"]),
                    x,
                    densities,
                    None if math.isnan(at) else at,
                )
            )
        out.append((str(ds["landscape"].values[li]), curves))
    return out


def _belief_figure(c: Content):
    from . import figures as fg

    stored = _stored_curves(c.ds)
    if not stored:
        return None
    dims = [len(curves) for _, curves in stored]
    ncols = max(dims)
    if ncols > 6:
        return None
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(
        len(dims),
        ncols,
        figsize=(4.2 * ncols, 3.3 * len(dims) + 0.3),
        squeeze=False,
        layout="constrained",
    )
    for row, (label, curves) in enumerate(stored):
        fg.marginal_panels(list(axes[row][: dims[row]]), curves)
        for ax in axes[row][dims[row] :]:
            ax.remove()
        axes[row][0].set_title(mpl_text(f"landscape {label}"), loc="left")
    fig.suptitle("Belief marginals", fontsize="large")
    return (
        "belief_marginals",
        "Belief marginals",
        "The belief as written (exact) and as distorted, marginal by marginal, in the units of "
        "each parameter, for replicate 0 of each landscape (shift directions are drawn per "
        "replicate); the vertical line marks the landscape's optimum.",
        _png(fig),
    )
