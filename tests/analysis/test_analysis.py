"""Analysis: metrics against their reference formulas and libraries, and the recommendation on
grids built by hand with the grid file's own variable and dimension names."""

import json

import numpy as np
import pytest
import scipy.stats
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench import analysis as an
from workbench.analysis import metrics
from workbench.cli import main
from workbench.study import gridfile
from workbench.study.spec import parse_text
from workbench.validation import InputError

BUDGET = 12
REPLICATES = 6
TARGET = 0.05
NEVER = BUDGET + 1
STRATEGIES = ("pseudo-posterior", "prior-weighted")
LANDSCAPES = ("branin", "six-hump-camel")
DISTORTIONS = ("exact", "shifted", "misplaced")
DECAYS = ("hyperbolic:2", "hyperbolic:8")
QUANTILES = (0.1, 0.5)
BASELINES = ("no-belief", "random")
STUDY = f"""
title = "hand-built grid"
budget = {BUDGET}
replicates = {REPLICATES}
target = {TARGET}
baselines = ["no-belief", "random"]
[[landscape]]
name = "branin"
[[landscape]]
name = "six-hump-camel"
[distortion]
shifted = {{ shift = 0.2 }}
misplaced = {{ misplace = "worst" }}
[strategy.pseudo-posterior]
decay = ["hyperbolic:2", "hyperbolic:8"]
quantile = [0.1, 0.5]
[strategy.prior-weighted]
decay = ["hyperbolic:2", "hyperbolic:8"]
"""
# The grid file's layout (workbench.study.gridfile), each series over evaluations.
GUIDED_DIMS = (*gridfile.GUIDED_DIMS, "evaluation")
BASE_DIMS = (*gridfile.BASELINE_DIMS, "evaluation")


def _curves(ett: np.ndarray) -> np.ndarray:
    """Normalized regret 0.5 before evaluation ``ett``, then 0.04 · 0.8^(t − ett), below the
    target 0.05 (NEVER: not reached); every metric then orders campaigns by ``ett``."""
    t = np.arange(1, BUDGET + 1)
    ett = ett[..., None]
    return np.where(t >= ett, 0.04 * 0.8 ** (t - ett), 0.5)


def hand_grid(guided_ett: np.ndarray, baseline_ett: np.ndarray, study: str = STUDY):
    """A grid Dataset laid out as workbench.study.gridfile writes it, from evaluations to target:
    guided (strategy, landscape, distortion, decay, quantile, replicate), baselines (baseline,
    landscape, distortion, replicate). Minimum 0 and gap 1, so best = normalized regret; the
    value at the belief's mode is 0.3."""
    guided_ett = np.asarray(guided_ett, dtype=float)[:, :, :, :, :, None, None, :]
    nr = _curves(guided_ett)
    base = _curves(np.asarray(baseline_ett, dtype=float))
    coords = {
        "strategy": list(STRATEGIES),
        "landscape": list(LANDSCAPES),
        "distortion": list(DISTORTIONS),
        "decay": list(DECAYS),
        "quantile": list(QUANTILES),
        "exploration": [0.0],
        "initial": ["belief"],
        "replicate": np.arange(REPLICATES),
        "evaluation": np.arange(1, BUDGET + 1),
        "baseline": list(BASELINES),
    }
    cell = ("landscape", "distortion", "replicate")
    return xr.Dataset(
        {
            "normalized_regret": (GUIDED_DIMS, nr),
            "best": (GUIDED_DIMS, nr),
            "baseline_normalized_regret": (BASE_DIMS, base),
            "baseline_best": (BASE_DIMS, base),
            "mode_value": (cell, np.full((2, 3, REPLICATES), 0.3)),
            "severity_distance": (
                cell,
                np.tile([0.0, 0.2, 0.7], (2, REPLICATES, 1)).swapaxes(1, 2),
            ),
            "severity_mass": (cell, np.tile([0.3, 0.1, 0.0], (2, REPLICATES, 1)).swapaxes(1, 2)),
            "distortion_shift": ("distortion", [0.0, 0.2, 0.0]),
            "distortion_scale": ("distortion", [1.0, 1.0, 1.0]),
            "distortion_misplace": ("distortion", ["", "", "worst"]),
        },
        coords=coords,
        attrs={
            "title": "hand-built grid",
            "study_name": "hand",
            "study": study,
            "budget": BUDGET,
            "target": TARGET,
            "version": "test",
            # The rule as the run stores it: nothing after the run parses the study text.
            **gridfile.decision_attributes(parse_text(study).decision),
        },
    )


def random_ett(seed: int, low: int = 4, high: int = NEVER + 1):
    """Evaluations to target drawn uniformly in [low, high) (NEVER: not reached); the
    prior-weighted strategy's values repeat across quantiles, as in a real grid."""
    rng = np.random.default_rng(seed)
    guided = rng.integers(low, high, size=(2, 2, 3, 2, 2, REPLICATES))
    guided[1, :, :, :, 1] = guided[1, :, :, :, 0]
    baseline = rng.integers(low, high, size=(2, 2, 3, REPLICATES))
    # no-belief and random ignore the belief: the same across distortions
    baseline[:] = baseline[:, :, :1]
    return guided, baseline


FAST = an.Resampling(draws=300, seed=1)


# --------------------------------------------------------------------------- reference values


def test_wilson_interval_matches_published_value_and_scipy():
    # Wilson (1927), JASA 22: 8 of 10 at 95 % gives [0.490, 0.943] (REFERENCES.md).
    low, high = an.wilson_interval(8, 10, 0.95)
    assert (round(float(low), 3), round(float(high), 3)) == (0.490, 0.943)
    # scipy.stats.binomtest(...).proportion_ci(method="wilson") is the reference library.
    for k, n, level in [(0, 7, 0.95), (3, 7, 0.9), (19, 20, 0.99), (20, 20, 0.95)]:
        ref = scipy.stats.binomtest(k, n).proportion_ci(confidence_level=level, method="wilson")
        low, high = an.wilson_interval(k, n, level)
        np.testing.assert_allclose([low, high], [ref.low, ref.high], rtol=1e-12, atol=1e-12)


def test_kaplan_meier_matches_scipy_ecdf_with_censored_data():
    # Kaplan & Meier (1958), JASA 53; scipy.stats.ecdf with CensoredData is the reference.
    rng = np.random.default_rng(4)
    for _ in range(5):
        t = rng.integers(1, BUDGET + 1, 40).astype(float)
        reached = rng.random(40) < 0.6
        ref = scipy.stats.ecdf(scipy.stats.CensoredData(uncensored=t[reached], right=t[~reached]))
        u, survival = an.kaplan_meier(t, reached)
        np.testing.assert_allclose(survival, ref.sf.evaluate(u), rtol=1e-12)
        below = ref.sf.probabilities <= 0.5
        expected = ref.sf.quantiles[np.argmax(below)] if below.any() else np.inf
        assert an.kaplan_meier_median(t, reached) == expected


def test_grid_kaplan_meier_median_equals_the_reference_per_cell():
    guided, baseline = random_ett(5, low=2, high=NEVER + 3)
    ds = hand_grid(np.minimum(guided, NEVER), np.minimum(baseline, NEVER))
    km = an.median_evaluations_to_target(ds, resampling=FAST)["estimate"]
    ett = an.evaluations_to_target(ds)
    for setting in ["prior-weighted, decay hyperbolic:8", "no-belief"]:
        for d in DISTORTIONS:
            one = ett.sel(setting=setting, distortion=d)
            t, r = one["evaluations"].values.ravel(), one["reached"].values.ravel()
            ref = scipy.stats.ecdf(scipy.stats.CensoredData(uncensored=t[r], right=t[~r]))
            below = ref.sf.probabilities <= 0.5
            expected = ref.sf.quantiles[np.argmax(below)] if below.any() else np.inf
            assert float(km.sel(setting=setting, distortion=d)) == expected


def test_bootstrap_interval_matches_scipy_percentile_bootstrap():
    # Efron & Tibshirani (1993); scipy.stats.bootstrap (percentile method) is the reference.
    rng = np.random.default_rng(2)
    x = rng.normal(size=15)
    rs = an.Resampling(draws=999, level=0.9, seed=3)
    ours = an.bootstrap(
        xr.DataArray(x, dims="replicate"), lambda v: v.mean("replicate"), resampling=rs
    )
    ref = scipy.stats.bootstrap(
        (x,),
        np.mean,
        n_resamples=999,
        confidence_level=0.9,
        method="percentile",
        rng=np.random.default_rng(3),
    )
    np.testing.assert_allclose(
        [ours["low"], ours["high"]], [ref.confidence_interval.low, ref.confidence_interval.high]
    )


def test_paired_bootstrap_resamples_settings_together_like_scipy_paired():
    # scipy.stats.bootstrap(paired=True) resamples one index for both samples: the same pairing
    # our common-random-numbers bootstrap uses across settings.
    rng = np.random.default_rng(6)
    x = rng.normal(size=12)
    y = x + rng.normal(0.5, 0.2, size=12)
    da = xr.DataArray(
        np.stack([x, y]), dims=("setting", "replicate"), coords={"setting": ["a", "b"]}
    )
    rs = an.Resampling(draws=500, seed=9)
    ours = an.bootstrap(
        da, lambda v: (v.sel(setting="b") - v.sel(setting="a")).mean("replicate"), resampling=rs
    )
    ref = scipy.stats.bootstrap(
        (x, y),
        lambda a, b, axis=-1: np.mean(b - a, axis=axis),
        paired=True,
        n_resamples=500,
        method="percentile",
        rng=np.random.default_rng(9),
    )
    np.testing.assert_allclose(
        [ours["low"], ours["high"]], [ref.confidence_interval.low, ref.confidence_interval.high]
    )
    # paired, the interval of the difference is much narrower than unpaired noise would allow
    assert float(ours["high"] - ours["low"]) < 0.5


def test_bootstrap_is_reproducible_with_its_fixed_seed():
    guided, baseline = random_ett(1)
    ds = hand_grid(guided, baseline)
    a = an.summarise(an.campaign_metric(ds), an.Resampling(draws=200, seed=5))
    b = an.summarise(an.campaign_metric(ds), an.Resampling(draws=200, seed=5))
    c = an.summarise(an.campaign_metric(ds), an.Resampling(draws=200, seed=6))
    xr.testing.assert_equal(a, b)
    assert not np.array_equal(a["low"].values, c["low"].values)


# --------------------------------------------------------------------------- metrics on a grid


def test_series_lists_each_setting_once_and_the_baselines():
    guided, baseline = random_ett(1)
    s = an.series(hand_grid(guided, baseline))
    assert list(s.setting.values) == [
        "pseudo-posterior, decay hyperbolic:2, quantile 0.1",
        "pseudo-posterior, decay hyperbolic:2, quantile 0.5",
        "pseudo-posterior, decay hyperbolic:8, quantile 0.1",
        "pseudo-posterior, decay hyperbolic:8, quantile 0.5",
        "prior-weighted, decay hyperbolic:2",
        "prior-weighted, decay hyperbolic:8",
        "no-belief",
        "random",
    ]
    assert s.dims == ("setting", "landscape", "distortion", "replicate", "evaluation")
    assert list(s["kind"].values).count("baseline") == 2


def test_evaluations_to_target_is_censored_at_the_budget():
    guided, baseline = random_ett(2)
    ds = hand_grid(guided, baseline)
    ett = an.evaluations_to_target(ds)
    one = ett.sel(setting="pseudo-posterior, decay hyperbolic:8, quantile 0.5")
    designed = guided[0, :, :, 1, 1]
    np.testing.assert_array_equal(one["evaluations"].values, np.minimum(designed, BUDGET))
    np.testing.assert_array_equal(one["reached"].values, designed <= BUDGET)
    nb = ett.sel(setting="no-belief")
    np.testing.assert_array_equal(nb["evaluations"].values, np.minimum(baseline[0], BUDGET))


def test_speedup_and_belief_cost_pair_each_replicate_with_no_belief():
    guided, baseline = random_ett(3)
    ds = hand_grid(guided, baseline)
    mine = np.minimum(guided[1, :, :, 0, 0], BUDGET)
    none = np.minimum(baseline[0], BUDGET)
    label = "prior-weighted, decay hyperbolic:2"
    np.testing.assert_allclose(an.speedup(ds).sel(setting=label).values, none / mine)
    np.testing.assert_allclose(an.belief_cost(ds).sel(setting=label).values, mine - none)
    assert np.all(an.belief_cost(ds).sel(setting="no-belief").values == 0)


def test_evaluations_to_beat_mode_finds_the_first_best_below_the_mode_value():
    guided, baseline = random_ett(4)
    ds = hand_grid(guided, baseline)
    ds["mode_value"][:] = 0.6  # the curves start at 0.5: beaten at once
    beat = an.evaluations_to_beat_mode(ds)
    assert np.all(beat["evaluations"].values == 1) and bool(beat["reached"].all())
    ds["mode_value"][:] = 0.3  # beaten when the curve drops below the target
    beat = an.evaluations_to_beat_mode(ds)
    ett = an.evaluations_to_target(ds)
    xr.testing.assert_equal(beat["evaluations"], ett["evaluations"])
    ds["mode_value"][:] = 0.0  # never beaten: censored at the budget
    beat = an.evaluations_to_beat_mode(ds)
    assert np.all(beat["evaluations"].values == BUDGET) and not bool(beat["reached"].any())


def test_log_regret_area_and_final_regret_follow_the_curves():
    guided, baseline = random_ett(5)
    ds = hand_grid(guided, baseline)
    nr = an.series(ds)
    np.testing.assert_allclose(an.log_regret_area(ds).values, metrics.log_regret_area(nr.values))
    # by hand: 0.5 for ett − 1 evaluations, then 0.04 · 0.8^j
    one = an.log_regret_area(ds).sel(setting="no-belief").values
    for ett, area in zip(baseline[0].ravel(), one.ravel(), strict=True):
        values = [0.5] * (min(ett, NEVER) - 1) + [0.04 * 0.8**j for j in range(BUDGET - ett + 1)]
        assert area == pytest.approx(np.mean(np.log10(values[:BUDGET])))
    final = an.final_normalized_regret(ds).sel(setting="no-belief").values
    expected = np.where(baseline[0] <= BUDGET, 0.04 * 0.8 ** (BUDGET - baseline[0]), 0.5)
    np.testing.assert_allclose(final, expected)


def test_normalized_regret_at_budgets_reads_the_curve_there():
    guided, baseline = random_ett(6)
    ds = hand_grid(guided, baseline)
    at = an.normalized_regret_at(ds, [1, 6, 12])
    assert list(at["budget"].values) == [1, 6, 12]
    nb = at.sel(setting="no-belief").transpose("budget", ...).values
    for b, row in zip([1, 6, 12], nb, strict=True):
        np.testing.assert_allclose(
            row, np.where(baseline[0] <= b, 0.04 * 0.8 ** (b - baseline[0]), 0.5)
        )
    with pytest.raises(InputError, match="budgets"):
        an.normalized_regret_at(ds, [0])


def test_recovery_counts_campaigns_that_reached_the_target():
    guided, baseline = random_ett(7)
    ds = hand_grid(guided, baseline)
    rec = an.recovery(ds).sel(setting="no-belief", distortion="exact")
    k = int((baseline[0, :, 0] <= BUDGET).sum())
    assert int(rec["successes"]) == k and int(rec["campaigns"]) == 2 * REPLICATES
    low, high = an.wilson_interval(k, 2 * REPLICATES)
    assert float(rec["low"]) == pytest.approx(low) and float(rec["high"]) == pytest.approx(high)


# --------------------------------------------------------------------------- decision rules


def test_score_applies_each_rule_by_its_formula():
    m = xr.DataArray([1.0, 5.0, 9.0], dims=("distortion",), coords={"distortion": ["a", "b", "c"]})
    w = {"a": 0.5, "b": 0.3, "c": 0.2}

    def score(rule, weights=w, level=0.25):
        return float(an.score(m, an.Rule(rule, weights, level, "evaluations_to_target")))

    assert score("expected") == pytest.approx(0.5 * 1 + 0.3 * 5 + 0.2 * 9)
    assert score("minimax") == 9
    # a distortion of weight 0 is out of the worst case
    assert score("minimax", {"a": 0.5, "b": 0.5, "c": 0.0}) == 5
    # cvar at 0.3: all of the worst (c, weight 0.2) and 0.1 of the next (b)
    assert score("cvar", level=0.3) == pytest.approx((0.2 * 9 + 0.1 * 5) / 0.3)
    assert score("cvar", level=1.0) == pytest.approx(score("expected"))
    assert score("cvar", level=0.1) == pytest.approx(9)


def _dominated_grid():
    guided, baseline = random_ett(11, low=5)
    guided[0, :, :, 1, 0] = 2  # pseudo-posterior, hyperbolic:8, quantile 0.1 dominates
    return hand_grid(guided, baseline)


@pytest.mark.parametrize("metric", an.METRICS)
@pytest.mark.parametrize(("rule", "level"), [("expected", 0.25), ("minimax", 0.25), ("cvar", 0.5)])
def test_a_dominating_setting_is_recommended_under_every_rule(rule, level, metric):
    ds = _dominated_grid()
    rec = an.recommend(ds, an.decision_rule(ds, rule, None, level, metric), FAST)
    assert rec.setting == "pseudo-posterior, decay hyperbolic:8, quantile 0.1"
    assert (rec.choice["decay"], rec.choice["quantile"]) == ("hyperbolic:8", 0.1)
    assert rec.stability == 1.0
    assert set(rec.leave_one_landscape_out.values()) == {rec.setting}
    # the dominating setting is the same in every replicate: its interval may be a point
    assert rec.interval[0] - 1e-12 <= rec.value <= rec.interval[1] + 1e-12
    assert rec.runner_up["value"] > rec.value


def test_weights_on_one_distortion_pick_that_distortions_best():
    guided, baseline = random_ett(12, low=9, high=11)
    guided[0, :, :, 0, 0] = 12  # pseudo-posterior hyperbolic:2 q 0.1: best when exact
    guided[0, :, 0, 0, 0] = 2
    guided[0, :, :, 1, 1] = 12  # pseudo-posterior hyperbolic:8 q 0.5: best when shifted
    guided[0, :, 1, 1, 1] = 2
    guided[1, :, :, 1, :] = 12  # prior-weighted hyperbolic:8: best when misplaced
    guided[1, :, 2, 1, :] = 2
    ds = hand_grid(guided, baseline)
    best = {
        "exact": "pseudo-posterior, decay hyperbolic:2, quantile 0.1",
        "shifted": "pseudo-posterior, decay hyperbolic:8, quantile 0.5",
        "misplaced": "prior-weighted, decay hyperbolic:8",
    }
    for name, setting in best.items():
        for rule in an.RULES:
            only = ",".join(f"{d}={int(d == name)}" for d in DISTORTIONS)
            chosen = an.recommend(ds, an.decision_rule(ds, rule, only), FAST)
            assert chosen.setting == setting, (name, rule)
    # the three balance out under equal weights, and are the three best settings
    rec = an.recommend(ds, an.decision_rule(ds, "expected", {}), FAST)
    assert rec.setting in best.values()


def test_a_strategy_restriction_picks_that_strategys_best_setting():
    guided, baseline = random_ett(13, low=9, high=11)
    guided[1, :, :, 0, :] = 2  # prior-weighted hyperbolic:2 wins overall
    guided[0, :, :, 1, 1] = 4  # pseudo-posterior hyperbolic:8, quantile 0.5 is its best
    ds = hand_grid(guided, baseline)
    assert an.recommend(ds, resampling=FAST).setting == "prior-weighted, decay hyperbolic:2"
    pp = an.recommend(ds, resampling=FAST, strategy="pseudo-posterior")
    assert (pp.choice["decay"], pp.choice["quantile"]) == ("hyperbolic:8", 0.5)
    assert pp.runner_up["strategy"] == "pseudo-posterior"
    with pytest.raises(InputError, match="--strategy"):
        an.recommend(ds, resampling=FAST, strategy="belief-sampling")


def test_decision_rule_defaults_come_from_the_study_decision_table():
    guided, baseline = random_ett(1)
    text = STUDY + '\n[decision]\nrule = "cvar"\nlevel = 0.5\nmetric = "log_regret_area"\n'
    text += "weights = { exact = 3, misplaced = 1 }\n"
    rule = an.decision_rule(hand_grid(guided, baseline, text))
    assert (rule.rule, rule.level, rule.metric) == ("cvar", 0.5, "log_regret_area")
    assert rule.weights == {"exact": 0.75, "shifted": 0.0, "misplaced": 0.25}
    plain = an.decision_rule(hand_grid(guided, baseline))
    assert plain.rule == "expected" and plain.metric == "evaluations_to_target"
    assert plain.weights == {d: pytest.approx(1 / 3) for d in DISTORTIONS}


@pytest.mark.parametrize(
    ("kwargs", "key"),
    [
        ({"rule": "maximin"}, "--rule"),
        ({"weights": "exact=1,sideways=2"}, "--weights"),
        ({"weights": "exact=-1"}, "--weights exact"),
        ({"weights": "exact=0,shifted=0"}, "--weights"),
        ({"weights": "exact"}, "--weights"),
        ({"level": 0.0}, "--level"),
        ({"level": 1.5}, "--level"),
        ({"metric": "regret"}, "--metric"),
    ],
)
def test_bad_decision_options_raise_input_error(kwargs, key):
    guided, baseline = random_ett(1)
    with pytest.raises(InputError) as err:
        an.decision_rule(hand_grid(guided, baseline), **kwargs)
    assert err.value.key == key


# --------------------------------------------------------------------------- figure data


def test_sensitivity_marks_the_best_cell_and_what_cannot_be_told_from_it():
    guided, baseline = random_ett(13, low=9, high=11)
    guided[0, :, :, 1, 0] = 2  # clearly best everywhere
    guided[0, :, :, 0, 1] = NEVER  # clearly worst everywhere
    ds = hand_grid(guided, baseline)
    rule = an.decision_rule(ds)
    s = an.sensitivity(ds, rule, FAST)
    assert list(s["panel"].values) == [*DISTORTIONS, "expected"]
    assert s.sizes == {"panel": 4, "decay": 2, "quantile": 2}
    assert bool(s["best"].sel(decay="hyperbolic:8", quantile=0.1).all())
    assert not bool(s["tied"].sel(decay="hyperbolic:2", quantile=0.5).any())
    assert int(s["best"].sum()) == 4
    assert float(s["estimate"].sel(panel="exact", decay="hyperbolic:8", quantile=0.1)) == 2


def test_frontier_keeps_only_settings_no_other_beats_on_both_axes():
    guided, baseline = random_ett(14, low=8, high=10)
    guided[0, :, 0, 0, 0], guided[0, :, 1:, 0, 0] = 2, 12  # big saving, big cost
    guided[1, :, :, 0, :] = 7  # small saving, small cost
    ds = hand_grid(guided, baseline)
    fr = an.frontier(ds, resampling=FAST)
    efficient = set(fr.setting.values[fr["efficient"].values])
    assert efficient == {
        "pseudo-posterior, decay hyperbolic:2, quantile 0.1",
        "prior-weighted, decay hyperbolic:2",
    }
    b, c = fr["estimate"].sel(axis="benefit"), fr["estimate"].sel(axis="cost")
    none = an.summarise(an.campaign_metric(ds), FAST)["estimate"].sel(setting="no-belief")
    label = "prior-weighted, decay hyperbolic:2"
    assert float(b.sel(setting=label)) == pytest.approx(float(none.sel(distortion="exact")) - 7)
    assert float(c.sel(setting=label)) == pytest.approx(7 - float(none.sel(distortion="shifted")))


def _least_squares_ss(y: np.ndarray, axes: tuple[int, ...]) -> float:
    """Explained sum of squares of a regression on the one-hot coding of the factors ``axes``
    (all their combinations), minus the grand mean's: the textbook definition."""
    index = np.indices(y.shape).reshape(y.ndim, -1)
    groups = np.ravel_multi_index(tuple(index[a] for a in axes), [y.shape[a] for a in axes])
    x = np.eye(groups.max() + 1)[groups]
    flat = y.ravel()
    fit = x @ np.linalg.lstsq(x, flat, rcond=None)[0]
    return float(((fit - flat.mean()) ** 2).sum())


def test_effects_sums_of_squares_equal_the_least_squares_definition():
    # Balanced ANOVA: main-effect SS = explained SS of the factor's one-hot regression; the
    # two-way interaction SS = SS(a, b jointly) − SS(a) − SS(b) (any statistics textbook).
    guided, baseline = random_ett(15, low=2)
    ds = hand_grid(guided, baseline)
    e = an.effects(ds, resampling=an.Resampling(draws=20))
    assert json.loads(e.attrs["factors"]) == [
        "strategy",
        "decay",
        "quantile",
        "distortion",
        "landscape",
    ]
    y = np.minimum(guided, BUDGET).astype(float)  # (strategy, landscape, distortion, decay, q, r)
    y = y.transpose(0, 3, 4, 2, 1, 5)  # the factor order of the table, replicate last
    ss = e["sum_of_squares"]
    for k, name in enumerate(["strategy", "decay", "quantile", "distortion", "landscape"]):
        assert float(ss.sel(source=name)) == pytest.approx(_least_squares_ss(y, (k,)))
    joint = _least_squares_ss(y, (1, 3))
    expected = joint - _least_squares_ss(y, (1,)) - _least_squares_ss(y, (3,))
    assert float(ss.sel(source="decay × distortion")) == pytest.approx(expected)
    total = float(((y - y.mean()) ** 2).sum())
    assert float(ss.sum()) == pytest.approx(total)


def test_effects_name_the_setting_that_matters():
    guided, baseline = random_ett(16, low=5, high=7)
    guided[:, :, :, 1] += 5  # decay hyperbolic:8 costs five more evaluations everywhere
    e = an.effects(hand_grid(guided, baseline), resampling=an.Resampling(draws=20))
    mains = e["share"].where(e["order"] == 1, drop=True)
    assert str(mains.idxmax().item()) == "decay"
    assert float(e["low"].sel(source="decay")) > 0.5


# --------------------------------------------------------------------------- command line


@pytest.fixture
def grid_dir(tmp_path):
    _dominated_grid().to_netcdf(tmp_path / "grid.nc")
    return tmp_path


def test_decide_prints_one_json_object_with_the_choice(grid_dir, capsys):
    assert main(["decide", str(grid_dir), "--json", "--draws", "200", "--rule", "minimax"]) == 0
    out = json.loads(capsys.readouterr().out)
    for key in ("decay", "quantile", "rule", "metric", "value", "interval", "stability"):
        assert key in out
    assert (out["strategy"], out["decay"], out["quantile"]) == (
        "pseudo-posterior",
        "hyperbolic:8",
        0.1,
    )
    assert out["rule"] == "minimax" and 0 <= out["stability"] <= 1
    assert out["interval"][0] <= out["value"] <= out["interval"][1]
    assert set(out["leave_one_landscape_out"]) == set(LANDSCAPES)
    assert out["runner_up"]["setting"] != out["setting"]


def test_decide_prints_the_choice_in_words(grid_dir, capsys):
    assert main(["decide", str(grid_dir), "--draws", "100"]) == 0
    out = capsys.readouterr().out
    assert "pseudo-posterior, decay hyperbolic:8, quantile 0.1" in out
    assert "runner-up" in out and "stability" in out


@pytest.mark.parametrize(
    "options",
    [
        ["--rule", "best"],
        ["--weights", "exact=1,sideways=1"],
        ["--weights", "exact=-2"],
        ["--level", "0"],
        ["--level", "2"],
        ["--draws", "0"],
    ],
)
def test_bad_decide_options_end_with_one_line_and_exit_2(grid_dir, capsys, options):
    assert main(["decide", str(grid_dir), *options]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("workbench: command line: '")


def test_a_missing_grid_is_named_in_one_line(tmp_path, capsys):
    assert main(["decide", str(tmp_path / "nowhere")]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and str(tmp_path / "nowhere" / "grid.nc") in err


# --------------------------------------------------------------------------- edge of the study


def test_a_choice_at_the_edge_of_the_levels_studied_is_named_with_the_next_levels():
    ds = _dominated_grid()
    rec = an.recommend(ds, an.decision_rule(ds), FAST)
    # hyperbolic:8 is the slowest decay studied (2, 8); quantile 0.1 the lowest (0.1, 0.5).
    edges = {e.factor: e for e in rec.edges}
    assert set(edges) == {"decay", "quantile"}
    assert (edges["decay"].side, edges["decay"].beyond) == (
        "highest",
        ("hyperbolic:16", "hyperbolic:32"),
    )
    assert (edges["quantile"].side, edges["quantile"].beyond) == ("lowest", ("0.025", "0.05"))
    lines = "\n".join(rec.lines())
    assert "slowest decay studied" in lines and "the lowest quantile studied" in lines
    snippet = an.edge_snippet(rec.edges)
    assert snippet.splitlines() == [
        "[strategy.pseudo-posterior]",
        'decay = ["hyperbolic:2", "hyperbolic:8", "hyperbolic:16", "hyperbolic:32"]',
        "quantile = [0.025, 0.05, 0.1, 0.5]",
    ]
    out = rec.to_dict()
    assert [e["factor"] for e in out["edge_of_study"]] == ["decay", "quantile"]
    assert out["edge_snippet"] == snippet


def test_the_edge_snippet_is_a_strategy_table_the_study_parser_accepts():
    rec = an.recommend(_dominated_grid(), None, FAST)
    table = (
        "[strategy.pseudo-posterior]\n"
        'decay = ["hyperbolic:2", "hyperbolic:8"]\n'
        "quantile = [0.1, 0.5]"
    )
    text = STUDY.replace(table, an.edge_snippet(rec.edges))
    assert text != STUDY
    study = parse_text(text)
    pp = next(s for s in study.strategies if s.name == "pseudo-posterior")
    assert [str(d) for d in pp.decay] == [
        "hyperbolic:2",
        "hyperbolic:8",
        "hyperbolic:16",
        "hyperbolic:32",
    ]
    assert pp.quantile == (0.025, 0.05, 0.1, 0.5)


def test_a_choice_inside_the_levels_studied_has_no_edge():
    studied = [
        {"strategy": "pseudo-posterior", "decay": f"hyperbolic:{b}", "quantile": q}
        for b in (2, 6, 20)
        for q in (0.1, 0.25, 0.5)
    ]
    inside = {"strategy": "pseudo-posterior", "decay": "hyperbolic:6", "quantile": 0.25}
    assert an.study_edges(studied, inside) == ()
    # another strategy's levels and another decay family do not count
    other = [{"strategy": "prior-weighted", "decay": "hyperbolic:1", "quantile": None}]
    family = [{"strategy": "pseudo-posterior", "decay": "exponential:1", "quantile": 0.25}]
    assert an.study_edges([*studied, *other, *family], inside) == ()


@given(
    levels=st.lists(
        st.floats(0.01, 0.99).map(lambda v: round(v, 2)), min_size=2, max_size=5, unique=True
    ),
    family=st.sampled_from(["hyperbolic", "exponential", "step", "linear"]),
    pick_low=st.booleans(),
)
@settings(max_examples=60, deadline=None)
def test_next_levels_lie_beyond_the_edge_and_inside_the_factors_range(levels, family, pick_low):
    values = [round(v * 40) + 1 if family == "step" else v * 40 for v in levels]
    values = sorted(set(values))
    studied = [
        {"strategy": "pseudo-posterior", "decay": f"{family}:{v:g}", "quantile": q}
        for v in values
        for q in levels
    ]
    choice = {
        "strategy": "pseudo-posterior",
        "decay": f"{family}:{(values[0] if pick_low else values[-1]):g}",
        "quantile": min(levels) if pick_low else max(levels),
    }
    for e in an.study_edges(studied, choice):
        beyond = [float(v.rpartition(":")[2]) for v in e.beyond]
        level = float(e.level.rpartition(":")[2])
        assert all((b < level) if e.side == "lowest" else (b > level) for b in beyond)
        if e.factor == "quantile":
            assert all(0 < b < 1 for b in beyond)
        elif family == "step":
            assert all(b >= 1 and b == int(b) for b in beyond)
        else:
            assert all(b > 0 for b in beyond)


# --------------------------------------------------------------------------- what the rule says


def test_partial_weights_on_the_command_line_are_refused_in_one_line(grid_dir, capsys):
    code = main(["decide", str(grid_dir), "--weights", "exact=0.5,shifted=0.5"])
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1
    assert "'--weights' must be a weight for every distortion" in err
    assert "missing: misplaced" in err and "exact=0.5,shifted=0.5" in err
    # written out with a 0, the same weights are taken
    full = "exact=0.5,shifted=0.5,misplaced=0"
    assert main(["decide", str(grid_dir), "--weights", full, "--draws", "50"]) == 0


def test_the_study_files_partial_weights_show_the_zero_they_give():
    guided, baseline = random_ett(1)
    text = STUDY + "\n[decision]\nweights = { exact = 3, misplaced = 1 }\n"
    rule = an.decision_rule(hand_grid(guided, baseline, text))
    assert "shifted 0" in rule.describe()


def test_the_minimax_line_names_only_the_distortions_it_takes_the_worst_of():
    guided, baseline = random_ett(1)
    ds = hand_grid(guided, baseline)
    rule = an.decision_rule(ds, "minimax", "exact=0.5,shifted=0.5,misplaced=0")
    words = rule.describe()
    assert "worst of the distortions exact, shifted" in words
    assert "misplaced left out" in words
    assert "0.5" not in words  # minimax uses which weights are positive, not their sizes
    rec = an.recommend(ds, rule, FAST)
    assert any(words in line for line in rec.lines())
