"""The audit's and the monitor's words and pages: plain lines for the terminal, Markdown and a
self-contained HTML page (figure embedded, no external reference, every user string escaped)."""

from __future__ import annotations

import base64
import html
from pathlib import Path

import numpy as np

from ..report.markup import md_text
from ..storage import write_text
from ..world.history import HYPER_ROWS, MAX_FIT_ROWS
from ..world.space import Space
from .audit import CONSISTENT_AT, CONTRADICTED_BELOW, FAR_FROM_DATA, Audit

__all__ = ["CAUTIONS", "audit_lines", "monitor_lines", "write_page"]

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
        d, m = a.distortion_distances[a.distortion]
        lines.append(
            f"most like the simulated distortion '{a.distortion}' (distance {d:.2f}, mass "
            f"{_pct(m)})"
        )
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


_STYLE = (
    "body{font-family:system-ui,sans-serif;max-width:60rem;margin:2rem auto;padding:0 1rem;"
    "line-height:1.45;color:#222}img{max-width:100%}li{margin:.3rem 0}"
    ".verdict{font-size:1.2rem;font-weight:600}"
)


def write_page(
    out: Path, stem: str, title: str, lines: list[str], png: bytes | None
) -> tuple[Path, Path]:
    """Write ``stem.md`` and ``stem.html`` (figure ``stem.png`` beside and embedded)."""
    figure = out / f"{stem}.png"
    if png is not None:
        from ..storage import atomic_path

        with atomic_path(figure) as tmp:
            tmp.write_bytes(png)
    md = [f"# {md_text(title)}", "", *(f"- {md_text(line)}" for line in lines), ""]
    if png is not None:
        md += [f"![{md_text(title)}]({figure.name})", ""]
    md += ["## Cautions", "", *(f"- {md_text(c)}" for c in CAUTIONS), ""]
    page = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        f"<title>{html.escape(title)}</title><style>{_STYLE}</style></head><body>",
        f"<h1>{html.escape(title)}</h1>",
        f'<p class="verdict">{html.escape(lines[1] if len(lines) > 1 else "")}</p>',
        "<ul>",
        *(f"<li>{html.escape(line)}</li>" for line in lines),
        "</ul>",
    ]
    if png is not None:
        data = base64.b64encode(png).decode("ascii")
        page.append(f'<img alt="{html.escape(title)}" src="data:image/png;base64,{data}">')
    page += ["<h2>Cautions</h2>", "<ul>", *(f"<li>{html.escape(c)}</li>" for c in CAUTIONS)]
    page += ["</ul>", "</body></html>"]
    return (
        write_text(out / f"{stem}.md", "\n".join(md)),
        write_text(out / f"{stem}.html", "\n".join(page) + "\n"),
    )
