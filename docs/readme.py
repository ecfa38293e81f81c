"""Rewrite the README's quoted program output and its demo figures from the program itself.

    python docs/readme.py            # run the demo into results/demo (resuming), then rewrite
    python docs/readme.py --no-run   # rewrite from the results already in results/demo

Each quoted block sits between ``<!-- begin: NAME -->`` and ``<!-- end: NAME -->`` in
README.md; everything between the markers is replaced, nothing else is touched:

- ``belief``: what ``workbench belief studies/demo.toml`` prints;
- ``demo-output``: what ``workbench demo`` printed (its wall time is this machine's);
- ``demo-summary``: the recommendation section of the report's ``summary.md``;
- ``demo-by-kind``: its table by kind of landscape;
- ``demo-transfer``, ``demo-resemblance``: its transfer check against the demo's invented truth
  and how well each landscape explains the earlier bakes;
- ``transfer-results``: ``benchmarks/tables/transfer-results.md``, which
  ``python benchmarks/transfer.py`` writes (the transfer check on the measured tables);
- ``audit-output`` (and ``monitor-output``): what those commands print on the demo's files.

The figures ``docs/figures/demo-*.png`` are the belief command's and the report's. The test
``tests/test_readme.py`` fails when the quoted recommendation no longer matches the demo's grid.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import os
import re
import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
README = ROOT / "README.md"
DEMO = ROOT / "studies" / "demo.toml"
TRANSFER_RESULTS = ROOT / "benchmarks" / "tables" / "transfer-results.md"
FIGURES = {
    "sensitivity.png": "demo-sensitivity.png",
    "regret_curves.png": "demo-regret-curves.png",
}


# The lines of the demo's output that state the recommendation (``Recommendation.lines``).
RECOMMENDATION = ("recommendation:", "  ")


# The commands on real data run on the demo's files after the demo (``results/demo``).
EVIDENCE = {
    "audit": [
        "audit",
        "studies/demo.toml",
        "--data",
        "studies/bakery-history.csv",
        "--grid",
        "results/demo",
    ],
    "monitor": [
        "monitor",
        "studies/demo.toml",
        "--observations",
        "studies/bakery-campaign.csv",
        "--grid",
        "results/demo",
    ],
}


def block(text: str, name: str) -> str:
    """The text between the markers of block ``name``."""
    found = re.search(rf"<!-- begin: {name} -->\n(.*?)<!-- end: {name} -->", text, re.S)
    if found is None:
        raise SystemExit(f"README.md: no block '{name}' (<!-- begin: {name} --> … end)")
    return found.group(1)


def replace_block(text: str, name: str, body: str) -> str:
    block(text, name)  # present, or a clear error
    return re.sub(
        rf"(<!-- begin: {name} -->\n).*?(<!-- end: {name} -->)",
        lambda m: m.group(1) + body + m.group(2),
        text,
        flags=re.S,
    )


def fenced(lines: str) -> str:
    return "```\n" + lines.rstrip("\n") + "\n```\n"


def summary_section(summary: str, heading: str = "Recommendation") -> str:
    """A '## heading' section of summary.md, without its heading."""
    found = re.search(rf"## {re.escape(heading)}\n\n(.*?)\n## ", summary, re.S)
    if found is None:
        raise SystemExit(f"summary.md: no '## {heading}' section")
    return found.group(1).strip("\n") + "\n"


def _printed(argv: list[str]) -> str:
    from workbench.cli import main

    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        code = main(argv)
    if code != 0:
        raise SystemExit(f"workbench {' '.join(argv)} exited with {code}")
    return out.getvalue()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--no-run", action="store_true", help="use results/demo as it is")
    parser.add_argument("--results", default=str(ROOT / "results" / "demo"))
    args = parser.parse_args(argv)
    results = Path(args.results).resolve()
    os.chdir(ROOT)  # the quoted commands name files relative to the project
    text = README.read_text(encoding="utf-8")

    with tempfile.TemporaryDirectory() as tmp:
        belief = _printed(["belief", str(DEMO.relative_to(ROOT)), "--out", tmp])
        shutil.copyfile(Path(tmp) / "belief.png", ROOT / "docs" / "figures" / "demo-belief.png")
    belief = "\n".join(line for line in belief.splitlines() if not line.startswith("figure:"))
    text = replace_block(text, "belief", fenced(belief))

    if args.no_run:
        # Keep the quoted wall times; the recommendation lines come from the grid.
        from workbench import analysis as an

        ds = an.open_grid(results)
        lines = an.recommend(ds, an.decision_rule(ds), an.Resampling()).lines()
        old = block(text, "demo-output").strip("`\n").splitlines()
        start = next(i for i, x in enumerate(old) if x.startswith(RECOMMENDATION[0]))
        rest = [x for x in old[start:] if not x.startswith(RECOMMENDATION)]
        demo = "\n".join([*old[:start], *lines, *rest])
    else:
        demo = _printed(["demo", "--out", str(results), "--fresh", "--quiet"])
        demo = demo.replace(str(results), "results/demo")
    text = replace_block(text, "demo-output", fenced(demo))
    summary = (results / "summary.md").read_text(encoding="utf-8")
    text = replace_block(text, "demo-summary", summary_section(summary))
    text = replace_block(text, "demo-by-kind", summary_section(summary, "By kind of landscape"))
    for name, heading in (
        ("demo-transfer", "Does the answer hold on the real problem?"),
        ("demo-resemblance", "How well each landscape explains the earlier evaluations"),
    ):
        text = replace_block(text, name, summary_section(summary, heading))
    # The transfer check on the measured tables: written by benchmarks/transfer.py (minutes).
    text = replace_block(text, "transfer-results", TRANSFER_RESULTS.read_text(encoding="utf-8"))

    if not args.no_run:
        # The README quotes the monitor's first call, which trains: a cache left by an
        # earlier run of the same grid would be read instead.
        shutil.rmtree(results / "monitor-cache", ignore_errors=True)
    with tempfile.TemporaryDirectory() as tmp:
        for name, argv in EVIDENCE.items():
            argv = [str(results) if a == "results/demo" else a for a in argv]
            printed = _printed([*argv, "--out", str(Path(tmp) / name)])
            printed = printed.replace(str(Path(tmp) / name), f"results/demo/{name}")
            text = replace_block(text, f"{name}-output", fenced(printed))

    for source, target in FIGURES.items():
        shutil.copyfile(results / "figures" / source, ROOT / "docs" / "figures" / target)
    README.write_text(text, encoding="utf-8")
    print(f"rewrote {README.name} blocks and {len(FIGURES)} figures from {results}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
