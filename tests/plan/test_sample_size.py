"""Sample sizes for the study plan: textbook values, the Wilson check, power by resampling."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.stats import binomtest

from workbench.plan import sample_size as planning


def test_interval_sample_size_is_the_textbook_value():
    # n = z² p(1 − p)/h², p = 0.5, h = 0.1, 95 %: 96.04, so 97 (common practice, any
    # statistics textbook).
    assert planning.interval_campaigns(0.5, 0.1, 0.95) == pytest.approx(96.04, abs=0.005)
    assert planning.campaigns_for_interval(0.5, 0.1, 0.95) == (97, 97)
    assert planning.z_value(0.95) == pytest.approx(1.959964, abs=1e-6)


def test_wilson_half_width_of_eight_in_ten_is_the_published_interval():
    # Wilson score interval, 8 of 10 at 95 %: [0.490, 0.943] (E. B. Wilson 1927, JASA 22).
    assert planning.wilson_half_width(0.8, 10, 0.95) == pytest.approx((0.943 - 0.490) / 2, abs=1e-3)


@pytest.mark.parametrize("k, n, level", [(8, 10, 0.95), (1, 40, 0.9), (49, 97, 0.95), (3, 7, 0.99)])
def test_wilson_half_width_agrees_with_scipy(k, n, level):
    # Reference library: scipy.stats.binomtest(...).proportion_ci(method="wilson").
    ci = binomtest(k, n).proportion_ci(confidence_level=level, method="wilson")
    expected = (ci.high - ci.low) / 2
    assert planning.wilson_half_width(k / n, n, level) == pytest.approx(expected, rel=1e-9)


@settings(max_examples=60, deadline=None)
@given(
    p=st.floats(0.01, 0.99),
    h=st.floats(0.02, 0.3),
    confidence=st.floats(0.8, 0.99),
)
def test_the_wilson_checked_count_is_the_smallest_that_meets_the_half_width(p, h, confidence):
    normal, n = planning.campaigns_for_interval(p, h, confidence)
    assert n >= normal >= planning.interval_campaigns(p, h, confidence) - 1e-9
    assert planning.wilson_half_width(p, n, confidence) <= h
    if n > normal:
        assert planning.wilson_half_width(p, n - 1, confidence) > h


def test_near_zero_the_wilson_check_raises_the_normal_count():
    # The Wilson interval is wider than the normal one near p = 0 (Wilson 1927).
    normal, n = planning.campaigns_for_interval(0.02, 0.02, 0.95)
    assert n > normal


def test_recovery_guess_is_the_worst_case_when_the_pilot_cannot_tell():
    p, worst = planning.recovery_guess([8, 3], [8, 8], 0.95)
    assert (p, worst) == (0.5, True)


def test_recovery_guess_is_the_interval_end_nearest_one_half():
    p, worst = planning.recovery_guess([2, 40], [40, 40], 0.95)
    assert not worst
    # Reference library: scipy.stats.binomtest(...).proportion_ci(method="wilson").
    ends = [
        binomtest(2, 40).proportion_ci(method="wilson").high,
        binomtest(40, 40).proportion_ci(method="wilson").low,
    ]
    assert p == pytest.approx(min(ends, key=lambda e: abs(e - 0.5)), rel=1e-9)


def test_centred_differences_have_median_zero_and_the_small_sample_scale():
    d = np.array([[1.0, 2.0, 4.0, 9.0], [3.0, 3.0, 3.0, np.nan]])
    c = planning.centred(d)
    assert np.nanmedian(c, axis=-1) == pytest.approx([0.0, 0.0])
    assert c[0] == pytest.approx((d[0] - 3.0) * np.sqrt(4 / 3))
    assert np.isnan(c[1, -1])


def test_pilot_based_count_shrinks_when_the_pilot_varies_less():
    rng = np.random.default_rng(11)
    narrow = [planning.centred(rng.normal(0, 2, 48)) for _ in range(2)]
    wide = [planning.centred(rng.normal(0, 12, 48)) for _ in range(2)]
    kw = dict(power=0.8, alpha=0.05, resamples=400, seed=5)
    few = planning.replicates_for_power(narrow, 5.0, **kw)
    many = planning.replicates_for_power(wide, 5.0, **kw)
    assert few.reached and many.reached
    assert few.replicates < many.replicates
    assert few.pairs_per_replicate == 2


def test_power_search_returns_the_smallest_count_reaching_the_power():
    rng = np.random.default_rng(3)
    strata = [rng.normal(0, 8, 60)]
    kw = dict(alpha=0.05, resamples=400, seed=9)
    found = planning.replicates_for_power(strata, 4.0, power=0.8, **kw)
    assert planning.paired_power(strata, 4.0, found.replicates, **kw) >= 0.8
    assert planning.paired_power(strata, 4.0, found.replicates - 1, **kw) < 0.8


def test_without_a_difference_the_test_rejects_at_about_its_level():
    rng = np.random.default_rng(4)
    strata = [planning.centred(rng.normal(0, 5, 200))]
    rate = planning.paired_power(strata, 0.0, 30, alpha=0.05, resamples=2000, seed=1)
    assert rate < 0.1


def test_power_search_reports_when_the_limit_is_not_enough():
    strata = [np.array([-50.0, 50.0, -40.0, 40.0])]
    found = planning.replicates_for_power(
        strata, 0.5, power=0.9, alpha=0.05, resamples=200, seed=0, limit=16
    )
    assert not found.reached and found.replicates == 16
