"""The audit: an exact belief passes, a belief on the worst point fails, and its measures agree
with their definitions."""

import html
import json
import textwrap
from pathlib import Path

import numpy as np
import pytest
import scipy.stats
from scipy.stats import qmc

from workbench.cli import main
from workbench.evidence.audit import (
    CONSISTENT_AT,
    MAX_UNSUPPORTED_SHARE,
    TOO_LITTLE,
    audit,
    support,
)
from workbench.evidence.pages import audit_lines
from workbench.world import landscapes as ls
from workbench.world.beliefs import gaussian_at
from workbench.world.history import History


def _history(placement, n: int = 64, seed: int = 3) -> History:
    X = qmc.Sobol(placement.dim, scramble=True, seed=seed).random(n)
    return History(X=X, y=placement.value(X), response="f", goal="minimise", path="t", digest="")


@pytest.fixture(scope="module")
def branin():
    # Branin (Dixon & Szegő 1978) placed with its first published minimiser at (0.6, 0.4).
    return ls.get("branin").placed(at=(0.6, 0.4))


def test_an_exact_belief_is_consistent_and_one_on_the_worst_point_contradicted(branin):
    history = _history(branin)
    exact = gaussian_at(np.array([0.6, 0.4]), 0.12)
    worst = gaussian_at(branin.worst()[0], 0.08)
    rng = np.random.default_rng(0)
    good = audit(history, exact, top=0.25, radius=0.1, rng=rng, draws=24)
    bad = audit(history, worst, top=0.25, radius=0.1, rng=rng, draws=24)
    assert good.verdict == "consistent" and good.inside_90 >= CONSISTENT_AT
    assert bad.verdict == "contradicted"
    assert good.distance < bad.distance and good.mass_within > bad.mass_within
    # Branin has three minimisers; the exact belief sits on one of them.
    assert good.good_median_level < bad.good_median_level


def test_good_points_spread_like_an_exact_belief_have_uniform_levels_and_others_do_not(branin):
    # Probability integral transform (textbook): for Z drawn from a belief p, the mass denser
    # than Z, P(p(Z') > p(Z)), is uniform on [0, 1]. Here the values are noise, so the good
    # quarter is a random quarter of points drawn from the belief; scipy.stats.kstest against
    # the uniform law is the reference. A belief on the worst point sees them far out instead.
    rng = np.random.default_rng(21)
    exact = gaussian_at(np.array([0.6, 0.4]), 0.12)
    X = exact.sample(240, rng)
    history = History(
        X=X, y=rng.normal(size=240), response="f", goal="minimise", path="t", digest=""
    )
    a = audit(history, exact, top=0.25, radius=0.1, rng=rng, draws=8)
    assert len(a.good_levels) == 60
    assert scipy.stats.kstest(a.good_levels, "uniform").pvalue > 0.01
    # Binomial sd of 60 uniform levels: 0.065 for the median, 0.039 for the share above 0.9.
    assert a.good_median_level == pytest.approx(0.5, abs=0.2)
    assert a.good_outside_90 == pytest.approx(0.1, abs=0.12)
    worst = gaussian_at(branin.worst()[0], 0.08)
    b = audit(history, worst, top=0.25, radius=0.1, rng=rng, draws=8)
    assert scipy.stats.kstest(b.good_levels, "uniform").pvalue < 0.01
    assert b.good_median_level > 0.9 and 0 <= b.inside_50 <= b.inside_90 <= 1


STUDY = """
title = "audit"
budget = 6
replicates = 2
seed = {seed}
[space.x1]
lower = 0
upper = 1
[space.x2]
lower = 0
upper = 1
[belief.x1]
centre = 0.5
spread = 0.2
[belief.x2]
centre = 0.5
spread = 0.2
[[landscape]]
name = "branin"
[strategy.prior-weighted]
decay = ["hyperbolic:4"]
"""


def _files(tmp_path, seed=1):
    study = tmp_path / f"s{seed}.toml"
    study.write_text(textwrap.dedent(STUDY.format(seed=seed)))
    rng = np.random.default_rng(0)
    X = rng.random((12, 2))
    y = (X - 0.4) ** 2 @ np.ones(2)
    rows = "\n".join(f"{a:.4f},{b:.4f},{v:.5f}" for (a, b), v in zip(X, y, strict=True))
    (tmp_path / "h.csv").write_text("x1,x2,f\n" + rows + "\n")
    return study


def _audit(tmp_path, study, *extra):
    data = ["--data", str(tmp_path / "h.csv"), "--response", "f", "--goal", "minimise"]
    return main(["audit", str(study), *data, *extra, "--out", str(tmp_path / "audit")])


def test_audit_writes_its_pages_and_prints_the_verdict(tmp_path, capsys):
    study = _files(tmp_path)
    code = _audit(tmp_path, study)
    out = capsys.readouterr().out
    assert code == 0 and "verdict:" in out and "safety limits" in out
    # The study reads no earlier evaluations: the table scores its landscapes on the audited.
    heading = "How well each landscape explains the earlier evaluations (12 evaluations in h.csv)"
    assert heading in out
    (branin,) = [line.split() for line in out.splitlines() if line.strip().startswith("branin")]
    assert branin[1] == "textbook" and -1.0 <= float(branin[2]) <= 1.0
    page = (tmp_path / "audit" / "audit.html").read_text()
    assert "Cautions" in page and "http" not in page.replace("http-equiv", "")
    assert (tmp_path / "audit" / "audit.md").exists()


def test_the_audit_page_states_its_verdict_once_over_headed_tables(tmp_path, capsys):
    study = _files(tmp_path)
    assert _audit(tmp_path, study) == 0
    (verdict,) = [line for line in capsys.readouterr().out.splitlines() if "verdict" in line]
    page = (tmp_path / "audit" / "audit.html").read_text()
    assert page.count(html.escape(verdict)) == 1 and '<p class="verdict">' in page
    assert "<thead><tr><th>finding</th><th>value</th>" in page
    assert "<th>landscape</th><th>kind</th><th>rank agreement</th>" in page
    assert page.count("<table>") == page.count('download="') == 2
    assert "<li>" not in page.split("<h2>Cautions</h2>")[0]


def test_audit_with_json_and_out_prints_the_json_and_writes_the_page(tmp_path, capsys):
    study = _files(tmp_path)
    assert _audit(tmp_path, study, "--json") == 0
    printed = capsys.readouterr()
    # stdout is the JSON alone; where the page went is said on stderr.
    assert json.loads(printed.out)["verdict"]
    assert f"audit: {tmp_path / 'audit' / 'audit.html'}" in printed.err
    assert (tmp_path / "audit" / "audit.html").exists()


def test_a_grid_of_another_study_is_refused(shared_grid, tmp_path, capsys):
    # The shared grid (tests/conftest.py) against its own study with another seed: a study
    # that differs from the grid's in nothing else. Read-only: a refused audit writes nothing.
    text = (shared_grid.parent / "study.toml").read_text(encoding="utf-8")
    assert "seed = 11\n" in text
    study = tmp_path / "s2.toml"
    study.write_text(text.replace("seed = 11\n", "seed = 12\n"), encoding="utf-8")
    rng = np.random.default_rng(0)
    X = rng.random((12, 2)) * [80, 220] + [180, 20]  # inside the shared study's oven space
    y = (X[:, 0] - 210) ** 2 / 100 + (X[:, 1] - 70) ** 2 / 1000
    rows = "\n".join(f"{a:.2f},{b:.2f},{v:.4f}" for (a, b), v in zip(X, y, strict=True))
    (tmp_path / "h.csv").write_text("temperature,proving,f\n" + rows + "\n")
    code = _audit(tmp_path, study, "--grid", str(shared_grid))
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1 and "'--grid'" in err
    assert "run from another study" in err
    assert not (tmp_path / "audit").exists()


# --------------------------------------------------------------------------- enough data?


def test_five_rows_in_four_dimensions_are_too_little_to_judge():
    # Common practice: a GP surrogate is trusted globally from about 10 points per dimension
    # (the 10·d initial design; value from memory); 5 rows for 4 parameters is far below.
    rng = np.random.default_rng(4)
    X = rng.random((5, 4))
    y = np.sum((X - 0.3) ** 2, axis=1)
    history = History(X=X, y=y, response="f", goal="minimise", path="t", digest="")
    belief = gaussian_at(np.full(4, 0.3), 0.1)
    a = audit(history, belief, top=0.25, radius=0.1, rng=rng, draws=16, severities={"x": (0, 1)})
    assert a.verdict == TOO_LITTLE and a.distortion is None
    assert a.support.needs[0] == "at least 5 rows per parameter (20 for 4); got 5 for 4"
    assert "too little data to judge: it needs at least 5 rows" in audit_lines(a, _cube(4), "t")[1]


def test_draws_on_the_bounds_or_outside_the_data_are_counted_and_far_ones_marked():
    X = np.array([[0.4, 0.4], [0.6, 0.6], [0.5, 0.45]])
    draws = np.array([[0.5, 0.5], [0.0, 0.5], [0.7, 0.5], [0.95, 0.95]])
    s = support(X, draws)
    # On a bound: the second; outside the box [0.38, 0.62]²: all but the first.
    assert s.on_bounds == 0.25 and s.outside_box == 0.75 and s.unsupported == 0.75
    # Nearest evaluation: 0.05, 0.40, 0.14, 0.49 away (Euclidean).
    assert s.far.tolist() == [False, True, False, True]
    assert not s.enough and s.unsupported > MAX_UNSUPPORTED_SHARE


def _cube(dim):
    from workbench.world.space import Space

    return Space.unit_cube(dim)


@pytest.mark.slow
def test_the_demo_bakes_keep_their_verdict_and_name_their_response(tmp_path, capsys):
    studies = Path(__file__).parents[2] / "studies"
    argv = ["audit", str(studies / "demo.toml"), "--data", str(studies / "bakery-history.csv")]
    assert main([*argv, "--json", "--out", str(tmp_path / "audit")]) == 0
    out = json.loads(capsys.readouterr().out)
    assert (tmp_path / "audit" / "audit.html").is_file()  # --json writes the page too
    assert list(out)[:3] == ["response", "goal", "goal_source"]
    assert (out["response"], out["goal"]) == ("crumb_score", "maximise")
    assert out["support"]["enough"] and out["verdict"] == "consistent"


def test_a_response_to_maximise_is_never_silently_minimised(tmp_path, capsys):
    study = _files(tmp_path)
    data = tmp_path / "acc.csv"
    # An accuracy peaking at (0.4, 0.4): 12 rows of the same design as h.csv.
    rows = (tmp_path / "h.csv").read_text().splitlines()[1:]
    X = np.array([[float(v) for v in r.split(",")[:2]] for r in rows])
    acc = 1 - np.sum((X - 0.4) ** 2, axis=1)
    body = "\n".join(f"{a:.4f},{b:.4f},{v:.5f}" for (a, b), v in zip(X, acc, strict=True))
    data.write_text("x1,x2,accuracy\n" + body + "\n")
    argv = ["audit", str(study), "--data", str(data), "--response", "accuracy", "--json"]
    argv += ["--out", str(tmp_path / "audit")]
    # The study names no goal: without --goal the audit refuses instead of minimising.
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "'--goal'" in err and "minimise or maximise" in err
    assert main([*argv, "--goal", "maximise"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert (out["response"], out["goal"], out["goal_source"]) == ("accuracy", "maximise", "--goal")
    # Maximised, the optimum is where the accuracy peaks, not in a corner.
    median = np.array(list(out["median_optimum"].values()), dtype=float)
    assert np.all(np.abs(median - 0.4) < 0.15)


def test_a_data_file_without_the_studys_response_is_refused(tmp_path, capsys):
    studies = Path(__file__).parents[2] / "studies"
    renamed = tmp_path / "bakes.csv"
    renamed.write_text((studies / "bakery-history.csv").read_text().replace("crumb_score", "score"))
    code = main(["audit", str(studies / "demo.toml"), "--data", str(renamed), "--json"])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1
    assert "'--response'" in err and "'crumb_score'" in err and "score" in err
