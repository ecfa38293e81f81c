"""The written study plan: sections built from the pilot's numbers (pure), rendered as Markdown
and HTML, and written as ``plan.md`` and ``plan.html``.

It states the questions, the factors and their levels, the responses and the decision rule,
the design and its seeding, the number of replicates and why, the compute the study will take
and how it will be analysed, and the command that runs it.
"""

from __future__ import annotations

import html
import re
import shlex
from collections.abc import Iterable
from dataclasses import dataclass, field, replace
from datetime import date
from pathlib import Path

from .. import __version__
from ..analysis.edges import edge_snippet
from ..engine.strategies import uses_quantile
from ..report import page
from ..report.markup import md_code, md_text
from ..storage import write_text
from ..study.cost import duration, size
from ..study.grid import settings
from ..study.runner import MANIFEST
from ..study.spec import Study
from . import sample_size
from .estimate import (
    TIME_LEVEL,
    TIME_RESAMPLES,
    Compute,
    Replicates,
    compute_estimate,
    pilot_edges,
    replicates_needed,
)
from .options import PlanOptions
from .pilot import Pilot

PLAN_MD = "plan.md"
PLAN_HTML = "plan.html"
DEFAULT_QUESTIONS = (
    "Which decay schedule and threshold quantile should be used?",
    "How many evaluations does a misleading belief cost against using no belief at all?",
)


@dataclass(frozen=True)
class Block:
    """One piece of the document: ``kind`` p (paragraph), ul (list), table, code or warning."""

    kind: str
    text: str = ""
    items: tuple[str, ...] = ()
    header: tuple[str, ...] = ()
    rows: tuple[tuple[str, ...], ...] = ()


@dataclass(frozen=True)
class Section:
    title: str
    blocks: tuple[Block, ...]


def _p(text: str) -> Block:
    return Block("p", text)


def _ul(items: Iterable[str]) -> Block:
    return Block("ul", items=tuple(items))


def _table(header: Iterable[str], rows: Iterable[Iterable]) -> Block:
    return Block("table", header=tuple(header), rows=tuple(tuple(str(v) for v in r) for r in rows))


@dataclass(frozen=True, eq=False)
class Plan:
    """The study plan: its parts, ready to print or write."""

    study: Study
    options: PlanOptions
    pilot: Pilot
    replicates: Replicates
    compute: Compute
    out: Path
    command: str
    edit: tuple[str | None, str]
    written: str
    sections: tuple[Section, ...] = field(default=())
    edges: tuple = ()

    @property
    def warning(self) -> str | None:
        r = self.replicates
        if not r.capped:
            return None
        return (
            f"the cap binds: {r.needed} replicates are needed but --cap is {r.cap}, so the plan "
            f"uses {r.cap}; the recovery interval and the power will fall short of their aims"
        )

    @property
    def title(self) -> str:
        return f"Study plan: {self.study.title}"

    def markdown(self) -> str:
        return _markdown(self)

    def html(self) -> str:
        return _html(self)


def build_plan(
    study: Study,
    pilot: Pilot,
    options: PlanOptions,
    out: str | Path,
    *,
    cores: int | None = None,
    written: str | None = None,
) -> Plan:
    """The plan of ``study`` from its ``pilot``; ``out`` is where the study's results will go."""
    options.check(study)
    out = Path(out)
    reps = replicates_needed(study, pilot, options)
    comp = compute_estimate(
        study, pilot, reps.chosen, jobs=options.jobs, workers=options.workers, cores=cores
    )
    command = f"workbench run {shlex.quote(study.path)} --out {shlex.quote(str(out))}"
    if options.jobs:
        command += f" --jobs {options.jobs}"
    # A folder holding results of the study before the edit refuses the edited study unless
    # the run starts over there.
    if reps.chosen != study.replicates and (out / MANIFEST).exists():
        command += " --fresh"
    plan = Plan(
        study=study,
        options=options,
        pilot=pilot,
        replicates=reps,
        compute=comp,
        out=out,
        command=command,
        edit=replicates_edit(study, reps.chosen),
        written=written or date.today().isoformat(),
        edges=pilot_edges(study, pilot),
    )
    return replace(plan, sections=_sections(plan))


def replicates_edit(study: Study, replicates: int) -> tuple[str | None, str]:
    """The study's top-level ``replicates`` line (None if it has none) and its new text."""
    head = re.split(r"(?m)^\s*\[", study.text, maxsplit=1)[0]
    match = re.search(r"(?m)^[ \t]*replicates[ \t]*=[ \t]*([0-9_]+)(.*)$", head)
    if match is None:
        return None, f"replicates = {replicates}"
    line = match.group(0)
    start, end = match.span(1)
    offset = match.start(0)
    return line, line[: start - offset] + str(replicates) + line[end - offset :]


def write_plan(plan: Plan, out: str | Path | None = None) -> tuple[Path, Path]:
    """Write ``plan.md`` and ``plan.html`` into ``out`` (default: the plan's results folder),
    each atomically; returns their paths."""
    folder = Path(out) if out is not None else plan.out
    md = write_text(folder / PLAN_MD, plan.markdown())
    html_path = page.write_page_linked(folder / PLAN_HTML, _html(plan, folder / PLAN_HTML))
    return md, html_path


# --------------------------------------------------------------------------- words


def _pct(v: float) -> str:
    return f"{100 * v:g} %"


def reasons(plan: Plan) -> list[str]:
    """The replicate count's reasons, one line each (the CLI prints these)."""
    r, o = plan.replicates, plan.options
    why = (
        "p = 0.5, the worst case: the pilot cannot tell"
        if r.worst_case
        else f"p = {r.p:.3g}, the end nearest 0.5 of the pilot's Wilson intervals"
    ) + (f"; {r.recovery_words}" if r.recovery_words else "")
    wilson = f", {r.campaigns} after the Wilson check" if r.campaigns != r.normal_campaigns else ""
    lines = [
        f"(a) recovery interval ±{o.half_width:g} at {_pct(o.confidence)} ({why}): "
        f"n = z² p(1 − p)/h² = {r.z:.4g}² × {r.p:.3g} × {1 - r.p:.3g} / {o.half_width:g}² "
        f"= {r.normal:.2f} → {r.normal_campaigns} campaigns per setting and distortion{wilson}; "
        f"over {r.per_replicate} landscape(s): {r.interval} replicate(s) "
        f"(Wilson half-width there {r.wilson:.3f})"
    ]
    if r.search is None:
        lines.append("(b) power: the pilot has no two settings to compare; not used")
    else:
        s = r.search
        count = (
            f"{s.replicates} replicate(s), power {s.achieved:.2f}"
            if s.reached
            else f"more than {s.replicates} replicates (power {s.achieved:.2f} there)"
        )
        lines.append(
            f"(b) power {o.power:g} to tell apart settings {r.difference:.3g} evaluations apart "
            f"(paired Wilcoxon signed-rank, two-sided, α = {o.alpha:.3g}, {s.resamples} "
            f"resampled studies of the pilot's centred paired differences): {count}"
        )
        lines.append(f"    difference {r.difference:.3g}: {r.difference_words}")
    lines.append(
        f"chosen: {r.chosen} replicates, the larger of the two ({plan.replicates.driver})"
        + (f", capped at --cap {r.cap}" if r.capped else "")
    )
    return lines


def _questions(study: Study) -> tuple[str, ...]:
    return study.questions or DEFAULT_QUESTIONS


def _rule_words(study: Study) -> str:
    """The decision rule as the report words it (weights normalised; none given: equal)."""
    from ..analysis import Rule
    from ..study.resemblance import earlier_evaluations
    from ..study.spec import EQUAL, RESEMBLANCE

    d = study.decision
    names = [x.name for x in study.distortions]
    weights = dict(d.weights) or dict.fromkeys(names, 1.0)
    total = float(sum(weights.values())) or 1.0
    full = {n: float(weights.get(n, 0.0)) / total for n in names}
    resemblance = d.landscapes == RESEMBLANCE or (
        not d.landscapes and earlier_evaluations(study) is not None
    )
    if resemblance:
        rule = Rule(d.rule, full, float(d.level), d.metric, {}, d.score)
        return f"{rule.describe()}; landscapes weighted by their resemblance to the data"
    lw = {} if d.landscapes == EQUAL else dict(d.landscapes)
    return Rule(d.rule, full, float(d.level), d.metric, lw, d.score, "the study's").describe()


def _placement_words(s: Study) -> str:
    if s.space is not None:
        return "each landscape's optimum at the belief's mode, on the study's space"
    if s.placement == "native":
        return "native (the landscape's own optimum)"
    return "random per replicate, at least 0.1 from the cube's faces"


def _questions_section(plan: Plan) -> Section:
    s = plan.study
    whose = (
        "The questions are the study's own."
        if s.questions
        else "The study states no questions; these are the workbench's defaults."
    )
    return Section("1. Questions", (_ul(_questions(s)), _p(whose)))


def _factors_section(plan: Plan) -> Section:
    s = plan.study
    blocks = [
        _p(
            f"Budget: {s.budget} evaluations per campaign, initial design included. Target: "
            f"normalized regret {s.target:g}. Landscape placement: {_placement_words(s)}."
        ),
        _table(
            ("landscape", "dimension", "noise (sd / gap)"),
            ((e.label, e.dim, f"{e.noise:g}") for e in s.landscapes),
        ),
    ]
    if s.space is not None:
        blocks.append(
            _table(("parameter", "range"), ((p.name, p.describe()) for p in s.space.parameters))
        )
    else:
        blocks.append(_p(f"Belief: a Gaussian of spread {s.spread:g} (cube units)."))
    size_words = f"{s.initial_size} evaluations" if s.initial_size is not None else "dimension + 1"
    blocks += [
        _table(
            ("distortion", "shift", "scale", "misplace"),
            ((d.name, f"{d.shift:g}", f"{d.scale:g}", d.misplace or "–") for d in s.distortions),
        ),
        _table(
            ("strategy", "decay schedules", "threshold quantiles", "exploration"),
            (
                (
                    f.name,
                    ", ".join(str(d) for d in f.decay),
                    ", ".join(f"{q:g}" for q in f.quantile)
                    if uses_quantile(f.name)
                    else "– (does not use it)",
                    ", ".join(f"{e:g}" for e in f.exploration),
                )
                for f in s.strategies
            ),
        ),
        _p(
            f"Initial designs: {', '.join(s.initial)} ({size_words}). "
            f"Baselines: {', '.join(s.baselines) or 'none'}."
        ),
        _p("Responses, per campaign:"),
        _ul(
            (
                f"evaluations to target: the first evaluation at which normalized regret falls "
                f"to {s.target:g}, censored at the budget ({s.budget}) when it never does",
                "recovery probability: the share of campaigns that reach the target within the "
                "budget, under each distortion",
                "final normalized regret: best value found minus the optimum, divided by the "
                "landscape's reference gap, after the whole budget",
                "belief cost: evaluations to target with the belief minus without it "
                "(no-belief), paired by replicate; negative is a saving",
                "speedup: evaluations to target without a belief divided by those with it",
            )
        ),
        _p(f"Decision rule: {_rule_words(s)}."),
    ]
    return Section("2. Factors, levels and responses", tuple(blocks))


def _design_section(plan: Plan) -> Section:
    s = plan.study
    guided, baseline = settings(s)
    n_settings = len(guided) + len(baseline)
    n_cells = len(s.landscapes) * len(s.distortions) * n_settings
    return Section(
        "3. Design",
        (
            _p(
                f"Full factorial: {len(s.landscapes)} landscape(s) × {len(s.distortions)} "
                f"distortion(s) × {n_settings} strategy settings ({len(guided)} "
                f"belief-guided, {len(baseline)} baselines) = {n_cells} grid cells, each run "
                "for every replicate."
            ),
            _p(
                "Common random numbers: replicate k of every setting shares its landscape "
                "placement and random streams, so settings are compared on the same draws and "
                "every comparison is paired by replicate (a variance-reduction device for "
                "comparing simulated systems; A. M. Law, Simulation Modeling and Analysis)."
            ),
            _p(
                f"Seeds: every stream derives from the root seed {s.seed} through numpy's "
                "SeedSequence, keyed by names (CRC-32) rather than positions. The placement "
                "comes from (root, landscape, 'placement', replicate), shared by every "
                "distortion and setting of that replicate; the distortion direction, initial "
                "design, strategy and noise streams from (root, landscape, distortion, "
                "replicate), shared by every strategy setting. The baselines that ignore the "
                "belief (no-belief, random) run once per landscape and replicate with the exact "
                "distortion's streams and are repeated across distortions."
            ),
            _p(
                "Work is split into chunks, one per landscape, distortion and block of "
                f"{s.block} replicates, whose campaigns advance together; each chunk is "
                "written to disk as it finishes, and a stopped run resumes."
            ),
        ),
    )


def _interval_words(plan: Plan) -> str:
    r, o = plan.replicates, plan.options
    if r.worst_case:
        p = (
            "p = 0.5, the worst case: some setting's pilot Wilson interval contains 0.5, so the "
            "pilot cannot tell the recovery probability away from it."
        )
    else:
        p = (
            f"p = {r.p:.3g}: no pilot Wilson interval contains 0.5, and this is the end nearest "
            "0.5 of any setting's interval (the widest interval to come)."
        )
    if r.recovery_words:
        p += f" Deciding cell: {r.recovery_words}."
    at = float(sample_size.wilson_half_width(r.p, r.campaigns, o.confidence))
    if r.campaigns != r.normal_campaigns:
        check = (
            f"at {r.normal_campaigns} campaigns it is wider than {o.half_width:g}, so the count "
            f"was raised to {r.campaigns}, where it is {at:.4f}"
        )
    else:
        check = f"at {r.campaigns} campaigns its half-width is {at:.4f} ≤ {o.half_width:g}"
    return (
        f"{p} Check with the Wilson score interval (Wilson 1927): {check}. The report pools "
        "each recovery interval over landscapes and replicates, per setting and distortion, so "
        f"each replicate adds {r.per_replicate} campaign(s): ⌈{r.campaigns} / "
        f"{r.per_replicate}⌉ = {r.interval} replicate(s), where the Wilson half-width is "
        f"{r.wilson:.4f}."
    )


def _power_words(plan: Plan) -> str:
    r, o = plan.replicates, plan.options
    sr = r.search
    if sr is None:
        return "(b) Power: the pilot has no two settings to compare; not used."
    found = (
        f"R = {sr.replicates}, power {sr.achieved:.3f}"
        if sr.reached
        else f"more than R = {sr.replicates} (the search stopped there, power {sr.achieved:.3f})"
    )
    return (
        f"(b) Power {o.power:g} to tell apart two settings whose evaluations to target differ "
        f"by {r.difference:.3g} evaluations ({r.difference_words}), paired by replicate, "
        "estimated by resampling the pilot. The paired differences of evaluations to target "
        "between pilot settings "
        f"({len(r.comparisons)} comparisons: {'; '.join(r.comparisons)}), in every landscape "
        "and distortion, are centred on their median over the pilot's replicates and scaled "
        f"by √(k/(k − 1)) for the spread centring takes away (k = {o.pilot_replicates}); the "
        f"stated difference is then added. For a candidate count R, {sr.resamples} resampled "
        f"studies each draw R differences per landscape ({sr.pairs_per_replicate} pairs per "
        "replicate, as the report pools landscapes) and apply the two-sided Wilcoxon "
        "signed-rank test (normal approximation, zeros split) at α = 1 − confidence = "
        f"{o.alpha:.3g}; the power is the share that reject. The smallest R reaching the power "
        "is found by doubling then bisection, with a fixed seed derived from the root seed "
        f"under the key 'plan': {found}. Censored campaigns enter at the budget, as in the "
        "report's restricted means; the report's own comparison is a paired bootstrap "
        "interval, for which the signed-rank test stands in here."
    )


def _replicates_section(plan: Plan) -> Section:
    s, o, r, pilot = plan.study, plan.options, plan.replicates, plan.pilot
    blocks = [
        _p(
            f"Pilot, run for real before this plan was written: {pilot.design.describe(s)}; "
            f"{pilot.campaigns} campaigns in {pilot.wall:.1f} s on {pilot.jobs} process(es). "
            "Its seeds are the study's own, so its campaigns are the study's first replicates "
            "of those cells."
        ),
        _p(
            f"(a) Recovery interval of half-width h = {o.half_width:g} at {_pct(o.confidence)} "
            "confidence, by the normal approximation (common practice, any statistics "
            "textbook):"
        ),
        Block(
            "code",
            f"n = z² p(1 − p) / h² = {r.z:.4f}² × {r.p:.3g} × {1 - r.p:.3g} / {o.half_width:g}²"
            f" = {r.normal:.2f}  →  {r.normal_campaigns} campaigns",
        ),
        _p(_interval_words(plan)),
        _p(_power_words(plan)),
        _table(
            ("reason", "replicates"),
            (
                (f"(a) recovery interval ±{o.half_width:g}", r.interval),
                (
                    f"(b) power {o.power:g} for a difference of {r.difference:.3g}",
                    "–" if r.search is None else r.search.replicates,
                ),
                ("chosen: the larger" + (f", capped at {r.cap}" if r.capped else ""), r.chosen),
            ),
        ),
    ]
    if plan.warning:
        blocks.append(Block("warning", f"Warning: {plan.warning}."))
    return Section("4. Replicates and why", tuple(blocks))


def _compute_section(plan: Plan) -> Section:
    c = plan.compute
    e = c.estimate
    rows = (
        ("replicates", c.replicates),
        ("grid cells", e.cells),
        ("campaigns", e.campaigns),
        ("evaluations", e.evaluations),
        ("chunks", c.chunks),
        ("CPU time", duration(c.cpu)),
        (
            f"wall time here ({e.jobs} process(es))",
            f"{duration(c.local)} ({duration(c.local_interval[0])} to "
            f"{duration(c.local_interval[1])})",
        ),
        (f"wall time on {c.workers} Dask workers", duration(c.cluster)),
        ("chunk files", size(c.chunk_bytes)),
        ("grid.nc", size(c.grid_bytes)),
        ("disk in all", size(c.disk_bytes)),
    )
    return Section(
        "5. Compute estimate",
        (
            _table(("quantity", "estimate"), rows),
            _p(
                "Time: each chunk takes its cell's overhead plus, for each campaign, the "
                "pilot's measured seconds per campaign of that strategy in that landscape and "
                f"distortion ({e.per_campaign:.3f} s per campaign on average); wall time is "
                f"max(CPU time / {e.jobs}, longest chunk {c.longest:.1f} s) plus the pilot's "
                f"start-up time ({c.startup:.1f} s). The range beside it is the same "
                "estimate with the pilot's cells (distortions within each landscape, and "
                f"replicates) resampled with replacement ({TIME_RESAMPLES} times; central "
                f"{TIME_LEVEL:.0%}). Dask workers are taken as fast as one "
                "core of this machine, with the same chunks. The timings are this machine's "
                "while the pilot ran: other work running then, or during the study, scales "
                "them."
            ),
            _p(
                "Disk: the chunk files as the pilot's arrays measured (values per campaign × "
                "8 bytes × variables), and grid.nc as its dense arrays (values per campaign × "
                "8 bytes × variables × every grid position, including the repeats: "
                "prior-weighted across quantile levels, no-belief and random across "
                "distortions)."
            ),
        ),
    )


def _analysis_section(plan: Plan) -> Section:
    s, o = plan.study, plan.options
    return Section(
        "6. Analysis plan",
        (
            _ul(
                (
                    "Metrics: evaluations to target (censored at the budget; the mean shown is "
                    "restricted to the budget), recovery probability, final normalized regret, "
                    "belief cost against no-belief, speedup.",
                    f"Intervals: {_pct(o.confidence)} percentile bootstrap intervals over "
                    "replicates with a fixed seed, each draw resampling the replicate index "
                    "once for every setting and baseline alike, so differences are paired "
                    "(Efron and Tibshirani 1993); Wilson score intervals for recovery (Wilson "
                    "1927); the Kaplan–Meier median for censored evaluations to target (Kaplan "
                    "and Meier 1958).",
                    "Figures: sensitivity heatmap (the metric over decay × quantile, per "
                    "distortion and under the rule), regret curves (median normalized regret "
                    "with bootstrap bands), robustness frontier (benefit with the exact belief "
                    "against cost at the worst distortion), belief marginals, and the "
                    "main-effects table (shares of variance of the factors and their two-way "
                    "interactions).",
                    f"Decision rule: {_rule_words(s)}. The metric is averaged over landscapes "
                    "and replicates in each distortion before the rule combines the "
                    "distortions; settings whose paired interval of the difference with the "
                    "best includes 0 are reported as tied with it.",
                )
            ),
        ),
    )


def _run_section(plan: Plan) -> Section:
    s, r = plan.study, plan.replicates
    old, new = plan.edit
    if r.chosen == s.replicates:
        edit = f"The study already says replicates = {s.replicates}: nothing to edit."
    elif old is None:
        edit = (
            f"Add this line at the top level of {s.path} (before the first table), so the "
            f"study runs {r.chosen} replicates: {new}"
        )
    else:
        edit = (
            f"Write the replicate count into the study's replicates key first: in {s.path}, "
            f"change '{old.strip()}' to '{new.strip()}'."
        )
    blocks = []
    if plan.command.endswith("--fresh"):
        blocks.append(
            _p(
                f"{plan.out} holds results of the study before this edit; the edited study is "
                "a different grid, so the command starts over there (--fresh discards those "
                "results; give another --out to keep them)."
            )
        )
    if plan.edges:
        blocks.append(
            _p(
                "Edge of the study: the pilot's best setting sits at the edge of the levels "
                "studied; "
                + "; ".join(e.words for e in plan.edges)
                + ". To study beyond it, set in the study file:"
            )
        )
        blocks.append(Block("code", edge_snippet(plan.edges)))
    return Section(
        "7. Running the study",
        (
            _p(edit),
            *blocks,
            Block("code", plan.command),
            _p(
                f"Results land in {plan.out}: chunks/ (one file per chunk), manifest.json, and "
                "grid.nc, the assembled grid the report reads. A changed study file is a "
                "different grid: the run refuses a folder of another version unless --fresh "
                "is given."
            ),
        ),
    )


_REFERENCES = (
    "E. B. Wilson (1927), Probable inference, the law of succession, and statistical "
    "inference, JASA 22.",
    "E. L. Kaplan and P. Meier (1958), Nonparametric estimation from incomplete observations, "
    "JASA 53.",
    "B. Efron and R. Tibshirani (1993), An Introduction to the Bootstrap.",
    "A. M. Law, Simulation Modeling and Analysis (common random numbers).",
    "Sample size for a proportion's interval: common practice, any statistics textbook.",
)


def _sections(plan: Plan) -> tuple[Section, ...]:
    return (
        _questions_section(plan),
        _factors_section(plan),
        _design_section(plan),
        _replicates_section(plan),
        _compute_section(plan),
        _analysis_section(plan),
        _run_section(plan),
        Section("References", (_ul(_REFERENCES),)),
    )


def _head(plan: Plan) -> list[str]:
    s = plan.study
    return [
        f"Study '{s.name}' ({s.path}), SHA-256 of the study text {s.digest[:16]}…; "
        f"plan written {plan.written} by workbench {__version__}.",
        f"Replicates: {plan.replicates.chosen}. Estimated wall time: "
        f"{duration(plan.compute.local)} here, {duration(plan.compute.cluster)} on "
        f"{plan.compute.workers} Dask workers. Command: {plan.command}",
    ]


# --------------------------------------------------------------------------- rendering


def _markdown(plan: Plan) -> str:
    lines = [f"# {md_text(plan.title)}", ""]
    for para in _head(plan):
        lines += [md_text(para), ""]
    for sec in plan.sections:
        lines += [f"## {md_text(sec.title)}", ""]
        for b in sec.blocks:
            if b.kind == "p":
                lines += [md_text(b.text), ""]
            elif b.kind == "ul":
                lines += [f"- {md_text(item)}" for item in b.items] + [""]
            elif b.kind == "table":
                lines.append("| " + " | ".join(md_text(h) for h in b.header) + " |")
                lines.append("|" + "|".join(" --- " for _ in b.header) + "|")
                lines += ["| " + " | ".join(md_text(v) for v in row) + " |" for row in b.rows]
                lines.append("")
            elif b.kind == "code":
                lines += [*md_code(b.text), ""]
            else:
                lines += [f"> **{md_text(b.text)}**", ""]
    return "\n".join(lines).rstrip() + "\n"


def _slug(text: str) -> str:
    return re.sub(r"[^a-z0-9]+", "_", text.lower()).strip("_") or "table"


def _html(plan: Plan, path: Path | None = None) -> str:
    """The plan as a page (the shared style and links of :mod:`workbench.report.page`); every
    table with its CSV download."""
    e = html.escape
    out = page.head(plan.title, path or plan.out / PLAN_HTML)
    out += [f"<p>{e(para)}</p>" for para in _head(plan)]
    for sec in plan.sections:
        out.append(f"<h2>{e(sec.title)}</h2>")
        for k, b in enumerate(sec.blocks):
            if b.kind == "p":
                out.append(f"<p>{e(b.text)}</p>")
            elif b.kind == "ul":
                out.append("<ul>" + "".join(f"<li>{e(i)}</li>" for i in b.items) + "</ul>")
            elif b.kind == "table":
                name = _slug(sec.title) + (f"_{k}" if k else "")
                out.append(page.table(b.header, b.rows, name, numeric_from=None))
            elif b.kind == "code":
                out.append(f"<pre><code>{e(b.text)}</code></pre>")
            else:
                out.append(f'<p class="warning">{e(b.text)}</p>')
    out += ["</body>", "</html>"]
    return "\n".join(out) + "\n"
