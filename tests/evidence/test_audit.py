"""The audit: an exact belief passes, a belief on the worst point fails, and its measures agree
with their definitions."""

import textwrap

import numpy as np
import pytest
import scipy.stats
from scipy.stats import qmc

from workbench.cli import main
from workbench.evidence.audit import CONSISTENT_AT, audit
from workbench.world import landscapes as ls
from workbench.world.beliefs import gaussian_at, highest_density_level
from workbench.world.history import History


def _history(placement, n: int = 64, seed: int = 3) -> History:
    X = qmc.Sobol(placement.dim, scramble=True, seed=seed).random(n)
    return History(X=X, y=placement.value(X), response="f", goal="minimise", path="t", digest="")


@pytest.fixture(scope="module")
def branin():
    # Branin (Dixon & Szegő 1978) placed with its first published minimiser at (0.6, 0.4).
    return ls.get("branin").placed(at=(0.6, 0.4))


def test_an_exact_belief_is_consistent_and_one_on_the_worst_point_contradicted(branin):
    history = _history(branin)
    exact = gaussian_at(np.array([0.6, 0.4]), 0.12)
    worst = gaussian_at(branin.worst()[0], 0.08)
    rng = np.random.default_rng(0)
    good = audit(history, exact, top=0.25, radius=0.1, rng=rng, draws=24)
    bad = audit(history, worst, top=0.25, radius=0.1, rng=rng, draws=24)
    assert good.verdict == "consistent" and good.inside_90 >= CONSISTENT_AT
    assert bad.verdict == "contradicted"
    assert good.distance < bad.distance and good.mass_within > bad.mass_within
    # Branin has three minimisers; the exact belief sits on one of them.
    assert good.good_median_level < bad.good_median_level


def test_the_highest_density_level_of_a_gaussian_is_the_chi_square_cdf_of_its_distance():
    # For an (effectively untruncated) Gaussian the highest-density region holding mass q is an
    # ellipsoid: level(u) = chi2.cdf(Mahalanobis(u)², d) (textbook; scipy.stats as reference).
    sd = 0.04
    belief = gaussian_at(np.array([0.5, 0.5]), sd)
    U = 0.5 + sd * np.array([[0.0, 0.3], [1.0, 0.5], [1.5, -1.2], [2.5, 0.0], [0.2, -3.0]])
    r2 = (((U - 0.5) / sd) ** 2).sum(axis=1)
    expected = scipy.stats.chi2.cdf(r2, df=2)
    # Monte-Carlo standard error of a share from 20000 draws is at most 0.0035.
    np.testing.assert_allclose(highest_density_level(belief, U), expected, atol=0.015)


def test_the_level_is_the_share_of_belief_draws_denser_than_the_point():
    # The definition, checked with an independent sample of the belief.
    belief = gaussian_at(np.array([0.3, 0.7]), 0.2)
    rng = np.random.default_rng(11)
    U = rng.random((6, 2))
    Z = belief.sample(40000, rng)
    direct = (belief.logpdf(Z)[None, :] > belief.logpdf(U)[:, None]).mean(axis=1)
    np.testing.assert_allclose(highest_density_level(belief, U), direct, atol=0.015)


def test_probabilities_lie_in_the_unit_interval_and_grow_with_the_region(branin):
    belief = gaussian_at(np.array([0.5, 0.5]), 0.2)
    a = audit(_history(branin), belief, top=0.2, radius=0.1, rng=np.random.default_rng(1), draws=16)
    sizes = np.linspace(0, 1, 21)
    inside = [float(np.mean(a.argmin_levels <= s)) for s in sizes]
    assert all(0 <= p <= 1 for p in inside) and np.all(np.diff(inside) >= 0)
    assert 0 <= a.inside_50 <= a.inside_90 <= 1
    assert np.all((a.good_levels >= 0) & (a.good_levels <= 1))


STUDY = """
title = "audit"
budget = 6
replicates = 2
seed = {seed}
[space.x1]
lower = 0
upper = 1
[space.x2]
lower = 0
upper = 1
[belief.x1]
centre = 0.5
spread = 0.2
[belief.x2]
centre = 0.5
spread = 0.2
[[landscape]]
name = "branin"
[strategy.prior-weighted]
decay = ["hyperbolic:4"]
"""


def _files(tmp_path, seed=1):
    study = tmp_path / f"s{seed}.toml"
    study.write_text(textwrap.dedent(STUDY.format(seed=seed)))
    rng = np.random.default_rng(0)
    X = rng.random((12, 2))
    y = (X - 0.4) ** 2 @ np.ones(2)
    rows = "\n".join(f"{a:.4f},{b:.4f},{v:.5f}" for (a, b), v in zip(X, y, strict=True))
    (tmp_path / "h.csv").write_text("x1,x2,f\n" + rows + "\n")
    return study


def _audit(tmp_path, study, *extra):
    data = ["--data", str(tmp_path / "h.csv"), "--response", "f"]
    return main(["audit", str(study), *data, *extra, "--out", str(tmp_path / "audit")])


def test_audit_writes_its_pages_and_prints_the_verdict(tmp_path, capsys):
    study = _files(tmp_path)
    code = _audit(tmp_path, study)
    out = capsys.readouterr().out
    assert code == 0 and "verdict:" in out and "safety limits" in out
    # The study reads no earlier evaluations: the table scores its landscapes on the audited.
    heading = "How well each landscape explains the earlier evaluations (12 evaluations in h.csv)"
    assert heading in out
    (branin,) = [line.split() for line in out.splitlines() if line.strip().startswith("branin")]
    assert branin[1] == "textbook" and -1.0 <= float(branin[2]) <= 1.0
    page = (tmp_path / "audit" / "audit.html").read_text()
    assert "Cautions" in page and "http" not in page.replace("http-equiv", "")
    assert (tmp_path / "audit" / "audit.md").exists()


def test_a_grid_of_another_study_is_refused(tmp_path, capsys):
    study, other = _files(tmp_path, 1), _files(tmp_path, 2)
    assert main(["run", str(other), "--out", str(tmp_path / "g"), "--quiet", "--jobs", "1"]) == 0
    capsys.readouterr()
    code = _audit(tmp_path, study, "--grid", str(tmp_path / "g"))
    err = capsys.readouterr().err.strip()
    assert code == 2 and len(err.splitlines()) == 1 and "'--grid'" in err
    assert not (tmp_path / "audit").exists()
