"""Multivariate skew-normal density and sampling (sleepfuse/explore/skewnormal.py)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from sleepfuse.explore import skewnormal as sn


@pytest.mark.parametrize("alpha, xi, omega", [(0.0, 0.0, 1.0), (3.0, 0.5, 2.0), (-4.5, 10.0, 7.5), (12.0, -2.0, 0.3)])
def test_univariate_density_matches_scipy_skewnorm(alpha, xi, omega):
    # Source: scipy.stats.skewnorm (Azzalini 1985 parametrisation: shape a = α, loc = ξ, scale = ω).
    y = np.linspace(xi - 4 * omega, xi + 4 * omega, 41)
    ours = sn.logpdf(y[:, None], [xi], [[omega**2]], [alpha])
    ref = stats.skewnorm.logpdf(y, alpha, loc=xi, scale=omega)
    np.testing.assert_allclose(ours, ref, rtol=1e-10, atol=1e-10)


def test_zero_shape_is_the_multivariate_normal():
    # Source: scipy.stats.multivariate_normal; with λ = 0 the skew-normal is N_d(ξ, Σ)
    # (Azzalini & Dalla Valle 1996, Biometrika 83:715-726).
    rng = np.random.default_rng(0)
    xi = np.array([1.0, -2.0, 0.5])
    a = rng.standard_normal((3, 3))
    sigma = a @ a.T + 0.5 * np.eye(3)
    y = rng.standard_normal((25, 3))
    np.testing.assert_allclose(sn.logpdf(y, xi, sigma, np.zeros(3)),
                               stats.multivariate_normal(xi, sigma).logpdf(y), rtol=1e-10)


def test_bivariate_density_integrates_to_one():
    # Source: a density integrates to 1 (numerical quadrature on a fine grid; common practice).
    sigma = np.array([[1.0, 0.4], [0.4, 0.8]])
    g = np.linspace(-7, 9, 401)
    mx, my = np.meshgrid(g, g)
    dens = sn.pdf(np.column_stack([mx.ravel(), my.ravel()]), [0.0, 0.5], sigma, [4.0, -2.0])
    assert dens.sum() * (g[1] - g[0]) ** 2 == pytest.approx(1.0, abs=1e-4)


def test_marginal_of_bivariate_is_univariate_skewnormal():
    # Source: Azzalini & Dalla Valle 1996 (marginals of a skew-normal are skew-normal); in the
    # (ξ, Σ, Δ) form the marginal keeps ξ_1, Σ_11, Δ_1, whose shape is δ/√(1−δ²), δ = Δ_1/√Σ_11.
    sigma = np.array([[2.0, 0.6], [0.6, 1.0]])
    shape = np.array([3.0, -1.0])
    delta = sn.delta_from_shape(sigma, shape)
    d1 = delta[0] / np.sqrt(sigma[0, 0])
    alpha1 = d1 / np.sqrt(1 - d1**2)
    g = np.linspace(-6, 8, 1401)
    y = np.linspace(-2, 4, 7)
    joint = sn.pdf(np.column_stack([np.repeat(y, g.size), np.tile(g, y.size)]), [0.0, 0.0], sigma, shape)
    marginal = joint.reshape(y.size, g.size).sum(axis=1) * (g[1] - g[0])
    np.testing.assert_allclose(marginal, stats.skewnorm.pdf(y, alpha1, scale=np.sqrt(sigma[0, 0])), rtol=1e-4)


def test_shape_delta_round_trip():
    # Source: Lin 2009 (J Multivariate Anal 100:257-265), δ = λ/√(1+λᵀλ), Δ = Σ^{1/2}δ and back.
    sigma = np.array([[1.5, -0.3, 0.2], [-0.3, 1.0, 0.1], [0.2, 0.1, 0.7]])
    shape = np.array([2.0, -5.0, 0.5])
    np.testing.assert_allclose(sn.shape_from_delta(sigma, sn.delta_from_shape(sigma, shape)), shape, rtol=1e-10)


def test_sampling_by_stochastic_representation_matches_the_density():
    # Source: scipy.stats.kstest against scipy.stats.skewnorm; Y = ξ + Δ|T0| + T1 (Lin 2009, eq. 3).
    rng = np.random.default_rng(42)
    draws = sn.sample(4000, [1.0], [[4.0]], [5.0], rng)[:, 0]
    assert stats.kstest(draws, stats.skewnorm(5.0, loc=1.0, scale=2.0).cdf).pvalue > 0.01


def test_sample_moments_match_theory():
    # Source: E[Y] = ξ + √(2/π)Δ, Cov[Y] = Σ − (2/π)ΔΔᵀ (Azzalini & Capitanio 1999, JRSS B 61:579-602).
    rng = np.random.default_rng(3)
    xi, sigma, shape = np.array([0.0, 2.0]), np.array([[1.0, 0.5], [0.5, 2.0]]), np.array([4.0, 1.0])
    draws = sn.sample(60000, xi, sigma, shape, rng)
    mean, cov = sn.mean_and_cov(xi, sigma, sn.delta_from_shape(sigma, shape))
    np.testing.assert_allclose(draws.mean(axis=0), mean, atol=0.02)
    np.testing.assert_allclose(np.cov(draws, rowvar=False), cov, atol=0.03)


def test_delta_from_skewness_inverts_the_moment_relation():
    # Source: skewness of scipy.stats.skewnorm(a) (Azzalini 1985 moment formula).
    for alpha in (-6.0, -1.0, 0.5, 3.0):
        dist = stats.skewnorm(alpha, scale=2.0)
        g = float(dist.stats(moments="s"))
        delta = sn.delta_from_skewness(np.array([g]), np.array([dist.std()]))[0]
        d = alpha / np.sqrt(1 + alpha**2)
        assert delta == pytest.approx(2.0 * d, rel=1e-6)


def test_non_positive_definite_scale_is_refused():
    with pytest.raises(ValueError):
        sn.delta_from_shape(np.array([[1.0, 2.0], [2.0, 1.0]]), np.array([1.0, 0.0]))
