"""The resemblance table of a study: how well each landscape explains the study's earlier
evaluations, computed from the study, stored in the grid at run time, printed by `check` and
shown by the report from the grid alone.

The earlier evaluations are made by branin placed where the study places it (at the belief's
mode), so the textbook branin landscape is the data's generator, and a function that returns
the same branin with goal = "maximise" is that generator reversed.
"""

import json
import shutil
import textwrap

import netCDF4
import numpy as np
import pytest
import scipy.stats
from helpers import make_study

from workbench.cli import main
from workbench.study.resemblance import earlier_evaluations, resemblance_table, table_lines
from workbench.study.spec import load
from workbench.world import landscapes as ls
from workbench.world import resemblance as rs

AT = (0.4, 0.6)  # the belief's mode in the cube: where the study places branin
ROWS = 24

STUDY = textwrap.dedent(
    """
    title = "Glaze kiln, invented"
    budget = 6
    replicates = 2
    baselines = ["no-belief"]

    [initial]
    size = 3

    [space.x1]
    lower = 0
    upper = 1

    [space.x2]
    lower = 0
    upper = 1

    [belief.x1]
    centre = 0.4
    within = 0.1

    [belief.x2]
    centre = 0.6
    within = 0.1

    [[landscape]]
    name = "branin"

    [[landscape]]
    name = "six-hump-camel"

    [[landscape]]
    function = "reverse.py:reversed_branin"
    goal = "maximise"
    label = "reversed"

    [[landscape]]
    data = "kiln.csv"
    response = "y"
    label = "kiln"

    [distortion]
    shifted = { shift = 0.2 }

    [strategy.pseudo-posterior]
    decay = ["hyperbolic:4"]
    quantile = [0.25]
    """
)

REVERSE = """
import numpy as np
from workbench.world import landscapes as ls

_PLACED = ls.get("branin").placed(at=(0.4, 0.6))


def reversed_branin(x1, x2):
    return float(_PLACED.value(np.array([[x1, x2]]))[0])
"""


def _generator():
    return ls.get("branin").placed(at=AT)


@pytest.fixture(scope="session")
def kiln(tmp_path_factory):
    """The study folder (study, data made by the placed branin, the reversed function), the
    data, the study and its table."""
    folder = tmp_path_factory.mktemp("kiln")
    X = np.random.default_rng(11).random((ROWS, 2))
    y = _generator().value(X)
    rows = zip(X.tolist(), y.tolist(), strict=True)
    lines = ["x1,x2,y", *(f"{a!r},{b!r},{v!r}" for (a, b), v in rows)]
    (folder / "kiln.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    (folder / "reverse.py").write_text(REVERSE, encoding="utf-8")
    (folder / "study.toml").write_text(STUDY, encoding="utf-8")
    study = load(folder / "study.toml")
    return folder, X, y, study, resemblance_table(study)


# Not the shared grid (tests/conftest.py): the study reads its data file and a function beside
# it, which this grid's tests move away after the run.
@pytest.fixture(scope="session")
def grid(kiln, tmp_path_factory):
    """A tiny run of a copy of the study; then its data file and function are moved away."""
    folder = tmp_path_factory.mktemp("kiln-run")
    for name in ("study.toml", "kiln.csv", "reverse.py"):
        shutil.copy(kiln[0] / name, folder / name)
    out = folder / "out"
    assert (
        main(["run", str(folder / "study.toml"), "--out", str(out), "--quiet", "--jobs", "1"]) == 0
    )
    away = folder / "away"
    away.mkdir()
    for name in ("kiln.csv", "reverse.py"):
        shutil.move(folder / name, away / name)
    return out


def _row(table, label):
    (row,) = [r for r in table.rows if r.landscape == label]
    return row


def test_earlier_evaluations_are_the_fitted_landscapes_data(kiln):
    _, X, y, study, _ = kiln
    data = earlier_evaluations(study)
    np.testing.assert_allclose(data.X, X, rtol=0, atol=1e-12)
    np.testing.assert_allclose(data.y, y, rtol=0, atol=1e-9)
    assert data.source == f"{ROWS} evaluations in kiln.csv"


def test_a_study_without_earlier_evaluations_has_no_table():
    study = make_study(
        """
        title = "Branin alone"
        budget = 6
        replicates = 2
        [[landscape]]
        name = "branin"
        [strategy.pseudo-posterior]
        decay = ["hyperbolic:4"]
        quantile = [0.25]
        """
    )
    assert earlier_evaluations(study) is None
    assert resemblance_table(study) is None


def test_the_datas_generator_scores_highest_and_its_reverse_lowest(kiln):
    *_, table = kiln
    assert [r.landscape for r in table.rows] == ["branin", "six-hump-camel", "reversed", "kiln"]
    generator, reversed_ = _row(table, "branin"), _row(table, "reversed")
    # Hand-computed: the same ordering gives Spearman ρ = 1 in every placement and every
    # bootstrap resample; the reversed ordering gives −1.
    assert (generator.estimate, generator.low, generator.high) == pytest.approx((1.0, 1.0, 1.0))
    assert (reversed_.estimate, reversed_.low, reversed_.high) == pytest.approx((-1, -1, -1))
    others = [r.estimate for r in table.rows if r.landscape not in ("branin", "reversed")]
    assert all(-1.0 < v < 1.0 for v in others)
    # The user's function is the same in every replicate: one placement.
    assert reversed_.placements == 1
    assert max(r.estimate for r in table.rows) == generator.estimate
    assert min(r.estimate for r in table.rows) == reversed_.estimate


def test_a_textbook_landscapes_rank_agreement_is_scipys_spearman_at_its_placement(kiln):
    _, X, y, _, table = kiln
    camel = _row(table, "six-hump-camel")
    # In a study with a space every replicate places the textbook landscape at the belief's
    # mode, so every placement gives the same ρ. Reference library: scipy.stats.spearmanr.
    values = ls.get("six-hump-camel").placed(at=AT).value(X)
    assert camel.estimate == pytest.approx(scipy.stats.spearmanr(values, y).statistic, abs=1e-12)
    assert camel.low <= camel.estimate <= camel.high
    assert camel.measure == "rank_agreement" and camel.placements == 2  # the study's replicates


def test_likelihood_cannot_tell_a_landscape_from_its_mirror_image(kiln):
    *_, table = kiln
    # A zero-mean GP gives z and −z the same density (Rasmussen & Williams 2006, eq. 2.30):
    # the likelihood of branin and of its reverse agree, which is why the table ranks by ρ.
    generator, reversed_ = _row(table, "branin"), _row(table, "reversed")
    assert np.isfinite(generator.likelihood)
    assert reversed_.likelihood == pytest.approx(generator.likelihood, rel=1e-3, abs=1e-3)


def test_a_fitted_landscape_is_scored_out_of_sample_by_leave_one_out(kiln):
    _, _, y, study, table = kiln
    fitted = _row(table, "kiln")
    assert fitted.measure == "loo_rank_agreement" and fitted.placements == 0
    model = study.landscapes[3].spec.model()
    mean, _ = rs.loo_predictive(model)
    # Reference library: scipy.stats.spearmanr of the leave-one-out means against the data.
    assert fitted.estimate == pytest.approx(scipy.stats.spearmanr(mean, y).statistic, abs=1e-12)
    # A smooth generator and 24 points: the data's GP predicts unseen rows well, but not as
    # well as the generator itself.
    assert 0.5 < fitted.estimate < 1.0
    assert fitted.low <= fitted.estimate <= fitted.high


def test_the_grid_carries_the_table_and_the_report_shows_it_without_the_data(kiln, grid):
    *_, table = kiln
    with netCDF4.Dataset(grid / "grid.nc") as ds:
        stored = {name: ds[name][:] for name in ds.variables if name.startswith("resemblance")}
        source = ds.resemblance_data
    assert source == table.source
    for name, field in (
        ("resemblance", "estimate"),
        ("resemblance_low", "low"),
        ("resemblance_high", "high"),
        ("resemblance_likelihood", "likelihood"),
    ):
        np.testing.assert_allclose(
            np.asarray(stored[name]), [getattr(r, field) for r in table.rows], rtol=1e-9
        )
    assert list(stored["resemblance_measure"]) == [r.measure for r in table.rows]
    # The data file and the function are gone: the report reads the grid alone.
    assert main(["report", str(grid), "--draws", "50"]) == 0
    page = (grid / "report.html").read_text(encoding="utf-8")
    summary = (grid / "summary.md").read_text(encoding="utf-8")
    for text in (page, summary):
        assert "How well each landscape explains the earlier evaluations" in text
        assert f"{ROWS} evaluations in kiln.csv" in text
        assert "leave-one-out rank agreement" in text
    assert 'id="resemblance"' in page


def test_check_prints_the_table_before_anything_runs(kiln, capsys):
    folder, *_, table = kiln
    capsys.readouterr()
    assert main(["check", str(folder / "study.toml"), "--jobs", "1"]) == 0
    out = capsys.readouterr().out
    lines = table_lines(table)
    assert lines[0].startswith("How well each landscape explains the earlier evaluations")
    assert "1: orders the data as measured; 0: no better than chance" in lines[1]
    for line in lines:
        assert line in out


def test_audit_shows_the_studys_table_with_its_intervals(kiln, tmp_path, capsys):
    # The audit reads the study's earlier evaluations (the fitted landscape's kiln.csv), so it
    # shows the very table `check` prints and the grid stores, intervals included.
    folder, *_, table = kiln
    out = tmp_path / "audit"
    argv = ["audit", str(folder / "study.toml"), "--data", str(folder / "kiln.csv")]
    argv += ["--response", "y", "--goal", "minimise", "--out", str(out)]
    capsys.readouterr()
    assert main([*argv, "--json"]) == 0
    shown = json.loads(capsys.readouterr().out)["resemblance"]
    assert shown["data"] == table.source and shown["level"] == table.level
    for row, expected in zip(shown["landscapes"], table.rows, strict=True):
        assert row["landscape"] == expected.landscape and row["measure"] == expected.measure
        for field in ("estimate", "low", "high", "likelihood"):
            assert row[field] == pytest.approx(getattr(expected, field), rel=1e-9)
    page = (out / "audit.md").read_text(encoding="utf-8")
    assert "How well each landscape explains the earlier evaluations" in page
    assert "leave-one-out" in page
