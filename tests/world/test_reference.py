"""The belief reference: levels, masses and volumes of highest-density regions against the
chi-square and Beta laws (scipy.stats as reference library)."""

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from workbench.world import beliefs as bl
from workbench.world.reference import REFERENCE_DRAWS, Belief, BeliefReference, volume_fraction
from workbench.world.space import Space

# Dvoretzky–Kiefer–Wolfowitz inequality with Massart's constant (textbook): the empirical cdf of
# N draws is within ε = sqrt(ln(2/α) / (2N)) of the true cdf everywhere with probability 1 − α.
# A level is 1 − the empirical cdf of log p(Z) at log p(u), so every level of one reference is
# within this of the true one; α = 0.001 and N = 4096 give ε = 0.0305.
DKW = float(np.sqrt(np.log(2 / 1e-3) / (2 * REFERENCE_DRAWS)))


def test_the_level_of_a_gaussian_belief_is_the_chi_square_cdf_of_its_squared_distance():
    # sd 0.05 around the centre: the cube's faces are 10 sd away, so the truncated mass is
    # about 6 · Φ(−10) ≈ 1e-22, nil.
    centre, sd, d = np.array([0.5, 0.5, 0.5]), 0.05, 3
    ref = BeliefReference.of(bl.gaussian_at(centre, sd))
    rng = np.random.default_rng(3)
    U = centre + sd * rng.normal(size=(300, d)) * rng.uniform(0.2, 1.6, size=(300, 1))
    m2 = np.sum(((U - centre) / sd) ** 2, axis=1)
    # Reference: for a normal in d dimensions the squared Mahalanobis distance is chi-square
    # with d degrees of freedom, so the mass denser than u is chi2.cdf(m², d) (textbook;
    # scipy.stats.chi2).
    expected = stats.chi2.cdf(m2, df=d)
    assert np.max(np.abs(ref.level(U) - expected)) <= DKW
    # The check has power: the same points read with the wrong degrees of freedom miss.
    assert np.max(np.abs(ref.level(U) - stats.chi2.cdf(m2, df=d - 1))) > DKW
    # The mode is the densest point; the sample's sd is the belief's (relative standard error
    # of a sample sd is 1/sqrt(2N) = 0.011; 0.05 allows 4.5 of them).
    assert ref.level(centre[None])[0] == 0.0
    np.testing.assert_allclose(ref.sd, sd, rtol=0.05)
    # Mass within r of the mode: chi2.cdf(r²/sd², d) by the same law; a binomial share of N
    # draws has sd at most 0.5/sqrt(N) = 0.0078, 4.5 of them allowed.
    for r in (0.05, 0.1):
        expected_mass = stats.chi2.cdf((r / sd) ** 2, df=d)
        assert ref.mass_within(centre, r) == pytest.approx(expected_mass, abs=0.035)


def test_the_level_of_a_symmetric_beta_belief_is_the_mass_of_the_central_interval():
    # A symmetric unimodal density on [0, 1]: the region denser than u is the interval
    # (1 − v, v) with v = max(u, 1 − u), so level(u) = cdf(v) − cdf(1 − v) (scipy.stats.beta).
    a = 3.0
    ref = BeliefReference.of(bl.Product((bl.Beta(a, a),)))
    u = np.linspace(0.01, 0.99, 99)
    v = np.maximum(u, 1 - u)
    expected = stats.beta.cdf(v, a, a) - stats.beta.cdf(1 - v, a, a)
    assert np.max(np.abs(ref.level(u[:, None]) - expected)) <= DKW


def test_volume_holding_ninety_percent_matches_the_chi_square_disc():
    # An isotropic bivariate normal's 90 % highest-density region is a disc of radius² =
    # χ²₂(0.9)·σ² (textbook: the Mahalanobis distance is chi-square with 2 degrees of freedom).
    sd = 0.05
    area = np.pi * stats.chi2.ppf(0.9, 2) * sd**2
    assert volume_fraction(bl.gaussian_at([0.5, 0.5], sd), draws=100_000) == pytest.approx(
        area, rel=0.05
    )


@settings(max_examples=25, deadline=None)
@given(
    st.lists(st.floats(0.0, 1.0), min_size=2, max_size=2),
    st.floats(0.03, 0.6),
    st.integers(0, 2**32 - 1),
)
def test_levels_fall_as_density_rises_and_a_belief_always_gives_the_same_reference(
    centre, spread, seed
):
    belief = bl.gaussian_at(centre, spread)
    ref = BeliefReference.of(belief)
    U = np.random.default_rng(seed).random((40, 2))
    level = ref.level(U)
    assert np.all((level >= 0) & (level <= 1))
    # A denser point never has a higher level.
    order = np.argsort(-belief.logpdf(U), kind="stable")
    assert np.all(np.diff(level[order]) >= 0)
    again = BeliefReference.of(bl.gaussian_at(centre, spread))
    np.testing.assert_array_equal(again.level(U), level)
    assert BeliefReference.of(ref) is ref


def test_joint_beliefs_keep_the_contract_and_only_inverse_cdf_ones_split_their_sampling():
    gaussian = bl.gaussian_at([0.3, 0.7], 0.1)
    mixture = bl.from_points(np.array([[0.2, 0.2], [0.8, 0.6], [0.5, 0.5]]), Space.unit_cube(2))
    beta = bl.Product((bl.Beta(2.0, 3.0), bl.TruncatedGaussian(0.5, 0.2)))
    for belief in (gaussian, mixture, beta):
        assert isinstance(belief, Belief)
        assert belief.sample(5, np.random.default_rng(0)).shape == (5, belief.dim)
    assert gaussian.by_inverse_cdf and not mixture.by_inverse_cdf and not beta.by_inverse_cdf
    # The pair reproduces sample() from the same stream, draw for draw.
    np.testing.assert_array_equal(
        gaussian.from_uniforms(gaussian.uniforms(7, np.random.default_rng(4))),
        gaussian.sample(7, np.random.default_rng(4)),
    )
