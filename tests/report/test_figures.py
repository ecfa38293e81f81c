"""The figures read right on a study with a log-scale, an integer and a categorical parameter:
tick labels that do not overlap, panels that are all used, one colour scale, a heatmap row per
belief-guided strategy, every frontier point labelled, the recommended and runner-up curves told
apart, whole-number evaluation ticks, titles inside the figure."""

import io
import textwrap

import matplotlib
import numpy as np
import pytest

from workbench import analysis as an
from workbench.report import figures as fg
from workbench.report import panels
from workbench.report.content import compute_content
from workbench.study.runner import run_study
from workbench.study.spec import parse_text
from workbench.world.marginals import marginal_curves

matplotlib.use("Agg")

# A training job: learning rate on a log scale, batch size 16–512 (497 integer levels) and an
# optimizer by name; a random smooth surface stands in for the unknown response.
STUDY = textwrap.dedent(
    """
    title = "A training job: learning rate, batch size, optimizer"
    budget = 6
    replicates = 2
    seed = 5
    baselines = ["no-belief"]

    [initial]
    size = 3

    [space.rate]
    lower = 1e-5
    upper = 1e-1
    scale = "log"

    [space.batch]
    lower = 16
    upper = 512
    type = "integer"

    [space.optimizer]
    choices = ["plain", "momentum", "adaptive"]

    [belief.rate]
    centre = 1e-3
    factor = 3

    [belief.batch]
    centre = 128
    within = 64

    [belief.optimizer]
    probabilities = { plain = 0.2, momentum = 0.3, adaptive = 0.5 }

    [[landscape]]
    drawn = { smoothness = 2.5, length_scale = 0.3 }
    label = "drawn"

    [distortion]
    shifted = { shift = 0.3 }
    misplaced = { misplace = "worst" }

    [strategy.pseudo-posterior]
    decay = ["hyperbolic:2", "hyperbolic:8"]
    quantile = [0.1, 0.5]

    [strategy.prior-weighted]
    decay = ["hyperbolic:2", "hyperbolic:8"]
    """
)


@pytest.fixture(scope="module")
def study():
    return parse_text(STUDY, name="training", where="training.toml")


# Not the shared grid (tests/conftest.py): the figures are checked on this study's log-scale,
# integer and categorical space and its drawn landscape.
@pytest.fixture(scope="module")
def content(study, tmp_path_factory):
    out = tmp_path_factory.mktemp("training")
    run_study(study, out, jobs=1)
    ds = an.open_grid(out)
    return compute_content(ds, an.decision_rule(ds), an.Resampling(draws=60, seed=1))


def _draw(fig):
    fig.canvas.draw()
    return fig.canvas.get_renderer()


def _overlaps(labels, renderer) -> list[tuple[str, str]]:
    """Pairs of visible, non-empty tick labels whose drawn boxes overlap."""
    boxes = [
        (t.get_text(), t.get_window_extent(renderer))
        for t in labels
        if t.get_visible() and t.get_text()
    ]
    return [
        (a, b)
        for i, (a, box) in enumerate(boxes)
        for b, other in boxes[i + 1 :]
        if box.overlaps(other)
    ]


def _x_labels(ax):
    # only the ticks inside the view are drawn
    lo, hi = sorted(ax.get_xlim())
    return [
        t.label1
        for t in ax.xaxis.get_major_ticks()
        if lo <= t.get_loc() <= hi or not np.isfinite(t.get_loc())
    ]


def test_belief_marginals_have_few_readable_ticks_on_log_and_integer_axes(study):
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 3, figsize=(12.6, 3.6), layout="constrained")
    fg.belief_marginals(list(axes), study.space, {"belief": study.belief})
    renderer = _draw(fig)
    for ax in axes:
        labels = [t for t in _x_labels(ax) if t.get_text()]
        assert 2 <= len(labels) <= fg.MAX_TICKS + 2, [t.get_text() for t in labels]
        assert _overlaps(labels, renderer) == []
    rate, batch, optimizer = axes
    assert rate.get_xscale() == "log"
    # whole decades over four decades, labelled as numbers (1e-5 … 0.1), not a run-on smear
    assert {t.get_text() for t in _x_labels(rate)} <= {"1e-5", "1e-4", "0.001", "0.01", "0.1"}
    # 497 batch sizes: labelled ticks are batch sizes, and there is no bar per level
    assert all(16 <= int(t.get_text()) <= 512 for t in _x_labels(batch) if t.get_text())
    assert len(batch.patches) == 0
    assert [t.get_text() for t in _x_labels(optimizer)] == ["plain", "momentum", "adaptive"]
    plt.close(fig)


def test_the_optimum_of_an_integer_parameter_is_drawn_at_its_level(study):
    optimum = np.array([0.5, 0.25, 0.9])
    curves = marginal_curves(study.space, {"belief": study.belief}, optimum)
    batch, optimizer = curves[1], curves[2]
    # u = 0.25 of 497 levels is level 124 (batch size 140); u = 0.9 of 3 is level 2
    assert batch.optimum == 124 and batch.labels[124] == "140"
    assert optimizer.optimum == 2


def test_every_report_figure_renders_with_no_overlapping_tick_labels(content):
    import matplotlib.pyplot as plt

    shown = {}
    real_png = panels._png

    def keep(fig):
        renderer = _draw(fig)
        for ax in fig.axes:
            if ax.get_label() == "<colorbar>":
                continue
            assert _overlaps(_x_labels(ax), renderer) == [], ax.get_title()
            assert _overlaps(ax.get_yticklabels(), renderer) == [], ax.get_title()
        # no title runs off the figure
        box = fig.bbox
        for text in [fig._suptitle, *(ax.title for ax in fig.axes)]:
            if text is not None and text.get_text():
                extent = text.get_window_extent(renderer)
                assert box.x0 - 1 <= extent.x0 and extent.x1 <= box.x1 + 1, text.get_text()
                assert extent.y1 <= box.y1 + 1, text.get_text()
        shown[len(shown)] = fig
        return real_png(fig)

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(panels, "_png", keep)
        figures = panels.report_figures(content)
    stems = [stem for stem, *_ in figures]
    assert stems == ["sensitivity", "regret_curves", "robustness_frontier", "belief_marginals"]
    for _, _, _, png in figures:
        assert png[:8] == b"\x89PNG\r\n\x1a\n"
    plt.close("all")


def test_the_heatmap_has_a_row_per_belief_guided_strategy_on_one_colour_scale(content):
    import matplotlib.pyplot as plt

    sets = content.sensitivities
    assert [d.attrs["strategy"] for d in sets] == ["pseudo-posterior", "prior-weighted"]
    n = sets[0].sizes["panel"]  # exact, shifted, misplaced and the rule
    fig, axes = plt.subplots(2, n, figsize=(3.6 * n, 7), layout="constrained", squeeze=False)
    fg.sensitivity_heatmap(list(axes.ravel()), sets, "evaluations to target")
    images = [ax.images[0] for ax in axes.ravel()]
    norms = {(im.norm.vmin, im.norm.vmax) for im in images}
    assert len(norms) == 1  # one colour scale
    values = np.concatenate([d["estimate"].values.ravel() for d in sets])
    assert norms.pop() == (np.nanmin(values), np.nanmax(values))
    bars = [ax for ax in fig.axes if ax.get_label() == "<colorbar>"]
    assert len(bars) == 1 and "one scale for every panel" in bars[0].get_ylabel()
    # prior-weighted does not use the quantile: a decay-only column
    for ax in axes[1]:
        assert [t.get_text() for t in ax.get_xticklabels()] == ["not used"]
        assert ax.images[0].get_array().shape == (2, 1)
        assert "prior-weighted" in ax.get_title()
    plt.close(fig)


def test_grid_of_panels_removes_the_slots_it_does_not_use():
    import matplotlib.pyplot as plt

    for n, ncols, shape in [(4, 3, (2, 2)), (5, 3, (2, 3)), (3, 3, (1, 3)), (1, 2, (1, 1))]:
        fig, axes = panels._grid_axes(n, ncols, 3.0, 2.0)
        assert len(fig.axes) == len(axes) == n
        spec = axes[0].get_subplotspec().get_gridspec()
        assert (spec.nrows, spec.ncols) == shape
        plt.close(fig)


def test_recommended_and_runner_up_curves_differ_in_colour_and_line(content):
    import matplotlib.pyplot as plt
    from matplotlib.colors import to_rgb

    rec = content.rec
    roles = {rec.setting: "recommended", rec.runner_up["setting"]: "runner-up"}
    n = content.bands.sizes["distortion"]
    fig, axes = plt.subplots(1, n, layout="constrained")
    fg.regret_curves(list(axes), content.bands, roles, target=0.05)
    for ax in axes:
        lines = {line.get_label().split(" (")[0]: line for line in ax.get_lines()}
        a, b = lines[rec.setting], lines[rec.runner_up["setting"]]
        assert a.get_linestyle() != b.get_linestyle()
        # far apart in colour: Euclidean distance in RGB of more than half the cube's side
        assert np.linalg.norm(np.subtract(to_rgb(a.get_color()), to_rgb(b.get_color()))) > 0.5
        ticks = [t for t in ax.get_xticks() if ax.get_xlim()[0] <= t <= ax.get_xlim()[1]]
        assert all(float(t).is_integer() for t in ticks)  # evaluations are whole numbers
    plt.close(fig)


def test_a_long_title_is_wrapped_inside_a_narrow_figure():
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(4.4, 3.6), layout="constrained")
    fg.distortion_probabilities(ax, np.arange(1, 8), np.full((7, 2), 0.5), ["exact", "shifted"])
    fg.figure_title(fig, "The live campaign read against the grid: " + "a long study title " * 4)
    buffer = io.BytesIO()
    fig.savefig(buffer, format="png")
    renderer = fig.canvas.get_renderer()
    extent = fig._suptitle.get_window_extent(renderer)
    assert fig.bbox.x0 <= extent.x0 and extent.x1 <= fig.bbox.x1
    assert all(float(t).is_integer() for t in ax.get_xticks())
    plt.close(fig)


def test_every_frontier_point_is_labelled_and_no_two_labels_overlap(content):
    import matplotlib.pyplot as plt
    from matplotlib.text import Text

    fig, ax = plt.subplots(figsize=(8.5, 5.6), layout="constrained")
    fg.robustness_frontier(
        ax, content.frontier, "evaluations", {content.rec.setting: "recommended"}
    )
    renderer = _draw(fig)
    notes = [t for t in ax.texts if t.get_text()]
    assert len(notes) == content.frontier.sizes["setting"]
    boxes = [Text.get_window_extent(t, renderer) for t in notes]
    assert not any(a.overlaps(b) for i, a in enumerate(boxes) for b in boxes[i + 1 :])
    plt.close(fig)
