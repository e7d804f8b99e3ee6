"""Multivariate t distribution and the t-mixture EM steps (Peel & McLachlan 2000).

Density of t_p(μ, Σ, ν) at y (Peel & McLachlan 2000, *Statistics and Computing*
10:339-348, eq. 1; the parametrisation of ``scipy.stats.multivariate_t``):

    f(y) = Γ((ν+p)/2) / (Γ(ν/2) (νπ)^{p/2} |Σ|^{1/2}) · (1 + δ(y)/ν)^{−(ν+p)/2},
    δ(y) = (y − μ)ᵀ Σ⁻¹ (y − μ).

EM for a mixture of K such components treats each y_j as normal given a latent weight
W_j ~ Gamma(ν_k/2, ν_k/2) in its component (section 4 of the paper):

* E-step: posterior membership τ_ij, and u_ij = E[W_j | y_j, component i]
  = (ν_i + p) / (ν_i + δ_ij).
* CM-step 1: π_i = Σ_j τ_ij / n; μ_i = Σ_j τ_ij u_ij y_j / Σ_j τ_ij u_ij;
  Σ_i = Σ_j τ_ij u_ij (y_j − μ_i)(y_j − μ_i)ᵀ / Σ_j τ_ij.
* CM-step 2: ν_i is the root of (the ECM equation of section 5)

    −ψ(ν/2) + log(ν/2) + 1 + (1/n_i) Σ_j τ_ij (log u_ij − u_ij) + ψ((ν_i⁽ᵏ⁾ + p)/2) − log((ν_i⁽ᵏ⁾ + p)/2) = 0,

  n_i = Σ_j τ_ij, found by ``scipy.optimize.brentq``. The left side falls monotonically in
  ν, so the root maximises the expected complete-data log-likelihood in ν; it is kept
  within ``NU_RANGE`` (the bound is taken when the root lies outside). Each CM-step
  maximises the same expected log-likelihood, so the observed log-likelihood never
  decreases (Meng & Rubin 1993, *Biometrika* 80:267-278).
"""

from __future__ import annotations

import numpy as np
from scipy.optimize import brentq
from scipy.special import digamma, gammaln

LOG_PI = float(np.log(np.pi))
# Bounds on ν (common practice: below 1 the tails are heavier than a Cauchy's and the fit
# chases single outlying participants; above 200 the t is a Gaussian for any sample of this
# size, and the root may lie at infinity when the data are lighter-tailed than normal).
NU_RANGE = (1.0, 200.0)
NU_START = 10.0            # ν of the partition starts (moderately heavy tails; common practice)


def log_densities(y: np.ndarray, mus: np.ndarray, sigmas: np.ndarray, nus: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray]:
    """(log f_k(y_j), δ_kj), each (K, n), for components (μ_k, Σ_k, ν_k) at the rows of y (n, p)."""
    p = y.shape[1]
    chol = np.linalg.cholesky(sigmas)
    resid = y[None, :, :] - mus[:, None, :]
    z = np.linalg.solve(chol, resid.transpose(0, 2, 1))
    maha = np.sum(z * z, axis=1)
    log_det = 2.0 * np.sum(np.log(np.diagonal(chol, axis1=1, axis2=2)), axis=1)
    nu = np.asarray(nus, dtype=float)[:, None]
    const = gammaln((nu + p) / 2.0) - gammaln(nu / 2.0) - 0.5 * p * (np.log(nu) + LOG_PI) - 0.5 * log_det[:, None]
    return const - 0.5 * (nu + p) * np.log1p(maha / nu), maha


def logpdf(y: np.ndarray, mu: np.ndarray, sigma: np.ndarray, nu: float) -> np.ndarray:
    """Log-density of t_p(μ, Σ, ν) at each row of y (n, p)."""
    mu = np.atleast_1d(np.asarray(mu, dtype=float))
    y = np.asarray(y, dtype=float).reshape(-1, mu.size)
    sigma = np.atleast_2d(np.asarray(sigma, dtype=float))
    return log_densities(y, mu[None, :], sigma[None, :, :], np.array([float(nu)]))[0][0]


def weights_u(maha: np.ndarray, nus: np.ndarray, p: int) -> np.ndarray:
    """u_kj = (ν_k + p) / (ν_k + δ_kj), the E-step weights (K, n)."""
    nu = np.asarray(nus, dtype=float)[:, None]
    return (nu + p) / (nu + maha)


def update_nu(resp: np.ndarray, u: np.ndarray, nu_old: float, p: int) -> float:
    """CM-step 2 for one component: the root in ``NU_RANGE`` of the ECM equation (module docstring).

    ``resp`` (n,) are the τ_j, ``u`` (n,) the u_j of the E-step at ν_old.
    """
    n_i = resp.sum()
    c = 1.0 + float(resp @ (np.log(u) - u)) / n_i + digamma((nu_old + p) / 2.0) - np.log((nu_old + p) / 2.0)

    def equation(nu):
        return -digamma(nu / 2.0) + np.log(nu / 2.0) + c

    low, high = NU_RANGE
    if equation(high) >= 0.0:          # still rising at the upper bound: the root lies beyond it
        return high
    if equation(low) <= 0.0:           # already falling at the lower bound
        return low
    return float(brentq(equation, low, high, xtol=1e-10, rtol=1e-12))


def m_step(y: np.ndarray, resp: np.ndarray, u: np.ndarray, nus: np.ndarray) -> tuple:
    """CM-steps 1 and 2: (weights, μ, Σ, ν) from the E-step's τ (K, n) and u (K, n)."""
    n, p = y.shape
    nk = resp.sum(axis=1)
    tu = resp * u
    mus = (tu @ y) / tu.sum(axis=1)[:, None]
    resid = y[None, :, :] - mus[:, None, :]
    sigmas = (resid * tu[:, :, None]).transpose(0, 2, 1) @ resid / nk[:, None, None]
    new_nus = np.array([update_nu(resp[k], u[k], float(nus[k]), p) for k in range(len(nk))])
    return nk / n, mus, sigmas, new_nus
