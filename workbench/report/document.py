"""The report of a grid: one self-contained HTML page, its figures as PNG files, and a Markdown
summary, all written atomically into the results folder.

The page opens with the answer (the recommendation and the risk of a misleading belief) and a
box where the reader changes the rule and the weights (:mod:`.decision`), then the figures,
then the method and the cautions. It holds no external reference: figures are embedded as
base64 PNG, the style sheet (:mod:`.page`, shared with the plan, audit and monitor pages) and
the one script are inline, every table's CSV is a ``data:`` link, and every string that comes
from the user (titles, names, labels, units) is escaped.
"""

from __future__ import annotations

import base64
from pathlib import Path

import xarray as xr

from .. import analysis as an
from ..analysis.dataset import GRID
from ..analysis.recommendation import stored_decision
from ..analysis.transfer_check import TRUTH_FOLDER
from ..storage import atomic_path, write_text
from . import page
from .content import (
    FIGURES,
    REPORT,
    SUMMARY,
    Content,
    Group,
    ReportFiles,
    compute_content,
    escape,
    pct,
)
from .decision import decision_data, decision_section
from .markup import md_text
from .panels import report_figures
from .text import (
    CAUTIONS,
    DISTORTION_HEAD,
    RESEMBLANCE_HEAD,
    SUMMARY_HEAD,
    TRANSFER_HEAD,
    TRUTH_HEAD,
    TRUTH_LANDSCAPE_HEAD,
    answer_rows,
    choice_words,
    distortion_rows,
    effects_rows,
    method_paragraphs,
    ranking_rows,
    regret_rows,
    resemblance_rows,
    risk_paragraph,
    strategy_paragraphs,
    summary_rows,
    transfer_rows,
    truth_rows,
)

__all__ = ["ReportFiles", "report_names", "write_report"]


def _table(head: list[str], rows: list, name: str, numeric_from: int = 1) -> str:
    return page.table(head, rows, name, numeric_from)


def _html(
    c: Content, figures: list[tuple[str, str, str, bytes]], path: Path, decision: dict
) -> str:
    ds = c.ds
    level = pct(c.rs.level)
    metric_name = an.METRIC_NAMES[c.rule.metric][0]
    parts = [
        *page.head(ds.attrs.get("title", "Report"), path),
        f'<p class="meta">Study {escape(ds.attrs.get("study_name", ""))}: '
        f"{ds.sizes['landscape']} landscape(s), {ds.sizes['distortion']} distortions, "
        f"{ds.sizes['replicate']} replicates per grid cell, budget {escape(ds.attrs['budget'])} "
        f"evaluations, target normalized regret {escape(ds.attrs['target'])}; "
        f"workbench {escape(ds.attrs.get('version', ''))}.</p>",
        "<h2>Recommendation</h2>",
        '<div class="answer">',
        '<p class="choice" id="recommendation">Use '
        f"<strong>{escape(choice_words(c.rec.choice, c.ds))}</strong>.</p>",
        page.table(["", "the answer"], answer_rows(c), "answer", numeric_from=None, cls="kv"),
        '<p id="risk"><strong>Risk of a misleading belief.</strong> '
        f"{escape(risk_paragraph(c))}</p>",
        "</div>",
        *decision_section(decision),
        "<h3>The recommended setting, the runner-up and the baselines</h3>",
        f"<p>Means and medians over landscapes and replicates, per distortion; beneath each "
        f"value its {level} interval (bootstrap over replicates; Wilson for recovery). Speedup "
        f"and belief cost are against no belief. The belief's mode is the expert's best guess: "
        f"when the belief is exact it sits on the optimum, which cannot be beaten.</p>",
        _table(SUMMARY_HEAD, summary_rows(c), "summary"),
    ]
    head, rows = regret_rows(c)
    parts += [
        "<h3>Normalized regret at chosen budgets</h3>",
        f"<p>Median normalized regret after the stated number of evaluations, with {level} "
        f"bootstrap intervals.</p>",
        _table(head, rows, "regret_at_budgets"),
        "<h2>Figures</h2>",
    ]
    for _, title, caption, png in figures:
        data = base64.b64encode(png).decode("ascii")
        parts += [
            f"<figure><h3>{escape(title)}</h3>",
            f'<img alt="{escape(title)}" src="data:image/png;base64,{data}">',
            f"<figcaption>{escape(caption)}</figcaption></figure>",
        ]
    effect_rows, effect_words = effects_rows(c)
    parts += [
        "<h3>Main effects and interactions</h3>",
        f"<p>Variance decomposition (the sums of squares of a balanced analysis of variance) of "
        f"{escape(metric_name)} per campaign over the factors of the grid, with {level} bootstrap "
        f"intervals of each share. {escape(effect_words)}</p>",
        _table(["source", "sum of squares", "share of the total"], effect_rows, "effects"),
    ]
    if c.transfer is not None:
        rows, words = transfer_rows(c)
        parts += [
            "<h3>Does the answer transfer? By kind of landscape</h3>",
            f"<p>The setting the rule picks on each kind of landscape alone, and what the "
            f"setting picked on the textbook landscapes costs on the other kinds (its score "
            f"minus the kind's own choice's, paired, {level} interval). {escape(words)}</p>",
            _table(TRANSFER_HEAD, rows, "transfer_by_kind", numeric_from=3),
        ]
    if c.truth is not None:
        rows, by, words = truth_rows(c)
        parts += [
            '<h3 id="truth">Does the answer hold on the real problem? The transfer check</h3>',
            f"<p>The study's belief-guided settings, distortions and rule replayed on the truth "
            f"({c.truth.draws} bootstrap draws over the replicates of both grids, {level} "
            f"intervals). {escape(words)}</p>",
            _table(TRUTH_HEAD, rows, "truth"),
            _table(TRUTH_LANDSCAPE_HEAD, by, "truth_by_landscape"),
        ]
    if c.resemblance is not None:
        rows, words = resemblance_rows(c)
        parts += [
            "<h3>How well each landscape explains the earlier evaluations</h3>",
            f'<p id="resemblance">{escape(words)}</p>',
            _table(RESEMBLANCE_HEAD, rows, "resemblance", numeric_from=3),
        ]
    head, rows = ranking_rows(c)
    parts += [
        "<h3>All belief-guided settings, ranked by the rule</h3>",
        f"<p>Score under the rule and mean {escape(metric_name)} per distortion, with {level} "
        f"intervals; lower is better.</p>",
        _table(head, rows, "ranking", numeric_from=2),
        "<h2>Method</h2>",
        "<p>Strategies simulated:</p>",
        "<ul>",
        *(f"<li>{escape(t)}</li>" for t in strategy_paragraphs(c)),
        "</ul>",
        *(f"<p>{escape(p)}</p>" for p in method_paragraphs(c)),
        "<h3>How the beliefs were distorted</h3>",
        "<p>Shift moves the belief's centre by a distance in fractions of each parameter's "
        "range; the spread factor multiplies its width (below 1: overconfident); misplace puts "
        "the centre on the landscape's worst point or on a decoy optimum. Distance and mass are "
        "means over landscapes and replicates.</p>",
        _table(DISTORTION_HEAD, distortion_rows(c), "distortions"),
        "<h2>Cautions</h2>",
        "<ul>",
        *(f"<li>{escape(t)}</li>" for t in CAUTIONS),
        "</ul>",
        "</body></html>",
    ]
    return "\n".join(parts) + "\n"


def _md_cell(v) -> str:
    return md_text(f"{v[0]} {v[1]}" if isinstance(v, tuple) else v)


def _md_table(head: list[str], rows: list) -> str:
    lines = ["| " + " | ".join(_md_cell(h) for h in head) + " |"]
    lines.append("|" + "|".join(" --- " for _ in head) + "|")
    for row in rows:
        if isinstance(row, Group):
            lines.append(f"| *{md_text(row)}* |" + " |" * (len(head) - 1))
            continue
        lines.append("| " + " | ".join(_md_cell(v) for v in row) + " |")
    return "\n".join(lines)


def _md_transfer(c: Content) -> list[str]:
    out = []
    if c.transfer is not None:
        rows, words = transfer_rows(c)
        out += [
            "## By kind of landscape",
            "",
            md_text(words),
            "",
            _md_table(TRANSFER_HEAD, rows),
            "",
        ]
    if c.truth is not None:
        rows, by, words = truth_rows(c)
        out += [
            "## Does the answer hold on the real problem?",
            "",
            md_text(words),
            "",
            _md_table(TRUTH_HEAD, rows),
            "",
            _md_table(TRUTH_LANDSCAPE_HEAD, by),
            "",
        ]
    return out


def _md_resemblance(c: Content) -> list[str]:
    if c.resemblance is None:
        return []
    rows, words = resemblance_rows(c)
    return [
        "## How well each landscape explains the earlier evaluations",
        "",
        md_text(words),
        "",
        _md_table(RESEMBLANCE_HEAD, rows),
        "",
    ]


def _markdown(c: Content, figures: list[tuple[str, str, str, bytes]], figures_dir: str) -> str:
    lines = [
        f"# {md_text(c.ds.attrs.get('title', 'Report'))}",
        "",
        "## Recommendation",
        "",
        f"Use **{md_text(choice_words(c.rec.choice, c.ds))}**.",
        "",
        *(f"- {md_text(k)}: {md_text(v)}" for k, v in answer_rows(c)),
        "",
        f"**Risk of a misleading belief.** {md_text(risk_paragraph(c))}",
        "",
        "## The recommended setting, the runner-up and the baselines",
        "",
        md_text(f"Values with their {pct(c.rs.level)} intervals in brackets."),
        "",
        _md_table(SUMMARY_HEAD, summary_rows(c)),
        "",
        *_md_transfer(c),
        *_md_resemblance(c),
        "## Figures",
        "",
        *(f"- {md_text(title)}: `{figures_dir}/{stem}.png`" for stem, title, _, _ in figures),
        "",
        "## Method",
        "",
        *(f"- {md_text(t)}" for t in strategy_paragraphs(c)),
        "",
        *(md_text(p) + "\n" for p in method_paragraphs(c)),
        "## Cautions",
        "",
        *(f"- {md_text(t)}" for t in CAUTIONS),
        "",
    ]
    return "\n".join(lines)


def report_names(ds: xr.Dataset, rule: an.Rule) -> tuple[str, str, str]:
    """The page, summary and figures folder names: ``report.html``, ``summary.md`` and
    ``figures`` for the study's own rule; ``report-RULE.html``, ``summary-RULE.md`` and
    ``figures-RULE`` for another rule, so that it does not overwrite the study's report."""
    if rule.rule == stored_decision(ds)["rule"]:
        return REPORT, SUMMARY, FIGURES
    stem = f"-{rule.rule}"
    return f"report{stem}.html", f"summary{stem}.md", f"{FIGURES}{stem}"


def write_report(
    folder: str | Path,
    rule: an.Rule | None = None,
    resampling: an.Resampling | None = None,
    ds: xr.Dataset | None = None,
) -> tuple[ReportFiles, an.Recommendation]:
    """Write ``report.html``, ``summary.md`` and ``figures/*.png`` into ``folder`` (which holds
    grid.nc, unless ``ds`` is given), named as :func:`report_names` says; returns the files
    written and the recommendation. The page's links line is updated in the pages beside it."""
    folder = Path(folder)
    ds = ds if ds is not None else an.open_grid(folder)
    rule = rule or an.decision_rule(ds)
    rs = resampling or an.Resampling()
    truth_grid = folder / TRUTH_FOLDER / GRID
    truth = an.open_grid(truth_grid) if truth_grid.is_file() else None
    c = compute_content(ds, rule, rs, truth)
    figures = report_figures(c)
    report, summary_name, figures_dir = report_names(ds, rule)
    paths = []
    for stem, _, _, png in figures:
        path = folder / figures_dir / f"{stem}.png"
        with atomic_path(path) as tmp:
            tmp.write_bytes(png)
        paths.append(path)
    decision = decision_data(ds, rule, rs, c.rec, str(folder))
    html_path = page.write_page_linked(
        folder / report, _html(c, figures, folder / report, decision)
    )
    summary = write_text(folder / summary_name, _markdown(c, figures, figures_dir))
    return ReportFiles(html_path, summary, tuple(paths)), c.rec
