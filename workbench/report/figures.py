"""Figures. Each takes data and a matplotlib Axes (or a row of them) and recomputes nothing.

Colours come from cividis and viridis, readable in grey and by colour-blind readers; line
styles differ as well as colours so that every curve can be told apart in print.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

import numpy as np

from ..world.marginals import GRID_POINTS, MarginalCurve, marginal_curves
from ..world.reference import Belief
from ..world.space import Space
from .markup import mpl_text

__all__ = [
    "MAX_TICKS",
    "belief_marginals",
    "distortion_probabilities",
    "evidence_marginals",
    "figure_title",
    "integer_ticks",
    "marginal_panels",
    "regret_curves",
    "robustness_frontier",
    "sensitivity_heatmap",
]

_STYLES = ("-", "--", "-.", ":")
# The recommended setting and the runner-up: far apart in colour (dark navy and an orange
# from the Okabe–Ito palette, told apart by colour-blind readers) and in line style.
_ROLE_STYLES = {"recommended": ("#00224e", "-"), "runner-up": ("#d55e00", "--")}


def _colours(n: int):
    import matplotlib

    cmap = matplotlib.colormaps["cividis"]
    # The bright end of cividis is hard to see on white: stop short of it.
    return [cmap(x) for x in np.linspace(0.0, 0.75, max(n, 1))]


# Most major ticks on an axis: enough to read a value off, few enough that labels never touch.
MAX_TICKS = 6


def _plain_number(v: float, _=None) -> str:
    """A tick label: plain digits from 0.001 to 99,999, else powers of ten as 1e-05."""
    if v == 0:
        return "0"
    if 1e-3 <= abs(v) < 1e5:
        return f"{v:.4g}"
    return f"{v:.0e}".replace("e-0", "e-").replace("e+0", "e")


def _log_axis(ax) -> None:
    """A log x axis with at most :data:`MAX_TICKS` labelled ticks: 1, 2, 5 × 10^k over less
    than two decades, whole decades (every few when they are many) over more (matplotlib's
    ``LogLocator``)."""
    from matplotlib import ticker

    ax.set_xscale("log")
    low, high = sorted(v for v in ax.get_xlim() if v > 0) or (1.0, 10.0)
    decades = np.log10(high / low) if high > low else 1.0
    subs = (1.0, 2.0, 5.0) if decades < 2 else (1.0,)
    ax.xaxis.set_major_locator(ticker.LogLocator(subs=subs, numticks=MAX_TICKS))
    ax.xaxis.set_major_formatter(ticker.FuncFormatter(_plain_number))
    ax.xaxis.set_minor_locator(ticker.LogLocator(subs="auto", numticks=12))
    ax.xaxis.set_minor_formatter(ticker.NullFormatter())


def _level_axis(ax, labels: Sequence[str]) -> None:
    """Level positions 0 … k − 1 labelled with their levels: every level when there are few,
    else at most :data:`MAX_TICKS` whole-number positions (``MaxNLocator(integer=True)``), so
    that an integer parameter of hundreds of levels reads like a number line."""
    from matplotlib import ticker

    labels = [mpl_text(v) for v in labels]
    if len(labels) <= 8:
        ax.set_xticks(range(len(labels)), labels)
        return
    try:  # an integer parameter: ticks at round values of the parameter, not of the index
        first, last = int(labels[0]), int(labels[-1])
    except ValueError:
        ax.xaxis.set_major_locator(ticker.MaxNLocator(nbins=MAX_TICKS, integer=True))
    else:
        values = ticker.MaxNLocator(nbins=MAX_TICKS, integer=True).tick_values(first, last)
        ax.xaxis.set_major_locator(
            ticker.FixedLocator([v - first for v in values if first <= v <= last])
        )
    ax.xaxis.set_major_formatter(
        ticker.FuncFormatter(lambda v, _: labels[round(v)] if 0 <= round(v) < len(labels) else "")
    )


def integer_ticks(axis) -> None:
    """Whole-number ticks only (counts, evaluations), at most :data:`MAX_TICKS` + 2."""
    from matplotlib import ticker

    axis.set_major_locator(ticker.MaxNLocator(nbins=MAX_TICKS + 2, integer=True))


def figure_title(fig, text: str, fontsize: float = 11.0) -> None:
    """A figure's title, wrapped to the figure's width so that no line runs off its edges
    (about 0.55 em per character, common practice for proportional fonts); with a constrained
    layout the panels make room for every line."""
    import textwrap

    width = fig.get_figwidth() * 72 / (0.55 * fontsize)
    lines = textwrap.wrap(str(text), max(int(width * 0.95), 20))
    fig.suptitle(mpl_text("\n".join(lines)), fontsize=fontsize)


def belief_marginals(
    axes: Sequence,
    space: Space,
    beliefs: Mapping[str, Belief],
    optimum: np.ndarray | None = None,
    grid: int = GRID_POINTS,
) -> None:
    """One panel per parameter: the marginal density of every named belief in user units
    (:func:`marginal_panels` of :func:`~workbench.world.marginals.marginal_curves`).
    ``optimum`` (a cube point) is marked as a vertical line."""
    marginal_panels(axes, marginal_curves(space, beliefs, optimum, grid))


def marginal_panels(axes: Sequence, curves: Sequence[MarginalCurve]) -> None:
    """One panel per :class:`~workbench.world.marginals.MarginalCurve`.

    Continuous parameters show density per unit of the normalised range against the user's
    values (log axis for log-scale parameters); discrete ones show grouped bars of probability.
    The optimum, when known, is a vertical line.
    """
    for ax, c in zip(axes, curves, strict=True):
        colours = _colours(len(c.densities))
        if c.discrete:
            n = len(c.densities)
            many = len(c.labels) > 8
            width = 0.8 / max(n, 1)
            for k, (label, probs) in enumerate(c.densities.items()):
                if many:  # hundreds of levels: a step line per belief, not a smear of bars
                    ax.step(
                        c.x,
                        probs,
                        _STYLES[k % 4],
                        where="mid",
                        color=colours[k],
                        label=mpl_text(label),
                        linewidth=1.4,
                    )
                    continue
                ax.bar(
                    c.x + (k - (n - 1) / 2) * width,
                    probs,
                    width,
                    label=mpl_text(label),
                    color=colours[k],
                    edgecolor="black",
                    linewidth=0.4,
                )
            _level_axis(ax, c.labels)
            ax.set_ylabel("probability")
            if c.optimum is not None:
                ax.axvline(c.optimum, color="black", linewidth=1.2)
        else:
            for k, (label, density) in enumerate(c.densities.items()):
                style = _STYLES[k % 4]
                ax.plot(c.x, density, style, color=colours[k], label=mpl_text(label), linewidth=1.6)
            if c.log:
                _log_axis(ax)
            else:
                from matplotlib import ticker

                ax.xaxis.set_major_locator(ticker.MaxNLocator(nbins=MAX_TICKS))
            ax.set_ylabel("density (per unit of range)")
            if c.optimum is not None:
                ax.axvline(c.optimum, color="black", linewidth=1.2, label="optimum")
        ax.set_xlabel(mpl_text(f"{c.name} [{c.unit}]" if c.unit else c.name))
        ax.set_ylim(bottom=0)
        ax.grid(alpha=0.3, linewidth=0.5)
    axes[0].legend(frameon=False, fontsize="small")


def _luminance(rgba) -> float:
    r, g, b = rgba[:3]
    return 0.2126 * r + 0.7152 * g + 0.0722 * b


def _short_number(v: float) -> str:
    if not np.isfinite(v):
        return "∞" if v > 0 else "−∞"
    return f"{v:.3g}" if abs(v) < 100 else f"{v:.0f}"


def sensitivity_heatmap(axes: Sequence, data, metric_label: str, panel_titles=None) -> None:
    """Heatmaps of ``data``: an :func:`workbench.analysis.sensitivity` Dataset, or a sequence
    of them (one per belief-guided strategy), drawn panel by panel into ``axes`` in order
    (strategy by strategy). Each panel is the metric over decay (rows) × quantile (columns;
    one column "not used" for a strategy without a quantile), each cell annotated with its
    value and interval; the outlined cell is the panel's lowest and hatched cells cannot be
    told apart from it.

    One colour scale for the whole figure (one norm, one colour bar, cividis, darker is
    lower), so that panels compare by colour as by number.
    """
    import matplotlib
    from matplotlib.colors import Normalize
    from matplotlib.patches import Patch, Rectangle

    sets = [data] if hasattr(data, "data_vars") else list(data)
    cmap = matplotlib.colormaps["cividis"]
    finite = np.concatenate([d["estimate"].values[np.isfinite(d["estimate"].values)] for d in sets])
    vmin, vmax = (finite.min(), finite.max()) if finite.size else (0.0, 1.0)
    flat = vmax - vmin < 1e-12
    if flat:
        vmin, vmax = vmin - 0.5, vmax + 0.5
    norm = Normalize(vmin, vmax)
    titles = panel_titles or {}
    slots = [(d, str(p)) for d in sets for p in d["panel"].values]
    for ax, (d, panel) in zip(axes, slots, strict=True):
        decays = [str(v) for v in d["decay"].values]
        quantiles = [float(q) for q in d["quantile"].values]
        est = d["estimate"].sel(panel=panel).values
        lo = d["low"].sel(panel=panel).values
        hi = d["high"].sel(panel=panel).values
        tied = d["tied"].sel(panel=panel).values
        best = d["best"].sel(panel=panel).values
        image = ax.imshow(est, cmap=cmap, norm=norm, aspect="auto", origin="upper")
        for i in range(len(decays)):
            for j in range(len(quantiles)):
                if not np.isfinite(est[i, j]):
                    ax.text(j, i, "not run", ha="center", va="center", fontsize="x-small")
                    continue
                colour = image.cmap(image.norm(est[i, j]))
                ink = "black" if _luminance(colour) > 0.45 else "white"
                # a backing in the cell's colour keeps the hatching off the digits
                backing = {"boxstyle": "square,pad=0.1", "facecolor": colour, "linewidth": 0}
                ax.text(
                    j,
                    i - 0.13,
                    _short_number(est[i, j]),
                    ha="center",
                    va="center",
                    fontsize="small",
                    color=ink,
                    fontweight="bold" if best[i, j] else "normal",
                    bbox=backing,
                    zorder=4,
                )
                ax.text(
                    j,
                    i + 0.2,
                    f"[{_short_number(lo[i, j])}, {_short_number(hi[i, j])}]",
                    ha="center",
                    va="center",
                    fontsize="x-small",
                    color=ink,
                    bbox=backing,
                    zorder=4,
                )
                if tied[i, j] and not best[i, j]:
                    ax.add_patch(
                        Rectangle(
                            (j - 0.5, i - 0.5),
                            1,
                            1,
                            fill=False,
                            hatch="//",
                            edgecolor="0.55" if ink == "black" else "0.8",
                            linewidth=0,
                        )
                    )
                if best[i, j]:
                    ax.add_patch(
                        Rectangle(
                            (j - 0.47, i - 0.47), 0.94, 0.94, fill=False, edgecolor="black", lw=2.5
                        )
                    )
        columns = [f"{q:g}" if np.isfinite(q) else "not used" for q in quantiles]
        ax.set_xticks(range(len(quantiles)), columns)
        ax.set_yticks(range(len(decays)), [mpl_text(v) for v in decays])
        ax.set_xlabel("threshold quantile γ")
        ax.set_ylabel("decay schedule")
        strategy = d.attrs.get("strategy", "")
        head = titles.get(panel, panel)
        ax.set_title(mpl_text(f"{strategy}\n{head}" if strategy else head), fontsize="medium")
    figure = axes[0].figure
    bar = figure.colorbar(
        matplotlib.cm.ScalarMappable(norm=norm, cmap=cmap), ax=list(axes), shrink=0.8, pad=0.02
    )
    if flat:  # one value everywhere: a single tick says so
        bar.set_ticks([vmin + 0.5])
    bar.set_label(mpl_text(f"{metric_label} (one scale for every panel)"), fontsize="small")
    handles = [
        Patch(facecolor="white", edgecolor="black", linewidth=2.5, label="lowest in the panel"),
        Patch(
            facecolor="white",
            edgecolor="0.45",
            hatch="//",
            label="cannot be told apart from the lowest",
        ),
    ]
    figure.legend(
        handles=handles, loc="outside lower center", ncol=2, frameon=False, fontsize="small"
    )


def regret_curves(
    axes: Sequence, bands, roles: Mapping[str, str] | None = None, target: float | None = None
) -> None:
    """One panel per distortion: median normalized regret (log scale) against evaluations
    spent, with the bootstrap band, for every setting of ``bands`` (an
    :func:`workbench.analysis.regret_bands` Dataset). ``roles`` adds a word to a setting's
    legend label ("recommended"); ``target`` draws the target level.
    """
    from ..analysis.metrics import LOG_FLOOR

    roles = roles or {}
    settings = [str(s) for s in bands["setting"].values]
    others = [s for s in settings if s not in roles]
    colours, styles = {}, {}
    for k, s in enumerate(others):  # the rest: cividis, dotted and dash-dotted
        colours[s] = _colours(len(others) + 1)[k + 1]
        styles[s] = (":", "-.", (0, (5, 1, 1, 1, 1, 1)))[k % 3]
    for s, role in roles.items():  # the two that matter: their own colour and line
        colours[s], styles[s] = _ROLE_STYLES.get(role, (_colours(1)[0], "-"))
    markers = ("o", "s", "^", "D", "v", "P", "X")
    t = bands["evaluation"].values
    every = max(1, len(t) // 8)
    for ax, distortion in zip(axes, [str(d) for d in bands["distortion"].values], strict=True):
        for k, s in enumerate(settings):
            one = bands.sel(setting=s, distortion=distortion)
            mid = np.maximum(one["estimate"].values, LOG_FLOOR)
            lo = np.maximum(one["low"].values, LOG_FLOOR)
            hi = np.maximum(one["high"].values, LOG_FLOOR)
            label = f"{s} ({roles[s]})" if s in roles else s
            ax.fill_between(t, lo, hi, color=colours[s], alpha=0.18, linewidth=0)
            ax.plot(
                t,
                mid,
                linestyle=styles[s],
                color=colours[s],
                marker=markers[k % len(markers)],
                markevery=(k % every, every),
                markersize=4,
                linewidth=2.0 if s in roles else 1.4,
                label=mpl_text(label),
            )
        if target is not None:
            ax.axhline(target, color="black", linewidth=0.8, linestyle=(0, (1, 3)))
            ax.annotate(
                "target",
                (t[-1], target),
                xytext=(0, 3),
                textcoords="offset points",
                ha="right",
                fontsize="x-small",
            )
        ax.set_yscale("log")
        integer_ticks(ax.xaxis)
        ax.set_title(mpl_text(f"distortion: {distortion}"), fontsize="medium")
        ax.set_xlabel("evaluations spent (initial design included)")
        ax.set_ylabel("median normalized regret")
        ax.grid(alpha=0.3, linewidth=0.5, which="both")
    handles, labels = axes[0].get_legend_handles_labels()
    axes[0].figure.legend(
        handles, labels, loc="outside lower center", ncol=2, frameon=False, fontsize="small"
    )


def robustness_frontier(
    ax, data, units: str = "evaluations", roles: Mapping[str, str] | None = None
) -> None:
    """Each belief-guided setting at (benefit when the belief is exact, cost at its worst
    distortion), both against no belief, with bootstrap intervals as error bars (an
    :func:`workbench.analysis.frontier` Dataset). Settings no other beats on both axes are
    filled and labelled in black, the others open and labelled in grey; better is to the right
    and down."""
    roles = roles or {}
    settings = [str(s) for s in data["setting"].values]
    b = data["estimate"].sel(axis="benefit").values
    c = data["estimate"].sel(axis="cost").values
    blo, bhi = data["low"].sel(axis="benefit").values, data["high"].sel(axis="benefit").values
    clo, chi = data["low"].sel(axis="cost").values, data["high"].sel(axis="cost").values
    efficient = data["efficient"].values
    dark = _colours(2)[0]
    ax.axhline(0, color="0.4", linewidth=0.8)
    ax.axvline(0, color="0.4", linewidth=0.8)
    for k in range(len(settings)):
        on = bool(efficient[k])
        ax.errorbar(
            b[k],
            c[k],
            xerr=[[b[k] - blo[k]], [bhi[k] - b[k]]],
            yerr=[[c[k] - clo[k]], [chi[k] - c[k]]],
            fmt="o" if on else "s",
            markersize=7 if on else 5,
            color=dark if on else "0.55",
            markerfacecolor=dark if on else "white",
            elinewidth=0.8,
            capsize=2,
            zorder=3 if on else 2,
        )
    # Every point is labelled: the ones no other beats in black, the beaten ones in grey. Each
    # label is raised until its drawn box clears the labels before it.
    from matplotlib.text import Text

    ax.autoscale_view()
    renderer = ax.figure.canvas.get_renderer()
    boxes = []
    for k in [*np.flatnonzero(efficient), *np.flatnonzero(~efficient)]:
        on = bool(efficient[k])
        label = settings[k] + (f" ({roles[settings[k]]})" if settings[k] in roles else "")
        note = ax.annotate(
            mpl_text(label),
            (b[k], c[k]),
            xytext=(6, 8),
            textcoords="offset points",
            fontsize="small" if on else "x-small",
            color="black" if on else "0.45",
            arrowprops={"arrowstyle": "-", "color": "0.5", "linewidth": 0.6},
        )
        # the text's own box (an annotation's box includes its leader line)
        for step in range(1, 16):
            box = Text.get_window_extent(note, renderer)
            if not any(box.overlaps(other) for other in boxes):
                break
            note.xyann = (6, 8 + 11 * step)
        boxes.append(Text.get_window_extent(note, renderer))
    from matplotlib.lines import Line2D

    ax.legend(
        handles=[
            Line2D([], [], marker="o", color=dark, linestyle="", label="not beaten on both axes"),
            Line2D(
                [],
                [],
                marker="s",
                color="0.55",
                markerfacecolor="white",
                linestyle="",
                label="beaten on both axes by another setting (grey label)",
            ),
        ],
        loc="upper left",
        frameon=False,
        fontsize="small",
    )
    ax.set_xlabel(mpl_text(f"saving when the belief is exact [{units}] (right is better)"))
    ax.set_ylabel(mpl_text(f"extra cost at the worst distortion [{units}] (down is better)"))
    ax.grid(alpha=0.3, linewidth=0.5)


def evidence_marginals(
    axes: Sequence,
    space: Space,
    belief,
    points: np.ndarray,
    good: np.ndarray,
    optima: np.ndarray | None = None,
) -> None:
    """The belief's marginals with real evaluations beneath them: every evaluated point as a
    short grey tick, the good ones as dark ticks, and (when given) where the data put the
    optimum, as the share of posterior draws whose argmin falls in each bin (right scale)."""
    belief_marginals(axes, space, {"belief": belief})
    for j, (ax, p) in enumerate(zip(axes, space.parameters, strict=True)):

        def at(U, p=p, j=j):
            """Positions on this panel's x axis: bar index for discrete parameters."""
            u = np.asarray(U, dtype=float)[:, j]
            if p.levels:
                return np.clip(np.floor(u * p.levels), 0, p.levels - 1)
            return p.from_unit(u)

        top = ax.get_ylim()[1]
        rug = -0.04 * top
        ax.plot(at(points), np.full(len(points), rug), "|", color="0.6", ms=9, label="evaluated")
        ax.plot(at(good), np.full(len(good), rug), "|", color="black", ms=12, mew=1.6, label="good")
        if optima is not None and len(optima):
            twin = ax.twinx()
            share = np.full(len(optima), 1 / len(optima))
            if p.levels:
                counts = np.bincount(at(optima).astype(int), weights=share, minlength=p.levels)
                twin.bar(np.arange(p.levels), counts, 0.25, color="0.3", alpha=0.5)
            else:
                edges = p.from_unit(np.linspace(0.0, 1.0, 31))
                twin.hist(at(optima), bins=edges, weights=share, color="0.3", alpha=0.35)
            twin.set_ylabel("share of the data's optimum draws")
            twin.set_ylim(bottom=0)
        ax.set_ylim(rug * 2, top)
    axes[0].legend(frameon=False, fontsize="small")


def distortion_probabilities(ax, t, probabilities, distortions) -> None:
    """The monitor's probability of each distortion after every evaluation t."""
    colours = _colours(len(distortions))
    for k, name in enumerate(distortions):
        ax.plot(
            t,
            probabilities[:, k],
            _STYLES[k % 4],
            marker="o",
            ms=3.5,
            color=colours[k],
            label=mpl_text(name),
            linewidth=1.6,
        )
    integer_ticks(ax.xaxis)
    ax.set_xlabel("evaluations so far")
    ax.set_ylabel("probability of the distortion")
    ax.set_ylim(0, 1)
    ax.grid(alpha=0.3, linewidth=0.5)
    ax.legend(frameon=False, fontsize="small")
