"""Scores standardised within each landscape: ranks, saving against no-belief and the raw
metric, on hand-computed cases laid out as campaign_metric lays out a grid's metric."""

import math

import numpy as np
import pytest
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from workbench.analysis import standardise as sd
from workbench.validation import InputError

SETTINGS = ("a", "b", "c")
LANDSCAPES = ("easy", "hard")


def metric(guided, baseline, distortions=("exact",)) -> xr.DataArray:
    """Per-cell values (setting, landscape, distortion) with the no-belief row last and the
    setting axis's coordinates as workbench.analysis.dataset.series gives them (among them
    ``quantile``, which must not clash with any computation over settings)."""
    guided = np.asarray(guided, dtype=float)
    base = np.asarray(baseline, dtype=float)[None]
    data = np.concatenate([guided, base])
    labels = [*SETTINGS[: len(guided)], "no-belief"]
    k = len(labels)
    return xr.DataArray(
        data,
        dims=("setting", "landscape", "distortion"),
        coords={
            "setting": labels,
            "strategy": ("setting", ["pseudo-posterior"] * (k - 1) + ["no-belief"]),
            "quantile": ("setting", [0.1] * (k - 1) + [math.nan]),
            "kind": ("setting", ["guided"] * (k - 1) + ["baseline"]),
            "landscape": list(LANDSCAPES),
            "distortion": list(distortions),
        },
        name="evaluations_to_target",
    )


@pytest.fixture
def easy_and_censored():
    # Easy landscape: the settings need 8, 9, 10 evaluations, no-belief 12. Hard landscape:
    # every setting and no-belief sit at the budget, 30 (censored).
    return metric([[[8.0], [30.0]], [[9.0], [30.0]], [[10.0], [30.0]]], [[12.0], [30.0]])


def test_ranks_by_hand_put_every_tied_setting_in_the_middle(easy_and_censored):
    r = sd.ranks(easy_and_censored.drop_sel(setting="no-belief"))
    # Hand-computed: ranks 1, 2, 3 of 3 → (r − 1)/2 = 0, ½, 1; three ties share rank 2 → ½.
    np.testing.assert_allclose(r.sel(landscape="easy", distortion="exact"), [0.0, 0.5, 1.0])
    np.testing.assert_allclose(r.sel(landscape="hard", distortion="exact"), [0.5, 0.5, 0.5])
    combined = sd.combine(r)
    np.testing.assert_allclose(combined.sel(setting=list(SETTINGS)), [0.25, 0.5, 0.75])


def test_saving_by_hand_and_the_censored_landscape_contributes_nothing(easy_and_censored):
    s = sd.saving(easy_and_censored)
    assert list(s["setting"].values) == list(SETTINGS)
    # Hand-computed: sd of 8, 9, 10 (ddof 0) is sqrt(2/3); savings (12 − m) / sd.
    spread = math.sqrt(2.0 / 3.0)
    expected = np.array([4.0, 3.0, 2.0]) / spread
    np.testing.assert_allclose(s.sel(landscape="easy", distortion="exact"), expected)
    np.testing.assert_array_equal(s.sel(landscape="hard", distortion="exact"), [0.0, 0.0, 0.0])
    np.testing.assert_allclose(sd.combine(s), expected / 2)
    # Interquartile range of 8, 9, 10 with linear interpolation: 9.5 − 8.5 = 1.
    iqr = sd.saving(easy_and_censored, spread="iqr")
    np.testing.assert_allclose(iqr.sel(landscape="easy", distortion="exact"), [4.0, 3.0, 2.0])
    np.testing.assert_array_equal(iqr.sel(landscape="hard", distortion="exact"), [0, 0, 0])


def test_saving_with_the_baseline_in_the_spread_is_bounded(easy_and_censored):
    s = sd.saving(easy_and_censored, with_baseline=True)
    # Hand-computed: sd of 8, 9, 10, 12 (ddof 0) = sqrt(2.1875).
    np.testing.assert_allclose(
        s.sel(landscape="easy", distortion="exact"), np.array([4.0, 3.0, 2.0]) / math.sqrt(2.1875)
    )
    # With N values of population sd σ, N σ² ≥ (x_i − x̄)² + (x_j − x̄)² ≥ (x_i − x_j)² / 2, so
    # |b − m| ≤ σ √(2N) (hand-derived); here N = 4 and the largest saving is 4 / 1.479 = 2.70.
    assert float(abs(s).max()) <= math.sqrt(2 * (len(SETTINGS) + 1))


def test_standardise_orients_every_method_lower_is_better_without_the_baseline(
    easy_and_censored,
):
    raw = sd.standardise(easy_and_censored, "raw")
    cost = sd.standardise(easy_and_censored, "saving")
    ranks = sd.standardise(easy_and_censored, "ranks")
    for out in (raw, cost, ranks):
        assert list(out["setting"].values) == list(SETTINGS)
        assert out.attrs["lower_is_better"] == 1
        assert sd.combine(out).to_series().idxmin() == "a"
    xr.testing.assert_allclose(cost, -sd.saving(easy_and_censored))
    # Raw: the plain mean over the two landscapes, (8 + 30)/2, (9 + 30)/2, (10 + 30)/2.
    np.testing.assert_allclose(sd.combine(raw), [19.0, 19.5, 20.0])


def test_combine_weighs_landscapes_and_distortions_by_normalised_weights():
    values = metric(
        [[[1.0, 2.0], [3.0, 4.0]], [[5.0, 6.0], [7.0, 8.0]]],
        [[0.0, 0.0], [0.0, 0.0]],
        distortions=("exact", "shifted"),
    ).drop_sel(setting="no-belief")
    out = sd.combine(values, {"easy": 3.0, "hard": 1.0}, {"shifted": 2.0})
    # Hand-computed: weights ¾, ¼ over landscapes; all weight on 'shifted'.
    np.testing.assert_allclose(out, [0.75 * 2 + 0.25 * 4, 0.75 * 6 + 0.25 * 8])
    per_distortion = sd.over_landscapes(values, {"hard": 1.0})
    np.testing.assert_allclose(per_distortion, [[3.0, 4.0], [7.0, 8.0]])
    with pytest.raises(InputError, match="'landscape_weights' must be one of"):
        sd.combine(values, {"steep": 1.0})
    with pytest.raises(InputError, match="not all 0"):
        sd.combine(values, {"easy": 0.0})


def test_replicates_are_averaged_before_standardising(easy_and_censored):
    # Two replicates around each value: 7 and 9 average to 8, and so on.
    twice = xr.concat([easy_and_censored - 1.0, easy_and_censored + 1.0], "replicate")
    xr.testing.assert_allclose(sd.saving(twice), sd.saving(easy_and_censored))
    xr.testing.assert_allclose(
        sd.combine(sd.standardise(twice, "ranks")),
        sd.combine(sd.standardise(easy_and_censored, "ranks")),
    )


def test_a_setting_without_a_value_has_no_rank_and_the_others_rank_among_themselves():
    values = metric([[[8.0], [1.0]], [[np.nan], [2.0]], [[10.0], [3.0]]], [[9.0], [9.0]])
    r = sd.ranks(values.drop_sel(setting="no-belief"))
    np.testing.assert_allclose(r.sel(landscape="easy", distortion="exact"), [0.0, np.nan, 1.0])
    assert np.isnan(sd.combine(r).sel(setting="b"))


def test_saving_needs_the_baseline(easy_and_censored):
    with pytest.raises(InputError, match="no-belief"):
        sd.saving(easy_and_censored.drop_sel(setting="no-belief"))


# --------------------------------------------------------------------------- invariants

cells = arrays(np.float64, (4, 2, 3), elements=st.integers(1, 60).map(float))
baselines = arrays(np.float64, (2, 3), elements=st.integers(1, 60).map(float))


def _values(guided: np.ndarray, baseline: np.ndarray) -> xr.DataArray:
    labels = ["a", "b", "c", "d", "no-belief"]
    return xr.DataArray(
        np.concatenate([guided, baseline[None]]),
        dims=("setting", "landscape", "distortion"),
        coords={"setting": labels, "landscape": ["l0", "l1"], "distortion": ["x", "y", "z"]},
    )


@settings(max_examples=30, deadline=None)
@given(cells, baselines, st.sampled_from([np.log, np.sqrt, lambda v: v**3, lambda v: -1 / v]))
def test_ranks_are_unchanged_by_an_increasing_transform_within_one_landscape(
    guided, baseline, transform
):
    values = _values(guided, baseline)
    changed = values.copy()
    changed.loc[{"landscape": "l1"}] = transform(values.sel(landscape="l1"))
    xr.testing.assert_allclose(sd.ranks(values), sd.ranks(changed))
    r = sd.ranks(values)
    assert float(r.min()) >= 0.0 and float(r.max()) <= 1.0
    # Normalised average ranks always average ½ over the settings (common practice: mean
    # rank (k + 1)/2).
    np.testing.assert_allclose(r.mean("setting"), 0.5)


@settings(max_examples=30, deadline=None)
@given(cells, baselines, st.floats(1e-3, 1e3), st.sampled_from(["sd", "iqr"]))
def test_scaling_one_landscape_changes_neither_saving_nor_ranks(guided, baseline, factor, spread):
    values = _values(guided, baseline)
    scaled = values.copy()
    scaled.loc[{"landscape": "l0"}] = factor * values.sel(landscape="l0")
    xr.testing.assert_allclose(
        sd.saving(values, spread=spread), sd.saving(scaled, spread=spread), rtol=1e-9, atol=1e-9
    )
    xr.testing.assert_allclose(sd.ranks(values), sd.ranks(scaled))
