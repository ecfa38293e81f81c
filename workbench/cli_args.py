"""The ``workbench`` command line's options: one parser, one sub-parser per command.

``workbench.cli`` runs the command the parser names (``args.command``); this module only
declares the options, so that it stays light to import.
"""

from __future__ import annotations

import argparse

from .engine.strategies import DEFAULT_QUANTILE

__all__ = ["build_parser"]


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="workbench",
        description="Stress-test a belief about where the optimum lies, on simulated campaigns.",
    )
    parser.add_argument("--debug", action="store_true", help="show tracebacks")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    p = sub.add_parser("landscapes", help="list the test landscapes and their published optima")
    p.add_argument("--json", action="store_true", help="print a JSON list")

    p = sub.add_parser("belief", help="describe a study's belief and draw its marginals")
    p.add_argument("study", help="study file (TOML)")
    p.add_argument("--out", help="output folder (default results/<study-name>/)")

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

    p = sub.add_parser("check", help="validate a study and estimate its cost")
    p.add_argument("study")
    p.add_argument("--jobs", type=int, default=None)

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

    for name, helptext in (
        ("run", "run a study's grid (resumes where it stopped)"),
        ("demo", "run the built-in demo study"),
        ("transfer", "run the study on its [truth] too: does the answer hold?"),
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

    for name, helptext, data, datahelp, grid_required in (
        (
            "audit",
            "check the belief against earlier evaluations (CSV)",
            "--data",
            "CSV of earlier evaluations",
            False,
        ),
        (
            "monitor",
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

    for name, helptext in (
        ("recommend", "pick the setting of a grid under a decision rule"),
        ("report", "write the HTML report, its figures and a Markdown summary"),
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
    return parser
