"""The commands on real data, ``workbench audit`` and ``workbench monitor``: they read the
study, the grid and the CSV files, call the pure functions of this stage and print (with
:mod:`workbench.cli`, the only modules that print)."""

from __future__ import annotations

import contextlib
import json
import math
import sys
import time
from dataclasses import asdict, replace
from pathlib import Path

from ..validation import InputError, raw

__all__ = ["MONITOR_EVERY", "cmd_audit", "cmd_monitor", "monitor_steps"]


def _study_with_space(path: str):
    from ..study.spec import load

    study = load(path)
    if study.space is None:
        raise InputError(
            "space", "a [space] section (real evaluations live on the user's space)", None, path
        )
    return study


def _study_grid(study, folder: str):
    """The grid of ``folder``, refused unless it was run from this very study."""
    from ..analysis import open_grid

    try:
        ds = open_grid(folder)
    except InputError as err:  # a missing or damaged grid: named by the option that gave it
        raise InputError("--grid", err.expected, err.got, "command line") from None
    if ds.attrs.get("study") != study.text:
        raise InputError(
            "--grid",
            f"the grid of this study ({study.path})",
            raw(f"the grid in {folder}, run from another study (its study text differs)"),
            "command line",
        )
    return ds


# Landscape kinds that read earlier evaluations: their spec names the response and its goal.
_READERS = ("fitted", "likedata")


def _study_response(study, file: str) -> tuple[str | None, str | None, str]:
    """The response, goal and their source of the study's earlier evaluations: its landscape
    that reads a file of the same name as ``file``, else its first that reads data, else its
    ``[truth]``; (None, None, "") when the study names neither."""
    readers = [e for e in study.landscapes if e.kind in _READERS]
    same = [e for e in readers if e.spec.source.endswith(f" in {Path(file).name}")]
    entries = same + readers + ([study.truth] if study.truth is not None else [])
    for entry in entries:
        response = getattr(entry.spec, "response", "") or None
        goal = getattr(entry.spec, "goal", None)
        if response or goal:
            return response, goal, f"the study's landscape '{entry.label}'"
    return None, None, ""


def _header(file: str) -> list[str] | None:
    """The column names of a CSV file (its first line not starting with '#'), or None when it
    cannot be read (the table reader then says why)."""
    import csv

    try:
        with open(file, encoding="utf-8", newline="") as fh:
            lines = (line for line in fh if not line.lstrip().startswith("#"))
            return [c.strip() for c in next(csv.reader(lines), [])]
    except (OSError, UnicodeDecodeError):
        return None


def _history(study, file: str, response: str | None, goal: str | None, min_rows=None):
    """Evaluations in ``file`` and where their goal came from. The response and goal default
    to those the study names for its earlier evaluations (:func:`_study_response`); nothing is
    guessed: a study's response that is not a column of ``file``, a response other than the
    study's without ``--goal``, or no goal anywhere, is refused."""
    from ..validation import check_choice
    from ..world.history import GOALS, read_history

    study_response, study_goal, source = _study_response(study, file)
    header = _header(file)
    if response is None and study_response is not None:
        if header is not None and study_response not in header:
            others = [c for c in header if c not in study.space.names] or ["none"]
            raise InputError(
                "--response",
                f"given: the study's response '{study_response}' is not a column of "
                f"{Path(file).name} (its other columns: {', '.join(others)})",
                raw("nothing"),
                "command line",
            )
        response = study_response
    if response is None:
        raise InputError("--response", "the response column's name", raw("nothing"), "command line")
    if goal is not None:
        goal, goal_source = check_choice(goal, "--goal", GOALS, where="command line"), "--goal"
    elif study_goal is not None and response == study_response:
        goal, goal_source = study_goal, f"goal from {source}"
    else:
        why = (
            f"the study's goal is for '{study_response}', not '{response}'"
            if study_response
            else "the study names no goal for its earlier evaluations"
        )
        raise InputError("--goal", f"minimise or maximise ({why})", raw("nothing"), "command line")
    history = read_history(file, study.space, response, goal, min_rows=min_rows)
    return history, goal_source


def _figure_png(draw, dim: int) -> bytes:
    import io

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, dim, figsize=(4.4 * dim, 3.6), squeeze=False, layout="constrained")
    draw(list(axes[0]), fig)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png", dpi=110)
    plt.close(fig)
    return buffer.getvalue()


def _finite_or_none(row: dict) -> dict:
    """A row for JSON: NaN (a measure that could not be computed) as null."""
    return {k: None if isinstance(v, float) and not math.isfinite(v) else v for k, v in row.items()}


def cmd_audit(args) -> int:
    from threadpoolctl import threadpool_limits

    # One BLAS thread, as a grid's workers: the audit's GP makes many small factorisations,
    # which threads slow down many times on a busy machine.
    with threadpool_limits(limits=1, user_api="blas"):
        return _audit(args)


def _audit(args) -> int:
    from .. import analysis as an
    from ..report.figures import evidence_marginals, figure_title
    from ..seeding import derive, generator
    from ..study.cells import SEVERITY_RADIUS
    from ..study.resemblance import (
        Evaluations,
        earlier_evaluations,
        resemblance_table,
        table_lines,
    )
    from ..validation import check_number
    from ..world.history import fitting_source
    from . import audit as au
    from .pages import audit_lines, audit_tables, write_page

    study = _study_with_space(args.study)
    ds = _study_grid(study, args.grid) if args.grid else None
    history, goal_source = _history(study, args.data, args.response, args.goal)
    top = study.quantile_levels[0] if args.top is None else args.top
    top = check_number(top, "--top", low=0.0, high=1.0, closed="right", where="command line")
    result = au.audit(
        history,
        study.belief,
        top=top,
        radius=SEVERITY_RADIUS,
        rng=generator(derive(study.seed, "audit")),
        severities=au.study_severities(study, ds),
    )
    result = replace(result, goal_source=goal_source)
    if ds is not None and result.distortion is not None:
        rec = an.recommend(ds)
        cost = an.summarise(an.belief_cost(ds)).sel(
            setting=rec.setting, distortion=result.distortion
        )
        result = replace(
            result,
            cost=(float(cost["estimate"]), float(cost["low"]), float(cost["high"])),
            setting=rec.setting,
        )
    lines = audit_lines(result, study.space, args.data)
    if ds is not None:
        from ..report.text import far_optimum_lines

        lines += far_optimum_lines(ds)
    # The study's earlier evaluations, or, when it reads none, the ones audited.
    data = earlier_evaluations(study)
    if data is None:
        fit = history.fitting_rows()  # the resemblance's GP sees what the audit's saw
        data = Evaluations(fit.X, fit.y, fitting_source(history, fit))
    table = resemblance_table(study, data=data)
    if args.json:
        out = au.to_dict(result, study.space)
        if ds is not None:
            out["far_fitted_optima"] = [asdict(f) for f in an.far_optima(ds)]
        if table is not None:
            out["resemblance"] = {
                "data": table.source,
                "level": table.level,
                "landscapes": [_finite_or_none(asdict(r)) for r in table.rows],
            }
        print(json.dumps(out, indent=2, ensure_ascii=False))
    else:
        print("\n".join(lines))
        if table is not None:
            print("\n".join(table_lines(table)))
    out = Path(args.out) if args.out else Path("results") / study.name / "audit"

    def draw(axes, fig):
        evidence_marginals(axes, study.space, study.belief, history.X, result.good, result.argmins)
        figure_title(fig, f"Belief and earlier evaluations: {study.title}")

    md, page = write_page(
        out,
        "audit",
        f"Audit of the belief: {study.title}",
        lines,
        _figure_png(draw, study.space.dim),
        audit_tables(lines, table),
    )
    _say_written("audit", page, md, args.json)
    return 0


def _say_written(what: str, page: Path, md: Path, to_json: bool) -> None:
    """Where the page went, and the cautions; on stderr when stdout carries the JSON."""
    from .pages import CAUTIONS

    stream = sys.stderr if to_json else sys.stdout
    print(f"{what}: {page} and {md.name}", file=stream)
    print(" ".join(CAUTIONS), file=stream)


def monitor_steps(study) -> list[int]:
    """The t at which the monitor trains a classifier: every ``MONITOR_EVERY``-th evaluation
    after the initial design, and the budget (between them, the step below serves)."""
    first = study.design_size(study.space.dim) + 1
    return sorted({*range(first, study.budget + 1, MONITOR_EVERY), study.budget})


MONITOR_EVERY = 4


@contextlib.contextmanager
def _training_progress(steps: int, campaigns: int):
    """The first training's progress on standard error: a bar in a terminal, else one status
    line; yields the ``progress(done, total)`` callback for the training (or None)."""
    if not sys.stderr.isatty():
        print(
            f"monitor: training {steps} classifiers on {campaigns} simulated campaigns (once "
            "per grid and strategy; later calls read them from the cache beside the grid)",
            file=sys.stderr,
        )
        yield None
        return
    from tqdm import tqdm

    bar = tqdm(total=steps, unit="classifier", desc="training the monitor", leave=False)

    def update(done: int, total: int) -> None:
        bar.n = done
        bar.refresh()

    try:
        yield update
    finally:
        bar.close()


def cmd_monitor(args) -> int:
    from .. import analysis as an
    from ..engine.strategies import DEFAULT_QUANTILE
    from .pages import monitor_lines, monitor_tables, write_page

    # Every argument is checked before the training, which is the only slow part.
    study = _study_with_space(args.study)
    ds = _study_grid(study, args.grid)
    from . import cache  # after the files' checks: xarray, scikit-learn
    from . import monitor as mo

    steps = monitor_steps(study)
    setting = args.setting or an.recommend(ds).setting
    strategy = mo.check_setting(ds, setting, "--setting", "command line")
    live, _ = _history(study, args.observations, args.response, args.goal, min_rows=steps[0])
    if live.rows > study.budget:
        # The grid holds no campaign past its budget: there is nothing to read it against.
        raise InputError(
            "--observations",
            f"at most {study.budget} evaluations (the grid's budget)",
            raw(f"{live.rows} rows"),
            args.observations,
        )
    start = time.perf_counter()
    # Learn from the campaigns of the live campaign's strategy (all its decays and quantiles);
    # trained once per grid and strategy, then read from the cache beside the grid.
    key = cache.MonitorKey.of(args.grid, strategy, steps, DEFAULT_QUANTILE, seed=0)
    monitor = cache.load(args.grid, key)
    cached = monitor is not None
    training = None
    if monitor is None:
        table = mo.training_table(ds, mo.grid_beliefs(study, ds, jobs=None), steps)
        table = mo.restrict(table, [str(x) == strategy for x in table.strategies])
        with _training_progress(len(steps), len(table.labels)) as progress:
            monitor = mo.train(table, seed=0, progress=progress)
        training = time.perf_counter() - start
        cache.save(args.grid, key, monitor)
    try:
        advice = mo.advise(monitor, ds, live.X, live.y, study.belief, setting)
    except InputError as err:
        raise err.located(args.observations) from None
    seconds = time.perf_counter() - start
    if args.json:
        out = advice.to_dict() | {"from_cache": cached, "seconds": round(seconds, 2)}
        out["training_seconds"] = None if training is None else round(training, 2)
        out["validation"] = json.loads(monitor.validation.to_dataframe().to_json(orient="index"))
        print(json.dumps(out, indent=2, ensure_ascii=False))
    lines = monitor_lines(monitor, advice, args.observations, seconds, cached)
    if not args.json:
        print("\n".join(lines))
    out = Path(args.out) if args.out else Path("results") / study.name / "monitor"

    def draw(axes, fig):
        from ..report.figures import distortion_probabilities, figure_title

        distortion_probabilities(axes[0], advice.t, advice.probabilities, advice.distortions)
        heading = f"The live campaign read against the grid: {study.title}"
        figure_title(fig, heading)

    title = f"Monitor of the live campaign: {study.title}"
    tables = monitor_tables(monitor, advice)
    md, page = write_page(out, "monitor", title, lines, _figure_png(draw, 1), tables)
    _say_written("monitor", page, md, args.json)
    return 0
