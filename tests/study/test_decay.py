import numpy as np
import pytest

from workbench.study.decay import parse
from workbench.validation import InputError


def test_schedules_follow_their_formulas():
    t = np.array([1.0, 2.0, 10.0, 40.0])
    np.testing.assert_allclose(parse("hyperbolic:10")(t), 10 / t)
    np.testing.assert_allclose(parse("exponential:5")(t), np.exp(-t / 5))
    np.testing.assert_allclose(parse("step:10")(t), [1, 1, 1, 0])
    np.testing.assert_allclose(parse("linear:20")(t), [0.95, 0.9, 0.5, 0.0])
    np.testing.assert_allclose(parse("constant:2")(t), 2.0)


def test_schedules_are_written_as_family_colon_value():
    assert str(parse("hyperbolic:10")) == "hyperbolic:10"
    assert str(parse(" step:3")) == "step:3"
    assert parse("hyperbolic:10") == parse("hyperbolic:10.0")


@pytest.mark.parametrize(
    "text", ["hyperbolic:0", "hyperbolic:-1", "step:0", "step:2.5", "x", "a:b:c"]
)
def test_impossible_schedules_are_rejected(text):
    with pytest.raises(InputError):
        parse(text)


def test_an_unknown_family_names_the_closest():
    with pytest.raises(InputError, match="did you mean 'hyperbolic'"):
        parse("hyperbolik:3")
