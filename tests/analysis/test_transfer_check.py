"""The transfer check on hand-made pairs of grids whose correlations and gap are computed by
hand, and its rank statistics against scipy.stats."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats
import xarray as xr
from hypothesis import given, settings
from hypothesis import strategies as st

from workbench.analysis.statistics import Resampling, mean_of
from workbench.analysis.transfer_check import (
    check_transfer,
    kendall_tau,
    spearman,
    transfer_gap,
)

SETTINGS = ["s1", "s2", "s3", "s4"]


def _grid(per_landscape: dict[str, list[float]], replicates: int = 6, noise: float = 0.0):
    """Values (setting, landscape, distortion, replicate): each landscape's setting means as
    given, constant over replicates unless ``noise``."""
    rng = np.random.default_rng(1)
    data = np.stack([np.asarray(v, float) for v in per_landscape.values()], axis=1)
    data = np.repeat(data[:, :, None, None], replicates, axis=3)
    data = np.repeat(data, 2, axis=2)
    data = data + noise * rng.standard_normal(data.shape)
    return xr.DataArray(
        data,
        dims=("setting", "landscape", "distortion", "replicate"),
        coords={
            "setting": SETTINGS,
            "landscape": list(per_landscape),
            "distortion": ["exact", "shifted"],
            "replicate": np.arange(replicates),
        },
    )


def _scorer(values):
    return mean_of(values).mean("distortion")


def test_hand_made_grids_give_the_hand_computed_correlations_and_gap():
    # Simulated scores 1, 2, 3, 4 (mean of two landscapes); real scores 2, 1, 4, 3.
    # By hand: Spearman 1 - 6·Σd²/(n(n²-1)) = 1 - 6·4/60 = 0.6; Kendall (4 concordant - 2
    # discordant)/6 = 1/3; the pick s1 is 2nd on the real problem, real cost 2 - 1 = 1;
    # gap (2 - 1)/(median 2.5 - 1) = 2/3.
    simulated = _grid({"a": [1, 2, 3, 4], "b": [1, 2, 3, 4]})
    real = _grid({"truth": [2, 1, 4, 3]}, replicates=8)
    check = check_transfer(simulated, real, _scorer, resampling=Resampling(draws=50))
    o = check.overall
    assert o.pick == "s1"
    assert check.best_real == "s2"
    assert o.spearman.estimate == pytest.approx(0.6)
    assert o.kendall.estimate == pytest.approx(1 / 3)
    assert o.real_rank.estimate == 2
    assert o.real_cost.estimate == pytest.approx(1.0)
    assert o.gap.estimate == pytest.approx(2 / 3)
    # Values constant over replicates: every bootstrap draw agrees with the estimate.
    assert o.spearman.low == pytest.approx(0.6) and o.spearman.high == pytest.approx(0.6)


def test_each_landscape_alone_shows_which_one_ranks_like_the_real_problem():
    # Landscape 'like' orders the settings as the truth does; 'against' reverses them.
    simulated = _grid({"like": [2, 1, 4, 3], "against": [3, 4, 1, 2]})
    real = _grid({"truth": [2, 1, 4, 3]})
    check = check_transfer(simulated, real, _scorer, resampling=Resampling(draws=20))
    rows = {r.landscape: r for r in check.by_landscape}
    assert rows["like"].spearman.estimate == pytest.approx(1.0)
    assert rows["like"].gap.estimate == 0.0 and rows["like"].real_rank.estimate == 1
    assert rows["against"].spearman.estimate == pytest.approx(-1.0)
    assert rows["against"].real_rank.estimate == 4
    # Worst real score 4, best 1, median 2.5: gap (4 - 1)/1.5 = 2.
    assert rows["against"].gap.estimate == pytest.approx(2.0)


def test_a_noisy_real_grid_has_reliability_below_one_and_wide_intervals():
    simulated = _grid({"a": [1, 2, 3, 4]})
    quiet = check_transfer(
        simulated, _grid({"t": [1, 2, 3, 4]}, 16, 0.01), _scorer, resampling=Resampling(draws=50)
    )
    noisy = check_transfer(
        simulated, _grid({"t": [1, 2, 3, 4]}, 16, 5.0), _scorer, resampling=Resampling(draws=50)
    )
    assert quiet.split_half.estimate == pytest.approx(1.0)
    assert noisy.split_half.estimate < 0.9
    assert noisy.overall.spearman.high - noisy.overall.spearman.low > 0.2


def test_settings_missing_from_the_truth_grid_are_refused():
    from workbench.validation import InputError

    simulated = _grid({"a": [1, 2, 3, 4]})
    real = _grid({"t": [1, 2, 3, 4]}).sel(setting=["s1", "s2", "s3"])
    with pytest.raises(InputError, match="s4"):
        check_transfer(simulated, real, _scorer, resampling=Resampling(draws=5))


@pytest.mark.filterwarnings("ignore:An input array is constant")
@settings(max_examples=40, deadline=None)
@given(st.lists(st.integers(-5, 5), min_size=3, max_size=9), st.randoms())
def test_rank_correlations_agree_with_scipy(values, random):
    # scipy.stats.spearmanr and kendalltau (τ-b) as reference library.
    a = np.array(values, float)
    b = a.copy()
    random.shuffle(b)
    b = b + np.arange(len(b)) % 2
    ref_rho = scipy.stats.spearmanr(a, b).statistic
    ref_tau = scipy.stats.kendalltau(a, b).statistic
    np.testing.assert_allclose(spearman(a, b), ref_rho, equal_nan=True, atol=1e-12)
    np.testing.assert_allclose(kendall_tau(a, b), ref_tau, equal_nan=True, atol=1e-12)


def test_gap_is_zero_when_every_setting_ties():
    assert transfer_gap(np.array([3.0, 3.0, 3.0]), np.array(1)) == 0.0
