"""Landscape weights and the standardised score in the decision rule, on hand-built grids whose
scores are computed by hand."""

from __future__ import annotations

import numpy as np
import pytest
from test_analysis import REPLICATES, hand_grid

from workbench import analysis as an
from workbench.analysis.recommendation import decision_values, setting_scores
from workbench.validation import InputError


def _grid(resemblance=None):
    # Setting (pseudo-posterior, hyperbolic:2, q 0.1) is best on branin (4 vs 8 evaluations),
    # (prior-weighted, hyperbolic:2) best on six-hump-camel (3 vs 9); the rest take 10.
    ett = np.full((2, 2, 3, 2, 2, REPLICATES), 10.0)
    ett[0, 0, :, 0, 0] = 4.0  # pseudo-posterior hyperbolic:2 q0.1 on branin
    ett[0, 1, :, 0, 0] = 9.0  # ... on six-hump-camel
    ett[1, 0, :, 0, :] = 8.0  # prior-weighted hyperbolic:2 on branin
    ett[1, 1, :, 0, :] = 3.0  # ... on six-hump-camel
    ds = hand_grid(ett, np.full((2, 2, 3, REPLICATES), 12.0))
    if resemblance is not None:
        ds["resemblance"] = ("landscape", np.asarray(resemblance, float))
        ds.attrs["resemblance_data"] = "hand-made data"
    return ds


PP = "pseudo-posterior, decay hyperbolic:2, quantile 0.1"
PW = "prior-weighted, decay hyperbolic:2"


def test_equal_weights_and_the_raw_metric_are_the_plain_mean_over_landscapes():
    ds = _grid()
    rule = an.decision_rule(ds)
    scores = setting_scores(decision_values(ds, rule), rule)
    # By hand: PP (4 + 9)/2 = 6.5, PW (8 + 3)/2 = 5.5.
    assert float(scores.sel(setting=PP)) == pytest.approx(6.5)
    assert float(scores.sel(setting=PW)) == pytest.approx(5.5)
    assert an.recommend(ds, rule, an.Resampling(draws=20)).setting == PW


def test_weights_by_label_move_the_choice_to_the_favoured_landscape():
    ds = _grid()
    rule = an.decision_rule(ds, landscapes={"branin": 3.0, "six-hump-camel": 1.0})
    scores = setting_scores(decision_values(ds, rule), rule)
    # By hand: PP 0.75·4 + 0.25·9 = 5.25; PW 0.75·8 + 0.25·3 = 6.75.
    assert float(scores.sel(setting=PP)) == pytest.approx(5.25)
    assert float(scores.sel(setting=PW)) == pytest.approx(6.75)
    rec = an.recommend(ds, rule, an.Resampling(draws=20))
    assert rec.setting == PP
    assert "branin 0.75" in rec.lines()[2]


def test_resemblance_weights_cut_negative_agreement_to_zero_and_are_the_default():
    ds = _grid(resemblance=[0.6, -0.3])
    rule = an.decision_rule(ds)  # nothing set: resemblance, as the data allow
    assert rule.landscape_weights == {"branin": 1.0, "six-hump-camel": 0.0}
    assert "the study sets none" in rule.landscape_basis
    assert an.recommend(ds, rule, an.Resampling(draws=20)).setting == PP
    equal = an.decision_rule(ds, landscapes="equal")
    assert equal.landscape_weights == {} and an.recommend(ds, equal).setting == PW
    both = an.decision_rule(_grid(resemblance=[0.6, 0.2]), landscapes="resemblance")
    assert both.landscape_weights == pytest.approx({"branin": 0.75, "six-hump-camel": 0.25})


def test_no_landscape_better_than_chance_falls_back_to_equal_weights_and_says_so():
    rule = an.decision_rule(_grid(resemblance=[-0.1, 0.0]))
    assert rule.landscape_weights == {}
    assert "better than chance" in rule.landscapes_text()


def test_resemblance_without_earlier_evaluations_is_one_clear_error():
    with pytest.raises(InputError, match="earlier evaluations"):
        an.decision_rule(_grid(), landscapes="resemblance")


def test_ranks_undo_the_scale_of_an_easy_landscape_and_the_value_shown_stays_raw():
    # branin: PP 2, PW 9, the rest 10; six-hump-camel: PW 3, X (pseudo-posterior,
    # hyperbolic:8, q 0.1) 4, PP 9, the rest 10. Raw means: PP 5.5, PW 6, X 7 -> PP.
    # Ranks over the 6 settings, (r - 1)/5: branin PP 0, PW 0.2; six-hump-camel PW 0, X 0.2,
    # PP 0.4 -> PP (0 + 0.4)/2 = 0.2, PW (0.2 + 0)/2 = 0.1 -> PW.
    ett = np.full((2, 2, 3, 2, 2, REPLICATES), 10.0)
    ett[0, 0, :, 0, 0], ett[1, 0, :, 0, :] = 2.0, 9.0
    ett[1, 1, :, 0, :], ett[0, 1, :, 1, 0], ett[0, 1, :, 0, 0] = 3.0, 4.0, 9.0
    ds = hand_grid(ett, np.full((2, 2, 3, REPLICATES), 12.0))
    raw_rule = an.decision_rule(ds)
    ranks_rule = an.decision_rule(ds, score_method="ranks")
    scores = setting_scores(decision_values(ds, ranks_rule), ranks_rule)
    assert float(scores.sel(setting=PP)) == pytest.approx(0.2)
    assert float(scores.sel(setting=PW)) == pytest.approx(0.1)
    assert an.recommend(ds, raw_rule, an.Resampling(draws=20)).setting == PP
    rec = an.recommend(ds, ranks_rule, an.Resampling(draws=20))
    assert rec.setting == PW
    # The value shown is the pick's raw mean evaluations to target, (9 + 3)/2.
    assert rec.value == pytest.approx(6.0)


def test_kinds_share_their_weight_equally():
    ds = _grid()
    ds["landscape_kind"] = ("landscape", ["textbook", "textbook"])
    rule = an.decision_rule(ds, landscapes={"textbook": 1.0})
    assert rule.landscape_weights == {"branin": 0.5, "six-hump-camel": 0.5}
