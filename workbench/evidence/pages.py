"""The audit's and the monitor's words and pages: plain lines for the terminal, Markdown and a
self-contained HTML page (the verdict once, headed tables with CSV downloads, figure embedded,
no external reference, every user string escaped; the style and the links to the other pages
are :mod:`workbench.report.page`'s)."""

from __future__ import annotations

import base64
import html
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..report import page
from ..report.markup import md_text
from ..storage import atomic_path, write_text
from ..world.history import HYPER_ROWS, MAX_FIT_ROWS
from ..world.space import Space
from .audit import CONSISTENT_AT, CONTRADICTED_BELOW, FAR_FROM_DATA, Audit
from .wording import WHY_THEY_DIFFER

__all__ = [
    "CAUTIONS",
    "PageTable",
    "audit_lines",
    "audit_tables",
    "monitor_lines",
    "monitor_tables",
    "write_page",
]

CAUTIONS = (
    "This rests on a simulation and on a Gaussian-process model of your data; both can be wrong "
    "about the real process.",
    "It advises and does not decide: the team decides, with what it knows of the process.",
    "The process's safety limits come first; keep every evaluation inside them, and where the "
    "process can hurt someone, defer to local codes and licensed practice.",
)


def _pct(v: float) -> str:
    return f"{100 * v:.0f} %"


def _point(space: Space, u: np.ndarray) -> str:
    return ", ".join(
        f"{k} = {v:.4g}" if isinstance(v, float) else f"{k} = {v}"
        for k, v in space.format_point(u).items()
    )


def audit_lines(a: Audit, space: Space, data: str) -> list[str]:
    """The audit in plain lines (the terminal prints them; the pages reuse them)."""
    s = a.support
    direction = "maximised" if a.goal == "maximise" else "minimised"
    source = f" ({a.goal_source})" if a.goal_source else ""
    if s.enough:
        verdict = (
            f"verdict: {a.verdict} (consistent when the data put the optimum inside the "
            f"belief's 90 % region with probability ≥ {CONSISTENT_AT:g}; contradicted below "
            f"{CONTRADICTED_BELOW:g}; doubtful between)"
        )
    else:
        verdict = f"verdict: {a.verdict}: it needs {'; and '.join(s.needs)}"
    far = int(np.sum(s.far))
    lines = [
        f"audit of the belief against {a.rows} earlier evaluations in {data}: response "
        f"'{a.response}', {direction}{source}",
        verdict,
        f"good evaluations (best {_pct(a.top)}, {len(a.good_levels)} points): median "
        f"highest-density level {a.good_median_level:.2f} (an exact belief gives 0.5), "
        f"{_pct(a.good_outside_90)} outside the 90 % region (an exact belief gives 10 %)",
        f"where the data put the optimum ({len(a.argmin_levels)} posterior draws): inside the "
        f"50 % region with probability {a.inside_50:.2f}, inside the 90 % region with "
        f"probability {a.inside_90:.2f}",
        f"support of those draws: {_pct(s.on_bounds)} on the bounds of the space, "
        f"{_pct(s.outside_box)} outside the data's bounding box, {far} of "
        f"{len(s.far)} far outside the data (farther than {FAR_FROM_DATA:g} of the range from "
        f"every evaluation: there the model extrapolates)",
        f"median optimum{'' if s.enough else ' (not supported by the data)'}: "
        f"{_point(space, a.median_argmin)}; belief's mode: {_point(space, a.mode)}",
        f"distance from the belief's mode to it: {a.distance:.2f} of the range; belief mass "
        f"within {a.radius:g} of it: {_pct(a.mass_within)}",
    ]
    if a.rows > HYPER_ROWS:
        seen = min(a.rows, MAX_FIT_ROWS)
        lines.append(
            f"the data's GP conditions on {seen} of the {a.rows} rows with hyper-parameters "
            f"fitted to {HYPER_ROWS} (above {HYPER_ROWS} rows, the best by response and the "
            f"rest spread by max-min distance); the good evaluations are taken from all rows"
        )
    if a.distortion is not None:
        lines += [a.most_like, WHY_THEY_DIFFER]
    if a.cost is not None:
        est, lo, hi = a.cost
        word, lo, hi = ("costs", lo, hi) if est > 0 else ("saves", -hi, -lo)
        lines.append(
            f"there the recommended setting ({a.setting}) {word} {abs(est):.3g} evaluations "
            f"to target against no belief (95 % interval {lo:.3g} to {hi:.3g})"
        )
    return lines


def monitor_lines(monitor, advice, data: str, seconds: float, cached: bool = False) -> list[str]:
    """The monitor's validation and its reading of the live campaign, in plain lines;
    ``cached``: the classifiers came from the cache beside the grid, not a training."""
    v = monitor.validation
    last = int(advice.t[-1])
    i = len(advice.t) - 1
    probs = ", ".join(
        f"{d} {p:.2f}" for d, p in zip(advice.distortions, advice.probabilities[i], strict=True)
    )
    how = "read from the cache beside the grid" if cached else "trained"
    lines = [
        f"monitor of the live campaign in {data} ({last} evaluations), setting {advice.setting}",
        f"after evaluation {last}: {probs}; advice: {advice.best_action[i]} (sure to "
        f"{advice.confidence[i]:.0%}: the probability of the distortions under which it is "
        f"the cheapest)",
        advice.most_like(i),
        WHY_THEY_DIFFER,
        f"validation on held-out replicates of the grid ({v.attrs['campaigns']} campaigns, "
        f"{v.attrs['replicates']} replicates, {how} in {seconds:.0f} s): per t, accuracy "
        f"against the base rate and Brier score against the base rate's (lower is better):",
    ]
    for k, step in enumerate(v["step"].values):
        lines.append(
            f"  t = {int(step)}: accuracy {float(v['accuracy'][k]):.2f} (base "
            f"{float(v['base_accuracy'][k]):.2f}), Brier {float(v['brier'][k]):.3f} (base "
            f"{float(v['base_brier'][k]):.3f}), {v['model'].values[k]}"
        )
    lines.append("after each evaluation (probabilities per distortion; cheapest action):")
    for k, t in enumerate(advice.t):
        row = " ".join(f"{p:.2f}" for p in advice.probabilities[k])
        lines.append(f"  t = {int(t)}: {row}  {advice.best_action[k]} ({advice.confidence[k]:.0%})")
    lines.append(
        "expected cost = the grid's mean evaluations to target of each action's setting, "
        "weighted by the probabilities; a switch is costed as a whole campaign of that decay"
    )
    return lines


@dataclass(frozen=True)
class PageTable:
    """A headed table of a page: its heading, a sentence saying how to read it, the column
    names, the rows and the CSV file's name."""

    heading: str
    words: str
    head: tuple[str, ...]
    rows: tuple[tuple, ...]
    name: str


def _finding(line: str) -> tuple[str, str]:
    what, sep, value = line.partition(": ")
    return (what, value) if sep else (line, "")


def audit_tables(lines: list[str], table=None) -> list[PageTable]:
    """The audit's page tables: its findings (every line after the first two, the source and
    the verdict, split into finding and value) and, when there are earlier evaluations, how
    well each landscape explains them (a :class:`~workbench.study.resemblance.ResemblanceTable`)."""
    out = [
        PageTable(
            "What the data say",
            "Each finding of the audit, as the terminal prints it.",
            ("finding", "value"),
            tuple(_finding(line) for line in lines[2:]),
            "audit_findings",
        )
    ]
    if table is not None:
        level = f"{100 * table.level:.0f} %"
        out.append(
            PageTable(
                "How well each landscape explains the earlier evaluations",
                f"Rank agreement of each landscape with {table.source}, with its {level} "
                "interval; the log likelihood per point of the data under the landscape.",
                (
                    "landscape",
                    "kind",
                    "rank agreement",
                    f"{level} interval",
                    "log lik./point",
                    "measure",
                ),
                tuple(
                    (
                        r.landscape,
                        r.kind,
                        f"{r.estimate:.3g}",
                        f"{r.low:.3g} to {r.high:.3g}",
                        f"{r.likelihood:.3g}",
                        r.how,
                    )
                    for r in table.rows
                ),
                "resemblance",
            )
        )
    return out


def monitor_tables(monitor, advice) -> list[PageTable]:
    """The monitor's page tables: the validation per t and the reading after each evaluation."""
    v = monitor.validation
    validation = tuple(
        (
            int(step),
            f"{float(v['accuracy'][k]):.2f}",
            f"{float(v['base_accuracy'][k]):.2f}",
            f"{float(v['brier'][k]):.3f}",
            f"{float(v['base_brier'][k]):.3f}",
            str(v["model"].values[k]),
        )
        for k, step in enumerate(v["step"].values)
    )
    reading = tuple(
        (
            int(t),
            *(f"{p:.2f}" for p in advice.probabilities[k]),
            advice.best_action[k],
            f"{advice.confidence[k]:.0%}",
        )
        for k, t in enumerate(advice.t)
    )
    return [
        PageTable(
            "Validation on held-out replicates of the grid",
            f"{v.attrs['campaigns']} campaigns, {v.attrs['replicates']} replicates: per t, "
            "accuracy against the base rate and Brier score against the base rate's (lower is "
            "better).",
            ("t", "accuracy", "base accuracy", "Brier", "base Brier", "classifier"),
            validation,
            "monitor_validation",
        ),
        PageTable(
            "After each evaluation",
            "The probability of each distortion given the live campaign so far, the cheapest "
            "action and how sure that is (the probability of the distortions under which it is "
            "the cheapest). Expected cost = the grid's mean evaluations to target of each "
            "action's setting, weighted by the probabilities; a switch is costed as a whole "
            "campaign of that decay.",
            ("t", *(f"p({d})" for d in advice.distortions), "cheapest action", "sure"),
            reading,
            "monitor_readings",
        ),
    ]


def write_page(
    out: Path,
    stem: str,
    title: str,
    lines: list[str],
    png: bytes | None,
    tables: list[PageTable] = (),
) -> tuple[Path, Path]:
    """Write ``stem.md`` and ``stem.html`` (figure ``stem.png`` beside and embedded): the
    first line (what was read) as a paragraph, the second (the verdict or the advice) once,
    then ``tables`` headed and each with its CSV download, the figure and the cautions. The
    page has the shared style and links of :mod:`workbench.report.page`."""
    figure = out / f"{stem}.png"
    if png is not None:
        with atomic_path(figure) as tmp:
            tmp.write_bytes(png)
    source, verdict = lines[0], lines[1] if len(lines) > 1 else ""
    md = [f"# {md_text(title)}", "", md_text(source), "", f"**{md_text(verdict)}**", ""]
    for t in tables:
        md += [f"## {md_text(t.heading)}", "", md_text(t.words), ""]
        md.append("| " + " | ".join(md_text(h) for h in t.head) + " |")
        md.append("|" + "|".join(" --- " for _ in t.head) + "|")
        md += ["| " + " | ".join(md_text(v) for v in row) + " |" for row in t.rows] + [""]
    if png is not None:
        md += [f"![{md_text(title)}]({figure.name})", ""]
    md += ["## Cautions", "", *(f"- {md_text(c)}" for c in CAUTIONS), ""]
    e = html.escape
    path = out / f"{stem}.html"
    body = [*page.head(title, path), f"<p>{e(source)}</p>", f'<p class="verdict">{e(verdict)}</p>']
    for t in tables:
        body += [f"<h2>{e(t.heading)}</h2>", f"<p>{e(t.words)}</p>"]
        body.append(page.table(t.head, t.rows, t.name, numeric_from=None))
    if png is not None:
        data = base64.b64encode(png).decode("ascii")
        body.append(f'<figure><img alt="{e(title)}" src="data:image/png;base64,{data}"></figure>')
    body += ["<h2>Cautions</h2>", "<ul>", *(f"<li>{e(c)}</li>" for c in CAUTIONS)]
    body += ["</ul>", "</body></html>"]
    return (
        write_text(out / f"{stem}.md", "\n".join(md)),
        page.write_page_linked(path, "\n".join(body) + "\n"),
    )
