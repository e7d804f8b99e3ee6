"""Seeded EM starting values: k-means++ partitions turned into component parameters.

k-means++ seeding (Arthur & Vassilvitskii 2007, *Proc SODA* 1027-1035) followed by a
few Lloyd iterations gives a hard partition; each part then yields a Gaussian start
(mean, covariance) or a skew-normal start by the method of moments. Everything is
drawn from ``numpy.random.default_rng`` seeded by (seed, K, start), so the same seed
gives the same starts.
"""

from __future__ import annotations

import itertools

import numpy as np
from scipy.stats import skew

from sleepfuse.explore.skewnormal import delta_from_skewness, logpdf_delta

TWO_OVER_PI = 2.0 / np.pi


def start_rng(seed: int, n_components: int, start: int) -> np.random.Generator:
    """The generator of one start; independent of the family, so both families share starts."""
    return np.random.default_rng([int(seed), int(n_components), int(start)])


def kmeans_partition(
    x: np.ndarray, n_components: int, rng: np.random.Generator, n_lloyd: int = 20
) -> np.ndarray:
    """Labels (n,) in 0..K-1 from k-means++ seeding and up to ``n_lloyd`` Lloyd iterations."""
    n = x.shape[0]
    centres = np.empty((n_components, x.shape[1]))
    centres[0] = x[rng.integers(n)]
    d2 = np.sum((x - centres[0]) ** 2, axis=1)
    for k in range(1, n_components):
        total = d2.sum()
        idx = rng.integers(n) if total <= 0 else rng.choice(n, p=d2 / total)
        centres[k] = x[idx]
        d2 = np.minimum(d2, np.sum((x - centres[k]) ** 2, axis=1))
    labels = np.full(n, -1)
    for _ in range(n_lloyd):
        dist = np.sum((x[:, None, :] - centres[None, :, :]) ** 2, axis=2)
        new = np.argmin(dist, axis=1)
        if np.array_equal(new, labels):
            break
        labels = new
        for k in range(n_components):
            members = x[labels == k]
            if len(members):
                centres[k] = members.mean(axis=0)
    return labels


def random_partition(n: int, n_components: int, rng: np.random.Generator) -> np.ndarray:
    """Labels (n,) drawn uniformly from 0..K-1: a random-partition start (the partition's parts
    have nearly equal means, so EM begins close to one component and separates from there)."""
    return rng.integers(n_components, size=n)


def floor_covariance(cov: np.ndarray, floor: float) -> tuple[np.ndarray, bool]:
    """Raise the smallest eigenvalue of a covariance to ``floor`` by adding ε·I; returns (cov, floored)."""
    low = float(np.linalg.eigvalsh(cov)[0])
    if low >= floor:
        return cov, False
    return cov + (floor - low) * np.eye(cov.shape[0]), True


def gaussian_start(x: np.ndarray, labels: np.ndarray, n_components: int, floor: float) -> tuple:
    """(weights, means, covariances, zero Δ) from a hard partition; 1/n moments."""
    n, d = x.shape
    weights = np.empty(n_components)
    means = np.empty((n_components, d))
    covs = np.empty((n_components, d, d))
    for k in range(n_components):
        part = x[labels == k]
        weights[k] = len(part) / n
        means[k] = part.mean(axis=0)
        covs[k] = floor_covariance(np.atleast_2d(np.cov(part, rowvar=False, bias=True)), floor)[0]
    return weights, means, covs, np.zeros((n_components, d))


def _sign_patterns(d: int):
    """Sign flips tried for a moment-based Δ: all 2^d for d ≤ 4, else none and each single flip."""
    if d <= 4:
        return [np.array(p) for p in itertools.product((1.0, -1.0), repeat=d)]
    return [np.ones(d)] + [np.where(np.arange(d) == j, -1.0, 1.0) for j in range(d)]


def skewnormal_moments(part: np.ndarray, floor: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(ξ, Γ, Δ) of a skew-normal whose mean, covariance and marginal skewness match ``part``.

    |Δ| per variable comes from its sample skewness (Azzalini 1985 moment relation), shrunk
    until Γ = S − (1 − 2/π)ΔΔᵀ is positive definite; ξ = mean − √(2/π)Δ. Marginal sample
    skewness is a noisy guide to the direction of Δ and a wrong sign traps EM in a poorer
    local maximum, so the sign patterns of ``_sign_patterns`` are tried and the one with the
    highest log-likelihood on ``part`` is kept.
    """
    mean = part.mean(axis=0)
    cov = np.atleast_2d(np.cov(part, rowvar=False, bias=True))
    cov = floor_covariance(cov, floor)[0]
    base = np.nan_to_num(delta_from_skewness(skew(part, axis=0), np.sqrt(np.diag(cov))))
    best = None
    for signs in _sign_patterns(mean.size):
        delta = base * signs
        for _ in range(60):
            gamma = cov - (1.0 - TWO_OVER_PI) * np.outer(delta, delta)
            if np.linalg.eigvalsh(gamma)[0] > floor:
                break
            delta = 0.8 * delta
        else:
            delta, gamma = np.zeros_like(delta), cov
        xi = mean - np.sqrt(TWO_OVER_PI) * delta
        loglik = float(np.sum(logpdf_delta(part, xi, gamma, delta)))
        if best is None or loglik > best[0]:
            best = (loglik, xi, gamma, delta)
        if not np.any(base):
            break
    return best[1], best[2], best[3]


def skewnormal_start(x: np.ndarray, labels: np.ndarray, n_components: int, floor: float) -> tuple:
    """(weights, ξ, Γ, Δ) from a hard partition by the method of moments."""
    n, d = x.shape
    weights = np.empty(n_components)
    xis = np.empty((n_components, d))
    gammas = np.empty((n_components, d, d))
    deltas = np.empty((n_components, d))
    for k in range(n_components):
        part = x[labels == k]
        weights[k] = len(part) / n
        xis[k], gammas[k], deltas[k] = skewnormal_moments(part, floor)
    return weights, xis, gammas, deltas


def skewnormal_from_gaussian(
    x: np.ndarray, weights: np.ndarray, means: np.ndarray, covs: np.ndarray,
    resp: np.ndarray, floor: float, fraction: float = 0.1,
) -> tuple:
    """A skew-normal start next to a fitted Gaussian mixture: same component means and covariances,
    a small Δ (``fraction`` of the moment estimate) in the direction of each component's skewness.

    Its log-likelihood is close to the Gaussian one, and EM never decreases it, so the
    skew-normal fit is not left worse than the nested Gaussian model by a bad start.
    """
    labels = np.argmax(resp, axis=1)
    k_total, d = means.shape
    xis = np.empty_like(means)
    gammas = np.empty_like(covs)
    deltas = np.zeros_like(means)
    for k in range(k_total):
        part = x[labels == k]
        if len(part) >= 3:
            g = np.nan_to_num(skew(part, axis=0))
            deltas[k] = fraction * delta_from_skewness(g, np.sqrt(np.diag(covs[k])))
        gamma = covs[k] - (1.0 - TWO_OVER_PI) * np.outer(deltas[k], deltas[k])
        if np.linalg.eigvalsh(gamma)[0] <= floor:
            deltas[k] = 0.0
            gamma = covs[k]
        gammas[k] = gamma
        xis[k] = means[k] - np.sqrt(TWO_OVER_PI) * deltas[k]
    return weights.copy(), xis, gammas, deltas
