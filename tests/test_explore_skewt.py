"""Restricted multivariate skew-t mixtures (sleepfuse/explore/skewt.py, family "skewt"), checked against SciPy:
the density against scipy.stats.multivariate_t and numerical integration, the E-step moments against
two-dimensional quadrature of the stochastic representation, and a one-component fit against the
maximum found by a general-purpose optimiser (scipy.optimize)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, optimize, stats
from sklearn.metrics import adjusted_rand_score

from sleepfuse.explore import skewnormal as sn
from sleepfuse.explore import skewt as st
from sleepfuse.explore.mixtures import fit_mixture, fit_mixtures, n_free_parameters, preferred_fit


def test_without_skewness_it_is_scipys_multivariate_t():
    # Source: scipy.stats.multivariate_t.logpdf (Δ = 0: 2·t·T(0) = t).
    y = np.random.default_rng(0).standard_normal((30, 2)) * 2
    sigma = np.array([[1.0, 0.3], [0.3, 2.0]])
    ref = stats.multivariate_t([0.1, 0.0], sigma, df=5.0).logpdf(y)
    np.testing.assert_allclose(st.logpdf(y, [0.1, 0.0], sigma, [0.0, 0.0], 5.0), ref, rtol=1e-12)


def test_density_integrates_to_one_and_tends_to_the_skew_normal():
    # Source: scipy.integrate.quad; for ν → ∞ the skew-t is the skew-normal (Azzalini & Capitanio 2003),
    # whose density is checked against scipy.stats.skewnorm in test_explore_skewnormal.py.
    total, _ = integrate.quad(lambda v: np.exp(st.logpdf(np.array([[v]]), [0.5], [[1.3]], [1.2], 4.0))[0],
                              -np.inf, np.inf)
    assert total == pytest.approx(1.0, abs=1e-8)
    y = np.linspace(-3, 5, 41)[:, None]
    sigma = 1.3 + 1.2 ** 2
    ref = sn.logpdf(y, [0.5], [[sigma]], [1.2 / np.sqrt(1.3)])
    np.testing.assert_allclose(st.logpdf(y, [0.5], [[1.3]], [1.2], 1e7), ref, atol=1e-5)


@pytest.mark.parametrize("y", [-1.0, 0.7, 3.0])
def test_e_step_moments_match_quadrature_of_the_representation(y):
    # Source: the representation Y = ξ + ΔU + E, W ~ Gamma(ν/2, ν/2), U | W ~ |N(0, 1/W)|,
    # E | W ~ N(0, Γ/W), its joint density written out and integrated by scipy.integrate.dblquad.
    xi, gamma, delta, nu = 0.5, 1.3, 1.2, 4.0

    log_gamma_const = (nu / 2) * math.log(nu / 2) - math.lgamma(nu / 2)

    def joint(u, w):    # Gamma(ν/2, rate ν/2) · half-normal(1/w) · normal(ξ + Δu, Γ/w), written out
        return math.exp(log_gamma_const + (nu / 2 - 1) * math.log(w) - nu * w / 2
                        + math.log(2) + 0.5 * math.log(w / (2 * math.pi)) - w * u * u / 2
                        + 0.5 * math.log(w / (2 * math.pi * gamma)) - w * (y - xi - delta * u) ** 2 / (2 * gamma))

    def moment(g):
        return integrate.dblquad(lambda u, w: g(u, w) * joint(u, w), 0, np.inf, 0, np.inf)[0]

    z = moment(lambda u, w: 1.0)
    logf, e0, e1, e2 = st.terms(np.array([[y]]), np.array([[xi]]), np.array([[[gamma]]]), np.array([[delta]]),
                                np.array([nu]))
    assert logf[0, 0] == pytest.approx(np.log(z), abs=1e-7)
    assert e0[0, 0] == pytest.approx(moment(lambda u, w: w) / z, rel=1e-6)
    assert e1[0, 0] == pytest.approx(moment(lambda u, w: w * u) / z, rel=1e-6)
    assert e2[0, 0] == pytest.approx(moment(lambda u, w: w * u * u) / z, rel=1e-6)


def test_one_component_fit_reaches_the_numerical_maximum_likelihood():
    # Source: the maximum of the same log-likelihood found by scipy.optimize.minimize (Nelder-Mead) from
    # several starts; the ECM/ECME must reach it.
    x = st.sample(400, [1.0], [[1.0]], [2.0], 5.0, np.random.default_rng(3))
    fit = fit_mixture(x, "skewt", 1, tol=1e-10)
    assert fit.ok and fit.converged

    def negll(th):
        return -float(np.sum(st.logpdf(x, [th[0]], [[np.exp(th[1])]], [th[2]], np.exp(th[3]))))

    best = min((optimize.minimize(negll, th0, method="Nelder-Mead",
                                  options=dict(xatol=1e-9, fatol=1e-11, maxiter=20000, maxfev=40000))
                for th0 in ([1.0, 0.0, 2.0, np.log(5.0)], [0.0, 0.0, 0.5, np.log(20.0)])), key=lambda r: r.fun)
    assert fit.loglik == pytest.approx(-best.fun, abs=1e-5)
    assert fit.locations[0, 0] == pytest.approx(best.x[0], rel=2e-3)
    assert fit.gammas[0, 0, 0] == pytest.approx(np.exp(best.x[1]), rel=2e-3)
    assert fit.deltas[0, 0] == pytest.approx(best.x[2], rel=2e-3)
    assert fit.dofs[0] == pytest.approx(np.exp(best.x[3]), rel=5e-3)
    assert np.all(np.diff(fit.loglik_trace) >= -1e-8 * np.abs(fit.loglik_trace[1:]))   # ECM/ECME never decreases


def test_two_skewed_heavy_tailed_groups_are_recovered():
    # Source: sklearn.metrics.adjusted_rand_score against the simulated groups.
    rng = np.random.default_rng(11)
    truth = (rng.random(150) < 0.6).astype(int)
    x = np.empty((150, 2))
    x[truth == 0] = st.sample(int((truth == 0).sum()), [0, 0], [[1, 0.3], [0.3, 1]], [2.5, 1.0], 5.0, rng)
    x[truth == 1] = st.sample(int((truth == 1).sum()), [9, 7], [[1, -0.2], [-0.2, 0.6]], [-2.0, 0.5], 6.0, rng)
    fits = fit_mixtures(x, ("skewt",), kmax=2, starts=1, seed=0)
    best = preferred_fit(fits)
    assert (best.family, best.n_components) == ("skewt", 2)
    for trace in best.start_traces:                       # ECM/ECME never decreases the likelihood
        assert np.all(np.diff(trace) >= -1e-8 * np.abs(trace[1:]))
    assert adjusted_rand_score(truth, best.posterior(x).argmax(axis=1)) >= 0.9
    assert n_free_parameters("skewt", 2, 2) == n_free_parameters("skewnormal", 2, 2) + 2 == best.n_params


def test_component_mean_matches_simulation():
    # Source: the sample mean of 200,000 draws from the representation (Monte Carlo, 5 standard errors).
    from sleepfuse.explore.mixtures import MixtureFit

    rng = np.random.default_rng(5)
    draws = st.sample(200_000, [0.5, -1.0], [[1.0, 0.2], [0.2, 0.8]], [1.5, -0.7], 6.0, rng)
    fit = MixtureFit("skewt", 1, 1, 2, weights=np.ones(1), locations=np.array([[0.5, -1.0]]),
                     scales=np.array([[[1.0 + 2.25, 0.2 - 1.05], [0.2 - 1.05, 0.8 + 0.49]]]),
                     deltas=np.array([[1.5, -0.7]]), dofs=np.array([6.0]))
    se = draws.std(axis=0) / np.sqrt(len(draws))
    assert np.all(np.abs(fit.means[0] - draws.mean(axis=0)) < 5 * se)
