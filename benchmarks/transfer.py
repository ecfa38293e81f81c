"""Does the recommendation hold on a real problem? The transfer check on the measured tables.

    python benchmarks/transfer.py                 # run (resuming) and write the results table
    python benchmarks/transfer.py --no-run        # only recompute the table from the grids

For each team study in ``benchmarks/tables/*-team.toml`` (what a team would simulate before
tuning: textbook landscapes placed at a belief at scikit-learn's defaults, a drawn surface, a
surface fitted to 20 measured rows, a surface drawn like those rows), ``workbench transfer``
runs the study and its truth (the measured table). The check is then read under several
decision rules over the same grids, each a different answer to "which simulated world and
which score":

- *before*: the landscapes a team had before surfaces drawn like its data existed (textbook,
  drawn, fitted), weighted equally, the raw metric;
- *+ like data*: the same with the drawn-like-data landscape added;
- *ranks*, *saving*: the metric standardised within each landscape;
- *resemblance*: landscapes weighted by their rank agreement with the 20 measured rows;
- each landscape alone.

The table is written to ``benchmarks/tables/transfer-results.md`` (dated, with this command),
which ``make readme`` copies into the README.
"""

from __future__ import annotations

import argparse
import datetime
import sys
from dataclasses import replace
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TABLES = ROOT / "benchmarks" / "tables"
RESULTS = TABLES / "transfer-results.md"
# The landscape added by this round (surfaces drawn like the data), left out of "before".
LIKE = "like-rows"


def variants(ds):
    """(name, grid, rule) for every decision compared."""
    from workbench.analysis import decision_rule

    labels = [str(v) for v in ds["landscape"].values]
    before = ds.isel(landscape=[i for i, n in enumerate(labels) if n != LIKE])
    plain = decision_rule(ds, landscapes="equal", score_method="raw")
    out = [
        (
            "before: textbook, drawn, fitted; equal; raw",
            before,
            decision_rule(before, landscapes="equal", score_method="raw"),
        ),
        ("+ like data; equal; raw", ds, plain),
        ("+ like data; equal; ranks", ds, replace(plain, score="ranks")),
        ("+ like data; equal; saving", ds, replace(plain, score="saving")),
    ]
    if "resemblance" in ds:
        for score in ("raw", "ranks", "saving"):
            rule = decision_rule(ds, landscapes="resemblance", score_method=score)
            out.append((f"+ like data; resemblance; {score}", ds, rule))
    out.append(("the study's own rule (resemblance by default; raw)", ds, decision_rule(ds)))
    return out


def _measure(m, digits: int = 2) -> str:
    return f"{m.estimate:.{digits}f} ({m.low:.{digits}f} to {m.high:.{digits}f})"


def table(name: str, out: Path, draws: int) -> list[str]:
    from workbench.analysis import Resampling, open_grid
    from workbench.analysis.transfer_check import TRUTH_FOLDER, difficulty, transfer_from_grids

    ds, truth = open_grid(out), open_grid(out / TRUTH_FOLDER)
    rs = Resampling(draws=draws)
    rows = []
    checks = {}
    for label, grid, rule in variants(ds):
        check = transfer_from_grids(grid, truth, rule, rs)
        checks[label] = check
        o = check.overall
        n = len(check.settings)
        rows.append(
            f"| {label} | {o.pick} | {o.real_rank.estimate:.0f} of {n} | "
            f"{_measure(o.gap)} | {_measure(o.spearman)} |"
        )
    full = checks["+ like data; equal; raw"]
    for r in full.by_landscape:
        rows.append(
            f"| {r.landscape} alone | {r.pick} | {r.real_rank.estimate:.0f} of "
            f"{len(full.settings)} | {_measure(r.gap)} | {_measure(r.spearman)} |"
        )
    hard = difficulty(ds) | difficulty(truth)
    hardness = ", ".join(f"{label} {value:.1f}" for label, value in hard.items())
    head = [
        f"**{name}** (split-half Spearman of the real order "
        f"{full.split_half.estimate:.2f}; best setting on the table: {full.best_real})",
        "",
        "| decision | simulated pick | real rank | transfer gap | Spearman, simulated vs real |",
        "| --- | --- | --- | --- | --- |",
    ]
    tail = [
        "",
        f"Difficulty (no-belief's mean evaluations to target, of a budget of "
        f"{int(ds.attrs['budget'])}): {hardness}.",
    ]
    return [*head, *rows, *tail, ""]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", default=str(ROOT / "results" / "transfer"))
    parser.add_argument("--jobs", type=int, default=None)
    parser.add_argument("--draws", type=int, default=1000)
    parser.add_argument("--no-run", action="store_true")
    args = parser.parse_args(argv)
    from workbench.cli import main as workbench

    lines = [
        f"Measured on {datetime.date.today().isoformat()} with `python benchmarks/transfer.py` "
        f"({args.draws} bootstrap draws; intervals are 95 %). Real rank: where the setting "
        "the simulation picks ranks among the 16 on the measured table (1 is best); transfer "
        "gap: 0 is the best real setting, 1 no better than a setting picked at random.",
        "",
    ]
    for study in sorted(TABLES.glob("*-team.toml")):
        name = study.name.removesuffix("-team.toml")
        out = Path(args.out) / name
        if not args.no_run:
            command = ["transfer", str(study), "--out", str(out), "--quiet", "--draws", "10"]
            if args.jobs:
                command += ["--jobs", str(args.jobs)]
            code = workbench(command)
            if code:
                return code
        lines += table(name, out, args.draws)
    RESULTS.write_text("\n".join(lines))
    print("\n".join(lines))
    return 0


if __name__ == "__main__":
    sys.exit(main())
