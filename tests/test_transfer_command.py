"""`workbench transfer`: the study and its truth grid, and the check the report shows."""

from __future__ import annotations

import json
import re
import textwrap

import numpy as np
import pytest

from workbench.analysis import campaign_metric, open_grid
from workbench.analysis.dataset import guided_only
from workbench.analysis.transfer_check import TRANSFER_FILE, TRUTH_FOLDER, spearman
from workbench.cli import main
from workbench.study.spec import load

STUDY = """
title = "A coating line: oven speed and primer layers (invented)"
budget = 8
replicates = 3
seed = 11
baselines = ["no-belief"]

[space.speed]
type = "integer"
lower = 1
upper = 6

[space.layers]
type = "integer"
lower = 1
upper = 5

[belief.speed]
probabilities = [0.05, 0.1, 0.5, 0.2, 0.1, 0.05]

[belief.layers]
probabilities = [0.1, 0.5, 0.2, 0.1, 0.1]

[[landscape]]
name = "branin"

[distortion]
shifted = { shift = 0.3 }

[strategy.pseudo-posterior]
decay = ["hyperbolic:2", "hyperbolic:20"]
quantile = [0.25]

[strategy.prior-weighted]
decay = ["hyperbolic:2", "hyperbolic:20"]

[decision]
weights = { exact = 0.7, shifted = 0.3 }

[truth]
table = "line.csv"
response = "defects"
replicates = 6
"""


def _table() -> str:
    """Every configuration of the space, measured (invented): defects per square metre."""
    lines = ["# invented measurements of the demo coating line", "speed,layers,defects"]
    for s in range(1, 7):
        for layer in range(1, 6):
            lines.append(f"{s},{layer},{(s - 4) ** 2 + 0.5 * (layer - 2) ** 2 + 0.1 * s:.3f}")
    return "\n".join(lines) + "\n"


# Not the shared grid (tests/conftest.py): `transfer` runs its two grids itself, from a table.
@pytest.fixture(scope="session")
def transferred(tmp_path_factory):
    folder = tmp_path_factory.mktemp("transfer")
    (folder / "line.csv").write_text(_table())
    study = folder / "line.toml"
    study.write_text(textwrap.dedent(STUDY))
    out = folder / "out"
    code = main(
        ["transfer", str(study), "--out", str(out), "--jobs", "1", "--quiet", "--draws", "50"]
    )
    return code, out


def test_transfer_runs_both_grids_and_writes_the_check(transferred):
    code, out = transferred
    assert code == 0
    assert (out / "grid.nc").is_file() and (out / TRUTH_FOLDER / "grid.nc").is_file()
    check = json.loads((out / TRANSFER_FILE).read_text())
    truth = open_grid(out / TRUTH_FOLDER)
    assert truth.sizes["landscape"] == 1 and truth.sizes["replicate"] == 6
    # The real score of each setting by hand: mean evaluations to target over the truth's
    # replicates in each distortion, weighted 0.7 / 0.3 (the study's rule).
    ett = guided_only(campaign_metric(truth, "evaluations_to_target"))
    means = ett.mean(["landscape", "replicate"])
    by_hand = 0.7 * means.sel(distortion="exact") + 0.3 * means.sel(distortion="shifted")
    labels = [str(s) for s in by_hand["setting"].values]
    real = dict(zip(check["settings"], check["real_score"], strict=True))
    np.testing.assert_allclose([real[s] for s in labels], by_hand.values)
    # The overall Spearman is the rank correlation of the two score lists it reports.
    rho = spearman(np.array(check["simulated_score"]), np.array(check["real_score"]))
    assert check["overall"]["spearman"]["estimate"] == pytest.approx(float(rho))
    assert check["overall"]["pick"] == check["settings"][int(np.argmin(check["simulated_score"]))]


def test_json_prints_one_object_and_a_rerun_computes_nothing_again(transferred, capsys):
    _, out = transferred
    first = json.loads((out / TRANSFER_FILE).read_text())
    argv = ["transfer", str(out.parent / "line.toml"), "--out", str(out), "--jobs", "1"]
    capsys.readouterr()
    assert main([*argv, "--quiet", "--draws", "50", "--json"]) == 0
    captured = capsys.readouterr()
    # Standard output is the one JSON object (the same check: same grids, same bootstrap
    # seed); what was run goes to standard error, and both grids were already complete.
    assert json.loads(captured.out) == first
    ran = [
        re.match(r"(\w+): (\d+) campaigns \((\d+) already done\)", line)
        for line in captured.err.splitlines()
    ]
    ran = [m.groups() for m in ran if m]
    assert [what for what, *_ in ran] == ["study", "truth"]
    assert all(total == done != "0" for _, total, done in ran)


def test_the_report_shows_the_transfer_check(transferred):
    _, out = transferred
    assert main(["report", str(out), "--draws", "50"]) == 0
    page = (out / "report.html").read_text()
    summary = (out / "summary.md").read_text()
    assert 'id="truth"' in page and "real rank of the pick" in page
    assert "Does the answer hold on the real problem?" in summary


def test_a_study_without_truth_is_refused_with_one_line(tmp_path, capsys):
    study = tmp_path / "plain.toml"
    study.write_text(textwrap.dedent(STUDY).split("[truth]")[0].replace('table = "line.csv"', ""))
    assert main(["transfer", str(study), "--out", str(tmp_path / "o")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "'truth' must be a [truth] table in the study" in err[0]
    assert not (tmp_path / "o").exists()


@pytest.mark.parametrize(
    ("rows", "message"),
    [
        (["1,1,2.0", "1,1,3.0", "2,1,1.0"], "lines 2 and 3 measure the same configuration"),
        (["1,1,2.0", "2,1,2.0"], "every response has the same value"),
        (["1,1,2.0", "2,x,1.0"], "line 3, column 'layers'"),
        (["1,1,2.0", "9,1,1.0"], "line 3, column 'speed'"),
        (["1,1,2.0", "2,1,"], "line 3, column 'defects'"),
    ],
)
def test_a_malformed_truth_table_is_one_line_naming_file_and_line(tmp_path, capsys, rows, message):
    (tmp_path / "line.csv").write_text("speed,layers,defects\n" + "\n".join(rows) + "\n")
    study = tmp_path / "line.toml"
    study.write_text(textwrap.dedent(STUDY))
    assert main(["check", str(study)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0] and "line.csv" in err[0]


def test_a_tables_bytes_are_part_of_the_digest_of_every_grid_that_reads_it(tmp_path):
    # A changed measurement must not be resumed over: the table's SHA-256 enters the digest of
    # the truth grid, and of the study's own grid when a landscape reads the table.
    table = tmp_path / "line.csv"
    study = tmp_path / "line.toml"
    landscape = '[[landscape]]\ntable = "line.csv"\nresponse = "defects"\n\n[distortion]'
    study.write_text(textwrap.dedent(STUDY).replace("[distortion]", landscape, 1))
    table.write_text(_table())
    before = load(study)
    assert load(study).digest == before.digest  # the same bytes, the same digest
    table.write_text(_table().replace("\n1,2,9.100\n", "\n1,2,9.000\n", 1))
    after = load(study)
    assert after.digest != before.digest
    assert after.truth_study().digest != before.truth_study().digest
