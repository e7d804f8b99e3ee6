"""EM for Gaussian and skew-normal mixtures (sleepfuse/explore/mixtures.py)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import solve_triangular
from sklearn.mixture import GaussianMixture

from sleepfuse.explore import skewnormal as sn
from sleepfuse.explore.mixtures import MixtureFit, bic, fit_mixture, fit_mixtures, n_free_parameters


def _two_gaussian_clouds(n=240, seed=5):
    rng = np.random.default_rng(seed)
    a = rng.multivariate_normal([0.0, 0.0], [[1.0, 0.5], [0.5, 1.0]], size=n // 2)
    b = rng.multivariate_normal([3.5, -1.0], [[0.6, -0.2], [-0.2, 0.9]], size=n - n // 2)
    return np.vstack([a, b])


def _gaussian_fit_from(weights, means, covs, n):
    k, d = means.shape
    return MixtureFit("gaussian", k, n, d, weights=weights, locations=means, scales=covs,
                      deltas=np.zeros((k, d)), loglik=0.0)


def _sklearn_with(weights, means, covs):
    """A fitted-looking GaussianMixture carrying given parameters (precisions_cholesky_ as sklearn defines it)."""
    gm = GaussianMixture(n_components=len(weights), covariance_type="full")
    gm.weights_, gm.means_, gm.covariances_ = weights, means, covs
    gm.precisions_cholesky_ = np.array(
        [solve_triangular(np.linalg.cholesky(c), np.eye(c.shape[0]), lower=True).T for c in covs])
    gm.precisions_ = np.array([np.linalg.inv(c) for c in covs])
    return gm


def test_gaussian_loglik_matches_sklearn_on_sklearn_parameters():
    # Source: scikit-learn GaussianMixture.score (mean log-likelihood per sample) on its own fit.
    x = _two_gaussian_clouds()
    gm = GaussianMixture(n_components=2, covariance_type="full", random_state=0).fit(x)
    ours = _gaussian_fit_from(gm.weights_, gm.means_, gm.covariances_, len(x))
    assert ours.log_likelihood(x) == pytest.approx(gm.score(x) * len(x), rel=1e-10)


def test_gaussian_em_reaches_sklearns_maximum_and_same_bic():
    # Source: scikit-learn GaussianMixture (EM, full covariance) and its bic(); same data, same
    # parameters must give the same log-likelihood and the same BIC (same free-parameter count).
    x = _two_gaussian_clouds()
    fit = fit_mixture(x, "gaussian", 2, starts=3, seed=1)
    gm = GaussianMixture(n_components=2, covariance_type="full", random_state=0, tol=1e-8,
                         reg_covar=0.0, max_iter=1000).fit(x)
    assert fit.loglik == pytest.approx(gm.score(x) * len(x), abs=1e-3)
    carried = _sklearn_with(fit.weights, fit.locations, fit.scales)
    assert carried.score(x) * len(x) == pytest.approx(fit.loglik, rel=1e-10)
    assert carried.bic(x) == pytest.approx(fit.bic, rel=1e-10)


def test_free_parameter_counts_and_bic_formula():
    # Source: the counts (K−1 + K·d + K·d(d+1)/2, + K·d shapes) and Schwarz 1978.
    assert n_free_parameters("gaussian", 1, 1) == 2
    assert n_free_parameters("gaussian", 2, 2) == 11
    assert n_free_parameters("skewnormal", 2, 2) == 15
    assert n_free_parameters("skewnormal", 3, 4) == 2 + 12 + 30 + 12
    assert bic(-100.0, 5, 50) == pytest.approx(200.0 + 5 * np.log(50))


def _check_monotone(traces):
    assert traces, "no EM trace was recorded"
    for trace in traces:
        steps = np.diff(trace)
        # Source: EM/ECM never decreases the likelihood (Dempster, Laird & Rubin 1977;
        # Meng & Rubin 1993, Biometrika 80:267-278); tolerance for rounding only.
        assert np.all(steps >= -1e-8 * np.abs(trace[1:])), f"loglik decreased by {steps.min():.3g}"


@pytest.mark.parametrize("family", ["gaussian", "skewnormal"])
def test_em_never_decreases_the_loglik(family):
    rng = np.random.default_rng(21)
    x = np.vstack([sn.sample(90, [0.0, 0.0], np.eye(2), [3.0, 1.0], rng),
                   sn.sample(60, [3.0, 2.0], [[1.0, 0.3], [0.3, 1.0]], [-2.0, 0.0], rng)])
    for k in (1, 2, 3):
        fit = fit_mixture(x, family, k, starts=4, seed=2, max_iter=300)
        assert fit.ok and not fit.floored
        _check_monotone(fit.start_traces)
        assert len(fit.loglik_trace) > 1


def _two_component_skewnormal(n, seed):
    """Data from a known 2-component bivariate skew-normal mixture, drawn by the stochastic representation."""
    truth = [(0.6, [0.0, 0.0], [[1.0, 0.3], [0.3, 1.0]], [4.0, 2.0]),
             (0.4, [5.0, 4.0], [[1.0, -0.2], [-0.2, 0.6]], [-3.0, 1.0])]
    rng = np.random.default_rng(seed)
    first = rng.random(n) < truth[0][0]
    x = np.empty((n, 2))
    x[first] = sn.sample(int(first.sum()), *truth[0][1:], rng)
    x[~first] = sn.sample(int((~first).sum()), *truth[1][1:], rng)
    return x, truth


def test_parameter_recovery_two_component_bivariate_skewnormal():
    # Source: simulation from the stochastic representation (Lin 2009, eq. 3); tolerances about
    # three standard errors at n = 300 (from repeated simulation, common practice).
    x, truth = _two_component_skewnormal(300, seed=8)
    fits = fit_mixtures(x, kmax=3, starts=3, seed=0)
    best = min((f for f in fits if f.ok), key=lambda f: f.bic)
    assert (best.family, best.n_components) == ("skewnormal", 2)
    for k, (weight, xi, sigma, shape) in enumerate(truth):
        sigma = np.array(sigma)
        delta = sn.delta_from_shape(sigma, shape)
        mean, _ = sn.mean_and_cov(np.array(xi), sigma, delta)
        assert best.weights[k] == pytest.approx(weight, abs=0.05)
        np.testing.assert_allclose(best.means[k], mean, atol=0.2)
        np.testing.assert_allclose(best.locations[k], xi, atol=0.3)
        np.testing.assert_allclose(best.scales[k], sigma, atol=0.3)
        np.testing.assert_allclose(best.deltas[k], delta, atol=0.35)


def test_one_skewed_component_prefers_single_skewnormal_over_gaussian_mixtures():
    # Source: the motivating case (Gaussian mixtures split one skewed cloud); BIC as in
    # Schwarz 1978. Data: one bivariate skew-normal, strongly right-skewed in both variables.
    rng = np.random.default_rng(4)
    x = sn.sample(300, [0.0, 0.0], [[1.0, 0.4], [0.4, 1.0]], [6.0, 6.0], rng)
    fits = fit_mixtures(x, kmax=3, starts=3, seed=0)
    by = {(f.family, f.n_components): f.bic for f in fits}
    best_gaussian = min(by[("gaussian", k)] for k in (1, 2, 3))
    best_gaussian_split = min(by[("gaussian", k)] for k in (2, 3))
    assert by[("skewnormal", 1)] < best_gaussian
    assert by[("gaussian", 2)] < by[("gaussian", 1)]       # the spurious split the issue warns about
    assert by[("skewnormal", 1)] < best_gaussian_split
    assert min(by, key=by.get) == ("skewnormal", 1)


def test_same_seed_same_result():
    # Source: determinism requirement of the issue (common practice).
    x = _two_gaussian_clouds(n=120, seed=9)
    a = fit_mixture(x, "skewnormal", 2, starts=3, seed=11)
    b = fit_mixture(x, "skewnormal", 2, starts=3, seed=11)
    assert a.loglik == b.loglik
    np.testing.assert_array_equal(a.locations, b.locations)
    np.testing.assert_array_equal(a.scales, b.scales)
    np.testing.assert_array_equal(a.loglik_trace, b.loglik_trace)


def test_too_few_participants_is_a_clear_failure_not_a_crash():
    x = np.random.default_rng(0).standard_normal((12, 2))
    fit = fit_mixture(x, "gaussian", 3, starts=2)
    assert not fit.ok
    assert np.isnan(fit.bic)
    assert "too few participants" in fit.message


def test_collapsing_components_are_skipped_with_a_reason():
    # Mostly one tight cloud plus a handful of outliers: K = 4 cannot keep 4 components of >= 5 members.
    rng = np.random.default_rng(1)
    x = np.vstack([rng.standard_normal((30, 2)), rng.standard_normal((3, 2)) + 8.0])
    fit = fit_mixture(x, "gaussian", 4, starts=4, seed=0)
    assert fit.n_starts_failed > 0
    assert "start" in fit.message


def test_covariance_floor_keeps_collinear_data_finite():
    # Two perfectly collinear columns: the covariance is singular without the floor.
    t = np.random.default_rng(2).standard_normal(80)
    x = np.column_stack([t, 2.0 * t])
    fit = fit_mixture(x, "gaussian", 1)
    assert fit.ok and fit.floored
    assert np.isfinite(fit.loglik)
    assert np.linalg.eigvalsh(fit.scales[0])[0] >= 1e-6 * (1 - 1e-9)
    assert "floor" in fit.message


def test_posterior_rows_sum_to_one():
    x = _two_gaussian_clouds(n=100)
    fit = fit_mixture(x, "skewnormal", 2, starts=2)
    post = fit.posterior(x)
    np.testing.assert_allclose(post.sum(axis=1), 1.0)
    assert post.shape == (100, 2)


def _sklearn_matrices():
    from sleepfuse.explore.simulate import hidden_subgroup_cohort, skewed_one_cluster_matrix

    for frame in (skewed_one_cluster_matrix().iloc[:, 1:4], hidden_subgroup_cohort()[0].iloc[:, 1:7]):
        x = frame.dropna().to_numpy(float)
        yield (x - x.mean(0)) / x.std(0, ddof=1)


@pytest.mark.parametrize("which", [0, 1])
def test_gaussian_optimum_is_at_least_sklearns_with_ten_inits(which):
    # Source: sklearn.mixture.GaussianMixture (full covariance, n_init=10, k-means init). Our EM
    # (default starts) must reach a log-likelihood at least as high at every K, up to the two
    # stopping tolerances (1e-5 relative). A K whose sklearn optimum has a component of at most
    # our minimum size (max(d + 1, 5) expected members, a near-singular covariance) is left out:
    # our guard forbids it by design.
    from sklearn.mixture import GaussianMixture

    z = list(_sklearn_matrices())[which]
    n, d = z.shape
    compared = 0
    for k in range(1, 6):
        ours = fit_mixture(z, "gaussian", k)
        ref = GaussianMixture(k, covariance_type="full", n_init=10, random_state=0, reg_covar=1e-6,
                              tol=1e-6, max_iter=2000).fit(z)
        if (ref.weights_ * n).min() < max(d + 1, 5) + 1:
            continue
        compared += 1
        assert ours.loglik >= ref.score(z) * n - 1e-5 * abs(ours.loglik), k
    assert compared >= 4
