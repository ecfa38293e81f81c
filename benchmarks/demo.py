"""Demo grid time, back to back against a baseline revision, and whether the grids agree.

Runs the demo study's grid (studies/demo.toml, `--jobs 2`) with this tree and with the code of
``--baseline`` (a git revision, checked out into a temporary worktree), alternating the two
``--repeats`` times so that both see the same hours of the machine, each run in a fresh
process. Prints each run, the medians and their ratio, and whether the last two grids are
identical value for value (xarray's ``identical``).

    python benchmarks/demo.py --baseline a19dd0f [--repeats 3]
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

RUN = """
import sys, time
from workbench.study.runner import run_study
from workbench.study.spec import load
start = time.perf_counter()
run_study(load(sys.argv[1]), sys.argv[2], jobs=2, fresh=True)
print(time.perf_counter() - start)
"""


def _time(code: Path, out: Path) -> float:
    env = {**os.environ, "PYTHONPATH": str(code)}
    study = code / "studies" / "demo.toml"
    done = subprocess.run(
        [sys.executable, "-c", RUN, str(study), str(out)],
        cwd=code,
        env=env,
        capture_output=True,
        text=True,
        check=False,
    )
    if done.returncode != 0:
        raise SystemExit(f"the demo grid failed in {code}:\n{done.stderr}")
    return float(done.stdout.strip().splitlines()[-1])


def _compare(a: Path, b: Path) -> tuple[list[str], list[str]]:
    """Variables of both grids that differ, and variables only ``b`` has."""
    import xarray as xr

    with xr.open_dataset(a / "grid.nc") as x, xr.open_dataset(b / "grid.nc") as y:
        common = [v for v in x.data_vars if v in y.data_vars]
        differ = [v for v in common if not x[v].load().identical(y[v].load())]
        return differ, sorted(set(y.data_vars) - set(x.data_vars))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--baseline", required=True, help="git revision to compare with")
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        base = tmp / "baseline"
        subprocess.run(
            ["git", "-C", str(ROOT), "worktree", "add", "-q", "--detach", str(base), args.baseline],
            check=True,
        )
        try:
            times: dict[str, list[float]] = {"baseline": [], "this tree": []}
            for i in range(args.repeats):
                for name, code in (("baseline", base), ("this tree", ROOT)):
                    seconds = _time(code, tmp / ("grid-" + name.replace(" ", "-")))
                    times[name].append(seconds)
                    print(f"run {i + 1}, {name}: {seconds:.1f} s", flush=True)
            med = {k: statistics.median(v) for k, v in times.items()}
            print(
                f"demo grid, median of {args.repeats}: baseline {args.baseline} "
                f"{med['baseline']:.1f} s, this tree {med['this tree']:.1f} s "
                f"(ratio {med['this tree'] / med['baseline']:.2f})"
            )
            differ, new = _compare(tmp / "grid-baseline", tmp / "grid-this-tree")
            print(
                "variables of both grids identical value for value: "
                + ("yes" if not differ else f"no ({', '.join(differ)})")
                + (f"; new in this tree: {', '.join(new)}" if new else "")
            )
        finally:
            subprocess.run(
                ["git", "-C", str(ROOT), "worktree", "remove", "--force", str(base)], check=False
            )


if __name__ == "__main__":
    main()
