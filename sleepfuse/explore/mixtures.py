"""Finite mixtures fitted by EM: Gaussian (full covariance), multivariate skew-normal, t and skew-t.

Gaussian EM as in Dempster, Laird & Rubin (1977, *JRSS B* 39:1-38). Skew-normal EM
(an ECM) through the stochastic representation Y = ξ + Δ|T0| + T1 (Lin 2009,
*J Multivariate Anal* 100:257-265; Cabral, Lachos & Prates 2012, *Comput Stat Data
Anal* 56:126-142): the E-step takes the moments of the truncated-normal latent |T0|
given y, the CM-steps update ξ, Δ and Γ in closed form, each maximising the expected
complete-data log-likelihood given the others, so the log-likelihood never decreases.
t-mixture ECM as in Peel & McLachlan (2000, *Statistics and Computing* 10:339-348), with the
degrees of freedom ν per component from the root of their equation (``studentt``); restricted
skew-t ECM/ECME after Lin (2010) and Lee & McLachlan (2014) (``skewt``).

Guards: a minimum expected component size, a covariance floor (smallest eigenvalue of
Σ or Γ raised to ``cov_floor``), and starts that fail are skipped with their reason.
Stopping: relative change in log-likelihood below tol (ℓ_t − ℓ_{t−1} ≤ tol·|ℓ_t|). A skew-normal
component whose shape diverges (the likelihood creeping towards a half-normal boundary)
never meets it; such fits stop at ``max_iter`` and say so in their message.
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import numpy as np
from scipy.special import log_ndtr

from sleepfuse.explore import starts as _starts
from sleepfuse.explore import skewt as _st
from sleepfuse.explore import studentt as _t
from sleepfuse.explore.skewnormal import LOG_2, LOG_2PI, shape_from_delta

from sleepfuse.explore.names import DEFAULT_FAMILIES, DEFAULT_MAX_ITER, DEFAULT_STARTS, FAMILIES  # noqa: E402
HALF_LOG_2PI = 0.5 * LOG_2PI


def n_free_parameters(family: str, n_components: int, n_dims: int) -> int:
    """Free parameters: (K−1) weights + K·d means + K·d(d+1)/2 covariances, + K·d shapes for skew-normal,
    + K degrees of freedom ν for t."""
    k, d = n_components, n_dims
    p = (k - 1) + k * d + k * d * (d + 1) // 2
    return p + {"skewnormal": k * d, "t": k, "skewt": k * d + k}.get(family, 0)


def bic(loglik: float, n_params: int, n_obs: int) -> float:
    """Schwarz (1978, *Ann Stat* 6:461-464) criterion: BIC = −2·loglik + n_params·ln(n); smaller is better."""
    return -2.0 * loglik + n_params * np.log(n_obs)


@dataclass
class MixtureFit:
    """One fitted (family, K): parameters of the best start, its log-likelihood trace and diagnostics.

    Components are ordered by the mean of the first variable. ``locations`` are ξ (the
    means for the Gaussian family), ``scales`` are Σ, ``deltas`` are Δ (zero for Gaussian and t),
    ``dofs`` the degrees of freedom ν per component (t and skew-t families only).
    """

    family: str
    n_components: int
    n_obs: int
    n_dims: int
    weights: np.ndarray | None = None
    locations: np.ndarray | None = None
    scales: np.ndarray | None = None
    deltas: np.ndarray | None = None
    dofs: np.ndarray | None = None
    loglik: float = float("nan")
    converged: bool = False
    n_iter: int = 0
    message: str = ""
    floored: bool = False
    loglik_trace: np.ndarray = field(default_factory=lambda: np.empty(0))
    start_traces: list = field(default_factory=list)
    n_starts: int = 0
    n_starts_failed: int = 0

    @property
    def ok(self) -> bool:
        """True when at least one start gave a usable fit."""
        return self.weights is not None and np.isfinite(self.loglik)

    @property
    def n_params(self) -> int:
        return n_free_parameters(self.family, self.n_components, self.n_dims)

    @property
    def bic(self) -> float:
        return bic(self.loglik, self.n_params, self.n_obs) if self.ok else float("nan")

    @property
    def gammas(self) -> np.ndarray:
        """Γ = Σ − ΔΔᵀ per component (the covariance of T1 in the representation)."""
        return self.scales - np.einsum("ki,kj->kij", self.deltas, self.deltas)

    @property
    def shapes(self) -> np.ndarray:
        """Shape λ per component (K, d); zero for the Gaussian family."""
        return np.array([shape_from_delta(s, d) for s, d in zip(self.scales, self.deltas)])

    @property
    def means(self) -> np.ndarray:
        """Component means E[Y] = ξ + E[U]·Δ (K, d): E[U] = √(2/π) (skew-normal), √(2/π)·√(ν/2)·Γ((ν−1)/2)/Γ(ν/2)
        (skew-t, infinite for ν ≤ 1)."""
        if self.family != "skewt":
            return self.locations + np.sqrt(2.0 / np.pi) * self.deltas
        return self.locations + _st.mean_of_u(self.dofs)[:, None] * self.deltas

    def weighted_log_density(self, x: np.ndarray) -> np.ndarray:
        """log(π_k) + log f_k(x_i) for each row of x and component (n, K)."""
        return _weighted_log_density(np.atleast_2d(x), self.weights, self.locations, self.gammas, self.deltas,
                                     self.dofs)

    def log_likelihood(self, x: np.ndarray) -> float:
        """Mixture log-likelihood of the rows of x (same standardised scale as the fit)."""
        return float(np.sum(_log_sum_exp(self.weighted_log_density(x))))

    def posterior(self, x: np.ndarray) -> np.ndarray:
        """Posterior membership probabilities (n, K)."""
        wl = self.weighted_log_density(x)
        return np.exp(wl - _log_sum_exp(wl)[:, None])


class StartFailed(Exception):
    """One EM start became degenerate; the message says why."""


def _log_sum_exp(a: np.ndarray) -> np.ndarray:
    """log Σ_k exp(a[:, k]) per row, stable."""
    top = np.max(a, axis=1)
    top = np.where(np.isfinite(top), top, 0.0)
    with np.errstate(divide="ignore"):
        return top + np.log(np.sum(np.exp(a - top[:, None]), axis=1))


def _component_terms(x, xis, gammas, deltas):
    """log f_k(x_i) (K, n) for all components, plus E[τ|x] and E[τ²|x] (skew-normal E-step).

    τ | y ~ N(μ_τ, M²) truncated to (0, ∞) with M² = 1 − ΔᵀΣ⁻¹Δ, μ_τ = ΔᵀΣ⁻¹(y − ξ)
    (Lin 2009, Proposition 1); E[τ] = μ_τ + M·ρ, E[τ²] = μ_τ² + M² + M·μ_τ·ρ, ρ = φ(u)/Φ(u), u = μ_τ/M.
    With Δ = 0 this is the Gaussian log-density (the constant log 2 + log Φ(0) = 0).
    """
    d = x.shape[1]
    sigma = gammas + deltas[:, :, None] * deltas[:, None, :]
    chol = np.linalg.cholesky(sigma)
    resid = x[None, :, :] - xis[:, None, :]
    z = np.linalg.solve(chol, resid.transpose(0, 2, 1))
    log_det = 2.0 * np.sum(np.log(np.diagonal(chol, axis1=1, axis2=2)), axis=1)
    log_phi = -0.5 * (np.sum(z * z, axis=1) + d * LOG_2PI + log_det[:, None])
    w = np.linalg.solve(sigma, deltas[:, :, None])[:, :, 0]
    m2 = np.maximum(1.0 - np.sum(deltas * w, axis=1), 1e-300)[:, None]
    m = np.sqrt(m2)
    mu = np.einsum("knd,kd->kn", resid, w)
    u = mu / m
    log_cdf = log_ndtr(u)
    rho = np.exp(-0.5 * u * u - HALF_LOG_2PI - log_cdf)
    return LOG_2 + log_phi + log_cdf, mu + m * rho, mu * mu + m2 + m * mu * rho


def _weighted_log_density(x, weights, xis, gammas, deltas, nus=None):
    if nus is None:
        logd = _component_terms(x, xis, gammas, deltas)[0]
    elif np.any(deltas):
        logd = _st.terms(x, xis, gammas, deltas, nus, moments=False)
    else:
        logd = _t.log_densities(x, xis, gammas, nus)[0]
    with np.errstate(divide="ignore"):
        return logd.T + np.log(weights)


def _floor_batch(gammas: np.ndarray, cov_floor: float) -> tuple[np.ndarray, bool]:
    low = np.linalg.eigvalsh(gammas)[:, 0]
    lift = np.maximum(cov_floor - low, 0.0)
    if not np.any(lift > 0):
        return gammas, False
    return gammas + lift[:, None, None] * np.eye(gammas.shape[1]), True


def _em(x, family, params, *, tol, max_iter, min_size, cov_floor):
    """Run EM from ``params`` = (weights, ξ, Γ, Δ[, ν]); returns ((weights, ξ, Γ, Δ, ν), trace, converged,
    floored), ν None except for the t family (whose Γ is Σ and Δ zero).

    trace[t] is the log-likelihood at the parameters after t M-steps. Raises StartFailed.
    """
    n, d = x.shape
    weights, xis, gammas, deltas = (np.array(p, dtype=float) for p in params[:4])
    nus = np.array(params[4], dtype=float) if family in ("t", "skewt") else None
    if family not in ("skewnormal", "skewt"):
        deltas = np.zeros_like(xis)
    trace: list[float] = []
    floored = converged = False
    for it in range(max_iter + 1):
        try:
            if family == "t":
                logd, maha = _t.log_densities(x, xis, gammas, nus)
            elif family == "skewt":
                logd, e_w, e_tau, e_tau2 = _st.terms(x, xis, gammas, deltas, nus)
            else:
                logd, e_tau, e_tau2 = _component_terms(x, xis, gammas, deltas)
                e_w = 1.0
        except np.linalg.LinAlgError as exc:
            raise StartFailed(f"numerical failure ({exc})") from None
        with np.errstate(divide="ignore"):
            logd += np.log(weights)[:, None]
        lse = _log_sum_exp(logd.T)
        ll = float(lse.sum())
        if not np.isfinite(ll):
            raise StartFailed("log-likelihood is not finite")
        trace.append(ll)
        if _has_converged(trace, tol):
            converged = True
            break
        if it == max_iter:
            break
        resp = np.exp(logd - lse[None, :])                     # (K, n)
        nk = resp.sum(axis=1)
        if nk.min() < min_size:
            raise StartFailed(f"a component fell below {min_size:g} expected members")
        weights = nk / n
        if family in ("skewnormal", "skewt"):                          # CM-steps: ξ given Δ, Δ given ξ, Γ
            weights, xis, gammas, deltas = _st.update(x, resp, e_w, e_tau, e_tau2, deltas)
        elif family == "t":
            weights, xis, gammas, nus = _t.m_step(x, resp, _t.weights_u(maha, nus, d), nus)
        else:
            xis = resp @ x / nk[:, None]
            resid = x[None, :, :] - xis[:, None, :]
            gammas = (resid * resp[:, :, None]).transpose(0, 2, 1) @ resid / nk[:, None, None]
        gammas = 0.5 * (gammas + gammas.transpose(0, 2, 1))
        if not (np.all(np.isfinite(xis)) and np.all(np.isfinite(gammas)) and np.all(np.isfinite(deltas))):
            raise StartFailed("parameters became non-finite")
        gammas, hit = _floor_batch(gammas, cov_floor)
        floored |= hit
        if family == "skewt":                                          # ECME step for ν (skewt.update_nus)
            nus = _st.update_nus(x, weights, xis, gammas, deltas, nus, _t.NU_RANGE)
    return (weights, xis, gammas, deltas, nus), np.array(trace), converged, floored


def _has_converged(trace: list[float], tol: float) -> bool:
    """Relative change in log-likelihood: stop when ℓ_t − ℓ_{t−1} ≤ tol·|ℓ_t| (common practice for
    EM, e.g. McLachlan & Peel 2000, *Finite Mixture Models*, §2.11); a decrease (possible only
    through the covariance floor) also stops."""
    return len(trace) >= 2 and trace[-1] - trace[-2] <= tol * abs(trace[-1])


def _order_components(params):
    weights, xis, gammas, deltas, nus = params
    means = xis + np.sqrt(2.0 / np.pi) * deltas
    order = np.lexsort((-weights, means[:, 0]))
    return weights[order], xis[order], gammas[order], deltas[order], None if nus is None else nus[order]


def fit_mixture(
    x: np.ndarray,
    family: str,
    n_components: int,
    *,
    starts: int = DEFAULT_STARTS,
    seed: int = 0,
    tol: float = 1e-6,
    max_iter: int = DEFAULT_MAX_ITER,
    min_component_size: float | None = None,
    cov_floor: float = 1e-6,
    gaussian_fit: MixtureFit | None = None,
    short_iter: int = 50,
    keep: int = 3,
) -> MixtureFit:
    """Fit one (family, K) mixture to standardised data x (n, d) by EM from several seeded starts.

    Starts are ``starts`` k-means++ partitions and as many random partitions (the same for
    every family; Biernacki, Celeux & Govaert 2003 compare both kinds; t starts take ν = ``studentt.NU_START``);
    a skew-normal or t fit also starts once next to ``gaussian_fit`` when given (t with ν at its upper bound). Every start runs ``short_iter``
    iterations; the ``keep`` best continue to convergence (or ``max_iter``), and the one
    with the highest log-likelihood wins. ``min_component_size`` defaults to max(d + 1, 5) expected members.
    A (family, K) where every start fails comes back with ``ok`` False and the reason.
    """
    if family not in FAMILIES:
        raise ValueError(f"family {family!r} is not one of {', '.join(FAMILIES)}")
    x = np.asarray(x, dtype=float)
    n, d = x.shape
    k_total = int(n_components)
    min_size = max(d + 1, 5) if min_component_size is None else float(min_component_size)
    fit = MixtureFit(family=family, n_components=k_total, n_obs=n, n_dims=d)
    if n < k_total * min_size:
        fit.message = (f"too few participants: {n} for {k_total} component(s) of at least "
                       f"{min_size:g} members each")
        return fit
    n_starts = 1 if k_total == 1 else max(1, int(starts))
    inits: list[tuple] = []
    failures: Counter[str] = Counter()
    for s in range(2 * n_starts if k_total > 1 else 1):
        rng = _starts.start_rng(seed, k_total, s)
        kind = "k-means" if s < n_starts else "random-partition"
        labels = (_starts.kmeans_partition(x, k_total, rng) if s < n_starts
                  else _starts.random_partition(n, k_total, rng))
        sizes = np.bincount(labels, minlength=k_total)
        if sizes.min() < min(min_size, d + 1) or sizes.min() < 2:
            failures[f"{kind} start gave a cluster of fewer than {max(d + 1, 2)} members"] += 1
            continue
        make = _starts.skewnormal_start if family in ("skewnormal", "skewt") else _starts.gaussian_start
        inits.append(make(x, labels, k_total, cov_floor) + (np.full(k_total, _t.NU_START),))
    if family in ("skewnormal", "skewt") and gaussian_fit is not None and gaussian_fit.ok:
        inits.append(_starts.skewnormal_from_gaussian(
            x, gaussian_fit.weights, gaussian_fit.locations, gaussian_fit.scales,
            gaussian_fit.posterior(x), cov_floor) + (np.full(k_total, _t.NU_RANGE[1]),))
    if family == "t" and gaussian_fit is not None and gaussian_fit.ok:   # ν at its bound: nearly the Gaussian fit
        inits.append((gaussian_fit.weights, gaussian_fit.locations, gaussian_fit.scales, gaussian_fit.deltas,
                      np.full(k_total, _t.NU_RANGE[1])))
    # "Short EM" start strategy (Biernacki, Celeux & Govaert 2003, Comput Stat Data Anal
    # 41:561-575): every start runs a few iterations, only the most promising run to the end.
    em = dict(tol=tol, min_size=min_size, cov_floor=cov_floor)
    short = []
    for init in inits:
        try:
            short.append(_em(x, family, init, max_iter=min(short_iter, max_iter), **em))
        except StartFailed as exc:
            failures[str(exc)] += 1
    short.sort(key=lambda r: -r[1][-1])
    finished = []
    for i, result in enumerate(short):
        params, trace, converged, floored = result
        if i < keep and not converged and max_iter > short_iter:
            try:
                params, more, converged, hit = _em(x, family, params, max_iter=max_iter - short_iter, **em)
            except StartFailed as exc:
                failures[f"{exc} (after the short run)"] += 1
                continue
            trace, floored = np.concatenate([trace, more[1:]]), floored or hit
        fit.start_traces.append(trace)
        if i < keep:
            finished.append((params, trace, converged, floored))
    best = max(finished, key=lambda r: r[1][-1]) if finished else None
    fit.n_starts = len(inits) + sum(v for k, v in failures.items() if " start gave " in k)
    fit.n_starts_failed = sum(failures.values())
    reasons = "; ".join(f"{reason} ({count}x)" for reason, count in failures.items())
    if best is None:
        fit.message = f"no usable fit: all {fit.n_starts} start(s) failed: {reasons}"
        return fit
    params, trace, converged, floored = best
    weights, xis, gammas, deltas, fit.dofs = _order_components(params)
    fit.weights, fit.locations, fit.deltas = weights, xis, deltas
    fit.scales = gammas + np.einsum("ki,kj->kij", deltas, deltas)
    fit.loglik, fit.loglik_trace = float(trace[-1]), trace
    fit.converged, fit.n_iter, fit.floored = converged, len(trace) - 1, floored
    notes = []
    if failures:
        notes.append(f"{fit.n_starts_failed} of {fit.n_starts} start(s) skipped: {reasons}")
    if not converged:
        notes.append(f"best start did not converge in {max_iter} iterations")
    if floored:
        notes.append(f"covariance floor {cov_floor:g} applied")
    if fit.dofs is not None and np.any(fit.dofs <= _t.NU_RANGE[0] * (1 + 1e-9)):
        notes.append(f"t degrees of freedom at the lower bound {_t.NU_RANGE[0]:g}: a component follows outliers")
    fit.message = "; ".join(notes)
    return fit


def preferred_fit(fits: list[MixtureFit]) -> MixtureFit | None:
    """The usable fit with the smallest BIC among those that converged; None when nothing could be fitted.

    A fit that stopped at the iteration limit is never preferred over one that converged; only
    when no usable fit converged is the smallest-BIC unconverged one returned (its
    ``converged`` is False, and front ends say so).
    """
    usable = [f for f in fits if f.ok]
    converged = [f for f in usable if f.converged]
    pool = converged or usable
    return min(pool, key=lambda f: f.bic) if pool else None


def fit_mixtures(
    x: np.ndarray,
    families: tuple[str, ...] = DEFAULT_FAMILIES,
    kmax: int = 5,
    progress=None,
    **options,
) -> list[MixtureFit]:
    """Fit every (family, K), K = 1..kmax; Gaussian fits seed one skew-normal and one t start each.

    ``progress`` (a callable taking a message) hears of each family as its fits begin."""
    fits = []
    gaussian: dict[int, MixtureFit] = {}
    order = sorted(families, key=FAMILIES.index)
    for i, family in enumerate(order, 1):
        if progress:
            progress(f"fitting {family} mixtures, K = 1..{int(kmax)} (family {i} of {len(order)})")
        for k in range(1, int(kmax) + 1):
            fit = fit_mixture(x, family, k, gaussian_fit=gaussian.get(k), **options)
            if family == "gaussian":
                gaussian[k] = fit
            fits.append(fit)
    return fits
