"""The report of a grid: one self-contained HTML page, its figures as PNG files, and a Markdown
summary, all written atomically into the results folder.

The page opens with the answer (the recommendation and the risk of a misleading belief), then
the figures, then the method and the cautions. It holds no external reference: figures are
embedded as base64 PNG, the style sheet is inline, there are no scripts, and every string
that comes from the user (titles, names, labels, units) is escaped.
"""

from __future__ import annotations

import base64
import html
import io
import json
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import xarray as xr

from .. import analysis as an
from ..storage import atomic_path, write_text

__all__ = ["ReportFiles", "write_report"]

REPORT = "report.html"
SUMMARY = "summary.md"
FIGURES = "figures"
_DPI = 110

_STRATEGY_TEXT = {
    "pseudo-posterior": (
        "combines the model's and the belief's odds that a point is good (better than the "
        "threshold quantile γ of the values seen so far); the belief's weight is λ(t)"
    ),
    "prior-weighted": "expected improvement multiplied by the belief raised to the power λ(t)",
    "no-belief": "a Gaussian-process model with expected improvement and no belief at all",
    "random": "uniform random draws over the search space",
    "belief-sampling": "every evaluation a fresh draw from the belief, with no model",
}
_DECAY_TEXT = {
    "hyperbolic": "λ(t) = β/t: the belief counts as β evaluations' worth",
    "exponential": "λ(t) = exp(−t/τ)",
    "step": "λ(t) = 1 for the first k evaluations, then 0",
    "linear": "λ(t) = max(0, 1 − t/T)",
    "constant": "λ(t) = c: the belief never washes out",
}


@dataclass(frozen=True)
class ReportFiles:
    """What :func:`write_report` wrote."""

    html: Path
    summary: Path
    figures: tuple[Path, ...]


# --------------------------------------------------------------------------- formatting


def _e(text) -> str:
    return html.escape(str(text), quote=True)


def _num(v, digits: int = 3) -> str:
    if v is None or (isinstance(v, float) and math.isnan(v)):
        return "–"
    v = float(v)
    if math.isinf(v):
        return "∞" if v > 0 else "−∞"
    if abs(v) >= 1000:
        return f"{v:.0f}"
    return f"{v:.{digits}g}"


def _pct(v) -> str:
    return f"{100 * float(v):.0f} %"


def _between(lo, hi) -> str:
    """An interval in running text."""
    return f"{_num(lo)} to {_num(hi)}"


def _cell(value, lo, hi, fmt=None) -> tuple[str, str]:
    """A table cell: the value, and its interval shown beneath it."""
    fmt = fmt or _num
    return fmt(value), f"[{fmt(lo)}, {fmt(hi)}]"


def _beyond(budget: int):
    """Number format for medians that may lie beyond the budget."""

    def fmt(v) -> str:
        return f"> {budget}" if v is not None and math.isinf(float(v)) else _num(v)

    return fmt


class _Group(str):
    """A row of a table that heads a group of rows (a distortion)."""


# --------------------------------------------------------------------------- computing


@dataclass
class _Content:
    """Everything the page shows, computed once."""

    ds: xr.Dataset
    rule: an.Rule
    rs: an.Resampling
    rec: an.Recommendation
    pseudo_posterior: an.Recommendation | None
    shown: list[str]
    ett: xr.Dataset
    km: xr.Dataset
    recovery: xr.Dataset
    speedup: xr.Dataset | None
    cost: xr.Dataset | None
    beat: xr.Dataset
    beat_share: xr.DataArray
    regret_at: xr.Dataset
    decision: xr.Dataset
    distance: xr.DataArray
    mass: xr.DataArray
    sensitivity: xr.Dataset | None
    bands: xr.Dataset
    frontier: xr.Dataset | None
    effects: xr.Dataset


def _compute(ds: xr.Dataset, rule: an.Rule, rs: an.Resampling) -> _Content:
    rec = an.recommend(ds, rule, rs)
    baselines = [str(b) for b in ds["baseline"].values]
    shown = [rec.setting]
    if rec.runner_up is not None:
        shown.append(rec.runner_up["setting"])
    shown += baselines
    has_none = an.NO_BELIEF in baselines
    beat = an.evaluations_to_beat_mode(ds)
    nr_at = an.normalized_regret_at(ds).sel(setting=shown)
    sens = pp = None
    if "pseudo-posterior" in [str(s) for s in ds["strategy"].values]:
        # The planner of a pseudo-posterior campaign needs its decay and quantile even when
        # another strategy wins overall.
        pp = (
            rec
            if rec.choice["strategy"] == "pseudo-posterior"
            else an.recommend(ds, rule, rs, strategy="pseudo-posterior")
        )
        fixed = {k: rec.choice[k] for k in ("exploration", "initial")}
        sens = an.sensitivity(ds, rule, rs, "pseudo-posterior", fixed)
    return _Content(
        ds=ds,
        rule=rule,
        rs=rs,
        rec=rec,
        pseudo_posterior=pp,
        shown=shown,
        ett=an.summarise(an.campaign_metric(ds, "evaluations_to_target"), rs),
        km=an.median_evaluations_to_target(ds, resampling=rs),
        recovery=an.recovery(ds, level=rs.level),
        speedup=an.summarise(an.speedup(ds), rs, geometric=True) if has_none else None,
        cost=an.summarise(an.belief_cost(ds), rs) if has_none else None,
        beat=an.summarise(beat["evaluations"], rs),
        beat_share=beat["reached"].mean(["landscape", "replicate"]),
        regret_at=an.bootstrap(
            nr_at, lambda v: v.median(["landscape", "replicate"]), resampling=rs
        ),
        decision=an.summarise(an.campaign_metric(ds, rule.metric), rs),
        distance=ds["severity_distance"].mean(["landscape", "replicate"]),
        mass=ds["severity_mass"].mean(["landscape", "replicate"]),
        sensitivity=sens,
        bands=an.regret_bands(ds, shown, rs),
        frontier=an.frontier(ds, rule.metric, rs) if has_none else None,
        effects=an.effects(ds, rule.metric, rs),
    )


# --------------------------------------------------------------------------- figures


def _png(fig) -> bytes:
    import matplotlib.pyplot as plt

    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=_DPI)
    plt.close(fig)
    return buffer.getvalue()


def _grid_axes(n: int, ncols: int, width: float, height: float, bottom: float = 0.0):
    import matplotlib.pyplot as plt

    ncols = max(1, min(ncols, n))
    nrows = math.ceil(n / ncols)
    fig, axes = plt.subplots(
        nrows,
        ncols,
        figsize=(width * ncols, height * nrows + bottom),
        squeeze=False,
        layout="constrained",
    )
    flat = list(axes.ravel())
    for ax in flat[n:]:
        ax.set_visible(False)
    return fig, flat[:n]


def _figures(c: _Content) -> list[tuple[str, str, str, bytes]]:
    """(file stem, title, caption, PNG bytes) of every figure."""
    import matplotlib

    matplotlib.use("Agg")
    from . import figures as fg

    out = []
    metric_name, unit = an.METRIC_NAMES[c.rule.metric]
    level = _pct(c.rs.level)
    roles = {c.rec.setting: "recommended"}
    if c.rec.runner_up is not None:
        roles[c.rec.runner_up["setting"]] = "runner-up"

    if c.sensitivity is not None:
        s = c.sensitivity
        panels = [str(p) for p in s["panel"].values]
        titles = {p: f"distortion: {p}" for p in panels[:-1]}
        titles[panels[-1]] = f"under the rule ({c.rule.rule})"
        fig, axes = _grid_axes(len(panels), 3, 5.0, 3.4, bottom=0.5)
        fg.sensitivity_heatmap(axes, s, metric_name, titles)
        title = f"Sensitivity of {metric_name} to decay and quantile"
        fig.suptitle(f"{title} (pseudo-posterior)", fontsize="large")
        out.append(
            (
                "sensitivity",
                title,
                f"Mean {metric_name} ({unit}; lower is better) of the pseudo-posterior strategy "
                f"for each decay schedule and threshold quantile, one panel per distortion and "
                f"one for the decision rule. Brackets: {level} bootstrap interval over "
                f"replicates. The outlined cell is the lowest of its panel; hatched cells "
                f"cannot be told apart from it (the paired {level} interval of their "
                f"difference with it includes 0).",
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
        import matplotlib.pyplot as plt

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
                f"and labelled: settings that no other setting beats on both axes.",
                _png(fig),
            )
        )

    marginals = _belief_figure(c)
    if marginals is not None:
        out.append(marginals)
    return out


def _belief_figure(c: _Content):
    from ..study.grid import Cell
    from ..study.spec import parse_text
    from . import figures as fg

    study = parse_text(c.ds.attrs["study"])
    landscapes = range(min(len(study.landscapes), 4))
    dims = [Cell(study, li, 0, 0).space.dim for li in landscapes]
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
    for row, li in enumerate(landscapes):
        cells = [Cell(study, li, d, 0) for d in range(len(study.distortions))]
        beliefs = {"exact": cells[0].exact_belief}
        for cell in cells:
            name = study.distortions[cell.distortion].name
            if name != "exact":
                beliefs[name] = cell.belief
        fg.belief_marginals(
            list(axes[row][: dims[row]]),
            cells[0].space,
            beliefs,
            optimum=np.asarray(cells[0].placement.minimisers[0]),
        )
        for ax in axes[row][dims[row] :]:
            ax.set_visible(False)
        axes[row][0].set_title(f"landscape {study.landscapes[li].label}", loc="left")
    fig.suptitle("Belief marginals", fontsize="large")
    return (
        "belief_marginals",
        "Belief marginals",
        "The belief as written (exact) and as distorted, marginal by marginal, in the units of "
        "each parameter, for replicate 0 of each landscape (shift directions are drawn per "
        "replicate); the vertical line marks the landscape's optimum.",
        _png(fig),
    )


# --------------------------------------------------------------------------- text


def _value(data: xr.Dataset, setting: str, distortion: str) -> tuple[float, float, float]:
    one = data.sel(setting=setting, distortion=distortion)
    return float(one["estimate"]), float(one["low"]), float(one["high"])


def _choice_words(choice: dict, ds: xr.Dataset) -> str:
    parts = [f"strategy {choice['strategy']}", f"decay schedule {choice['decay']}"]
    if choice.get("quantile") is not None:
        parts.append(f"threshold quantile γ = {choice['quantile']:g}")
    for k in ("exploration", "initial"):
        if ds.sizes[k] > 1:
            parts.append(f"{k} {choice[k]}")
    return ", ".join(parts)


def _risk_paragraph(c: _Content) -> str:
    """What the recommended setting costs at each distortion against no belief, and where the
    belief stops paying for itself."""
    if c.cost is None:
        return (
            "The grid has no no-belief baseline, so the cost of a misleading belief against "
            "using no belief cannot be stated."
        )
    s = c.rec.setting
    names = [str(d) for d in c.ds["distortion"].values]
    base = float(c.ett["estimate"].sel(setting=an.NO_BELIEF).mean())
    level = _pct(c.rs.level)
    parts = []
    for d in names:
        v, lo, hi = _value(c.cost, s, d)
        if hi < 0:
            word = f"saves {_num(-v)} evaluations ({_between(-hi, -lo)})"
        elif lo > 0:
            word = f"costs {_num(v)} more ({_between(lo, hi)})"
        else:
            word = f"costs about the same ({_num(v)}, {_between(lo, hi)})"
        parts.append(f"{word} when the belief is {d}")
    text = (
        f"Against no belief, which needs {_num(base)} evaluations to reach the target on average "
        f"(mean restricted to the budget of {c.ds.attrs['budget']}), the recommended setting "
        + "; ".join(parts)
        + f" ({level} intervals, paired by replicate)."
    )
    order = sorted(names, key=lambda d: float(c.distance.sel(distortion=d)))
    losing = [d for d in order if _value(c.cost, s, d)[0] > 0]
    if losing:
        d = losing[0]
        text += (
            f" Ordered by how far the belief's centre sits from the optimum, the belief stops "
            f"paying for itself at '{d}' (centre {_num(float(c.distance.sel(distortion=d)), 2)} "
            f"of the range away on average, {_pct(float(c.mass.sel(distortion=d)))} of its mass "
            f"within 0.1 of the optimum): there it costs more than using no belief at all."
        )
        kept = [x for x in order if order.index(x) < order.index(d)]
        if kept:
            far = kept[-1]
            text += (
                f" It still pays at '{far}' (centre "
                f"{_num(float(c.distance.sel(distortion=far)), 2)} of the range away)."
            )
    else:
        worst = max(names, key=lambda d: _value(c.cost, s, d)[0])
        text += (
            f" In none of the simulated distortions did it cost more than no belief; at the "
            f"least favourable, '{worst}', it still saved {_num(-_value(c.cost, s, worst)[0])}."
        )
    return text


def _answer_rows(c: _Content) -> list[tuple[str, str]]:
    r = c.rec
    metric_name, unit = an.METRIC_NAMES[c.rule.metric]
    level = _pct(c.rs.level)
    rows = [
        ("rule", c.rule.describe()),
        (metric_name, f"{_num(r.value)} {unit} ({level} interval {_between(*r.interval)})"),
    ]
    if r.runner_up is not None:
        ru = r.runner_up
        rows.append(
            ("runner-up", f"{ru['setting']}: {_num(ru['value'])} ({_between(*ru['interval'])})")
        )
    rows.append(
        (
            "stability",
            f"{_pct(r.stability)} of {c.rs.draws} bootstrap resamples of the replicates pick the "
            f"same setting",
        )
    )
    if r.leave_one_landscape_out:
        items = [
            f"without {name}: {'the same' if choice == r.setting else choice}"
            for name, choice in r.leave_one_landscape_out.items()
        ]
        rows.append(("leave one landscape out", "; ".join(items)))
    pp = c.pseudo_posterior
    if pp is not None and pp.setting != r.setting:
        rows.append(
            (
                "best pseudo-posterior",
                f"{_choice_words(pp.choice, c.ds)}: {_num(pp.value)} {unit} "
                f"({level} interval {_between(*pp.interval)}; stability {_pct(pp.stability)})",
            )
        )
    return rows


_SUMMARY_HEAD = [
    "setting",
    "evaluations to target, mean",
    "evaluations to target, median",
    "recovery",
    "speedup",
    "belief cost [evaluations]",
    "evaluations to beat the belief's mode",
    "share that beat it",
]


def _summary_rows(c: _Content) -> list:
    km = _beyond(int(c.ds.attrs["budget"]))
    out = []
    for d in [str(x) for x in c.ds["distortion"].values]:
        out.append(_Group(f"distortion: {d}"))
        for s in c.shown:
            rec = c.recovery.sel(setting=s, distortion=d)
            row = [
                s,
                _cell(*_value(c.ett, s, d)),
                _cell(*_value(c.km, s, d), fmt=km),
                _cell(rec["probability"], rec["low"], rec["high"], fmt=_pct),
            ]
            if c.speedup is not None and s != an.NO_BELIEF:
                row += [_cell(*_value(c.speedup, s, d)), _cell(*_value(c.cost, s, d))]
            else:
                row += ["–", "–"]
            row.append(_cell(*_value(c.beat, s, d)))
            row.append(_pct(float(c.beat_share.sel(setting=s, distortion=d))))
            out.append(row)
    return out


def _regret_rows(c: _Content) -> tuple[list[str], list]:
    budgets = [int(b) for b in c.regret_at["budget"].values]
    head = ["setting", *(f"after {b} evaluations" for b in budgets)]
    rows = []
    for d in [str(x) for x in c.ds["distortion"].values]:
        rows.append(_Group(f"distortion: {d}"))
        for s in c.shown:
            one = c.regret_at.sel(setting=s, distortion=d)
            rows.append(
                [s]
                + [
                    _cell(*(float(one[k].sel(budget=b)) for k in ("estimate", "low", "high")))
                    for b in budgets
                ]
            )
    return head, rows


def _ranking_rows(c: _Content) -> tuple[list[str], list]:
    names = [str(d) for d in c.ds["distortion"].values]
    scores = c.rec.scores
    order = np.argsort(scores["estimate"].values, kind="stable")
    head = ["rank", "setting", f"score ({c.rule.rule})", *names]
    rows = []
    for rank, i in enumerate(order, 1):
        s = str(scores["setting"].values[i])
        row = [str(rank), s, _cell(*(float(scores[k][i]) for k in ("estimate", "low", "high")))]
        row += [_cell(*_value(c.decision, s, d)) for d in names]
        rows.append(row)
    return head, rows


def _effects_rows(c: _Content) -> tuple[list, str]:
    e = c.effects
    order = np.argsort(-e["share"].values, kind="stable")
    rows = []
    for i in order:
        rows.append(
            [
                str(e["source"].values[i]),
                f"{float(e['sum_of_squares'][i]):.4g}",
                _cell(e["share"][i], e["low"][i], e["high"][i], fmt=lambda v: f"{100 * v:.1f} %"),
            ]
        )
    factors = json.loads(e.attrs["factors"])
    chosen = [f for f in factors if f in an.SETTING_FACTORS]
    if chosen:
        top = max(chosen, key=lambda f: float(e["share"].sel(source=f)))
        words = (
            f"Of the settings, {top} matters most: its main effect holds "
            f"{100 * float(e['share'].sel(source=top)):.1f} % of the variation."
        )
        biggest = max(factors, key=lambda f: float(e["share"].sel(source=f)))
        if biggest not in chosen:
            words += (
                f" The largest single source is {biggest} "
                f"({100 * float(e['share'].sel(source=biggest)):.1f} %), a property of the "
                f"situation rather than a setting one can choose."
            )
    else:
        words = "No setting varies in this grid."
    dropped = json.loads(e.attrs["dropped"])
    if dropped:
        words += " Left out to keep the decomposition balanced: " + ", ".join(dropped) + "."
    return rows, words


def _strategies(c: _Content) -> list[str]:
    names = [str(s) for s in c.ds["strategy"].values] + [str(b) for b in c.ds["baseline"].values]
    return [f"{s}: {_STRATEGY_TEXT.get(s, 'a strategy of the workbench')}" for s in names]


def _method(c: _Content) -> list[str]:
    ds = c.ds
    decays = [str(d) for d in ds["decay"].values]
    families = sorted({d.partition(":")[0] for d in decays})
    return [
        "Decay schedules λ(t) of the belief's weight, t the evaluations spent: "
        + ", ".join(decays)
        + " ("
        + "; ".join(f"{f}: {_DECAY_TEXT.get(f, '')}" for f in families)
        + ").",
        (
            f"Each grid cell ran {ds.sizes['replicate']} replicates of {ds.attrs['budget']} "
            f"evaluations on each of {ds.sizes['landscape']} test landscape(s) "
            f"({', '.join(str(x) for x in ds['landscape'].values)}). Replicate k of every "
            f"setting, baseline and distortion shares the landscape's placement and its random "
            f"streams (common random numbers), so that settings are compared on the same draws: "
            f"every difference in this report is paired by replicate."
        ),
        (
            "Normalized regret is the best value found so far minus the landscape's optimum, "
            "divided by the gap between the median value over the space and the optimum. "
            f"Evaluations to target count evaluations until normalized regret first falls to "
            f"{ds.attrs['target']:g}; a campaign that never gets there is censored at the budget, "
            f"so the mean shown is restricted to the budget and the median is the Kaplan–Meier "
            f"estimate ('> budget' when fewer than half reach the target). Recovery is the share "
            f"of campaigns that reached the target, with Wilson score intervals. Speedup is "
            f"evaluations to target without a belief divided by those with it, per replicate "
            f"(geometric mean); belief cost is their difference (negative: a saving)."
        ),
        (
            f"Intervals are {_pct(c.rs.level)} percentile bootstrap intervals over replicates: "
            f"{c.rs.draws} draws with a fixed seed ({c.rs.seed}), each resampling the replicate "
            f"index once and applying it to every setting and baseline alike. The recommendation "
            f"averages the {an.METRIC_NAMES[c.rule.metric][0]} over landscapes and replicates "
            f"in each distortion and combines the distortions by the rule: {c.rule.describe()}."
        ),
    ]


_CAUTIONS = [
    "This is a simulation on cheap test landscapes placed where the belief says the optimum "
    "is; it is not the real system. The real response can be rougher, noisier or shaped "
    "differently, and the numbers here only rank settings under the stated assumptions.",
    "The real process's safety limits come first: keep every real evaluation inside the limits "
    "that the process, its equipment and its materials allow, whatever a strategy proposes.",
    "Where the tuned system can hurt someone, defer to local codes and to licensed practice; "
    "a recommendation from this workbench replaces neither.",
]


def _distortion_rows(c: _Content) -> list:
    ds = c.ds
    rows = []
    for i, d in enumerate(str(x) for x in ds["distortion"].values):
        rows.append(
            [
                d,
                _num(float(ds["distortion_shift"].values[i])),
                _num(float(ds["distortion_scale"].values[i])),
                str(ds["distortion_misplace"].values[i]) or "–",
                _num(float(c.distance.sel(distortion=d)), 2),
                _pct(float(c.mass.sel(distortion=d))),
            ]
        )
    return rows


_DISTORTION_HEAD = [
    "distortion",
    "shift [fraction of range]",
    "spread multiplied by",
    "centre put on",
    "distance of centre from optimum",
    "belief mass within 0.1 of it",
]


# --------------------------------------------------------------------------- HTML and Markdown


_STYLE = """
body { font-family: Georgia, "Times New Roman", serif; color: #1e1e1e; background: #fff;
  max-width: 64rem; margin: 2rem auto; padding: 0 1.2rem; line-height: 1.5; }
h1 { font-size: 1.75rem; margin-bottom: 0.2rem; }
h2 { font-size: 1.3rem; border-bottom: 1px solid #888; padding-bottom: 0.15rem;
  margin-top: 2.2rem; }
h3 { font-size: 1.08rem; margin-top: 1.6rem; }
p.meta { color: #555; margin-top: 0; }
.answer { border-left: 4px solid #333; background: #f5f4ef; padding: 0.6rem 1.1rem; }
.answer p.choice { font-size: 1.2rem; margin: 0.3rem 0 0.6rem 0; }
table { border-collapse: collapse; margin: 0.6rem 0 1rem 0; font-size: 0.86rem; }
th, td { border-bottom: 1px solid #ccc; padding: 0.22rem 0.55rem; vertical-align: top; }
th { text-align: left; border-bottom: 2px solid #666; font-weight: bold; }
td.n { text-align: right; white-space: nowrap; font-variant-numeric: tabular-nums; }
td.n span { display: block; color: #555; font-size: 0.8rem; }
tr.group th { background: #eeede8; border-bottom: 1px solid #999; font-style: italic; }
table.kv th { border-bottom: 1px solid #ccc; width: 12rem; }
figure { margin: 1.4rem 0; }
figure img { max-width: 100%; height: auto; border: 1px solid #ddd; }
figcaption { font-size: 0.9rem; color: #333; margin-top: 0.3rem; }
ul li { margin-bottom: 0.35rem; }
"""


def _html_cell(v, numeric: bool) -> str:
    cls = ' class="n"' if numeric else ""
    if isinstance(v, tuple):
        return f"<td{cls}>{_e(v[0])}<span>{_e(v[1])}</span></td>"
    return f"<td{cls}>{_e(v)}</td>"


def _table(head: list[str], rows: list, numeric_from: int = 1) -> str:
    out = ["<table>", "<tr>" + "".join(f"<th>{_e(h)}</th>" for h in head) + "</tr>"]
    for row in rows:
        if isinstance(row, _Group):
            out.append(f'<tr class="group"><th colspan="{len(head)}">{_e(row)}</th></tr>')
            continue
        out.append(
            "<tr>" + "".join(_html_cell(v, j >= numeric_from) for j, v in enumerate(row)) + "</tr>"
        )
    out.append("</table>")
    return "\n".join(out)


def _html(c: _Content, figures: list[tuple[str, str, str, bytes]]) -> str:
    ds = c.ds
    level = _pct(c.rs.level)
    metric_name = an.METRIC_NAMES[c.rule.metric][0]
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        f"<title>{_e(ds.attrs.get('title', 'Report'))}</title>",
        f"<style>{_STYLE}</style></head><body>",
        f"<h1>{_e(ds.attrs.get('title', ''))}</h1>",
        f'<p class="meta">Study {_e(ds.attrs.get("study_name", ""))}: '
        f"{ds.sizes['landscape']} landscape(s), {ds.sizes['distortion']} distortions, "
        f"{ds.sizes['replicate']} replicates per grid cell, budget {_e(ds.attrs['budget'])} "
        f"evaluations, target normalized regret {_e(ds.attrs['target'])}; "
        f"workbench {_e(ds.attrs.get('version', ''))}.</p>",
        "<h2>Recommendation</h2>",
        '<div class="answer">',
        f'<p class="choice" id="recommendation">Use <strong>{_e(_choice_words(c.rec.choice, c.ds))}'
        "</strong>.</p>",
        '<table class="kv">',
        *(f"<tr><th>{_e(k)}</th><td>{_e(v)}</td></tr>" for k, v in _answer_rows(c)),
        "</table>",
        f'<p id="risk"><strong>Risk of a misleading belief.</strong> {_e(_risk_paragraph(c))}</p>',
        "</div>",
        "<h3>The recommended setting, the runner-up and the baselines</h3>",
        f"<p>Means and medians over landscapes and replicates, per distortion; beneath each "
        f"value its {level} interval (bootstrap over replicates; Wilson for recovery). Speedup "
        f"and belief cost are against no belief. The belief's mode is the expert's best guess: "
        f"when the belief is exact it sits on the optimum, which cannot be beaten.</p>",
        _table(_SUMMARY_HEAD, _summary_rows(c)),
    ]
    head, rows = _regret_rows(c)
    parts += [
        "<h3>Normalized regret at chosen budgets</h3>",
        f"<p>Median normalized regret after the stated number of evaluations, with {level} "
        f"bootstrap intervals.</p>",
        _table(head, rows),
        "<h2>Figures</h2>",
    ]
    for _, title, caption, png in figures:
        data = base64.b64encode(png).decode("ascii")
        parts += [
            f"<figure><h3>{_e(title)}</h3>",
            f'<img alt="{_e(title)}" src="data:image/png;base64,{data}">',
            f"<figcaption>{_e(caption)}</figcaption></figure>",
        ]
    effect_rows, effect_words = _effects_rows(c)
    parts += [
        "<h3>Main effects and interactions</h3>",
        f"<p>Variance decomposition (the sums of squares of a balanced analysis of variance) of "
        f"{_e(metric_name)} per campaign over the factors of the grid, with {level} bootstrap "
        f"intervals of each share. {_e(effect_words)}</p>",
        _table(["source", "sum of squares", "share of the total"], effect_rows),
    ]
    head, rows = _ranking_rows(c)
    parts += [
        "<h3>All belief-guided settings, ranked by the rule</h3>",
        f"<p>Score under the rule and mean {_e(metric_name)} per distortion, with {level} "
        f"intervals; lower is better.</p>",
        _table(head, rows, numeric_from=2),
        "<h2>Method</h2>",
        "<p>Strategies simulated:</p>",
        "<ul>",
        *(f"<li>{_e(t)}</li>" for t in _strategies(c)),
        "</ul>",
        *(f"<p>{_e(p)}</p>" for p in _method(c)),
        "<h3>How the beliefs were distorted</h3>",
        "<p>Shift moves the belief's centre by a distance in fractions of each parameter's "
        "range; the spread factor multiplies its width (below 1: overconfident); misplace puts "
        "the centre on the landscape's worst point or on a decoy optimum. Distance and mass are "
        "means over landscapes and replicates.</p>",
        _table(_DISTORTION_HEAD, _distortion_rows(c)),
        "<h2>Cautions</h2>",
        "<ul>",
        *(f"<li>{_e(t)}</li>" for t in _CAUTIONS),
        "</ul>",
        "</body></html>",
    ]
    return "\n".join(parts) + "\n"


def _md_cell(v) -> str:
    text = f"{v[0]} {v[1]}" if isinstance(v, tuple) else str(v)
    return text.replace("|", "\\|")


def _md_table(head: list[str], rows: list) -> str:
    lines = ["| " + " | ".join(_md_cell(h) for h in head) + " |"]
    lines.append("|" + "|".join(" --- " for _ in head) + "|")
    for row in rows:
        if isinstance(row, _Group):
            row = [f"*{row}*"] + [""] * (len(head) - 1)
        lines.append("| " + " | ".join(_md_cell(v) for v in row) + " |")
    return "\n".join(lines)


def _markdown(c: _Content, figures: list[tuple[str, str, str, bytes]]) -> str:
    lines = [
        f"# {c.ds.attrs.get('title', 'Report')}",
        "",
        "## Recommendation",
        "",
        f"Use **{_choice_words(c.rec.choice, c.ds)}**.",
        "",
        *(f"- {k}: {v}" for k, v in _answer_rows(c)),
        "",
        f"**Risk of a misleading belief.** {_risk_paragraph(c)}",
        "",
        "## The recommended setting, the runner-up and the baselines",
        "",
        f"Values with their {_pct(c.rs.level)} intervals in brackets.",
        "",
        _md_table(_SUMMARY_HEAD, _summary_rows(c)),
        "",
        "## Figures",
        "",
        *(f"- {title}: `{FIGURES}/{stem}.png`" for stem, title, _, _ in figures),
        "",
        "## Method",
        "",
        *(f"- {t}" for t in _strategies(c)),
        "",
        *(p + "\n" for p in _method(c)),
        "## Cautions",
        "",
        *(f"- {t}" for t in _CAUTIONS),
        "",
    ]
    return "\n".join(lines)


def write_report(
    folder: str | Path,
    rule: an.Rule | None = None,
    resampling: an.Resampling | None = None,
    ds: xr.Dataset | None = None,
) -> tuple[ReportFiles, an.Recommendation]:
    """Write ``report.html``, ``summary.md`` and ``figures/*.png`` into ``folder`` (which holds
    grid.nc, unless ``ds`` is given); returns the files written and the recommendation."""
    folder = Path(folder)
    ds = ds if ds is not None else an.open_grid(folder)
    rule = rule or an.decision_rule(ds)
    c = _compute(ds, rule, resampling or an.Resampling())
    figures = _figures(c)
    paths = []
    for stem, _, _, png in figures:
        path = folder / FIGURES / f"{stem}.png"
        with atomic_path(path) as tmp:
            tmp.write_bytes(png)
        paths.append(path)
    page = write_text(folder / REPORT, _html(c, figures))
    summary = write_text(folder / SUMMARY, _markdown(c, figures))
    return ReportFiles(page, summary, tuple(paths)), c.rec
