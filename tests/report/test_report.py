"""The report: a tiny study run through the real runner by `workbench demo`, its page checked
for content, self-containment and escaping, and rendered in headless Chromium."""

import contextlib
import io
import json
import re
import shutil
import subprocess
import textwrap

import matplotlib
import numpy as np
import pytest
import xarray as xr
from helpers import GUIDED_SETTINGS, oven

from workbench import analysis as an
from workbench import cli
from workbench.report import figures as fg
from workbench.report.markup import md_text

matplotlib.use("Agg")

TITLE = 'Oven <script>alert(1)</script> & "crust" test'
STUDY = (
    textwrap.dedent(
        """
    title = 'Oven <script>alert(1)</script> & "crust" test'
    budget = 8
    replicates = 3
    seed = 7
    baselines = ["no-belief", "random"]

    [initial]
    size = 3

    """
    )
    + oven(units=True)
    + textwrap.dedent(
        """
    [[landscape]]
    name = "branin"

    [distortion]
    "misplaced <b>" = { misplace = "worst" }
    """
    )
    + GUIDED_SETTINGS
    + textwrap.dedent(
        """
    [decision]
    weights = { exact = 0.7, "misplaced <b>" = 0.3 }
    """
    )
)


# Not the shared grid (tests/conftest.py): these tests check `workbench demo` itself, on a study
# whose title and distortion name carry markup to escape, with units and a random baseline.
@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    """`workbench demo` on the tiny study: run, assemble, report; returns (folder, stdout)."""
    root = tmp_path_factory.mktemp("demo")
    study = root / "tiny.toml"
    study.write_text(STUDY, encoding="utf-8")
    out = root / "out"
    buffer = io.StringIO()
    with pytest.MonkeyPatch.context() as mp, contextlib.redirect_stdout(buffer):
        mp.setattr(cli, "_demo_study", lambda: study)
        code = cli.main(["demo", "--out", str(out), "--quiet", "--jobs", "1"])
    assert code == 0
    return out, buffer.getvalue()


@pytest.fixture(scope="module")
def page(demo):
    return (demo[0] / "report.html").read_text(encoding="utf-8")


def test_demo_ends_by_writing_the_report_and_printing_its_path_and_the_choice(demo):
    out, printed = demo
    ds = an.open_grid(out)
    rec = an.recommend(ds)
    assert f"report: {out / 'report.html'}" in printed
    assert f"recommendation: {rec.setting}" in printed
    assert "stability" in printed and "runner-up" in printed


def test_report_writes_page_summary_and_figures_and_no_temporary_files(demo):
    out, _ = demo
    names = sorted(p.name for p in (out / "figures").iterdir())
    assert names == [
        "belief_marginals.png",
        "regret_curves.png",
        "robustness_frontier.png",
        "sensitivity.png",
    ]
    for p in (out / "figures").iterdir():
        assert p.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    assert (out / "summary.md").stat().st_size > 0
    assert not list(out.rglob("*.part"))


def test_page_is_one_self_contained_file(page):
    for forbidden in ("http://", "https://", 'src="//', "<link", "url(", "fetch("):
        assert forbidden not in page.lower()
    # Its scripts are inline (the decision box's data and code): none has a source.
    scripts = re.findall(r"<script[^>]*>", page)
    assert scripts and all("src" not in s for s in scripts)
    sources = re.findall(r'<img [^>]*src="([^"]*)"', page)
    assert len(sources) == 4
    assert all(s.startswith("data:image/png;base64,") for s in sources)


def test_user_strings_are_escaped(page):
    assert "&lt;script&gt;alert(1)&lt;/script&gt; &amp; &quot;crust&quot;" in page
    assert "misplaced &lt;b&gt;" in page
    assert "<b>" not in page


def test_page_opens_with_the_answer_then_figures_method_and_cautions(demo, page):
    rec = an.recommend(an.open_grid(demo[0]))
    headings = re.findall(r"<h2>(.*?)</h2>", page)
    assert headings == ["Recommendation", "Figures", "Method", "Cautions"]
    answer = page[page.index("<h2>Recommendation</h2>") : page.index("<h2>Figures</h2>")]
    assert f"decay schedule {rec.choice['decay']}" in answer
    assert "Risk of a misleading belief" in answer
    risk = re.search(r'<p id="risk">(.*?)</p>', page, re.S).group(1)
    assert "when the belief is exact" in risk and "when the belief is misplaced &lt;b&gt;" in risk
    for title in (
        "Sensitivity of evaluations to target to decay and quantile",
        "Regret curves",
        "Robustness frontier",
        "Belief marginals",
        "Main effects and interactions",
    ):
        assert f"<h3>{title}</h3>" in page
    cautions = page[page.index("<h2>Cautions</h2>") :]
    assert "not the real system" in cautions and "safety limits come first" in cautions
    assert "local codes and to licensed practice" in cautions


def test_summary_states_the_recommendation(demo):
    text = (demo[0] / "summary.md").read_text(encoding="utf-8")
    rec = an.recommend(an.open_grid(demo[0]))
    # The title's markup is escaped: shown as written, never read as HTML.
    assert text.startswith(f"# {md_text(TITLE)}") and "<script>" not in text
    assert f"decay schedule {rec.choice['decay']}" in text
    assert "figures/regret_curves.png" in text


def test_report_command_takes_the_decision_options(demo, tmp_path, capsys):
    shutil.copy(demo[0] / "grid.nc", tmp_path / "grid.nc")
    code = cli.main(["report", str(tmp_path), "--rule", "minimax", "--draws", "100"])
    assert code == 0
    printed = capsys.readouterr().out
    # Another rule than the study's: its own files, the study's report is not overwritten.
    assert f"report: {tmp_path / 'report-minimax.html'}" in printed
    assert not (tmp_path / "report.html").exists()
    page = (tmp_path / "report-minimax.html").read_text(encoding="utf-8")
    assert "at the worst of the distortions" in page
    assert (tmp_path / "summary-minimax.md").exists()
    assert len(list((tmp_path / "figures-minimax").glob("*.png"))) == 4
    assert cli.main(["report", str(tmp_path / "missing")]) == 2
    assert "grid.nc" in capsys.readouterr().err


def _chromium():
    path = shutil.which("chromium")
    if path is None:
        pytest.skip("chromium is not installed and could not be (make test installs it with apt)")
    return path


def _run_chromium(tmp_path, *args):
    return subprocess.run(
        [
            _chromium(),
            "--headless",
            "--no-sandbox",
            "--disable-gpu",
            "--disable-quic",
            "--no-first-run",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            f"--user-data-dir={tmp_path / 'profile'}",
            "--enable-logging=stderr",  # console messages of the page go to stderr
            *args,
        ],
        capture_output=True,
        text=True,
        timeout=120,
    )


# Chromium lines that mean the page itself spoke or failed (the rest is sandbox, GPU and
# D-Bus noise of a headless machine).
PAGE_ERRORS = re.compile(r"CONSOLE|Uncaught|net::ERR_", re.I)


def test_the_page_error_check_sees_a_broken_page(tmp_path):
    bad = tmp_path / "bad.html"
    bad.write_text("<html><body><script>missing_function();</script></body></html>")
    done = _run_chromium(tmp_path, "--dump-dom", bad.as_uri())
    assert PAGE_ERRORS.search(done.stderr)


def test_report_renders_in_headless_chromium(demo, tmp_path):
    from PIL import Image

    url = (demo[0] / "report.html").as_uri()
    shot = tmp_path / "page.png"
    done = _run_chromium(tmp_path, f"--screenshot={shot}", "--window-size=1200,3000", url)
    assert done.returncode == 0, done.stderr[-2000:]
    assert not PAGE_ERRORS.search(done.stderr), done.stderr[-2000:]
    image = np.asarray(Image.open(shot).convert("L"), dtype=float)
    assert image.shape == (3000, 1200)
    # not blank: text and figures darken a real share of the page
    assert (image < 128).mean() > 0.01 and image.std() > 20
    dom = _run_chromium(tmp_path, "--dump-dom", url)
    assert dom.returncode == 0
    rec = an.recommend(an.open_grid(demo[0]))
    assert 'id="recommendation"' in dom.stdout
    assert f"decay schedule {rec.choice['decay']}" in dom.stdout


# --------------------------------------------------------------------------- figures


@pytest.fixture(scope="module")
def data(demo):
    ds = an.open_grid(demo[0])
    rule = an.decision_rule(ds)
    rs = an.Resampling(draws=100)
    return ds, rule, rs


def test_sensitivity_heatmap_hatches_the_cells_tied_with_the_best(data):
    import matplotlib.pyplot as plt

    ds, rule, rs = data
    s = an.sensitivity(ds, rule, rs)
    fig, axes = plt.subplots(1, s.sizes["panel"])
    fg.sensitivity_heatmap(list(axes), s, "evaluations to target")
    tied = (s["tied"] & ~s["best"]).sum(["decay", "quantile"]).values
    for ax, n in zip(axes, tied, strict=True):
        hatched = [p for p in ax.patches if p.get_hatch()]
        assert len(hatched) == n
        assert ax.get_xlabel() == "threshold quantile γ"
        assert [t.get_text() for t in ax.get_yticklabels()] == ["hyperbolic:2", "hyperbolic:8"]
    plt.close(fig)


def test_sensitivity_shows_the_quantiles_user_whatever_the_order_of_the_grids_strategies(data):
    # The default strategy comes from the registry (uses_quantile), not from a name: with
    # prior-weighted first in the grid, the grid still shows the pseudo-posterior's
    # decay × quantile (two quantile columns), not prior-weighted's single NaN column.
    ds, rule, rs = data
    swapped = ds.isel(strategy=slice(None, None, -1))
    assert str(swapped["strategy"].values[0]) == "prior-weighted"
    s = an.sensitivity(swapped, rule, rs)
    assert s.sizes["quantile"] == 2
    xr.testing.assert_identical(s, an.sensitivity(ds, rule, rs, "pseudo-posterior"))


def test_regret_curves_draw_one_log_panel_per_distortion(data):
    import matplotlib.pyplot as plt

    ds, _, rs = data
    bands = an.regret_bands(ds, ["no-belief", "random"], rs)
    fig, axes = plt.subplots(1, 2)
    fg.regret_curves(list(axes), bands, {"no-belief": "reference"}, target=0.05)
    for ax in axes:
        assert ax.get_yscale() == "log"
        styles = {line.get_linestyle() for line in ax.get_lines()[:2]}
        assert len(styles) == 2  # told apart without colour
    labels = [t.get_text() for t in fig.legends[0].get_texts()]
    assert labels == ["no-belief (reference)", "random"]
    plt.close(fig)


def test_robustness_frontier_labels_the_settings_no_other_beats(data):
    import matplotlib.pyplot as plt

    ds, rule, rs = data
    fr = an.frontier(ds, rule.metric, rs)
    fig, ax = plt.subplots()
    fg.robustness_frontier(ax, fr)
    # every point is labelled: black for those no other beats, grey for the beaten ones
    labels = {t.get_text(): t.get_color() for t in ax.texts}
    assert set(labels) == set(fr["setting"].values)
    for setting, on in zip(fr["setting"].values, fr["efficient"].values, strict=True):
        assert (labels[setting] == "black") == bool(on)
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "beaten on both axes by another setting (grey label)" in legend
    assert "exact" in ax.get_xlabel() and "worst distortion" in ax.get_ylabel()
    plt.close(fig)


def test_recommendation_json_round_trips(demo):
    rec = an.recommend(an.open_grid(demo[0]))
    out = json.loads(json.dumps(rec.to_dict()))
    assert out["setting"] == rec.setting and out["stability"] == rec.stability


def test_the_page_and_the_terminal_name_the_same_edge_of_the_study(demo, page):
    from html import escape

    printed = [
        line.strip().split("edge of the study: ", 1)[1]
        for line in demo[1].splitlines()
        if line.strip().startswith("edge of the study: ")
    ]
    for words in printed:
        assert escape(words) in page
    assert ("edge of the study" in page) == bool(printed)


def test_the_edge_rows_give_the_lines_to_put_in_the_study_file():
    from workbench.report.text import edge_rows

    studied = [
        {"strategy": "pseudo-posterior", "decay": f"hyperbolic:{b}", "quantile": 0.25}
        for b in (2, 6, 20)
    ]
    edges = an.study_edges(studied, studied[0])
    rows = dict(edge_rows(edges))
    assert "fastest decay studied" in rows["edge of the study"]
    assert rows["to study beyond it"] == (
        "in the study file's [strategy.pseudo-posterior] table, replace the decay line with: "
        'decay = ["hyperbolic:0.5", "hyperbolic:1", "hyperbolic:2", "hyperbolic:6"]'
    )
    assert edge_rows(()) == []
