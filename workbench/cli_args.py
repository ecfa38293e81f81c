"""The ``workbench`` command line's options: one parser, one sub-parser per command.

``workbench.cli`` runs the command the parser names (``args.command``); this module only
declares the options, so that it stays light to import. Every option's help states its
choices and its default; a usage error is one line on stderr (exit code 2), and a command's
old name is refused with one line naming the new one.
"""

from __future__ import annotations

import argparse
import sys

from .engine.strategies import DEFAULT_QUANTILE, STRATEGIES
from .study.decay import FAMILIES

__all__ = ["RENAMED", "build_parser"]

# Commands renamed since an earlier release: refused with one line naming the new name.
RENAMED = {"recommend": "decide"}

_OUT = "output folder (default: results/<study-name>/)"
_JOBS = "parallel workers, at least 1 (default: all cores)"
_RULES = "decision rule: expected, minimax or cvar (default: the study's, else expected)"
_METRICS = (
    "evaluations_to_target, final_normalized_regret or log_regret_area "
    "(default: the study's, else evaluations_to_target)"
)


class _Help(argparse.HelpFormatter):
    """Help that shows each option's default after its text, unless the text already says
    it or there is none to show (None, False, a required option)."""

    def _get_help_string(self, action: argparse.Action) -> str:
        text = action.help or ""
        default = action.default
        if (
            "default" in text
            or default is None
            or default is False
            or default is argparse.SUPPRESS
            or not action.option_strings
        ):
            return text
        return f"{text} (default: %(default)s)"


class _Parser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line, with a pointer to ``--help``."""

    def error(self, message: str):  # type: ignore[override]
        for old, new in RENAMED.items():
            if f"invalid choice: '{old}'" in message:
                self.exit(2, f"workbench: the command '{old}' is now '{new}'\n")
        message = " ".join(message.split())
        self.exit(2, f"workbench: error: {message} (see '{self.prog} --help')\n")


def _version() -> str:
    from importlib import metadata

    try:
        return metadata.version("workbench")
    except metadata.PackageNotFoundError:  # run from a source tree that is not installed
        from . import __version__

        return __version__


class _Version(argparse.Action):
    """``--version``: the installed package's version (read only when asked for)."""

    def __init__(self, option_strings, dest=argparse.SUPPRESS, **kwargs):
        super().__init__(option_strings, dest, nargs=0, default=argparse.SUPPRESS, **kwargs)

    def __call__(self, parser, namespace, values, option_string=None):
        sys.stdout.write(f"workbench {_version()}\n")
        parser.exit()


def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(
        prog="workbench",
        description="Stress-test a belief about where the optimum lies, on simulated campaigns.",
        formatter_class=_Help,
    )
    parser.add_argument("--version", action=_Version, help="print the version and stop")
    parser.add_argument("--debug", action="store_true", help="show tracebacks")
    # The global options, accepted after the command too (`workbench run x.toml --debug`);
    # SUPPRESS keeps a command's parser from resetting what was given before the command.
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument(
        "--debug", action="store_true", default=argparse.SUPPRESS, help="show tracebacks"
    )
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")

    def command(name: str, helptext: str) -> argparse.ArgumentParser:
        return sub.add_parser(
            name, help=helptext, description=helptext, parents=[common], formatter_class=_Help
        )

    p = command("landscapes", "list the test landscapes and their published optima")
    p.add_argument("--json", action="store_true", help="print a JSON list")

    p = command("belief", "describe a study's belief and draw its marginals")
    p.add_argument("study", help="study file (TOML)")
    p.add_argument("--out", help=_OUT)

    p = command("simulate", "run one grid cell from the command line")
    p.add_argument("--landscape", required=True, help="a name that `workbench landscapes` lists")
    p.add_argument(
        "--dim", type=int, default=None, help="dimension, for landscapes that take one (default: 2)"
    )
    p.add_argument("--strategy", required=True, help=f"one of {', '.join(STRATEGIES)}")
    p.add_argument("--budget", type=int, default=30, help="evaluations per campaign")
    p.add_argument("--replicates", type=int, default=4, help="campaigns")
    p.add_argument("--seed", type=int, default=0, help="root seed")
    p.add_argument("--jobs", type=int, default=None, help=_JOBS)
    p.add_argument("--belief-spread", type=float, default=0.1, help="sd as a fraction of the range")
    p.add_argument("--shift", type=float, default=0.0, help="move the belief by this distance")
    p.add_argument("--scale", type=float, default=1.0, help="multiply the belief's spread")
    p.add_argument(
        "--misplace", default=None, help="centre the belief on 'worst' or 'decoy' (default: no)"
    )
    p.add_argument(
        "--decay",
        default="hyperbolic:10",
        help=f"FAMILY:VALUE, FAMILY one of {', '.join(FAMILIES)}",
    )
    p.add_argument("--quantile", type=float, default=DEFAULT_QUANTILE, help="threshold quantile γ")
    p.add_argument("--exploration", type=float, default=0.0, help="share of uniform proposals")
    p.add_argument("--initial", default="belief", help="initial design: belief, sobol or lhs[:N]")
    p.add_argument("--target", type=float, default=0.05, help="normalized regret to reach")
    p.add_argument("--noise", type=float, default=0.0, help="noise sd as a fraction of the gap")
    p.add_argument(
        "--placement",
        choices=("random", "native"),
        default="random",
        help="random: the optimum placed at a random point; native: the published domain",
    )
    p.add_argument("--random-multiple", type=int, default=1, help="random: k draws per evaluation")
    p.add_argument("--json", action="store_true", help="print one JSON object")

    p = command("check", "validate a study and estimate its cost")
    p.add_argument("study", help="study file (TOML)")
    p.add_argument("--jobs", type=int, default=None, help=_JOBS)

    p = command("plan", "write the study plan: replicates and why, cost, analysis")
    p.add_argument("study", help="study file (TOML)")
    p.add_argument("--out", help=_OUT)
    for option, helptext in (
        ("--half-width", "half-width of the recovery interval (default: 0.1)"),
        ("--power", "power to tell apart two settings (default: 0.8)"),
        ("--difference", "evaluations to target to tell apart (default: from the pilot)"),
        ("--confidence", "confidence level; the test's level is 1 - confidence (default: 0.95)"),
        ("--pilot-replicates", "replicates per pilot cell (default: 4)"),
        ("--cap", "most replicates to plan for (default: 64)"),
        ("--workers", "Dask workers for the cluster estimate (default: 4)"),
        ("--jobs", _JOBS),
    ):
        p.add_argument(option, default=None, help=helptext)

    for name, helptext in (
        ("run", "run a study's grid (resumes where it stopped)"),
        ("demo", "run the built-in demo study"),
        ("transfer", "run the study on its [truth] too: does the answer hold?"),
    ):
        p = command(name, helptext)
        if name != "demo":
            p.add_argument("study", help="study file (TOML)")
        if name == "transfer":
            p.add_argument("--json", action="store_true", help="print one JSON object")
            p.add_argument("--confidence", type=float, default=0.95, help="interval level")
            p.add_argument("--draws", type=int, default=1000, help="bootstrap draws")
            p.add_argument("--seed", type=int, default=0, help="bootstrap seed")
        p.add_argument(
            "--out", help="output folder (default: results/demo/)" if name == "demo" else _OUT
        )
        p.add_argument("--jobs", type=int, default=None, help=_JOBS)
        p.add_argument(
            "--scheduler", default=None, help="Dask scheduler address (default: local processes)"
        )
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
        p = command(name, helptext)
        p.add_argument("study", help="study file (TOML)")
        p.add_argument(data, required=True, help=datahelp)
        grid = "this study's results folder"
        p.add_argument(
            "--grid",
            required=grid_required,
            default=None,
            help=grid if grid_required else f"{grid} (default: none, no grid is read)",
        )
        p.add_argument("--response", default=None, help="response column (default: the study's)")
        p.add_argument("--goal", default=None, help="minimise or maximise (default: the study's)")
        p.add_argument(
            "--out", default=None, help=f"output folder (default: results/<study>/{name})"
        )
        p.add_argument(
            "--json", action="store_true", help="print one JSON object (the page is written too)"
        )
        if name == "audit":
            p.add_argument(
                "--top",
                type=float,
                default=None,
                help="share of the data that is good "
                "(default: the study's lowest threshold quantile)",
            )
        else:
            p.add_argument(
                "--setting", default=None, help="the campaign's setting (default: the recommended)"
            )

    for name, helptext in (
        ("decide", "pick the setting of a grid under a decision rule"),
        ("report", "write the HTML report, its figures and a Markdown summary"),
    ):
        p = command(name, helptext)
        p.add_argument("dir", metavar="DIR", help="results folder holding grid.nc")
        p.add_argument("--rule", default=None, help=_RULES)
        p.add_argument(
            "--weights",
            default=None,
            help="distortion weights, e.g. exact=0.5,shifted=0.5 "
            "(default: the study's, else equal)",
        )
        p.add_argument(
            "--level",
            type=float,
            default=None,
            help="cvar: worst share of weight (default: the study's, else 0.25)",
        )
        p.add_argument("--metric", default=None, help=_METRICS)
        p.add_argument(
            "--landscapes",
            default=None,
            help="landscape weights by label or kind (e.g. textbook=0.2,fitted-history=0.8), "
            "'resemblance' or 'equal' (default: the study's; none set: resemblance when the "
            "study has earlier evaluations, else equal)",
        )
        p.add_argument(
            "--score",
            default=None,
            help="raw, ranks or saving: the metric within each landscape (default: the study's, "
            "else raw)",
        )
        p.add_argument("--confidence", type=float, default=0.95, help="interval level")
        p.add_argument("--draws", type=int, default=1000, help="bootstrap draws")
        p.add_argument("--seed", type=int, default=0, help="bootstrap seed")
        if name == "decide":
            p.add_argument(
                "--strategy",
                default=None,
                help="choose among one strategy's settings only (default: all strategies)",
            )
            p.add_argument("--json", action="store_true", help="print one JSON object")
    return parser
