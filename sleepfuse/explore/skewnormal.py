"""Multivariate skew-normal distribution: density, log-density and sampling.

Parametrisation of Azzalini & Dalla Valle (1996, *Biometrika* 83:715-726) as
used for mixtures by Lin (2009, *J Multivariate Anal* 100:257-265): location
ξ (d,), scale matrix Σ (d, d), shape λ (d,), with density

    f(y) = 2 · φ_d(y; ξ, Σ) · Φ(λᵀ Σ^{-1/2} (y − ξ)),

Σ^{-1/2} the symmetric inverse square root. In one dimension this is the
skew-normal of Azzalini (1985) with shape α = λ, location ξ and scale
ω = √Σ (``scipy.stats.skewnorm(a=α, loc=ξ, scale=ω)``).

The EM works with the equivalent stochastic representation (Lin 2009, eq. 3)

    Y = ξ + Δ·|T0| + T1,   T0 ~ N(0, 1),  T1 ~ N_d(0, Γ)  independent,

with δ = λ / √(1 + λᵀλ), Δ = Σ^{1/2} δ and Γ = Σ − ΔΔᵀ. Working in (ξ, Δ, Γ)
keeps the EM in closed form; the shape λ is only needed for reporting.
"""

from __future__ import annotations

import numpy as np
from scipy.special import log_ndtr

LOG_2PI = float(np.log(2.0 * np.pi))
LOG_2 = float(np.log(2.0))


def _sym_sqrt(matrix: np.ndarray, inverse: bool = False) -> np.ndarray:
    """Symmetric (inverse) square root of a symmetric positive-definite matrix."""
    values, vectors = np.linalg.eigh(matrix)
    if np.any(values <= 0):
        raise ValueError("scale matrix is not positive definite")
    power = -0.5 if inverse else 0.5
    return (vectors * values**power) @ vectors.T


def delta_from_shape(sigma: np.ndarray, shape: np.ndarray) -> np.ndarray:
    """Δ = Σ^{1/2} λ / √(1 + λᵀλ) (Lin 2009, section 2)."""
    sigma = np.atleast_2d(np.asarray(sigma, dtype=float))
    shape = np.atleast_1d(np.asarray(shape, dtype=float))
    return _sym_sqrt(sigma) @ (shape / np.sqrt(1.0 + shape @ shape))


def shape_from_delta(sigma: np.ndarray, delta: np.ndarray) -> np.ndarray:
    """λ = Σ^{-1/2} Δ / √(1 − Δᵀ Σ^{-1} Δ) (Lin 2009, section 2); inverse of :func:`delta_from_shape`."""
    sigma = np.atleast_2d(np.asarray(sigma, dtype=float))
    delta = np.atleast_1d(np.asarray(delta, dtype=float))
    q = float(delta @ np.linalg.solve(sigma, delta))
    if q >= 1.0:
        raise ValueError("Δ lies outside the skew-normal range (Δᵀ Σ⁻¹ Δ ≥ 1)")
    return _sym_sqrt(sigma, inverse=True) @ delta / np.sqrt(1.0 - q)


def gaussian_logpdf(y: np.ndarray, mean: np.ndarray, cov: np.ndarray) -> np.ndarray:
    """Log-density of N_d(mean, cov) at each row of ``y`` (n, d), through a Cholesky factor."""
    y = np.atleast_2d(y)
    chol = np.linalg.cholesky(cov)
    z = np.linalg.solve(chol, (y - mean).T)
    log_det = 2.0 * np.sum(np.log(np.diag(chol)))
    return -0.5 * (np.sum(z * z, axis=0) + y.shape[1] * LOG_2PI + log_det)


def _skew_argument(y: np.ndarray, xi: np.ndarray, sigma: np.ndarray, delta: np.ndarray) -> np.ndarray:
    """λᵀΣ^{-1/2}(y − ξ) = ΔᵀΣ⁻¹(y − ξ) / √(1 − ΔᵀΣ⁻¹Δ): the argument of Φ, per row of y."""
    w = np.linalg.solve(sigma, delta)
    q = float(delta @ w)
    return ((y - xi) @ w) / np.sqrt(max(1.0 - q, 1e-300))


def logpdf_delta(y: np.ndarray, xi: np.ndarray, gamma: np.ndarray, delta: np.ndarray) -> np.ndarray:
    """Skew-normal log-density at each row of y (n, d) from the (ξ, Δ, Γ) representation."""
    y = np.atleast_2d(np.asarray(y, dtype=float))
    sigma = gamma + np.outer(delta, delta)
    return LOG_2 + gaussian_logpdf(y, xi, sigma) + log_ndtr(_skew_argument(y, xi, sigma, delta))


def logpdf(y: np.ndarray, xi: np.ndarray, sigma: np.ndarray, shape: np.ndarray) -> np.ndarray:
    """Log-density of SN_d(ξ, Σ, λ) (Azzalini & Dalla Valle 1996) at each row of y (n, d)."""
    xi = np.atleast_1d(np.asarray(xi, dtype=float))
    sigma = np.atleast_2d(np.asarray(sigma, dtype=float))
    y = np.asarray(y, dtype=float)
    if y.ndim == 1:
        y = y.reshape(-1, xi.size)
    delta = delta_from_shape(sigma, shape)
    return LOG_2 + gaussian_logpdf(y, xi, sigma) + log_ndtr(_skew_argument(y, xi, sigma, delta))


def pdf(y: np.ndarray, xi: np.ndarray, sigma: np.ndarray, shape: np.ndarray) -> np.ndarray:
    """Density of SN_d(ξ, Σ, λ) at each row of y; see :func:`logpdf`."""
    return np.exp(logpdf(y, xi, sigma, shape))


def sample_delta(
    n: int, xi: np.ndarray, gamma: np.ndarray, delta: np.ndarray, rng: np.random.Generator
) -> np.ndarray:
    """n draws (n, d) by the stochastic representation Y = ξ + Δ|T0| + T1, T1 ~ N(0, Γ) (Lin 2009, eq. 3)."""
    xi = np.atleast_1d(np.asarray(xi, dtype=float))
    t0 = np.abs(rng.standard_normal(n))
    t1 = rng.multivariate_normal(np.zeros(xi.size), np.atleast_2d(gamma), size=n, method="cholesky")
    return xi + np.outer(t0, delta) + t1


def sample(
    n: int, xi: np.ndarray, sigma: np.ndarray, shape: np.ndarray, rng: np.random.Generator
) -> np.ndarray:
    """n draws (n, d) from SN_d(ξ, Σ, λ) through the stochastic representation."""
    sigma = np.atleast_2d(np.asarray(sigma, dtype=float))
    delta = delta_from_shape(sigma, shape)
    return sample_delta(n, xi, sigma - np.outer(delta, delta), delta, rng)


def mean_and_cov(xi: np.ndarray, sigma: np.ndarray, delta: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """E[Y] = ξ + √(2/π)·Δ and Cov[Y] = Σ − (2/π)·ΔΔᵀ (Azzalini & Capitanio 1999, *JRSS B* 61:579-602)."""
    b = np.sqrt(2.0 / np.pi)
    return xi + b * delta, sigma - b * b * np.outer(delta, delta)


def delta_from_skewness(skewness: np.ndarray, sd: np.ndarray, cap: float = 0.99) -> np.ndarray:
    """Per-variable Δ whose univariate skew-normal has the given skewness and SD (method of moments).

    Inverts γ₁ = ((4 − π)/2)·m³/(1 − m²)^{3/2}, m = δ√(2/π) (Azzalini 1985); |γ₁| is capped
    below its maximum 0.9953 so the start stays inside the parameter space. Used for EM starts.
    """
    g = np.clip(np.asarray(skewness, dtype=float), -cap, cap)
    c = np.cbrt(2.0 * g / (4.0 - np.pi))
    m = c / np.sqrt(1.0 + c * c)
    omega = np.asarray(sd, dtype=float) / np.sqrt(1.0 - m * m)
    return omega * m * np.sqrt(np.pi / 2.0)
