"""The ``workbench`` command: the only module that prints.

Bad input ends with one line on stderr naming the file or option, the key, what was expected
and what was given, and exit code 2. ``--debug`` shows the traceback instead.
"""

from __future__ import annotations

import json
import logging
import os
import sys
import time
import warnings
from pathlib import Path

from .cli_args import build_parser
from .cli_progress import STATUS, CampaignBar, status
from .evidence.commands import cmd_audit, cmd_monitor  # noqa: F401 (run by name in main)
from .validation import InputError, check_number, raw

__all__ = ["main"]

log = logging.getLogger("workbench")


def _out_dir(args, study_name: str) -> Path:
    return Path(args.out) if args.out else Path("results") / study_name


# --------------------------------------------------------------------------- commands


def cmd_landscapes(args) -> int:
    from .world import landscapes as ls

    rows = []
    for name in ls.catalogue():
        lowest, highest = ls.dimensions(name)
        rows.append(ls.get(name).describe() | {"dimensions": [lowest, highest]})
        rows[-1]["accepts_dim"] = lowest != highest
    if args.json:
        print(json.dumps(rows, indent=2))
        return 0
    print(f"{'name':<18} {'dim':>9}  {'minimum':>12}  domain / minimisers")
    for r in rows:
        domain = " x ".join(f"[{lo:g}, {hi:g}]" for lo, hi in r["domain"])
        dim = "{}-{} *".format(*r["dimensions"]) if r["accepts_dim"] else str(r["dimension"])
        print(f"{r['name']:<18} {dim:>9}  {r['minimum']:>12.6g}  {domain}")
        for m in r["minimisers"]:
            print(f"{'':<43}at ({', '.join(f'{v:.6g}' for v in m)})")
    generic = [r for r in rows if r["accepts_dim"]]
    if generic:
        print(
            f"* accepts dim (`dim = N` in a [[landscape]] table, `simulate --dim N`); shown "
            f"at dim = {generic[0]['dimension']}"
        )
    return 0


def cmd_belief(args) -> int:
    from .study import spec as study
    from .world import beliefs

    s = study.load(args.study)
    if s.space is None:
        raise InputError(
            "space",
            "a [space] section (the belief command describes a belief on a space)",
            raw("a study without one"),
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

    from .report.figures import belief_marginals, figure_title
    from .storage import atomic_path

    size = (4.2 * s.space.dim, 3.6)
    fig, axes = plt.subplots(1, s.space.dim, figsize=size, squeeze=False, layout="constrained")
    belief_marginals(list(axes[0]), s.space, {"belief": s.belief})
    figure_title(fig, f"Belief marginals: {s.title}")
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


def _simulated(chunk, arrays, target: float) -> list[dict]:
    """The rows of ``simulate`` for one finished chunk: one per replicate."""
    from .analysis.metrics import evaluations_to_target
    from .study.grid import split

    rows = []
    for replicate, result in split(chunk, arrays):
        regret = result["regret"][0]
        nr = result["normalized_regret"][0]
        ett, reached = evaluations_to_target(nr, target)
        rows.append(
            {
                "replicate": replicate,
                "final_regret": float(regret[-1]),
                "final_normalized_regret": float(nr[-1]),
                "evaluations_to_target": int(ett) if reached else None,
                "mode_value_regret": float(result["mode_value"][0] - result["minimum"][0]),
            }
        )
    return rows


def cmd_simulate(args) -> int:
    import numpy as np

    study, settings = _simulation_study(args)
    # After the options are checked: these load the engine, joblib and xarray.
    from .study.grid import chunks
    from .study.runner import execute

    rows, todo = [], chunks(study)
    total, done = sum(c.campaigns for c in todo), 0
    with CampaignBar() as bar:
        bar.update(done, total)
        for chunk, arrays, _ in execute(study, todo, jobs=args.jobs):
            done += chunk.campaigns
            bar.update(done, total)
            rows.extend(_simulated(chunk, arrays, study.target))
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


def cmd_check(args) -> int:
    from .study.spec import load

    s = load(args.study)  # the study checked before the engine and the plan load
    from .plan import check_lines
    from .study.cost import MAX_GRID_BYTES, check_grid_size, size
    from .study.resemblance import resemblance_table, table_lines

    grid = check_grid_size(s)  # a grid too large to load is refused before anything runs
    # The user's functions first: one call each at the belief's mode, in a child process.
    timed = [(e.label, e.spec.probe(s.belief.mode())) for e in s.landscapes if e.kind == "function"]
    print(f"study '{s.name}': {s.title}")
    for label, seconds in timed:
        print(f"{label}: {seconds * 1e3:.1f} ms per call at the belief's mode")
    # Before the pilot, which runs campaigns at the full budget: what the grid will hold.
    print(
        f"grid.nc: about {size(grid)}, which decide and report load into memory "
        f"(limit {size(MAX_GRID_BYTES)})",
        flush=True,
    )
    lines = check_lines(s, args.jobs)  # the plan's pilot, smaller, and the plan's estimate
    print("\n".join(lines))
    if s.without_belief:
        print(f"without a belief (uniform over the range): {', '.join(s.without_belief)}")
    table = resemblance_table(s)
    if table is not None:
        print("\n".join(table_lines(table)))
    return 0


def _run(study, out: Path, args) -> object:
    from .study.runner import run_study

    with CampaignBar(args.quiet) as bar:
        return run_study(
            study,
            out,
            jobs=args.jobs,
            scheduler=args.scheduler,
            fresh=args.fresh,
            progress=bar.update,
        )


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
        f"time: {c.estimate.campaigns} campaigns, {c.estimate.evaluations} evaluations: "
        f"{c.time_words()}; {duration(c.cluster)} on {c.workers} Dask workers; disk about "
        f"{size(c.disk_bytes)}"
    )
    old, new = plan.edit
    if r.chosen == study.replicates:
        print(f"the study already says replicates = {r.chosen}")
    elif old is None:
        print(f"add this line at the top of {study.path}: {new}")
    else:
        print(f"first, in {study.path}: change '{old.strip()}' to '{new.strip()}'")
    print("\n".join(pl.edge_lines(plan)))
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


def cmd_decide(args) -> int:
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
        # Each command is the function cmd_<name> of this module (looked up when it runs).
        with status(STATUS.get(args.command)):
            return int(globals()[f"cmd_{args.command}"](args) or 0)
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
