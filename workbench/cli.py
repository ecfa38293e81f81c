"""The ``workbench`` command: the only module that prints.

Bad input ends with one line on stderr naming the file or option, the key, what was expected
and what was given, and exit code 2. ``--debug`` shows the traceback instead.
"""

from __future__ import annotations

import argparse
import json
import logging
import sys
import warnings
from pathlib import Path

from .validation import InputError

__all__ = ["main"]

log = logging.getLogger("workbench")


def _out_dir(args, study_name: str) -> Path:
    return Path(args.out) if args.out else Path("results") / study_name


def _format_value(value) -> str:
    if isinstance(value, float):
        return f"{value:.4g}"
    return str(value)


# --------------------------------------------------------------------------- commands


def cmd_landscapes(args) -> int:
    from . import landscapes as ls

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
    from . import beliefs, study

    s = study.load(args.study)
    if s.space is None:
        raise InputError(
            "space",
            "a [space] section (the belief command describes a belief on a space)",
            None,
            args.study,
        )
    summary = beliefs.summarise(s.belief, s.space)
    print(f"Belief of study '{s.name}': {s.title}")
    print(f"{'parameter':<16} {'mode':>12}  {'central 50 %':>26}  {'central 90 %':>26}  truncated")
    for r in summary.parameters:
        unit = f" {r.unit}" if r.unit else ""
        c50 = ", ".join(_format_value(v) for v in r.central50)
        c90 = ", ".join(_format_value(v) for v in r.central90)
        print(
            f"{r.name:<16} {_format_value(r.mode) + unit:>12}  {'[' + c50 + ']':>26}  "
            f"{'[' + c90 + ']':>26}  {r.truncated_mass:.1%}"
        )
    mode = ", ".join(f"{k} = {_format_value(v)}" for k, v in summary.mode.items())
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
    from .storage import atomic_path

    fig, axes = plt.subplots(1, s.space.dim, figsize=(4.2 * s.space.dim, 3.4), squeeze=False)
    belief_marginals(list(axes[0]), s.space, {"belief": s.belief})
    fig.suptitle(f"Belief marginals: {s.title}", fontsize="medium")
    fig.tight_layout()
    with atomic_path(path) as tmp:
        fig.savefig(tmp, format="png", dpi=110)
    plt.close(fig)
    return path


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
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    logging.basicConfig(level=logging.WARNING, format="workbench: %(message)s")
    warnings.simplefilter("default")
    warnings.formatwarning = lambda msg, *a, **k: f"workbench: warning: {msg}\n"
    try:
        return int(args.func(args) or 0)
    except InputError as err:
        if args.debug:
            raise
        print(f"workbench: {err}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print("workbench: interrupted; finished work is kept and a rerun resumes", file=sys.stderr)
        return 130


if __name__ == "__main__":
    sys.exit(main())
