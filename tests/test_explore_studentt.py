"""Multivariate t mixtures (sleepfuse/explore/studentt.py and the "t" family of mixtures.py),
checked against SciPy and scikit-learn."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from sklearn.metrics import adjusted_rand_score
from sklearn.mixture import GaussianMixture

from sleepfuse.explore import studentt
from sleepfuse.explore.mixtures import fit_mixture, fit_mixtures, n_free_parameters, preferred_fit


@pytest.mark.parametrize("nu", [1.5, 4.0, 30.0])
def test_log_density_matches_scipy_multivariate_t(nu):
    # Source: scipy.stats.multivariate_t.logpdf (loc, shape, df), the parametrisation of
    # Peel & McLachlan 2000, eq. 1.
    rng = np.random.default_rng(3)
    mu = np.array([0.1, 0.2, -0.3])
    sigma = np.array([[1.0, 0.3, 0.0], [0.3, 2.0, 0.5], [0.0, 0.5, 1.5]])
    y = rng.standard_normal((40, 3)) * 2.0
    ref = stats.multivariate_t(loc=mu, shape=sigma, df=nu).logpdf(y)
    np.testing.assert_allclose(studentt.logpdf(y, mu, sigma, nu), ref, rtol=1e-12, atol=1e-12)


def test_one_component_univariate_fit_is_scipys_t_mle():
    # Source: scipy.stats.t.fit (maximum likelihood for df, loc, scale). One t component in one
    # dimension is the same model; the ECM must reach the same maximum.
    x = stats.t.rvs(df=4, loc=2.0, scale=1.5, size=500, random_state=3)
    fit = fit_mixture(x[:, None], "t", 1, tol=1e-12, max_iter=20000)
    df, loc, scale = stats.t.fit(x)
    assert fit.ok and fit.converged
    assert fit.locations[0, 0] == pytest.approx(loc, rel=1e-4)
    assert np.sqrt(fit.scales[0, 0, 0]) == pytest.approx(scale, rel=1e-4)
    assert fit.dofs[0] == pytest.approx(df, rel=1e-3)
    assert fit.loglik == pytest.approx(float(np.sum(stats.t.logpdf(x, df, loc, scale))), abs=1e-6)


def test_on_gaussian_data_the_t_fit_approaches_sklearns_gaussian_mixture():
    # Source: sklearn.mixture.GaussianMixture log-likelihood. On normal data ν is large and the
    # t likelihood is the Gaussian one up to O(1/ν); it cannot be far below it (the t start next
    # to the Gaussian fit), and only a little above it (one extra parameter per component).
    rng = np.random.default_rng(5)
    x = np.vstack([rng.multivariate_normal([0, 0], [[1, 0.4], [0.4, 1]], 200),
                   rng.multivariate_normal([4, 1], [[0.7, 0], [0, 1.2]], 200)])
    gm = GaussianMixture(2, covariance_type="full", n_init=10, random_state=0, tol=1e-8).fit(x)
    fits = fit_mixtures(x, ("gaussian", "t"), kmax=2, starts=4, seed=0)
    t2 = next(f for f in fits if f.family == "t" and f.n_components == 2)
    assert t2.ok and t2.converged
    assert t2.dofs.min() > 20
    assert t2.loglik == pytest.approx(gm.score(x) * len(x), abs=2.0)
    gauss2 = next(f for f in fits if f.family == "gaussian" and f.n_components == 2)
    assert t2.bic > gauss2.bic          # the ν parameters buy nothing on normal data


def _two_t_groups(n=300, seed=7):
    rng = np.random.default_rng(seed)
    truth = (rng.random(n) < 0.6).astype(int)
    specs = [([0.0, 0.0], np.array([[1.0, 0.3], [0.3, 1.0]]), 3.0),
             ([6.0, 4.0], np.array([[1.0, -0.2], [-0.2, 0.6]]), 5.0)]
    x = np.empty((n, 2))
    for k, (mu, sigma, nu) in enumerate(specs):
        m = truth == k
        x[m] = stats.multivariate_t(loc=mu, shape=sigma, df=nu).rvs(size=int(m.sum()), random_state=seed + k)
    return x, truth


def test_two_t_groups_are_recovered():
    # Source: sklearn.metrics.adjusted_rand_score against the simulated groups; the heavy tails
    # make Gaussian mixtures add spurious components, the t mixture should not.
    x, truth = _two_t_groups()
    fits = fit_mixtures(x, ("t",), kmax=3, starts=4, seed=0)
    best = preferred_fit(fits)
    assert (best.family, best.n_components) == ("t", 2)
    labels = best.posterior(x).argmax(axis=1)
    assert adjusted_rand_score(truth, labels) >= 0.9
    assert 1.5 < best.dofs.min() and best.dofs.max() < 15      # heavy tails seen, not a Gaussian


def test_em_never_decreases_the_loglik_and_counts_nu():
    # Source: ECM monotonicity (Meng & Rubin 1993); BIC parameters per Peel & McLachlan 2000 (ν free).
    x, _ = _two_t_groups(n=200, seed=2)
    fit = fit_mixture(x, "t", 2, starts=3, seed=1)
    for trace in fit.start_traces:
        assert np.all(np.diff(trace) >= -1e-8 * np.abs(trace[1:]))
    assert n_free_parameters("t", 2, 2) == n_free_parameters("gaussian", 2, 2) + 2
    assert fit.n_params == 13


def test_nu_stays_within_its_bounds():
    # Uniform data are lighter-tailed than normal: the ECM root lies beyond the upper bound.
    x = np.random.default_rng(0).uniform(size=(300, 1))
    fit = fit_mixture(x, "t", 1)
    assert fit.dofs[0] == pytest.approx(studentt.NU_RANGE[1])
    # Cauchy data: heavy tails, ν near 1 but never below the lower bound.
    y = stats.cauchy.rvs(size=400, random_state=1)[:, None]
    fit = fit_mixture(y, "t", 1, tol=1e-10)
    assert studentt.NU_RANGE[0] <= fit.dofs[0] < 2.0
    assert ("lower bound" in fit.message) == (fit.dofs[0] <= studentt.NU_RANGE[0] * (1 + 1e-9))
    # a handful of wild outliers in a small sample drive ν to the bound, and the message says so
    z = np.r_[np.random.default_rng(4).standard_normal(40) * 0.01, [-50.0, 40.0, 80.0, -90.0, 120.0, -150.0]]
    fit = fit_mixture(z[:, None], "t", 1)
    assert fit.dofs[0] == pytest.approx(studentt.NU_RANGE[0]) and "lower bound 1" in fit.message
