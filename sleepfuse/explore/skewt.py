"""Multivariate skew-t distribution (restricted form) and the steps of its mixture EM.

The restricted multivariate skew-t (Azzalini & Capitanio 2003, *JRSS B* 65:367-389; in
mixtures Pyne et al. 2009, *PNAS* 106:8519-8524; the "restricted MST" of Lee & McLachlan
2014, *Stat Comput* 24:181-202) has the
representation

    Y = ξ + Δ·U + E,  W ~ Gamma(ν/2, ν/2),  U | W ~ |N(0, 1/W)|,  E | W ~ N_p(0, Γ/W),

with density, Σ = Γ + ΔΔᵀ, d = (y − ξ)ᵀΣ⁻¹(y − ξ), μ_τ = ΔᵀΣ⁻¹(y − ξ), M² = 1 − ΔᵀΣ⁻¹Δ,

    f(y) = 2 · t_p(y; ξ, Σ, ν) · T_{ν+p}( (μ_τ/M) · √((ν + p)/(ν + d)) ).

Given y, W follows a Gamma((ν+p)/2, (ν+d)/2) law tilted by Φ(√W·μ_τ/M), and U | y, W is
N(μ_τ, M²/W) truncated to (0, ∞). Hence, with A = μ_τ/M, a = (ν+p)/2, b = (ν+d)/2:

    E[W | y]   = (a/b) · T_{ν+p+2}(A√((a+1)/b)) / T_{ν+p}(A√(a/b))
    c          = E[√W φ(√W A)/Φ(√W A) | y] = Γ(a+½) bᵃ / (√(2π) Γ(a) (b + A²/2)^{a+½} T_{ν+p}(A√(a/b)))
    E[W U | y]  = μ_τ E[W | y] + M c
    E[W U² | y] = μ_τ² E[W | y] + M² + μ_τ M c

(the integrals against the Gamma density are closed; see the tests for numerical checks).
The CM-steps for ξ, Δ and Γ are those of the skew-normal ECM with these weights
(Lin 2010, *Stat Comput* 20:343-356); ν is updated ECME-style, on the actual log-likelihood
(Liu & Rubin 1994, *Biometrika* 81:633-648; see ``update_nus``), because E[log W | y] has
no closed form here.
"""

from __future__ import annotations

import numpy as np
from scipy.special import gammaln, stdtr

LOG_2 = float(np.log(2.0))
LOG_PI = float(np.log(np.pi))
HALF_LOG_2PI = 0.5 * float(np.log(2.0 * np.pi))


def _log_stdtr(df, x):
    with np.errstate(divide="ignore"):
        return np.log(np.clip(stdtr(df, x), 1e-300, None))


def _geometry(y, xis, gammas, deltas):
    """The parts of the density that do not depend on ν: d, log|Σ|, μ_τ, M², each per component."""
    sigma = gammas + deltas[:, :, None] * deltas[:, None, :]
    chol = np.linalg.cholesky(sigma)
    resid = y[None, :, :] - xis[:, None, :]
    z = np.linalg.solve(chol, resid.transpose(0, 2, 1))
    d = np.sum(z * z, axis=1)
    log_det = 2.0 * np.sum(np.log(np.diagonal(chol, axis1=1, axis2=2)), axis=1)
    w = np.linalg.solve(sigma, deltas[:, :, None])[:, :, 0]
    m2 = np.maximum(1.0 - np.sum(deltas * w, axis=1), 1e-300)[:, None]
    m = np.sqrt(m2)
    mu = np.einsum("knd,kd->kn", resid, w)
    return d, log_det[:, None], mu, m2, mu / m


def _log_density(p, nu, d, log_det, big_a):
    """log f from the geometry; returns (log f, log T_{ν+p}(·)), ν a column (K, 1) or a scalar."""
    a, b = (nu + p) / 2.0, (nu + d) / 2.0
    log_t = gammaln(a) - gammaln(nu / 2.0) - 0.5 * p * (np.log(nu) + LOG_PI) - 0.5 * log_det - a * np.log1p(d / nu)
    log_cdf = _log_stdtr(nu + p, big_a * np.sqrt(a / b))
    return LOG_2 + log_t + log_cdf, log_cdf


def terms(y, xis, gammas, deltas, nus, *, moments: bool = True):
    """log f_k(y_j) (K, n), and with ``moments`` E[W|y], E[WU|y], E[WU²|y] (each (K, n))."""
    p = y.shape[1]
    d, log_det, mu, m2, big_a = _geometry(y, xis, gammas, deltas)
    m = np.sqrt(m2)
    nu = np.asarray(nus, dtype=float)[:, None]
    a, b = (nu + p) / 2.0, (nu + d) / 2.0
    logf, log_cdf = _log_density(p, nu, d, log_det, big_a)
    if not moments:
        return logf
    e0 = (a / b) * np.exp(_log_stdtr(nu + p + 2.0, big_a * np.sqrt((a + 1.0) / b)) - log_cdf)
    c = np.exp(gammaln(a + 0.5) - gammaln(a) + a * np.log(b) - (a + 0.5) * np.log(b + 0.5 * big_a ** 2)
               - HALF_LOG_2PI - log_cdf)
    return logf, e0, mu * e0 + m * c, mu * mu * e0 + m2 + mu * m * c


def logpdf(y, xi, gamma, delta, nu) -> np.ndarray:
    """Log-density of the restricted skew-t (ξ, Γ, Δ, ν) at each row of y (n, p)."""
    xi = np.atleast_1d(np.asarray(xi, dtype=float))
    y = np.asarray(y, dtype=float).reshape(-1, xi.size)
    return terms(y, xi[None], np.atleast_2d(gamma)[None], np.atleast_1d(delta)[None].astype(float),
                 np.array([float(nu)]), moments=False)[0]


def sample(n, xi, gamma, delta, nu, rng) -> np.ndarray:
    """n draws from the representation Y = ξ + ΔU + E."""
    xi = np.atleast_1d(np.asarray(xi, dtype=float))
    w = rng.gamma(nu / 2.0, 2.0 / nu, size=n)
    u = np.abs(rng.standard_normal(n)) / np.sqrt(w)
    e = rng.multivariate_normal(np.zeros(xi.size), np.atleast_2d(gamma), size=n) / np.sqrt(w)[:, None]
    return xi + np.outer(u, delta) + e


def update(y, resp, e0, e1, e2, deltas):
    """ξ given Δ, then Δ given ξ, then Γ (each a conditional maximisation); returns (weights, ξ, Γ, Δ).

    With W ≡ 1 (e0 = 1, e1 = E[τ|y], e2 = E[τ²|y]) these are the skew-normal CM-steps (Lin 2009), so
    both skewed families share them."""
    n = y.shape[0]
    nk = resp.sum(axis=1)
    r0, r1, r2 = resp * e0, resp * e1, resp * e2
    xis = (r0 @ y - r1.sum(axis=1)[:, None] * deltas) / r0.sum(axis=1)[:, None]
    resid = y[None, :, :] - xis[:, None, :]
    s1r = np.einsum("kn,knd->kd", r1, resid)
    deltas = s1r / r2.sum(axis=1)[:, None]
    cross = s1r[:, :, None] * deltas[:, None, :]
    outer = deltas[:, :, None] * deltas[:, None, :]
    scatter = (resid * r0[:, :, None]).transpose(0, 2, 1) @ resid
    gammas = (scatter - cross - cross.transpose(0, 2, 1) + r2.sum(axis=1)[:, None, None] * outer) / nk[:, None, None]
    return nk / n, xis, gammas, deltas


def mean_of_u(nus) -> np.ndarray:
    """E[U] = √(2/π)·√(ν/2)·Γ((ν−1)/2)/Γ(ν/2) for ν > 1 (E[W^{−1/2}] of the Gamma(ν/2, ν/2)); inf otherwise."""
    nu = np.asarray(nus, dtype=float)
    with np.errstate(invalid="ignore"):
        value = np.sqrt(2.0 / np.pi) * np.sqrt(nu / 2.0) * np.exp(gammaln((nu - 1.0) / 2.0) - gammaln(nu / 2.0))
    return np.where(nu > 1.0, value, np.inf)


def update_nus(y, weights, xis, gammas, deltas, nus, bounds: tuple[float, float], h: float = 1e-3) -> np.ndarray:
    """The ν step (ECME in the manner of Liu & Rubin 1994, as a generalised EM step): each component's ν in
    turn moves to raise the mixture's actual log-likelihood, the other parameters fixed, by one Newton step
    in s = log ν (first and second derivatives by central differences of width ``h``), halved until it
    raises the log-likelihood (at most 8 times; else ν stays), within ``bounds``. The log-likelihood never
    decreases, and at a fixed point its derivative in ν is zero, as at the maximum."""
    nus = np.array(nus, dtype=float)
    p = y.shape[1]
    d, log_det, _, _, big_a = _geometry(y, xis, gammas, deltas)
    with np.errstate(divide="ignore"):
        log_w = np.log(weights)
    logd = _log_density(p, nus[:, None], d, log_det, big_a)[0] + log_w[:, None]
    low, high = np.log(bounds[0]), np.log(bounds[1])
    for k in range(len(nus)):
        rest = np.delete(logd, k, axis=0)
        rest = np.logaddexp.reduce(rest, axis=0) if len(rest) else np.full(y.shape[0], -np.inf)

        def component(s, k=k):
            return _log_density(p, np.exp(s), d[k], log_det[k], big_a[k])[0] + log_w[k]

        def loglik(s):
            return float(np.sum(np.logaddexp(component(s), rest)))

        s0 = float(np.log(nus[k]))
        f0 = float(np.sum(np.logaddexp(logd[k], rest)))
        fp, fm = loglik(s0 + h), loglik(s0 - h)
        grad, curv = (fp - fm) / (2 * h), (fp - 2 * f0 + fm) / (h * h)
        step = -grad / curv if curv < 0 else np.sign(grad)
        step = float(np.clip(step, -1.0, 1.0))
        for _ in range(8):
            s1 = float(np.clip(s0 + step, low, high))
            if s1 != s0 and loglik(s1) > f0:
                nus[k] = float(np.exp(s1))
                logd[k] = component(s1)
                break
            step /= 2.0
    return nus
