"""Landscapes from the user's world (drawn, fitted, function) as a study builds and runs them."""

import math
import textwrap

import numpy as np
import pytest
import xarray as xr
from helpers import BRANIN_SPACE

from workbench import analysis as an
from workbench.study.cells import Cell
from workbench.study.runner import run_study
from workbench.study.spec import load

# Branin: Dixon & Szegő (1978); minimisers (−π, 12.275), (π, 2.275), (9.42478, 2.475),
# f* = 0.397887 on [−5, 10] × [0, 15] (Surjanovic & Bingham 2013).
BRANIN_MINIMISERS = np.array([[-math.pi, 12.275], [math.pi, 2.275], [9.42478, 2.475]])


def branin(x1, x2):
    b, c, t = 5.1 / (4 * math.pi**2), 5 / math.pi, 1 / (8 * math.pi)
    return (x2 - b * x1**2 + c * x1 - 6) ** 2 + 10 * (1 - t) * np.cos(x1) + 10


def _study(tmp_path, landscapes: str, extra: str = "", replicates: int = 2, budget: int = 8):
    text = textwrap.dedent(
        f"""
        title = "kinds"
        budget = {budget}
        replicates = {replicates}
        seed = 5
        baselines = ["no-belief"]
        {BRANIN_SPACE}
        {landscapes}
        [distortion]
        shifted = {{ shift = 0.2 }}
        [strategy.prior-weighted]
        decay = ["hyperbolic:4"]
        {extra}
        """
    )
    path = tmp_path / "study.toml"
    path.write_text(text, encoding="utf-8")
    return path


def _branin_csv(path, n_side: int = 12, maximise: bool = False):
    """Branin on a grid including the boundary, in user units (data sampled from a known
    function, so the fitted landscape's optimum is known)."""
    g1, g2 = np.meshgrid(np.linspace(-5, 10, n_side), np.linspace(0, 15, n_side))
    f = branin(g1.ravel(), g2.ravel())
    f = -f if maximise else f
    rows = "\n".join(
        f"{a:.6f},{b:.6f},{v:.6f}" for a, b, v in zip(g1.ravel(), g2.ravel(), f, strict=True)
    )
    path.write_text("# sampled from Branin for the test\nx1,x2,score\n" + rows + "\n")


def test_drawn_landscapes_are_new_per_replicate_and_no_random_point_beats_their_minimum(tmp_path):
    study = load(
        _study(tmp_path, "[[landscape]]\ndrawn = { smoothness = 1.5, length_scale = 0.3 }")
    )
    cells = [Cell(study, 0, 0, r) for r in range(2)]
    rng = np.random.default_rng(0)
    U = rng.random((100_000, 2))
    values = [c.placement.value(U) for c in cells]
    assert not np.allclose(values[0][:100], values[1][:100])  # a new surface per replicate
    for c, v in zip(cells, values, strict=True):
        assert v.min() >= c.placement.minimum - 1e-9
        # placed at the belief's mode, like a textbook landscape
        mode = c.space.snap(np.atleast_2d(study.belief.mode()))[0]
        assert c.placement.nearest_minimiser_distance(mode) < 1e-6


def test_fitted_landscape_draws_put_the_optimum_near_the_data_functions_minimisers(tmp_path):
    _branin_csv(tmp_path / "history.csv", maximise=True)
    path = _study(
        tmp_path,
        '[[landscape]]\ndata = "history.csv"\nresponse = "score"\ngoal = "maximise"',
        replicates=8,
    )
    study = load(path)
    entry = study.landscapes[0]
    assert entry.kind == "fitted" and not entry.placed_at_belief
    published = study.space.to_unit([BRANIN_MINIMISERS[:, 0], BRANIN_MINIMISERS[:, 1]])
    distances = []
    for r in range(8):
        p = Cell(study, 0, 0, r).placement
        distances.append(np.linalg.norm(published - p.minimisers[0], axis=1).min())
        # a draw passes through the data within a few noise sds (the data are noise-free)
        X, y = np.array(entry.spec.X), np.array(entry.spec.y)
        noise = math.sqrt(entry.spec.model().hyperparameters.noise_variance) * np.std(y)
        assert np.max(np.abs(p.value(X) - y)) < 4 * noise + 1e-3 * np.ptp(y)
    # The draws' optima cluster at Branin's minimisers: median within 0.05 of the cube.
    assert np.median(distances) < 0.05
    # The fitted mean reproduces Branin within 2 % of its range at random points.
    model = entry.spec.model()
    U = np.random.default_rng(1).random((2000, 2))
    x = study.space.to_user_array(U)
    mean, _ = model.predict(U)
    truth = -branin(x[:, 0], x[:, 1])
    assert np.sqrt(np.mean((mean - (-truth)) ** 2)) < 0.02 * np.ptp(truth)


def test_a_study_mixing_every_kind_runs_resumes_and_records_optima_and_kinds(tmp_path):
    _branin_csv(tmp_path / "history.csv", n_side=6)
    (tmp_path / "process.py").write_text(
        textwrap.dedent(
            """
            import math
            def score(x1, x2):
                if x1 > 9.5:
                    raise RuntimeError("outside the safe range")
                return (x1 - 2) ** 2 + (x2 - 4) ** 2
            def as_dict(point):
                return float("nan") if point["x2"] > 14 else point["x1"] ** 2 + point["x2"]
            """
        )
    )
    landscapes = """
    [[landscape]]
    name = "branin"
    [[landscape]]
    drawn = { smoothness = 2.5, length_scale = [0.3, 0.2] }
    [[landscape]]
    data = "history.csv"
    response = "score"
    [[landscape]]
    function = "process.py:score"
    minimum = 0.0
    [[landscape]]
    function = "process.py:as_dict"
    label = "dict-function"
    """
    study = load(_study(tmp_path, landscapes))
    out = tmp_path / "out"
    summary = run_study(study, out, jobs=2)  # worker processes import the function by path
    ds = xr.open_dataset(summary.grid).load()
    assert list(ds["landscape_kind"].values) == [
        "textbook",
        "drawn",
        "fitted",
        "function",
        "function",
    ]
    assert list(ds["minimum_estimated"].values) == [0, 1, 1, 0, 1]
    # the known function's minimum is where the function says: (2, 4), value 0
    np.testing.assert_allclose(
        ds["optimum"].sel(landscape="function-score").values, [[2, 4]] * 2, atol=1e-3
    )
    assert np.all(np.isfinite(ds["optimum_cube"].values))
    # No campaign beats a computed minimum.
    for name in ("normalized_regret", "baseline_normalized_regret"):
        assert float(ds[name].min()) >= -1e-9
    assert summary.below_minimum == {}
    # Resume: delete one chunk, run again, the same grid.
    next(iter(sorted((out / "chunks").glob("*.npz")))).unlink()
    again = run_study(study, out, jobs=1)
    assert again.resumed > 0
    xr.testing.assert_identical(xr.open_dataset(again.grid).load(), ds)
    by_kind = an.transfer(ds, an.decision_rule(ds), an.Resampling(draws=200, seed=1))
    assert list(by_kind["kind"].values) == ["textbook", "drawn", "fitted", "function"]
    assert np.isnan(float(by_kind["cost"].sel(kind="textbook")))


def test_failing_function_points_are_failed_evaluations(tmp_path):
    (tmp_path / "process.py").write_text(
        "def score(x1, x2):\n"
        "    if x1 > 2:\n"
        "        raise ValueError('no')\n"
        "    return x1**2 + x2\n"
    )
    study = load(_study(tmp_path, '[[landscape]]\nfunction = "process.py:score"'))
    cell = Cell(study, 0, 0, 0)
    U = np.array([[0.1, 0.5], [0.9, 0.5]])  # x1 = −3.5 and 8.5
    values = cell.placement.value(U)
    assert np.isfinite(values[0]) and np.isnan(values[1])
    # In a campaign, such points are failed evaluations; the others are not.
    from workbench.study.grid import run_setting, settings

    guided, _ = settings(study)
    trace = run_setting(cell, guided[0])
    x1 = study.space.to_user_array(trace.points)[:, 0]
    assert trace.failed.any()
    np.testing.assert_array_equal(trace.failed.astype(bool), x1 > 2)


def test_the_data_file_changing_makes_a_different_study(tmp_path):
    _branin_csv(tmp_path / "history.csv", n_side=5)
    path = _study(tmp_path, '[[landscape]]\ndata = "history.csv"\nresponse = "score"')
    before = load(path).digest
    _branin_csv(tmp_path / "history.csv", n_side=6)
    assert load(path).digest != before


def _by_kind_grid(kind_of_second: str):
    """The hand-built grid of the analysis tests, its second landscape of another kind."""
    from analysis.test_analysis import hand_grid, random_ett

    guided, baseline = random_ett(3)
    ds = hand_grid(guided, baseline)
    return ds.assign(landscape_kind=("landscape", ["textbook", kind_of_second]))


def test_the_transfer_cost_is_the_score_difference_of_the_two_choices_on_that_kind():
    from analysis.test_analysis import FAST

    ds = _by_kind_grid("drawn")
    rule = an.decision_rule(ds)
    t = an.transfer(ds, rule, FAST)
    textbook = an.recommend(ds.isel(landscape=[0]), rule, FAST).setting
    drawn = an.recommend(ds.isel(landscape=[1]), rule, FAST).setting
    assert t["setting"].sel(kind="textbook").item() == textbook
    assert t["setting"].sel(kind="drawn").item() == drawn
    values = an.campaign_metric(ds.isel(landscape=[1]), rule.metric)
    scores = an.score(values.mean(["landscape", "replicate"]), rule)
    expected = float(scores.sel(setting=textbook) - scores.sel(setting=drawn))
    assert float(t["cost"].sel(kind="drawn")) == pytest.approx(expected, abs=1e-12)
    assert float(t["low"].sel(kind="drawn")) <= expected <= float(t["high"].sel(kind="drawn"))
