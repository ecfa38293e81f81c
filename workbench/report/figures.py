"""Figures. Each takes data and a matplotlib Axes (or a row of them) and recomputes nothing.

Colours come from cividis and viridis, readable in grey and by colour-blind readers; line
styles differ as well as colours so that every curve can be told apart in print.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from ..space import Categorical, Continuous, Space

__all__ = ["belief_marginals"]

_STYLES = ("-", "--", "-.", ":")


def _colours(n: int):
    import matplotlib

    cmap = matplotlib.colormaps["cividis"]
    return [cmap(x) for x in np.linspace(0.05, 0.85, max(n, 1))]


def belief_marginals(
    axes: Sequence,
    space: Space,
    beliefs: Mapping[str, object],
    optimum: np.ndarray | None = None,
    grid: int = 401,
) -> None:
    """One panel per parameter: the marginal density of every named belief in user units.

    Continuous parameters show density per unit of the normalised range against the user's
    values (log axis for log-scale parameters); discrete ones show grouped bars of probability.
    ``optimum`` (a cube point) is marked as a vertical line.
    """
    colours = _colours(len(beliefs))
    u = np.linspace(0.0, 1.0, grid)
    for j, (ax, p) in enumerate(zip(axes, space.parameters, strict=True)):
        if p.levels:
            centres = (np.arange(p.levels) + 0.5) / p.levels
            width = 0.8 / max(len(beliefs), 1)
            for k, (label, belief) in enumerate(beliefs.items()):
                probs = np.exp(belief.marginal(j).logpdf(centres)) / p.levels
                ax.bar(
                    np.arange(p.levels) + (k - (len(beliefs) - 1) / 2) * width,
                    probs,
                    width,
                    label=label,
                    color=colours[k],
                    edgecolor="black",
                    linewidth=0.4,
                )
            labels = (
                p.choices
                if isinstance(p, Categorical)
                else [str(v) for v in range(p.lower, p.upper + 1)]
            )
            ax.set_xticks(np.arange(p.levels), labels, rotation=30 if p.levels > 6 else 0)
            ax.set_ylabel("probability")
            if optimum is not None:
                ax.axvline(int(p.from_unit(optimum[j])), color="black", linewidth=1.2)
        else:
            x = p.from_unit(u)
            for k, (label, belief) in enumerate(beliefs.items()):
                ax.plot(
                    x,
                    np.exp(belief.marginal(j).logpdf(u)),
                    _STYLES[k % 4],
                    color=colours[k],
                    label=label,
                    linewidth=1.6,
                )
            if isinstance(p, Continuous) and p.log:
                ax.set_xscale("log")
            ax.set_ylabel("density (per unit of range)")
            if optimum is not None:
                ax.axvline(
                    float(p.from_unit(optimum[j])), color="black", linewidth=1.2, label="optimum"
                )
        ax.set_xlabel(f"{p.name} [{p.unit}]" if p.unit else p.name)
        ax.set_ylim(bottom=0)
        ax.grid(alpha=0.3, linewidth=0.5)
    axes[0].legend(frameon=False, fontsize="small")
