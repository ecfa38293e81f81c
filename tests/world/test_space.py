import numpy as np
import pytest
import scipy.stats
from hypothesis import given
from hypothesis import strategies as st

from workbench.engine.batch import run
from workbench.engine.campaign import Campaign
from workbench.seeding import campaign_streams, derive
from workbench.study.decay import parse
from workbench.validation import InputError
from workbench.world import landscapes as ls
from workbench.world.beliefs import gaussian_at
from workbench.world.space import Categorical, Continuous, Integer, Space


def test_linear_and_log_parameters_round_trip_through_the_cube():
    lin = Continuous("temperature", 180, 260, unit="°C")
    log = Continuous("proving", 20, 240, log=True, unit="min")
    x = np.array([180.0, 200.0, 260.0])
    np.testing.assert_allclose(lin.from_unit(lin.to_unit(x)), x)
    y = np.array([20.0, 69.28, 240.0])
    np.testing.assert_allclose(log.from_unit(log.to_unit(y)), y)
    # On a log scale the geometric midpoint sits at the cube's centre.
    assert log.to_unit(np.sqrt(20 * 240)) == pytest.approx(0.5)


def test_integer_and_categorical_values_own_equal_bins_and_encode_at_their_centres():
    n = Integer("racks", 1, 4)
    np.testing.assert_allclose(n.to_unit([1, 2, 3, 4]), [0.125, 0.375, 0.625, 0.875])
    np.testing.assert_array_equal(n.from_unit([0.0, 0.2499, 0.25, 0.999, 1.0]), [1, 1, 2, 4, 4])
    c = Categorical("flour", ("rye", "wheat", "spelt"))
    np.testing.assert_allclose(c.to_unit(np.array(["rye", "spelt"])), [1 / 6, 5 / 6])
    np.testing.assert_array_equal(c.from_unit([0.1, 0.5, 0.9]), [0, 1, 2])


@given(st.lists(st.floats(0, 1), min_size=3, max_size=3))
def test_snap_is_idempotent_and_stays_in_the_cube(u):
    space = Space((Continuous("a", 0, 1), Integer("b", 0, 9), Categorical("c", ("x", "y"))))
    once = space.snap(np.array([u]))
    np.testing.assert_allclose(space.snap(once), once)
    assert np.all((once >= 0) & (once <= 1))


def test_features_expand_categoricals_one_hot():
    space = Space((Continuous("a", 0, 1), Categorical("c", ("x", "y", "z"))))
    f = space.features(np.array([[0.3, 0.5], [0.7, 0.95]]))
    np.testing.assert_allclose(f, [[0.3, 0, 1, 0], [0.7, 0, 0, 1]])


@pytest.mark.parametrize(
    "build, words",
    [
        (lambda: Continuous("a", 2, 1), "upper must be greater than lower"),
        (lambda: Continuous("a", 1, 1), "upper must be greater than lower"),
        (lambda: Continuous("a", 0, 1, log=True), "positive on a log scale"),
        (lambda: Continuous("a", float("nan"), 1), "lower must be a finite number"),
        (lambda: Continuous("", 0, 1), "non-empty string"),
        (lambda: Integer("n", 1, 2.5), "upper must be an integer"),
        (lambda: Categorical("c", ()), "at least 2 choices"),
        (lambda: Categorical("c", ("x", "x")), "'x' twice"),
        (lambda: Space(()), "at least one parameter"),
        (lambda: Space((Continuous("a", 0, 1), Continuous("a", 0, 2))), "'a' twice"),
    ],
)
def test_impossible_spaces_raise_a_plain_value_error_saying_why(build, words):
    # The constructors know no study keys: the parser names the key (tests/study/test_spec.py).
    with pytest.raises(ValueError, match=words) as err:
        build()
    assert not isinstance(err.value, InputError)
    assert "space." not in str(err.value) and "\n" not in str(err.value)


def test_an_unknown_choice_is_a_plain_value_error():
    with pytest.raises(ValueError, match="one of 'rye', 'wheat'") as err:
        Categorical("flour", ("rye", "wheat")).to_unit(np.array(["spelt"]))
    assert not isinstance(err.value, InputError)


def test_a_log_scale_integer_rounds_its_log_coordinate_and_keeps_its_bounds():
    batch = Continuous("batch", 16, 512, log=True, integer=True)
    assert batch.from_unit(np.array([0.0, 1.0])).tolist() == [16, 512]
    # the geometric midpoint sqrt(16 * 512) = 90.51 rounds to 91
    assert batch.from_unit(np.array([0.5])).tolist() == [91]
    # Each value v owns the u that round to it: its share of a uniform u is the log-uniform
    # probability of [v - 0.5, v + 0.5) cut to the bounds (reference: scipy.stats.loguniform).
    u = (np.arange(400_000) + 0.5) / 400_000
    values, counts = np.unique(batch.from_unit(u), return_counts=True)
    assert values.tolist() == list(range(16, 513))
    ref = scipy.stats.loguniform(16, 512)
    expected = ref.cdf(np.minimum(values + 0.5, 512)) - ref.cdf(np.maximum(values - 0.5, 16))
    np.testing.assert_allclose(counts / len(u), expected, atol=5e-6)
    assert "integer" in batch.describe()
    with pytest.raises(ValueError, match="whole numbers"):
        Continuous("batch", 16.5, 512, log=True, integer=True)


@given(st.lists(st.floats(0, 1), min_size=2, max_size=2))
def test_a_log_scale_integer_snaps_to_the_coordinate_of_its_rounded_value(u):
    space = Space(
        (Continuous("lr", 1e-5, 1e-1, log=True), Continuous("batch", 16, 512, True, "", True))
    )
    once = space.snap(np.array([u]))
    np.testing.assert_allclose(space.snap(once), once)
    batch = space.from_unit(once)[1]
    assert batch.dtype.kind == "i" and 16 <= batch[0] <= 512
    assert batch[0] == space.from_unit(np.array([u]))[1][0]
    assert space.is_discrete.tolist() == [False, True]


def test_a_campaign_evaluates_a_log_scale_integer_only_at_whole_numbers():
    space = Space((Continuous("x", 0, 1), Continuous("batch", 16, 512, True, "", True)))
    placement = ls.get("branin").placed(at=[0.3, 0.6])
    for strategy in ("pseudo-posterior", "prior-weighted"):
        c = Campaign(
            strategy,
            placement,
            space,
            gaussian_at([0.3, 0.6], 0.15),
            10,
            decay=parse("hyperbolic:4"),
        )
        points = run(c, campaign_streams(derive(3, 1))).points
        np.testing.assert_allclose(space.snap(points), points)
        assert len(np.unique(space.from_unit(points)[1])) > 3  # it moves along the axis
