"""The report's words and table rows: the answer, the risk paragraph, the method, the cautions."""

from __future__ import annotations

import json

import numpy as np
import xarray as xr

from .. import analysis as an
from ..analysis.transfer_check import difficulty
from ..engine.strategies import STRATEGIES, description
from ..world.resemblance import MEASURES
from .content import (
    DECAY_TEXT,
    Content,
    Group,
    beyond_budget,
    cell,
    num,
    pct,
    span,
)


def _value(data: xr.Dataset, setting: str, distortion: str) -> tuple[float, float, float]:
    one = data.sel(setting=setting, distortion=distortion)
    return float(one["estimate"]), float(one["low"]), float(one["high"])


def choice_words(choice: dict, ds: xr.Dataset) -> str:
    parts = [f"strategy {choice['strategy']}", f"decay schedule {choice['decay']}"]
    if choice.get("quantile") is not None:
        parts.append(f"threshold quantile γ = {choice['quantile']:g}")
    for k in ("exploration", "initial"):
        if ds.sizes[k] > 1:
            parts.append(f"{k} {choice[k]}")
    return ", ".join(parts)


def risk_paragraph(c: Content) -> str:
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
    level = pct(c.rs.level)
    parts = []
    for d in names:
        v, lo, hi = _value(c.cost, s, d)
        if hi < 0:
            word = f"saves {num(-v)} evaluations ({span(-hi, -lo)})"
        elif lo > 0:
            word = f"costs {num(v)} more ({span(lo, hi)})"
        else:
            word = f"costs about the same ({num(v)}, {span(lo, hi)})"
        parts.append(f"{word} when the belief is {d}")
    text = (
        f"Against no belief, which needs {num(base)} evaluations to reach the target on average "
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
            f"paying for itself at '{d}' (centre {num(float(c.distance.sel(distortion=d)), 2)} "
            f"of the range away on average, {pct(float(c.mass.sel(distortion=d)))} of its mass "
            f"within 0.1 of the optimum): there it costs more than using no belief at all."
        )
        kept = [x for x in order if order.index(x) < order.index(d)]
        if kept:
            far = kept[-1]
            text += (
                f" It still pays at '{far}' (centre "
                f"{num(float(c.distance.sel(distortion=far)), 2)} of the range away)."
            )
    else:
        worst = max(names, key=lambda d: _value(c.cost, s, d)[0])
        text += (
            f" In none of the simulated distortions did it cost more than no belief; at the "
            f"least favourable, '{worst}', it still saved {num(-_value(c.cost, s, worst)[0])}."
        )
    return text


def edge_rows(edges) -> list[tuple[str, str]]:
    """The answer's rows for a choice at the edge of the levels studied
    (:func:`workbench.analysis.study_edges`): what sits on the edge, and the lines to put in
    the study file to study beyond it."""
    if not edges:
        return []
    rows = [("edge of the study", e.words) for e in edges]
    head, *keys = an.edge_snippet(edges).splitlines()
    rows.append(
        (
            "to study beyond it",
            f"in the study file's {head} table, replace "
            + " and ".join(f"the {k.split(' =')[0]} line with: {k}" for k in keys),
        )
    )
    return rows


def answer_rows(c: Content) -> list[tuple[str, str]]:
    r = c.rec
    metric_name, unit = an.METRIC_NAMES[c.rule.metric]
    level = pct(c.rs.level)
    rows = [
        ("rule", c.rule.describe()),
        ("landscapes", c.rule.landscapes_text()),
        (
            metric_name,
            f"{num(r.value)} {unit} ({level} interval {span(*r.interval)})",
        ),
    ]
    if r.runner_up is not None:
        ru = r.runner_up
        rows.append(
            (
                "runner-up",
                f"{ru['setting']}: {num(ru['value'])} ({span(*ru['interval'])})",
            )
        )
    rows.append(
        (
            "stability",
            f"{pct(r.stability)} of {c.rs.draws} bootstrap resamples of the replicates pick the "
            f"same setting",
        )
    )
    rows += edge_rows(r.edges)
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
                f"{choice_words(pp.choice, c.ds)}: {num(pp.value)} {unit} "
                f"({level} interval {span(*pp.interval)}; stability {pct(pp.stability)})",
            )
        )
    return rows


SUMMARY_HEAD = [
    "setting",
    "evaluations to target, mean",
    "evaluations to target, median",
    "recovery",
    "speedup",
    "belief cost [evaluations]",
    "evaluations to beat the belief's mode",
    "share that beat it",
]


def summary_rows(c: Content) -> list:
    km = beyond_budget(int(c.ds.attrs["budget"]))
    out = []
    for d in [str(x) for x in c.ds["distortion"].values]:
        out.append(Group(f"distortion: {d}"))
        for s in c.shown:
            rec = c.recovery.sel(setting=s, distortion=d)
            row = [
                s,
                cell(*_value(c.ett, s, d)),
                cell(*_value(c.km, s, d), fmt=km),
                cell(rec["probability"], rec["low"], rec["high"], fmt=pct),
            ]
            if c.speedup is not None and s != an.NO_BELIEF:
                row += [
                    cell(*_value(c.speedup, s, d)),
                    cell(*_value(c.cost, s, d)),
                ]
            else:
                row += ["–", "–"]
            row.append(cell(*_value(c.beat, s, d)))
            row.append(pct(float(c.beat_share.sel(setting=s, distortion=d))))
            out.append(row)
    return out


def regret_rows(c: Content) -> tuple[list[str], list]:
    budgets = [int(b) for b in c.regret_at["budget"].values]
    head = ["setting", *(f"after {b} evaluations" for b in budgets)]
    rows = []
    for d in [str(x) for x in c.ds["distortion"].values]:
        rows.append(Group(f"distortion: {d}"))
        for s in c.shown:
            one = c.regret_at.sel(setting=s, distortion=d)
            rows.append(
                [s]
                + [
                    cell(*(float(one[k].sel(budget=b)) for k in ("estimate", "low", "high")))
                    for b in budgets
                ]
            )
    return head, rows


def ranking_rows(c: Content) -> tuple[list[str], list]:
    names = [str(d) for d in c.ds["distortion"].values]
    scores = c.rec.scores
    order = np.argsort(scores["estimate"].values, kind="stable")
    head = ["rank", "setting", f"score ({c.rule.rule})", *names]
    rows = []
    for rank, i in enumerate(order, 1):
        s = str(scores["setting"].values[i])
        row = [
            str(rank),
            s,
            cell(*(float(scores[k][i]) for k in ("estimate", "low", "high"))),
        ]
        row += [cell(*_value(c.decision, s, d)) for d in names]
        rows.append(row)
    return head, rows


def effects_rows(c: Content) -> tuple[list, str]:
    e = c.effects
    order = np.argsort(-e["share"].values, kind="stable")
    rows = []
    for i in order:
        rows.append(
            [
                str(e["source"].values[i]),
                f"{float(e['sum_of_squares'][i]):.4g}",
                cell(e["share"][i], e["low"][i], e["high"][i], fmt=lambda v: f"{100 * v:.1f} %"),
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


TRANSFER_HEAD = [
    "kind of landscape",
    "landscapes",
    "setting chosen on this kind alone",
    "its score",
    "cost of the textbook choice here",
]


def transfer_rows(c: Content) -> tuple[list, str]:
    """Rows of the by-kind table and a sentence on whether the textbook choice holds."""
    t = c.transfer
    rows = []
    for i, kind in enumerate(t["kind"].values):
        textbook = str(kind) == "textbook" or not t.attrs["textbook_setting"]
        rows.append(
            [
                str(kind),
                str(int(t["landscapes"][i])),
                str(t["setting"].values[i]),
                num(float(t["value"][i])),
                "–"
                if textbook
                else cell(float(t["cost"][i]), float(t["low"][i]), float(t["high"][i])),
            ]
        )
    others = [i for i, k in enumerate(t["kind"].values) if str(k) != "textbook"]
    if not t.attrs["textbook_setting"]:
        words = "The grid has no textbook landscape to compare with."
    elif all(float(t["high"][i]) <= 0 or float(t["cost"][i]) == 0 for i in others):
        words = (
            "The setting chosen on the textbook landscapes costs nothing measurable on the "
            "other kinds: the answer transfers."
        )
    else:
        worse = [str(t["kind"].values[i]) for i in others if float(t["low"][i]) > 0]
        words = (
            "On " + ", ".join(worse) + " landscapes the textbook choice costs more than the "
            "kind's own choice (interval above 0): check the answer there before relying on it."
            if worse
            else "Where the kinds choose differently, the intervals include no cost: the "
            "difference is not told apart from chance."
        )
    return rows, words


RESEMBLANCE_HEAD = [
    "landscape",
    "kind",
    "measures",
    "rank agreement",
    "log likelihood per point",
]


def resemblance_rows(c: Content) -> tuple[list, str]:
    """Rows of the resemblance table (from the grid's variables) and the words around it."""
    r = c.resemblance
    likelihood = {
        "rank_agreement": MEASURES["likelihood"],
        "loo_rank_agreement": MEASURES["loo_log_density"],
    }
    rows = []
    for i, label in enumerate(r["landscape"].values):
        measure = str(r["resemblance_measure"].values[i])
        placements = int(r["resemblance_placements"][i]) if "resemblance_placements" in r else 0
        how = MEASURES.get(measure, measure)
        if placements > 1:
            how += f", median of {placements} placements"
        rows.append(
            [
                str(label),
                str(r["landscape_kind"].values[i]) if "landscape_kind" in r else "textbook",
                f"{how}; {likelihood.get(measure, 'likelihood')}",
                cell(
                    float(r["resemblance"][i]),
                    float(r["resemblance_low"][i]),
                    float(r["resemblance_high"][i]),
                    fmt=lambda v: num(v, 2),
                ),
                num(float(r["resemblance_likelihood"][i])),
            ]
        )
    level = pct(float(c.ds.attrs.get("resemblance_level", 0.95)))
    words = (
        f"How well each landscape explains the earlier evaluations "
        f"({c.ds.attrs.get('resemblance_data', 'the study data')}), computed when the grid was "
        f"run. Rank agreement is Spearman's correlation between the landscape's values at the "
        f"data's configurations and the measured responses (for a fitted landscape, between "
        f"the leave-one-out predictions of the GP fitted to the data and the responses), with a "
        f"{level} bootstrap interval over the data rows: 1 orders the data as measured, 0 no "
        f"better than chance, negative against it. The log likelihood per point is that of "
        f"the standardised data under a GP with the landscape's own length scales (for a "
        f"fitted landscape, the leave-one-out log predictive density, usually higher since "
        f"that GP was fitted to the data): higher is better; it cannot tell a landscape from "
        f"its mirror image, the rank agreement can."
    )
    far = far_optimum_lines(c.ds)
    if far:
        words += " " + " ".join(f"{line[0].upper()}{line[1:]}." for line in far)
    return rows, words


# The far optima a line names (distinct places, in replicate order).
_PLACES_SHOWN = 3


def far_optimum_lines(ds: xr.Dataset) -> list[str]:
    """One line per fitted landscape with replicates whose optimum lies far from every earlier
    evaluation (:func:`workbench.analysis.far_optima`); the report and the audit print them."""
    lines = []
    for f in an.far_optima(ds):
        places = list(dict.fromkeys(p for p in f.points if p))
        shown = "; ".join(places[:_PLACES_SHOWN])
        if len(places) > _PLACES_SHOWN:
            shown += f"; and {len(places) - _PLACES_SHOWN} other places"
        where = f" (at {shown})" if shown else ""
        verb = "puts its optimum" if f.far == 1 else "put their optimum"
        lines.append(
            f"{f.far} of {f.replicates} fitted replicates of '{f.landscape}' {verb} far from "
            f"every earlier evaluation{where}: farther than {f.limit:g} of the range from the "
            f"nearest, where the fitted GP extrapolates"
        )
    return lines


def strategy_paragraphs(c: Content) -> list[str]:
    names = [str(s) for s in c.ds["strategy"].values] + [str(b) for b in c.ds["baseline"].values]
    return [
        f"{s}: {description(s) if s in STRATEGIES else 'a strategy of the workbench'}"
        for s in names
    ]


def method_paragraphs(c: Content) -> list[str]:
    ds = c.ds
    decays = [str(d) for d in ds["decay"].values]
    families = sorted({d.partition(":")[0] for d in decays})
    return [
        "Decay schedules λ(t) of the belief's weight, t the evaluations spent: "
        + ", ".join(decays)
        + " ("
        + "; ".join(f"{f}: {DECAY_TEXT.get(f, '')}" for f in families)
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
            f"Intervals are {pct(c.rs.level)} percentile bootstrap intervals over replicates: "
            f"{c.rs.draws} draws with a fixed seed ({c.rs.seed}), each resampling the replicate "
            f"index once and applying it to every setting and baseline alike. The recommendation "
            f"averages the {an.METRIC_NAMES[c.rule.metric][0]} over landscapes and replicates "
            f"in each distortion and combines the distortions by the rule: {c.rule.describe()}."
        ),
    ]


CAUTIONS = [
    "This is a simulation on cheap test landscapes placed where the belief says the optimum "
    "is; it is not the real system. The real response can be rougher, noisier or shaped "
    "differently, and the numbers here only rank settings under the stated assumptions.",
    "The real process's safety limits come first: keep every real evaluation inside the limits "
    "that the process, its equipment and its materials allow, whatever a strategy proposes.",
    "Where the tuned system can hurt someone, defer to local codes and to licensed practice; "
    "a recommendation from this workbench replaces neither.",
]


def distortion_rows(c: Content) -> list:
    ds = c.ds
    rows = []
    for i, d in enumerate(str(x) for x in ds["distortion"].values):
        rows.append(
            [
                d,
                num(float(ds["distortion_shift"].values[i])),
                num(float(ds["distortion_scale"].values[i])),
                str(ds["distortion_misplace"].values[i]) or "–",
                num(float(c.distance.sel(distortion=d)), 2),
                pct(float(c.mass.sel(distortion=d))),
            ]
        )
    return rows


DISTORTION_HEAD = [
    "distortion",
    "shift [fraction of range]",
    "spread multiplied by",
    "centre put on",
    "distance of centre from optimum",
    "belief mass within 0.1 of it",
]


TRUTH_HEAD = ["measure", "estimate", "interval"]
TRUTH_LANDSCAPE_HEAD = ["landscape (alone)", "Spearman", "real rank of its pick", "transfer gap"]


def truth_rows(c: Content) -> tuple[list, list, str]:
    """The transfer check: its measures, the same per landscape, and a reading of them."""
    t = c.truth
    o = t.overall
    n = len(t.settings)

    def row(name, m, fmt=num):
        return [name, fmt(m.estimate), f"{fmt(m.low)} to {fmt(m.high)}"]

    rank = lambda v: f"{v:.0f} of {n}"  # noqa: E731
    rows = [
        ["simulated pick", o.pick, ""],
        ["best on the truth", t.best_real, ""],
        row("real rank of the pick", o.real_rank, rank),
        row("real cost of the pick (score above the best)", o.real_cost),
        row("transfer gap (0 perfect, 1 a random setting)", o.gap),
        row("Spearman, simulated vs real scores", o.spearman),
        row("Kendall, simulated vs real scores", o.kendall),
        row("split-half Spearman of the real order (its ceiling)", t.split_half),
    ]
    by = [
        [
            r.landscape,
            cell(r.spearman.estimate, r.spearman.low, r.spearman.high),
            rank(r.real_rank.estimate),
            num(r.gap.estimate),
        ]
        for r in t.by_landscape
    ]
    holds = o.gap.high <= 0.5 and o.spearman.low > 0
    words = (
        f"The setting chosen in simulation ranks {rank(o.real_rank.estimate)} on the truth "
        f"and the simulated order agrees with the real one (Spearman {num(o.spearman.estimate)}; "
        f"the real order's own split-half agreement is {num(t.split_half.estimate)})."
        if holds
        else f"The setting chosen in simulation ranks {rank(o.real_rank.estimate)} on the truth: "
        "the simulated order does not reliably match the real one; weigh the landscapes that "
        "rank like the truth (below) more, or add ones that resemble the real response."
    )
    hard = difficulty(c.ds) | difficulty(c.truth_grid)
    if hard:
        words += (
            " How hard each landscape is beside the truth (no-belief's mean evaluations to "
            "target, exact belief): "
            + ", ".join(f"{k} {num(v)}" for k, v in hard.items())
            + f", of a budget of {int(c.ds.attrs['budget'])}."
        )
    return rows, by, words
