"""The ``workbench`` command: the only module that prints.

Bad input ends with one line on stderr naming the file or option, the key, what was expected
and what was given, and exit code 2. ``--debug`` shows the traceback instead.
"""

from __future__ import annotations

import argparse
import json
import logging
import os
import sys
import time
import warnings
from pathlib import Path

from .engine.strategies import DEFAULT_QUANTILE
from .evidence.commands import cmd_audit, cmd_monitor
from .validation import InputError, check_number

__all__ = ["main"]

log = logging.getLogger("workbench")


def _out_dir(args, study_name: str) -> Path:
    return Path(args.out) if args.out else Path("results") / study_name


# --------------------------------------------------------------------------- commands


def cmd_landscapes(args) -> int:
    from .world import landscapes as ls

    rows = [ls.get(name).describe() for name in ls.catalogue()]
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    print(f"{'name':<18} {'dim':>3}  {'minimum':>12}  domain / minimisers")
    for r in rows:
        domain = " x ".join(f"[{lo:g}, {hi:g}]" for lo, hi in r["domain"])
        print(f"{r['name']:<18} {r['dimension']:>3}  {r['minimum']:>12.6g}  {domain}")
        for m in r["minimisers"]:
            print(f"{'':<37}at ({', '.join(f'{v:.6g}' for v in m)})")
    return 0


def cmd_belief(args) -> int:
    from .study import spec as study
    from .world import beliefs

    s = study.load(args.study)
    if s.space is None:
        raise InputError(
            "space",
            "a [space] section (the belief command describes a belief on a space)",
            None,
            args.study,
        )
    from .analysis.recommendation import short_number  # after the checks: it loads xarray

    summary = beliefs.summarise(s.belief, s.space)
    print(f"Belief of study '{s.name}': {s.title}")
    print(f"{'parameter':<16} {'mode':>12}  {'central 50 %':>26}  {'central 90 %':>26}  truncated")
    for r in summary.parameters:
        unit = f" {r.unit}" if r.unit else ""
        c50 = ", ".join(short_number(v) for v in r.central50)
        c90 = ", ".join(short_number(v) for v in r.central90)
        print(
            f"{r.name:<16} {short_number(r.mode) + unit:>12}  {'[' + c50 + ']':>26}  "
            f"{'[' + c90 + ']':>26}  {r.truncated_mass:.1%}"
        )
    mode = ", ".join(f"{k} = {short_number(v)}" for k, v in summary.mode.items())
    print(f"joint mode: {mode}")
    print(f"share of the search volume holding 90 % of the belief: {summary.volume90:.1%}")
    print(f"mass lost to truncation at the bounds: {summary.truncated_mass:.2%}")
    path = _write_belief_figure(s, _out_dir(args, s.name) / "belief.png")
    print(f"figure: {path}")
    return 0


def _write_belief_figure(s, path: Path) -> Path:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .report.figures import belief_marginals
    from .report.markup import mpl_text
    from .storage import atomic_path

    fig, axes = plt.subplots(1, s.space.dim, figsize=(4.2 * s.space.dim, 3.4), squeeze=False)
    belief_marginals(list(axes[0]), s.space, {"belief": s.belief})
    fig.suptitle(mpl_text(f"Belief marginals: {s.title}"), fontsize="medium")
    fig.tight_layout()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=110)
    plt.close(fig)
    return path


# --------------------------------------------------------------------------- simulate


def _simulation_study(args):
    """The one-cell study of the command line (parsed by the study file's parser; errors name
    the option) and the settings it ran, for the JSON output."""
    from .study.spec import parse_simulation

    study, factors = parse_simulation(vars(args), text=" ".join(sys.argv))
    entry, distortion = study.landscapes[0], study.distortions[0]
    settings = {
        "strategy": factors.name,
        "landscape": entry.name,
        "dim": entry.dim,
        "budget": study.budget,
        "replicates": study.replicates,
        "seed": study.seed,
        "belief_spread": study.spread,
        "shift": distortion.shift,
        "scale": distortion.scale,
        "misplace": distortion.misplace,
        "decay": str(factors.decay[0]),
        "quantile": factors.quantile[0],
        "exploration": factors.exploration[0],
        "initial": study.initial[0],
        "initial_size": study.design_size(entry.dim),
        "target": study.target,
        "noise": entry.noise,
        "placement": study.placement,
        "random_multiple": study.random_multiple,
    }
    return study, settings


def cmd_simulate(args) -> int:
    import numpy as np

    study, settings = _simulation_study(args)
    # After the options are checked: these load the engine, joblib and xarray.
    from .analysis.metrics import evaluations_to_target
    from .study.grid import chunks, split
    from .study.runner import execute

    rows = []
    for chunk, arrays, _ in execute(study, chunks(study), jobs=args.jobs):
        for replicate, result in split(chunk, arrays):
            regret = result["regret"][0]
            nr = result["normalized_regret"][0]
            ett, reached = evaluations_to_target(nr, study.target)
            rows.append(
                {
                    "replicate": replicate,
                    "final_regret": float(regret[-1]),
                    "final_normalized_regret": float(nr[-1]),
                    "evaluations_to_target": int(ett) if reached else None,
                    "mode_value_regret": float(result["mode_value"][0] - result["minimum"][0]),
                }
            )
    rows.sort(key=lambda r: r["replicate"])
    if args.json:
        print(json.dumps({"settings": settings, "replicates": rows}, indent=2))
        return 0
    print(
        f"{settings['strategy']} on {settings['landscape']} ({settings['dim']}-D), "
        f"budget {settings['budget']}, target normalized regret {settings['target']:g}"
    )
    print(f"{'replicate':>9} {'final regret':>14} {'normalized':>12} {'evals to target':>16}")
    for r in rows:
        ett = r["evaluations_to_target"]
        print(
            f"{r['replicate']:>9} {r['final_regret']:>14.4g} {r['final_normalized_regret']:>12.4g} "
            f"{'not reached' if ett is None else ett:>16}"
        )
    finals = np.array([r["final_normalized_regret"] for r in rows])
    print(
        f"median final normalized regret {np.median(finals):.4g}; "
        f"reached the target in {sum(r['evaluations_to_target'] is not None for r in rows)}"
        f" of {len(rows)}"
    )
    return 0


# --------------------------------------------------------------------------- studies


def _progress(quiet: bool):
    from tqdm import tqdm

    if quiet or not sys.stderr.isatty():
        return None, None
    bar = tqdm(total=0, unit="campaign", desc="campaigns", dynamic_ncols=True)

    def update(done: int, total: int) -> None:
        bar.total = total
        bar.n = done
        bar.refresh()

    return bar, update


def cmd_check(args) -> int:
    from .study.cost import duration, probe
    from .study.resemblance import resemblance_table, table_lines
    from .study.spec import load

    s = load(args.study)
    # The user's objectives first: one call each at the belief's mode, in a child process.
    timed = [
        (e.label, e.spec.probe(s.belief.mode())) for e in s.landscapes if e.kind == "objective"
    ]
    est = probe(s, jobs=args.jobs)
    print(f"study '{s.name}': {s.title}")
    for label, seconds in timed:
        print(f"objective {label}: {seconds * 1e3:.1f} ms per call at the belief's mode")
    print(f"grid cells: {est.cells} (landscapes x distortions x strategy settings)")
    print(f"campaigns: {est.campaigns} ({s.replicates} replicates per cell, baselines included)")
    print(f"evaluations in total: {est.evaluations}")
    print(
        f"estimated wall time on {est.jobs} worker(s): {duration(est.seconds)} "
        f"(timing probe: {est.probe_campaigns} campaigns, {est.per_campaign:.3f} s each)"
    )
    table = resemblance_table(s)
    if table is not None:
        print("\n".join(table_lines(table)))
    return 0


def _run(study, out: Path, args) -> object:
    from .study.runner import run_study

    bar, update = _progress(args.quiet)
    try:
        return run_study(
            study, out, jobs=args.jobs, scheduler=args.scheduler, fresh=args.fresh, progress=update
        )
    finally:
        if bar is not None:
            bar.close()


def _warn(summary) -> None:
    for line in summary.warnings():
        print(f"warning: {line}", file=sys.stderr)


def cmd_run(args) -> int:
    from .study.cost import duration
    from .study.spec import load

    study = load(args.study)
    summary = _run(study, _out_dir(args, study.name), args)
    print(
        f"{summary.campaigns} campaigns ({summary.resumed} already done) in "
        f"{duration(summary.seconds)}; grid: {summary.grid}"
    )
    _warn(summary)
    return 0


def _demo_study() -> Path:
    here = Path(__file__).resolve().parents[1] / "studies" / "demo.toml"
    return here if here.exists() else Path("studies") / "demo.toml"


def cmd_demo(args) -> int:
    from .analysis.transfer_check import TRUTH_FOLDER
    from .report.document import write_report
    from .study.spec import load

    study = load(_demo_study())
    out = Path(args.out) if args.out else Path("results") / "demo"
    summary = _run(study, out, args)
    print(
        f"demo: {summary.campaigns} campaigns ({summary.resumed} already done) in "
        f"{summary.seconds:.1f} s wall time; grid: {summary.grid}"
    )
    _warn(summary)
    if study.truth is not None:
        truth = _run(study.truth_study(), out / TRUTH_FOLDER, args)
        print(
            f"truth: {truth.campaigns} campaigns on the study's [truth] "
            f"({truth.resumed} already done) in {truth.seconds:.1f} s; grid: {truth.grid}"
        )
        _warn(truth)
    start = time.perf_counter()
    files, rec = write_report(out)
    print(f"report: {files.html} ({time.perf_counter() - start:.1f} s)")
    _print_recommendation(rec)
    print(
        "A simulation on test landscapes is not the real system: the real process's safety "
        "limits come first."
    )
    return 0


def cmd_plan(args) -> int:
    from . import plan as pl  # its names load at first use: the engine after the checks
    from .study.cost import duration, size
    from .study.spec import load

    options = pl.PlanOptions.from_text(
        half_width=args.half_width,
        power=args.power,
        difference=args.difference,
        confidence=args.confidence,
        pilot_replicates=args.pilot_replicates,
        cap=args.cap,
        workers=args.workers,
        jobs=args.jobs,
    )
    study = load(args.study)
    out = _out_dir(args, study.name)
    pilot = pl.run_pilot(study, options)
    plan = pl.build_plan(study, pilot, options, out)
    md, page = pl.write_plan(plan)
    r, c = plan.replicates, plan.compute
    print(f"study plan of '{study.name}': {study.title}")
    print(
        f"pilot: {pilot.campaigns} campaigns ({pilot.design.replicates} replicates of every "
        f"landscape x distortion, {len(pilot.design.settings)} settings) in {pilot.wall:.1f} s"
    )
    print(f"replicates: {r.chosen}")
    for line in pl.reasons(plan):
        print(f"  {line}")
    if plan.warning:
        print(f"  warning: {plan.warning}")
        print(f"workbench: warning: {plan.warning}", file=sys.stderr)
    print(
        f"time: {c.estimate.campaigns} campaigns, {c.estimate.evaluations} evaluations: about "
        f"{duration(c.local)} here ({c.estimate.jobs} processes), {duration(c.cluster)} on "
        f"{c.workers} Dask workers; disk about {size(c.disk_bytes)}"
    )
    old, new = plan.edit
    if r.chosen == study.replicates:
        print(f"the study already says replicates = {r.chosen}")
    elif old is None:
        print(f"add this line at the top of {study.path}: {new}")
    else:
        print(f"first, in {study.path}: change '{old.strip()}' to '{new.strip()}'")
    print(f"command: {plan.command}")
    print(f"plan: {md}, {page}")
    return 0


# --------------------------------------------------------------------------- analysis


def _decision(args):
    """The grid of DIR and the decision rule and resampling the options ask for."""
    from . import analysis as an  # its names load at first use: xarray after the grid's check

    try:
        ds = an.open_grid(args.dir)
        rule = an.decision_rule(
            ds, args.rule, args.weights, args.level, args.metric, _landscapes(args), args.score
        )
        resampling = an.Resampling(args.draws, args.confidence, args.seed)
    except InputError as err:
        raise err.located("command line") from None
    return ds, rule, resampling


def _landscapes(args):
    """``--landscapes``: 'resemblance', or name=value weights by landscape label or kind."""
    from .analysis.recommendation import EQUAL, RESEMBLANCE, parse_weights

    text = args.landscapes
    if text is None or text in (RESEMBLANCE, EQUAL):
        return text
    return parse_weights(text, None, "--landscapes")


def _print_recommendation(rec) -> None:
    print("\n".join(rec.lines()))


def cmd_recommend(args) -> int:
    ds, rule, resampling = _decision(args)
    from .analysis import landscape_kinds, recommend, transfer
    from .analysis.recommendation import short_number

    rec = recommend(ds, rule, resampling, strategy=args.strategy)
    kinds = set(landscape_kinds(ds))
    by_kind = transfer(ds, rule, resampling) if len(kinds) > 1 and not args.strategy else None
    if args.json:
        out = rec.to_dict()
        if by_kind is not None:
            out["by_landscape_kind"] = json.loads(by_kind.to_dataframe().to_json(orient="index"))
        print(json.dumps(out, indent=2, ensure_ascii=False))
        return 0
    _print_recommendation(rec)
    if by_kind is not None:
        print(
            "by kind of landscape (setting chosen on that kind alone; cost of the textbook choice):"
        )
        for i, kind in enumerate(by_kind["kind"].values):
            value = short_number(float(by_kind["value"][i]))
            line = f"  {kind}: {by_kind['setting'].values[i]} ({value})"
            if str(kind) != "textbook" and by_kind.attrs["textbook_setting"]:
                lo, hi = float(by_kind["low"][i]), float(by_kind["high"][i])
                line += (
                    f"; textbook choice costs {short_number(float(by_kind['cost'][i]))} "
                    f"({short_number(lo)} to {short_number(hi)})"
                )
            print(line)
    return 0


def cmd_transfer(args) -> int:
    """Run the study's grid and its truth grid (both resume), then compare their orders."""
    from .storage import write_text
    from .study.cost import duration
    from .study.spec import load

    study = load(args.study)
    from .analysis import Resampling, open_grid  # after the study's check: xarray, SciPy
    from .analysis.transfer_check import TRANSFER_FILE, transfer_from_grids
    from .analysis.transfer_check import TRUTH_FOLDER as TRUTH

    truth = study.truth_study()
    out = _out_dir(args, study.name)
    try:
        resampling = Resampling(args.draws, args.confidence, args.seed)
    except InputError as err:
        raise err.located("command line") from None
    for what, s, folder in (("study", study, out), ("truth", truth, out / TRUTH)):
        summary = _run(s, folder, args)
        print(
            f"{what}: {summary.campaigns} campaigns ({summary.resumed} already done) in "
            f"{duration(summary.seconds)}; grid: {summary.grid}",
            file=sys.stderr if args.json else sys.stdout,
        )
        _warn(summary)
    check = transfer_from_grids(open_grid(out), open_grid(out / TRUTH), resampling=resampling)
    text = json.dumps(check.to_dict(), indent=2, ensure_ascii=False)
    write_text(out / TRANSFER_FILE, text + "\n")
    if args.json:
        print(text)
        return 0
    print(f"transfer check of '{study.name}' against its truth ({study.truth.spec.source}):")
    print("\n".join(check.lines()))
    print(
        "The truth grid replays the study's campaigns on the truth; the real process's safety "
        "limits still come first."
    )
    return 0


def cmd_report(args) -> int:
    ds, rule, resampling = _decision(args)
    from .report.document import write_report  # after the checks: matplotlib

    files, rec = write_report(args.dir, rule, resampling, ds=ds)
    print(f"report: {files.html}")
    print(f"summary: {files.summary}")
    print(f"figures: {', '.join(str(p) for p in files.figures)}")
    _print_recommendation(rec)
    return 0


# --------------------------------------------------------------------------- parser


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="workbench",
        description="Stress-test a belief about where the optimum lies, on simulated campaigns.",
    )
    parser.add_argument("--debug", action="store_true", help="show tracebacks")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("landscapes", help="list the test landscapes and their published optima")
    p.add_argument("--json", action="store_true", help="print a JSON list")
    p.set_defaults(func=cmd_landscapes)

    p = sub.add_parser("belief", help="describe a study's belief and draw its marginals")
    p.add_argument("study", help="study file (TOML)")
    p.add_argument("--out", help="output folder (default results/<study-name>/)")
    p.set_defaults(func=cmd_belief)

    p = sub.add_parser("simulate", help="run one grid cell from the command line")
    p.add_argument("--landscape", required=True)
    p.add_argument("--dim", type=int, default=None, help="dimension of a generic landscape")
    p.add_argument("--strategy", required=True)
    p.add_argument("--budget", type=int, default=30)
    p.add_argument("--replicates", type=int, default=4)
    p.add_argument("--seed", type=int, default=0)
    p.add_argument("--jobs", type=int, default=None, help="parallel workers (default: all cores)")
    p.add_argument("--belief-spread", type=float, default=0.1, help="sd as a fraction of the range")
    p.add_argument("--shift", type=float, default=0.0, help="move the belief by this distance")
    p.add_argument("--scale", type=float, default=1.0, help="multiply the belief's spread")
    p.add_argument("--misplace", default=None, help="centre the belief on 'worst' or 'decoy'")
    p.add_argument("--decay", default="hyperbolic:10", help="family:value")
    p.add_argument("--quantile", type=float, default=DEFAULT_QUANTILE, help="threshold quantile γ")
    p.add_argument("--exploration", type=float, default=0.0, help="share of uniform proposals")
    p.add_argument("--initial", default="belief", help="belief|sobol|lhs[:N]")
    p.add_argument("--target", type=float, default=0.05, help="normalized regret to reach")
    p.add_argument("--noise", type=float, default=0.0, help="noise sd as a fraction of the gap")
    p.add_argument("--placement", choices=("random", "native"), default="random")
    p.add_argument("--random-multiple", type=int, default=1, help="random: k draws per evaluation")
    p.add_argument("--json", action="store_true")
    p.set_defaults(func=cmd_simulate)

    p = sub.add_parser("check", help="validate a study and estimate its cost")
    p.add_argument("study")
    p.add_argument("--jobs", type=int, default=None)
    p.set_defaults(func=cmd_check)

    p = sub.add_parser("plan", help="write the study plan: replicates and why, cost, analysis")
    p.add_argument("study")
    p.add_argument("--out", help="output folder (default results/<study-name>/)")
    for option, helptext in (
        ("--half-width", "half-width of the recovery interval (default 0.1)"),
        ("--power", "power to tell apart two settings (default 0.8)"),
        ("--difference", "difference in evaluations to target to detect (default 5)"),
        ("--confidence", "confidence level; the test's level is 1 - confidence (default 0.95)"),
        ("--pilot-replicates", "replicates per pilot cell (default 4)"),
        ("--cap", "most replicates to plan for (default 64)"),
        ("--workers", "Dask workers for the cluster estimate (default 4)"),
        ("--jobs", "parallel workers here (default: all cores)"),
    ):
        p.add_argument(option, default=None, help=helptext)
    p.set_defaults(func=cmd_plan)

    for name, func, helptext in (
        ("run", cmd_run, "run a study's grid (resumes where it stopped)"),
        ("demo", cmd_demo, "run the built-in demo study"),
        ("transfer", cmd_transfer, "run the study on its [truth] too: does the answer hold?"),
    ):
        p = sub.add_parser(name, help=helptext)
        if name != "demo":
            p.add_argument("study")
        if name == "transfer":
            p.add_argument("--json", action="store_true", help="print one JSON object")
            p.add_argument("--confidence", type=float, default=0.95, help="interval level")
            p.add_argument("--draws", type=int, default=1000, help="bootstrap draws")
            p.add_argument("--seed", type=int, default=0, help="bootstrap seed")
        p.add_argument("--out", help="output folder (default results/<study-name>/)")
        p.add_argument(
            "--jobs", type=int, default=None, help="parallel workers (default: all cores)"
        )
        p.add_argument("--scheduler", default=None, help="Dask scheduler address")
        p.add_argument("--fresh", action="store_true", help="discard earlier results in --out")
        p.add_argument("--quiet", action="store_true", help="no progress bar")
        p.set_defaults(func=func)

    for name, func, helptext, data, datahelp, grid_required in (
        (
            "audit",
            cmd_audit,
            "check the belief against earlier evaluations (CSV)",
            "--data",
            "CSV of earlier evaluations",
            False,
        ),
        (
            "monitor",
            cmd_monitor,
            "read a live campaign against the grid: distortions, advice",
            "--observations",
            "CSV of the campaign's evaluations",
            True,
        ),
    ):
        p = sub.add_parser(name, help=helptext)
        p.add_argument("study")
        p.add_argument(data, required=True, help=datahelp)
        p.add_argument(
            "--grid", required=grid_required, default=None, help="this study's results folder"
        )
        p.add_argument("--response", default=None, help="response column (default: the study's)")
        p.add_argument("--goal", default=None, help="minimise or maximise (default: the study's)")
        p.add_argument(
            "--out", default=None, help=f"output folder (default results/<study>/{name})"
        )
        p.add_argument("--json", action="store_true", help="print one JSON object")
        if name == "audit":
            p.add_argument("--top", type=float, default=None, help="share of the data that is good")
        else:
            p.add_argument("--setting", default=None, help="the campaign's (default: recommended)")
        p.set_defaults(func=func)

    for name, func, helptext in (
        ("recommend", cmd_recommend, "pick the setting of a grid under a decision rule"),
        ("report", cmd_report, "write the HTML report, its figures and a Markdown summary"),
    ):
        p = sub.add_parser(name, help=helptext)
        p.add_argument("dir", metavar="DIR", help="results folder holding grid.nc")
        p.add_argument(
            "--rule", default=None, help="expected, minimax or cvar (default: the study's)"
        )
        p.add_argument(
            "--weights", default=None, help="distortion weights, e.g. exact=0.5,shifted=0.5"
        )
        p.add_argument("--level", type=float, default=None, help="cvar: worst share of weight")
        p.add_argument(
            "--metric",
            default=None,
            help="evaluations_to_target, final_normalized_regret or log_regret_area",
        )
        p.add_argument(
            "--landscapes",
            default=None,
            help="landscape weights by label or kind (e.g. textbook=0.2,fitted-history=0.8), "
            "'resemblance' or 'equal' (default: the study's; none set: resemblance when the "
            "study has earlier evaluations)",
        )
        p.add_argument(
            "--score",
            default=None,
            help="raw, ranks or saving: the metric within each landscape (default: the study's)",
        )
        p.add_argument("--confidence", type=float, default=0.95, help="interval level")
        p.add_argument("--draws", type=int, default=1000, help="bootstrap draws")
        p.add_argument("--seed", type=int, default=0, help="bootstrap seed")
        if name == "recommend":
            p.add_argument(
                "--strategy", default=None, help="choose among one strategy's settings only"
            )
            p.add_argument("--json", action="store_true", help="print one JSON object")
        p.set_defaults(func=func)
    return parser


# What an interrupted command leaves for a rerun (Ctrl-C): only the grid runs save as they go.
_RESUMES = "the finished chunks are kept in the results folder and a rerun resumes from them"
_KEPT = {
    "run": _RESUMES,
    "demo": _RESUMES,
    "transfer": _RESUMES,
    "monitor": "a monitor is cached beside the grid only once its training finishes; this "
    "one is not kept and a rerun trains it again",
}
_NOTHING_KEPT = "nothing is kept for a rerun, which starts again from the beginning"


class _NoCampaignRan(Exception):
    """Raised by nothing: what a command that ran no campaign matches for CampaignError."""


def _campaign_error() -> type[Exception]:
    """The grid's ``CampaignError`` if the grid module was imported, else a class nothing
    raises: only that module raises one, and importing it (and the engine) just to name the
    class would slow every command's start."""
    grid = sys.modules.get("workbench.study.grid")
    return grid.CampaignError if grid is not None else _NoCampaignRan


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.WARNING, format="workbench: %(message)s")
    # Every warning is one line; NumPy's floating-point warnings (divide by zero, overflow,
    # invalid value), which the numerics expect and handle, are silenced unless --debug.
    warnings.simplefilter("default")
    if not args.debug:
        warnings.filterwarnings("ignore", r".* encountered in ", RuntimeWarning)
    warnings.formatwarning = lambda msg, *a, **k: (
        f"workbench: warning: {' '.join(str(msg).split())}\n"
    )
    try:
        if isinstance(getattr(args, "jobs", None), int):  # plan reads its own options
            check_number(args.jobs, "--jobs", low=1, integer=True, where="command line")
        return int(args.func(args) or 0)
    except InputError as err:
        if args.debug:
            raise
        print(f"workbench: {err}", file=sys.stderr)
        return 2
    except _campaign_error() as err:
        if args.debug:
            raise
        print(f"workbench: {err}; finished chunks are kept, a rerun resumes", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        print(f"workbench: interrupted; {_KEPT.get(args.command, _NOTHING_KEPT)}", file=sys.stderr)
        return 130
    except BrokenPipeError:
        # The reader (a pager, head) went away: stop quietly, as command-line tools do.
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 1
    except Exception as err:
        if args.debug:
            raise
        print(
            f"workbench: internal error: {type(err).__name__}: {err} (--debug shows where)",
            file=sys.stderr,
        )
        return 1


if __name__ == "__main__":
    sys.exit(main())
