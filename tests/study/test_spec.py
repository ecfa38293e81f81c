import json

import numpy as np
import pytest
from helpers import make_study

from workbench.cli import main
from workbench.study.cells import Cell
from workbench.study.grid import chunks
from workbench.study.spec import load
from workbench.validation import InputError
from workbench.world.beliefs import Discrete, Mixture, Product, TruncatedGaussian

USER = """
title = "Coating line: cure temperature, line speed, primer"
budget = 12
[space.cure]
lower = 120
upper = 200
unit = "°C"
[space.speed]
lower = 0.5
upper = 8
scale = "log"
unit = "m/min"
[space.passes]
lower = 1
upper = 4
type = "integer"
[space.primer]
choices = ["epoxy", "acrylic", "none"]
[belief.cure]
centre = 165
within = 10
[belief.speed]
centre = 2
factor = 2
[belief.passes]
probabilities = [0.1, 0.6, 0.2, 0.1]
[belief.primer]
probabilities = { epoxy = 0.7, acrylic = 0.3 }
[[landscape]]
name = "shekel5"
[strategy.pseudo-posterior]
decay = ["hyperbolic:5"]
"""


def test_a_user_space_study_reads_units_scales_and_beliefs():
    s = make_study(USER)
    assert s.space.names == ["cure", "speed", "passes", "primer"]
    assert s.space["speed"].log and s.space["cure"].unit == "°C"
    assert isinstance(s.belief, Product)
    cure, speed, passes, primer = s.belief.marginals
    assert isinstance(cure, TruncatedGaussian) and isinstance(passes, Discrete)
    assert isinstance(speed, TruncatedGaussian)
    assert primer.probabilities == pytest.approx((0.7, 0.3, 0.0))
    mode = s.space.format_point(s.belief.mode())
    assert mode["cure"] == pytest.approx(165) and mode["speed"] == pytest.approx(2)
    assert mode["passes"] == 2 and mode["primer"] == "epoxy"


def test_the_truth_is_placed_at_the_belief_mode_on_a_user_space():
    s = make_study(USER)
    cell = Cell(s, 0, 0, 0)
    mode = s.space.snap(np.atleast_2d(s.belief.mode()))[0]
    assert cell.placement.nearest_minimiser_distance(mode) == pytest.approx(0.0, abs=1e-9)
    assert cell.mode_value == pytest.approx(cell.placement.minimum, abs=1e-9)


def test_a_belief_from_earlier_good_points_is_a_density_estimate():
    s = make_study(
        """
        title = "points"
        [space.t]
        lower = 0
        upper = 10
        [space.flour]
        choices = ["rye", "wheat"]
        [belief]
        points = [
          { t = 2.0, flour = "rye" },
          { t = 2.5, flour = "rye" },
          { t = 3.0, flour = "wheat" },
        ]
        [[landscape]]
        name = "branin"
        [strategy.prior-weighted]
        decay = ["hyperbolic:5"]
        """
    )
    assert isinstance(s.belief, Mixture) and len(s.belief.components) == 3
    assert s.space.format_point(s.belief.mode())["flour"] == "rye"


def test_per_parameter_mixtures_and_beta_beliefs_are_read():
    s = make_study(
        """
        title = "shapes"
        [space.a]
        lower = 0
        upper = 1
        [space.b]
        lower = 0
        upper = 1
        [belief.a]
        mixture = [
          { centre = 0.2, spread = 0.05, weight = 1 },
          { centre = 0.7, spread = 0.1, weight = 3 },
        ]
        [belief.b]
        beta = [2, 5]
        [[landscape]]
        name = "branin"
        [strategy.prior-weighted]
        decay = ["hyperbolic:5"]
        """
    )
    a, b = s.belief.marginals
    assert isinstance(a, Mixture) and a.weights == pytest.approx((0.25, 0.75))
    assert b.mode() == pytest.approx(0.2)


def test_distortion_levels_come_named_and_from_a_factorial():
    s = make_study(
        """
        title = "factorial"
        [[landscape]]
        name = "branin"
        [distortion]
        misplaced = { misplace = "worst" }
        factorial = { shift = [0.1, 0.3], scale = [0.5, 2.0] }
        [strategy.pseudo-posterior]
        decay = ["hyperbolic:5", "exponential:10"]
        quantile = [0.1, 0.3]
        """
    )
    names = [d.name for d in s.distortions]
    assert names[:2] == ["exact", "misplaced"] and len(names) == 6
    assert "shift 0.3 scale 2" in names
    # One chunk per distortion: the 8 replicates make one block.
    assert [c.distortion for c in chunks(s)] == list(range(6))


def test_a_dimension_mismatch_between_space_and_landscape_is_refused():
    with pytest.raises(InputError, match="dimension 4"):
        make_study(USER.replace('name = "shekel5"', 'name = "branin"'))


def test_the_demo_study_reads_and_its_belief_command_writes_the_figure(tmp_path, capsys):
    s = load("studies/demo.toml")
    assert {d.name for d in s.distortions} >= {"exact", "shifted", "overconfident", "misplaced"}
    assert len(s.decay_levels) >= 3 and len(s.quantile_levels) >= 3 and len(s.landscapes) >= 2
    assert main(["belief", "studies/demo.toml", "--out", str(tmp_path)]) == 0
    out = capsys.readouterr().out
    assert "temperature" in out and "central 90 %" in out and "truncation" in out
    png = tmp_path / "belief.png"
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_the_landscape_catalogue_prints_as_json(capsys):
    assert main(["landscapes", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert len(rows) >= 12
    assert {"name", "dimension", "domain", "minimum", "minimisers"} <= set(rows[0])
    branin = next(r for r in rows if r["name"] == "branin")
    # Dixon & Szegő (1978); Surjanovic & Bingham (2013): Branin f* = 0.397887.
    assert branin["minimum"] == pytest.approx(0.397887, rel=1e-4)


@pytest.mark.parametrize(
    "old, new, key",
    [
        ("probabilities = [0.1, 0.6, 0.2, 0.1]", "probabilities = [-0.1, 1.1, 0, 0]", "passes"),
        ("probabilities = [0.1, 0.6, 0.2, 0.1]", "probabilities = [0, 0, 0, 0]", "passes"),
        ("probabilities = [0.1, 0.6, 0.2, 0.1]", "probabilities = [0.5, 0.5]", "passes"),
        ("{ epoxy = 0.7, acrylic = 0.3 }", "{ epoxi = 0.7 }", "primer.probabilities"),
        ("centre = 2\nfactor = 2", "centre = 2\nwithin = 1", "speed.within"),
        ("centre = 165\nwithin = 10", "centre = 165\nfactor = 2", "cure.factor"),
        ("centre = 165\nwithin = 10", "centre = 250\nwithin = 10", "cure.centre"),
        ("centre = 165\nwithin = 10", "centre = 165\nwithin = 0", "cure.within"),
        ("centre = 165\nwithin = 10", "centre = 165", "belief.cure"),
    ],
)
def test_impossible_beliefs_are_refused_under_their_key(old, new, key):
    with pytest.raises(InputError) as info:
        make_study(USER.replace(old, new))
    assert key in info.value.key and "test.toml" in str(info.value)


@pytest.mark.parametrize(
    "table, key",
    [
        ("shifted = { shift = -0.1 }", "distortion.shifted.shift"),
        ("wide = { scale = 0 }", "distortion.wide.scale"),
        ("moved = { misplace = 'worse' }", "distortion.moved.misplace"),
        ("pushed = { shift = 0.1, direction = [0, 0] }", "distortion.pushed.direction"),
        ("pushed = { shift = 0.1, direction = [1, 0, 0] }", "distortion.pushed.direction"),
        ("factorial = { shift = [0.1, -1], scale = [1.0] }", "distortion.factorial.shift"),
    ],
)
def test_impossible_distortions_are_refused_by_the_parser_under_their_key(table, key):
    # Checked once, by the parser; the shekel5 landscape has 4 parameters, so a direction of 3
    # components does not fit it.
    with pytest.raises(InputError) as info:
        make_study(USER + f"[distortion]\n{table}\n")
    assert info.value.key == key


@pytest.mark.parametrize(
    "old, new, message",
    [
        (
            "lower = 120\nupper = 200",
            "lower = 200\nupper = 120",
            "'space.cure.upper' must be greater than lower (200); got 120.0",
        ),
        (
            "lower = 0.5\nupper = 8",
            "lower = 0\nupper = 8",
            "'space.speed.lower' must be positive on a log scale; got 0.0",
        ),
        (
            "lower = 1\nupper = 4",
            "lower = 4\nupper = 1",
            "'space.passes.upper' must be an integer greater than lower (4); got 1",
        ),
        (
            '["epoxy", "acrylic", "none"]',
            '["epoxy", "epoxy", "none"]',
            "'space.primer.choices' must be a list of distinct choices; got 'epoxy' twice",
        ),
        (
            'name = "shekel5"',
            'name = "shekel5"\ndim = 3',
            "'landscape[0].dim' must be 4 for shekel5; got 3",
        ),
    ],
)
def test_impossible_spaces_and_dimensions_are_refused_by_the_parser_under_their_key(
    old, new, message
):
    # The world's constructors raise plain ValueErrors; the parser checks first, under the key.
    with pytest.raises(InputError) as info:
        make_study(USER.replace(old, new))
    assert str(info.value).endswith(message)


def test_a_decoy_misplacement_without_a_decoy_names_the_distortion_key():
    # Branin on its native domain has three global minima and no other (Dixon & Szegő 1978),
    # so there is no decoy to misplace the belief on: the study's error, raised by the cell.
    s = make_study(
        'title = "t"\nbudget = 10\nplacement = "native"\n[[landscape]]\nname = "branin"\n'
        "[distortion]\nmoved = { misplace = 'decoy' }\n[strategy.pseudo-posterior]\n"
        'decay = ["hyperbolic:5"]\nquantile = [0.25]\n'
    )
    with pytest.raises(InputError) as info:
        _ = Cell(s, 0, 1, 0).belief
    assert info.value.key == "distortion.moved.misplace"
    assert "(use 'worst' instead); got 'branin'" in str(info.value)


def test_a_log_scale_integer_parameter_is_read_with_a_factor_belief():
    # the usual batch size: 16 to 512 on a log scale, believed near 64 within a factor of 4
    text = USER.replace(
        "[space.primer]",
        '[space.batch]\nlower = 16\nupper = 512\ntype = "integer"\nscale = "log"\n[space.primer]',
    ).replace("[belief.primer]", "[belief.batch]\ncentre = 64\nfactor = 4\n[belief.primer]")
    text = text.replace('name = "shekel5"', 'name = "levy"\ndim = 5')
    s = make_study(text)
    batch = s.space["batch"]
    assert batch.log and batch.integer and (batch.lower, batch.upper) == (16, 512)
    assert s.space.format_point(s.belief.mode())["batch"] == 64
    for bad, message in (
        ("lower = 16", "'space.batch.lower' must be an integer in [1, inf); got 0"),
        ("upper = 512", "'space.batch.upper' must be an integer greater than lower (16); got 8"),
    ):
        edited = text.replace(bad, "lower = 0" if "lower" in bad else "upper = 8")
        with pytest.raises(InputError) as info:
            make_study(edited)
        assert str(info.value).endswith(message)
