"""The study plan: the pilot, the compute estimate against a real run, the command and its files."""

import contextlib
import dataclasses
import io
import re
import shlex
import textwrap
from pathlib import Path

import numpy as np
import pytest

from workbench import plan as pl
from workbench.cli import main
from workbench.report.page import STYLE
from workbench.study import grid
from workbench.study.runner import run_study
from workbench.study.spec import load, parse_text
from workbench.validation import InputError

DEMO = Path(__file__).resolve().parents[2] / "studies" / "demo.toml"

TINY = """
title = "Tiny <script>alert('x')</script> & co"
budget = 8
replicates = 3
seed = 11
baselines = ["no-belief"]
[[landscape]]
name = "branin"
[belief]
spread = 0.15
[distortion]
shifted = { shift = 0.3 }
[strategy.pseudo-posterior]
decay = ["hyperbolic:3", "hyperbolic:9"]
quantile = [0.25]
"""


def _run(argv, capsys):
    code = main(argv)
    captured = capsys.readouterr()
    return code, captured.out, captured.err


@pytest.fixture(scope="module")
def demo_pilot():
    study = load(DEMO)
    return study, pl.run_pilot(study, pl.PlanOptions(pilot_replicates=2))


# Not the shared grid (tests/conftest.py): the plan runs a pilot of this study, and one test
# runs it, edits its file and runs it again; one landscape, one distortion and one strategy
# keep those runs small.
@pytest.fixture(scope="module")
def tiny(tmp_path_factory):
    folder = tmp_path_factory.mktemp("tiny")
    path = folder / "tiny.toml"
    path.write_text(textwrap.dedent(TINY), encoding="utf-8")
    return path


@pytest.fixture(scope="module")
def tiny_capped(tiny, tmp_path_factory):
    """`workbench plan tiny.toml --cap 2`, run once: stdout, stderr and the output folder."""
    out = tmp_path_factory.mktemp("tiny-plan")
    stdout, stderr = io.StringIO(), io.StringIO()
    argv = ["plan", str(tiny), "--out", str(out), "--cap", "2", "--pilot-replicates", "2"]
    with contextlib.redirect_stdout(stdout), contextlib.redirect_stderr(stderr):
        code = main(argv)
    return code, stdout.getvalue(), stderr.getvalue(), out


def test_pilot_uses_first_middle_and_last_settings_and_every_baseline():
    study = load(DEMO)
    guided, _ = grid.settings(study)
    design = pl.pilot_design(study, 4)
    n = len(guided)
    assert [s.label for s in design.guided] == [guided[i].label for i in (0, n // 2, n - 1)]
    assert [s.strategy for s in design.baselines] == list(study.baselines)
    pilot, todo = pl.pilot_chunks(study, design)
    assert pilot.replicates == 4 < study.replicates
    # Four pilot replicates fit in one block: one chunk per landscape and distortion.
    assert len(todo) == len(study.landscapes) * len(study.distortions)
    assert all(c.replicates == (0, 1, 2, 3) for c in todo)
    assert {s.label for c in todo for s in c.settings} == {s.label for s in design.settings}


def test_pilot_campaigns_are_the_studys_first_replicates(tiny):
    study = load(tiny)
    pilot, todo = pl.pilot_chunks(study, pl.pilot_design(study, 2))
    chunk = todo[-1]
    full = next(
        c
        for c in grid.chunks(study)
        if (c.landscape, c.distortion) == (chunk.landscape, chunk.distortion)
    )
    assert set(chunk.replicates) <= set(full.replicates)
    small = dict(grid.split(chunk, grid.run_chunk(pilot, chunk)))
    whole = dict(grid.split(full, grid.run_chunk(study, full)))
    labels = [s.label for s in full.settings]
    for r in chunk.replicates:
        for k, s in enumerate(chunk.settings):
            j = labels.index(s.label)
            np.testing.assert_array_equal(small[r]["value"][k], whole[r]["value"][j])


def test_compute_estimate_counts_the_campaigns_and_bytes_of_a_real_run(tiny, tmp_path):
    # The tiny study keeps the suite fast: its pilot and the study itself, run for real. The
    # seconds are compared with the estimate in benchmarks/estimate.py (medians of several
    # runs on the demo), not here: a suite shares the machine.
    small = load(tiny)
    pilot = pl.run_pilot(small, pl.PlanOptions(pilot_replicates=2, jobs=1))
    estimate = pl.compute_estimate(small, pilot, small.replicates)
    summary = run_study(small, tmp_path / "run", jobs=1)
    assert estimate.estimate.campaigns == summary.campaigns
    on_disk = sum(p.stat().st_size for p in (tmp_path / "run" / "chunks").glob("*.npz"))
    grid_file = (tmp_path / "run" / "grid.nc").stat().st_size
    assert 0.5 <= estimate.chunk_bytes / on_disk <= 2.0
    assert 0.5 <= estimate.grid_bytes / grid_file <= 2.0


def test_wall_time_is_the_busiest_process_or_the_longest_chunk_plus_start_up(demo_pilot):
    study, pilot = demo_pilot
    # A pilot whose every campaign took 10 ms, with no overhead, and whose wall time was
    # 2 s beyond its own bound: the estimate by hand is campaigns × 10 ms over the processes
    # (or the longest chunk, if longer) plus those 2 s of start-up.
    even = dataclasses.replace(
        pilot,
        seconds=np.where(np.isfinite(pilot.seconds), 0.01, np.nan),
        overhead=np.zeros_like(pilot.overhead),
        jobs=1,
    )
    even = dataclasses.replace(even, wall=even.cpu + 2.0)
    for jobs in (1, 2):
        at = pl.compute_estimate(study, even, 8, jobs=jobs)
        work = at.estimate.campaigns * 0.01
        assert at.cpu == pytest.approx(work)
        assert at.longest == pytest.approx(
            max(c.campaigns for c in grid.chunks(dataclasses.replace(study, replicates=8))) * 0.01
        )
        assert at.local == pytest.approx(max(work / jobs, at.longest) + 2.0)
        low, high = at.local_interval
        assert low == pytest.approx(at.local) and high == pytest.approx(at.local)


def test_more_replicates_cost_proportionally_more(demo_pilot):
    study, pilot = demo_pilot
    two = pl.compute_estimate(study, pilot, 2)
    eight = pl.compute_estimate(study, pilot, 8)
    assert eight.estimate.campaigns == 4 * two.estimate.campaigns
    assert eight.cpu == pytest.approx(4 * two.cpu)
    assert eight.cluster < eight.local or eight.workers <= eight.estimate.jobs


def test_plan_of_the_demo_writes_both_files_with_replicates_reasons_time_and_command(
    tmp_path, capsys
):
    out = tmp_path / "tmp"
    code, stdout, err = _run(["plan", str(DEMO), "--out", str(out)], capsys)
    assert code == 0, err
    md, page = out / "plan.md", out / "plan.html"
    assert md.is_file() and page.is_file()
    chosen = int(re.search(r"^replicates: (\d+)$", stdout, re.M).group(1))
    text = md.read_text(encoding="utf-8")
    for needle in (
        f"Replicates: {chosen}",
        "n = z² p(1 − p) / h²",
        "Wilson",
        "Wilcoxon signed-rank",
        "(a) recovery interval",
        "(b) power",
        "wall time here",
        "Dask workers",
        f"workbench run {DEMO} --out {out}",
        f"replicates = {chosen}",
        "common random numbers",
    ):
        assert needle.lower() in text.lower(), needle
    assert "(a) recovery interval" in stdout and "(b) power" in stdout
    assert "time:" in stdout and f"command: workbench run {DEMO} --out {out}" in stdout
    assert str(md) in stdout and str(page) in stdout


def test_a_binding_cap_prints_a_warning_and_the_plan_says_so(tiny_capped):
    code, out, err, folder = tiny_capped
    assert code == 0, err
    assert "replicates: 2" in out
    assert "warning: the cap binds" in out and "the cap binds" in err
    assert "Warning: the cap binds" in (folder / "plan.md").read_text(encoding="utf-8")


def test_plan_page_is_self_contained_and_escapes_user_strings(tiny_capped):
    *_, folder = tiny_capped
    page = (folder / "plan.html").read_text(encoding="utf-8")
    assert "<script" not in page.lower()
    assert f"<style>{STYLE}</style>" in page  # the report's, audit's and monitor's style
    assert "&lt;script&gt;alert(&#x27;x&#x27;)&lt;/script&gt; &amp; co" in page
    assert not re.search(r"src\s*=|https?://|@import", page)
    # The only links: the tables' CSV inside the page, and the pages beside it.
    for href in re.findall(r'href="([^"]*)"', page):
        assert href.startswith("data:text/csv") or re.fullmatch(r"[\w./-]+\.html", href)


@pytest.mark.parametrize(
    "option, value, key",
    [
        ("--half-width", "0", "'--half-width'"),
        ("--half-width", "abc", "'--half-width'"),
        ("--power", "1.5", "'--power'"),
        ("--confidence", "1", "'--confidence'"),
        ("--difference", "0", "'--difference'"),
        ("--difference", "500", "'--difference'"),
        ("--pilot-replicates", "1", "'--pilot-replicates'"),
        ("--cap", "0", "'--cap'"),
        ("--workers", "2.5", "'--workers'"),
        ("--jobs", "0", "'--jobs'"),
    ],
)
def test_bad_options_give_one_line_and_exit_2(option, value, key, tiny, tmp_path, capsys):
    out = tmp_path / "out"
    code, _, err = _run(["plan", str(tiny), "--out", str(out), option, value], capsys)
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1 and key in lines[0] and "command line" in lines[0], err
    assert not out.exists()


def test_options_are_read_from_text_and_checked():
    options = pl.PlanOptions.from_text(half_width="0.05", cap="10", jobs=None)
    assert options.half_width == 0.05 and options.cap == 10 and options.jobs is None
    with pytest.raises(InputError, match="'--power' must be a number in \\(0, 1\\)"):
        pl.PlanOptions(power=0)


def test_the_replicates_line_is_edited_in_place_or_added():
    study = parse_text(textwrap.dedent(TINY), name="tiny")
    old, new = pl.replicates_edit(study, 12)
    assert old == "replicates = 3" and new == "replicates = 12"
    bare = parse_text(textwrap.dedent(TINY).replace("replicates = 3\n", ""), name="tiny")
    assert pl.replicates_edit(bare, 12) == (None, "replicates = 12")


# --------------------------------------------------------------------------- one estimate


def test_checks_counts_add_up_cells_times_replicates_make_the_campaigns():
    study = load(DEMO)
    guided_cells, baseline_cells = pl.cell_counts(study)
    # 4 landscapes × 4 distortions × 12 guided settings; belief-sampling in every distortion,
    # no-belief and random in the exact one only: 4 × (4 + 2) baseline cells.
    assert (guided_cells, baseline_cells) == (192, 24)
    campaigns = sum(c.campaigns for c in grid.chunks(study))
    assert (guided_cells + baseline_cells) * study.replicates == campaigns == 6912


def test_check_and_plan_print_the_one_estimate_of_the_pilot(demo_pilot, tiny, tmp_path, capsys):
    study, pilot = demo_pilot
    # Both commands take their time from a pilot through compute_estimate: given the same
    # pilot, they print the same words.
    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(pl, "run_pilot", lambda s, o: pilot)  # plan's
        mp.setattr(pl.estimate, "run_pilot", lambda s, o: pilot)  # check's
        code, checked, err = _run(["check", str(DEMO), "--jobs", "2"], capsys)
        assert code == 0, err
        code, planned, err = _run(
            ["plan", str(DEMO), "--out", str(tmp_path), "--jobs", "2", "--cap", "32"], capsys
        )
        assert code == 0, err
    words = pl.compute_estimate(study, pilot, study.replicates, jobs=2).time_words()
    assert f"estimated wall time: {words}" in checked
    chosen = int(re.search(r"^replicates: (\d+)$", planned, re.M).group(1))
    at = pl.compute_estimate(study, pilot, chosen, jobs=2)
    assert f"evaluations: {at.time_words()}" in planned, planned
    low, high = pl.compute_estimate(study, pilot, 32, jobs=2).local_interval
    assert low < high  # a range, not a point


# --------------------------------------------------------------------------- uses its pilot


def test_the_default_difference_is_the_gap_between_the_pilots_two_best_settings(demo_pilot):
    study, pilot = demo_pilot
    r = pl.replicates_needed(study, pilot, pl.PlanOptions(pilot_replicates=2, resamples=50))
    # By hand: mean evaluations to target over landscapes and replicates, per distortion,
    # weighted by the study's [decision] weights; the two lowest settings' gap.
    w = np.array([study.decision.weights[d.name] for d in study.distortions])
    guided = pilot.evaluations[: len(pilot.design.guided)]
    means = np.array([[np.mean(g[:, d]) for d in range(g.shape[1])] for g in guided]) @ (
        w / w.sum()
    )
    gap = np.sort(means)[1] - np.sort(means)[0]
    assert r.difference == pytest.approx(min(max(gap, 1.0), study.budget - 1))
    assert "gap between the pilot's two best settings" in r.difference_words
    given = pl.replicates_needed(
        study, pilot, pl.PlanOptions(pilot_replicates=2, resamples=50, difference=3)
    )
    assert (given.difference, given.difference_words) == (3, "given by --difference")


def test_the_plans_printed_command_works_when_followed(tiny, tmp_path, capsys):
    study = tmp_path / "tiny.toml"
    study.write_text(tiny.read_text(encoding="utf-8"), encoding="utf-8")
    out = tmp_path / "out"
    assert main(["run", str(study), "--out", str(out), "--quiet", "--jobs", "1"]) == 0
    code, stdout, err = _run(
        ["plan", str(study), "--out", str(out), "--cap", "2", "--pilot-replicates", "2"], capsys
    )
    assert code == 0, err
    # Follow it: make the edit it asks for, then run the command it prints.
    edit = re.search(r"^first, in .*: change '(.*)' to '(.*)'$", stdout, re.M)
    text = study.read_text(encoding="utf-8")
    study.write_text(text.replace(edit.group(1), edit.group(2), 1), encoding="utf-8")
    command = re.search(r"^command: (.*)$", stdout, re.M).group(1)
    assert command.endswith("--fresh")  # the folder holds the study before the edit
    assert "--fresh discards those results" in (out / "plan.md").read_text(encoding="utf-8")
    argv = shlex.split(command)
    assert argv[0] == "workbench"
    code, _, err = _run([*argv[1:], "--quiet"], capsys)
    assert code == 0, err
    assert load(study).replicates == 2


def test_the_plan_names_the_edge_its_pilots_best_setting_sits_on(tiny_capped):
    code, out, err, folder = tiny_capped
    assert code == 0, err
    # The tiny study runs hyperbolic:3 and hyperbolic:9 only: the pilot's best is an edge.
    assert "edge of the study (pilot's best): decay hyperbolic:" in out
    assert "[strategy.pseudo-posterior]" in out
    text = (folder / "plan.md").read_text(encoding="utf-8")
    assert "Edge of the study" in text and "decay = [" in text


def test_the_recovery_rule_names_the_pilot_cell_that_decides_p(demo_pilot):
    from scipy.stats import binomtest

    study, pilot = demo_pilot
    r = pl.replicates_needed(study, pilot, pl.PlanOptions(pilot_replicates=2, resamples=50))
    m = re.search(
        r"pilot recovery (\d+)/(\d+) for .* interval ([\d.]+) to ([\d.]+), whose end toward "
        r"0\.5 is ([\d.]+)",
        r.recovery_words,
    )
    k, n = int(m.group(1)), int(m.group(2))
    # Reference library: scipy.stats.binomtest(...).proportion_ci(method="wilson"), the
    # Wilson score interval (Wilson 1927, JASA 22).
    ci = binomtest(k, n).proportion_ci(confidence_level=0.95, method="wilson")
    assert (float(m.group(3)), float(m.group(4))) == (round(ci.low, 2), round(ci.high, 2))
    toward = ci.low if ci.low > 0.5 else ci.high if ci.high < 0.5 else 0.5
    assert float(m.group(5)) == pytest.approx(toward, abs=5e-3)
    assert r.p == pytest.approx(toward, abs=1e-9)  # the cell named is the one used
