"""Agreement statistics when nights are nested in participants (several nights per person).

Nights of one participant share that person's bias, so they are not
independent subjects; intervals and tests computed as if they were are too
narrow. Used by ``agreement`` wherever a participant has more than one
night (with one night each the single-level formulas apply unchanged):

- limits corrected for repeated nights and the bias CI from the variance
  components of a one-way ANOVA of the differences by participant (Bland &
  Altman 2007, *J Biopharm Stat* 17:571–582; from memory):
  Var(d̄) = (σ²_b·Σmᵢ² + σ²_w·N) / N², t with n − 1 df (n participants);
- CIs of the corrected limits by the MOVER (Zou 2013);
- CIs of the naive limits and of Lin's CCC from a participant-level
  (cluster) bootstrap standard error (Davison & Hinkley 1997, *Bootstrap
  Methods and their Application*, §3.8, for resampling clusters): whole
  participants are resampled with replacement, each statistic recomputed
  from per-participant sums, so the B replicates are one matrix product (no
  loop over replicates);
- proportional bias: the OLS slope of the difference on the pair mean,
  tested by the wild cluster bootstrap-t with the null imposed and
  Rademacher weights (Cameron, Gelbach & Miller 2008, *Rev Econ Stat*
  90:414–427) on the cluster-robust CR1 standard error; with up to
  ``ENUMERATE_UP_TO`` participants all 2ⁿ sign vectors are used (exact, no
  randomness); the slope CI is slope ± q·SE with q the ``confidence``
  quantile of |t*|.
"""

from __future__ import annotations

import functools
import itertools
import math

import numpy as np

from .quantiles import normal_quantile, t_quantile

_NAN = float("nan")
ONE_NIGHT_NOTE = "one night per participant: corrected limits equal naive"
ONE_PARTICIPANT_NOTE = "one participant: no interval or test across participants"
ENUMERATE_UP_TO = 12
"""Up to this many participants the wild bootstrap enumerates every sign vector (2ⁿ ≤ 4096)."""
BIAS_METHOD = "t on n_participants-1 df, participant-level variance (Bland & Altman 2007)"


def bootstrap_method(replicates: int, ccc: bool = False) -> str:
    scale = " on Fisher's z" if ccc else ""
    return (f"cluster bootstrap SE{scale}, participants resampled, B={replicates}, t on n_participants-1 df "
            "(Efron & Tibshirani 1993)")


def wild_method(n: int, replicates: int) -> str:
    draws = f"all {2 ** n} sign vectors" if n <= ENUMERATE_UP_TO else f"B={replicates}"
    return f"OLS slope, wild cluster bootstrap-t, CR1 SE (Cameron, Gelbach & Miller 2008), {draws}"


def _components(d: np.ndarray, codes: np.ndarray) -> dict:
    """One-way ANOVA of ``d`` by participant: counts, mean squares, σ²_b (truncated at 0) and σ²_w."""
    N = d.size
    n = int(codes.max()) + 1
    m_i = np.bincount(codes, minlength=n).astype(float)
    mean = float(d.mean())
    group_mean = np.bincount(codes, weights=d, minlength=n) / m_i
    ss_between = float(np.sum(m_i * (group_mean - mean) ** 2))
    ss_within = float(np.sum((d - group_mean[codes]) ** 2))
    ms_between = ss_between / (n - 1)
    ms_within = ss_within / (N - n)
    divisor = (N**2 - float(np.sum(m_i**2))) / ((n - 1) * N)
    var_between = (ms_between - ms_within) / divisor
    return {"N": N, "n": n, "m_i": m_i, "mean": mean, "ms_between": ms_between, "ms_within": ms_within, "k": divisor,
            "var_between": max(var_between, 0.0), "truncated": var_between < 0}


def multi_night_limits(diff, participant, *, confidence: float = 0.95) -> dict:
    """Limits of agreement corrected for several nights per participant.

    Bland & Altman 2007 (J Biopharm Stat 17:571–582; from memory): one-way
    ANOVA of the differences by participant, σ²_w = MS_within,
    σ²_b = (MS_between − MS_within) / ((N² − Σmᵢ²)/((n − 1)·N)) truncated at 0,
    SD = √(σ²_b + σ²_w), limits = mean difference ± z·SD. With one night per
    participant the naive SD is returned, with a note.
    """
    import pandas as pd

    d = np.asarray(diff, dtype=float).ravel()
    ids = np.asarray(participant, dtype=object).ravel()
    if ids.shape != d.shape:
        raise ValueError(
            f"participant must give one ID per night, got {ids.size} IDs for {d.size} nights"
        )
    keep = np.isfinite(d)
    d, ids = d[keep], ids[keep]
    if pd.isna(ids).any():
        raise ValueError(f"participant ID missing for {int(pd.isna(ids).sum())} night(s)")
    codes, _ = pd.factorize(ids)
    return corrected_limits(d, codes, confidence)


def corrected_limits(d: np.ndarray, codes: np.ndarray, confidence: float) -> dict:
    """``multi_night_limits`` of finite differences ``d`` whose participants are ``codes``
    (0, 1, ... in order of first appearance, as ``pd.factorize`` numbers them)."""
    out = {"mn_sd": _NAN, "mn_loa_low": _NAN, "mn_loa_high": _NAN,
           "mn_sd_between": _NAN, "mn_sd_within": _NAN, "note": ""}
    N = d.size
    if N < 2:
        return out
    z = normal_quantile(confidence)
    mean = float(d.mean())
    n = int(codes.max()) + 1
    notes = []
    if n == N:
        sd = float(d.std(ddof=1))
        notes.append(ONE_NIGHT_NOTE)
    elif n == 1:
        sd = float(d.std(ddof=1))
        out["mn_sd_within"] = sd
        notes.append("one participant: between-participant variance not estimable")
    else:
        c = _components(d, codes)
        if c["truncated"]:
            notes.append("between-participant variance negative, set to 0")
        sd = math.sqrt(c["var_between"] + c["ms_within"])
        out["mn_sd_between"] = math.sqrt(c["var_between"])
        out["mn_sd_within"] = math.sqrt(c["ms_within"])
    out.update(mn_sd=sd, mn_loa_low=mean - z * sd, mn_loa_high=mean + z * sd)
    out["note"] = "; ".join(notes)
    return out


def bias_interval(d: np.ndarray, codes: np.ndarray, confidence: float) -> tuple[float, float]:
    """CI of the mean difference of nested nights (2 ≤ participants < nights): Bland & Altman 2007 components.

    The mean of N nights has Var(d̄) = (σ²_b·Σmᵢ² + σ²_w·N) / N² under the
    one-way random-effects model; with equal nights per participant this is
    MS_between / N, the one-sample t interval of the participants' means.
    """
    c = _components(d, codes)
    N = c["N"]
    var_mean = (c["var_between"] * float(np.sum(c["m_i"] ** 2)) + c["ms_within"] * N) / N**2
    half = t_quantile(confidence, c["n"] - 1) * math.sqrt(var_mean)
    return c["mean"] - half, c["mean"] + half


@functools.lru_cache(maxsize=16)
def _resample_counts(n: int, replicates: int, seed: int) -> np.ndarray:
    """B × n times each participant is drawn in each cluster-bootstrap replicate (seeded, read-only)."""
    rng = np.random.default_rng(seed)
    draws = rng.integers(0, n, size=(replicates, n)) + (np.arange(replicates) * n)[:, None]
    counts = np.bincount(draws.ravel(), minlength=replicates * n).reshape(replicates, n).astype(float)
    counts.flags.writeable = False
    return counts


@functools.lru_cache(maxsize=16)
def _sign_vectors(n: int, replicates: int, seed: int) -> np.ndarray:
    """Rademacher weights, B × n: all 2ⁿ sign vectors up to ENUMERATE_UP_TO participants, else B seeded draws."""
    if n <= ENUMERATE_UP_TO:
        signs = np.array(list(itertools.product((1.0, -1.0), repeat=n)))
    else:
        signs = np.random.default_rng(seed).choice((-1.0, 1.0), size=(replicates, n))
    signs.flags.writeable = False
    return signs


def _weighted_sums(weights: np.ndarray, columns: np.ndarray) -> np.ndarray:
    """weights (B × n) times columns (n × k): B × k.

    By einsum in one thread, not BLAS: on a shared 2-core machine the
    threaded product of these small matrices stalled at 10–200 ms where the
    single-threaded loop takes about 0.6 ms (1000 × 200 × 8, measured), and
    matmul on the read-only weights took 8 ms.
    """
    return np.einsum("bn,kn->bk", weights, np.ascontiguousarray(columns.T), optimize=False)


def cluster_bootstrap(x: np.ndarray, y: np.ndarray, codes: np.ndarray, *, confidence: float,
                      replicates: int, seed: int) -> dict[str, float]:
    """CIs of the naive limits and of Lin's CCC from a participant-level bootstrap standard error.

    Whole participants are resampled with replacement; per replicate the
    statistics come from per-participant sums weighted by how often the
    participant was drawn (a participant drawn twice counts as two, as in any
    cluster bootstrap). Interval: estimate ± t_{n−1}·SE, SE the SD of the
    replicates × √(n/(n − 1)) (the bootstrap's variance of a mean of n
    clusters is (n − 1)/n of the unbiased one); the CCC on Fisher's z scale,
    as for its single-level interval (Efron & Tibshirani 1993, *An
    Introduction to the Bootstrap*, §6 and §13: the standard-error interval).
    Percentile intervals covered only about 83% with 10 participants (both
    statistics) in the simulation of tests/test_fusion_nested.py.
    Values are centred first (one shift for x and y together), which changes
    none of the statistics.
    """
    n = int(codes.max()) + 1
    w = _resample_counts(n, replicates, seed)
    shift = (x.mean() + y.mean()) / 2.0
    a, b = x - shift, y - shift
    e = (a - b) - (a - b).mean()
    d_centre = float((a - b).mean())

    def sums(v):
        return np.bincount(codes, weights=v, minlength=n)

    table = np.column_stack([np.bincount(codes, minlength=n).astype(float), sums(e), sums(e * e),
                             sums(a), sums(b), sums(a * a), sums(b * b), sums(a * b)])
    # replicates, then the observed sample (every participant once) as the last row
    N, se, see, sa, sb, saa, sbb, sab = np.vstack([_weighted_sums(w, table), table.sum(axis=0)]).T
    z = normal_quantile(confidence)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = d_centre + se / N
        sd = np.sqrt(np.maximum(see - se * se / N, 0.0) / (N - 1))
        mx, my = sa / N, sb / N
        vx, vy = saa / N - mx * mx, sbb / N - my * my
        ccc = 2.0 * (sab / N - mx * my) / (vx + vy + (mx - my) ** 2)
        z_ccc = np.arctanh(ccc)
    t = t_quantile(confidence, n - 1)
    inflate = math.sqrt(n / (n - 1))
    out = {}
    for name, values in (("loa_low", mean - z * sd), ("loa_high", mean + z * sd), ("ccc", z_ccc)):
        reps = values[:-1][np.isfinite(values[:-1])]
        half = t * inflate * float(np.std(reps, ddof=1)) if reps.size > 1 else _NAN
        low, high = values[-1] - half, values[-1] + half
        if name == "ccc":
            low, high = math.tanh(low), math.tanh(high)
        out[f"{name}_ci_low"], out[f"{name}_ci_high"] = float(low), float(high)
    return out


def wild_cluster_slope(m: np.ndarray, d: np.ndarray, codes: np.ndarray, *, confidence: float,
                       replicates: int, seed: int) -> dict[str, float]:
    """Slope of d on m with the wild cluster bootstrap-t (null imposed, Rademacher, CR1): slope, CI, p.

    CR1 variance of the slope: G/(G − 1)·(N − 1)/(N − 2)·Σᵢ(Σⱼ xᵢⱼrᵢⱼ)² / Sxx²
    (x = m − m̄, r the OLS residuals, G participants). Bootstrap samples
    d* = d̄ + vᵢ·(d − d̄) with one sign vᵢ per participant; p is the share of
    replicates with |t*| ≥ |t| (Cameron, Gelbach & Miller 2008).
    """
    n = int(codes.max()) + 1
    N = d.size
    x = m - m.mean()
    sxx = float(x @ x)
    out = {"prop_slope": _NAN, "prop_slope_ci_low": _NAN, "prop_slope_ci_high": _NAN, "prop_p": _NAN}
    if n < 2 or N < 3 or sxx == 0.0:
        return out
    u = d - d.mean()  # residuals of the model under the null (no slope)
    a = np.bincount(codes, weights=x * u, minlength=n)
    big_u = np.bincount(codes, weights=u, minlength=n)
    big_x = np.bincount(codes, weights=x, minlength=n)
    q = np.bincount(codes, weights=x * x, minlength=n)
    factor = n / (n - 1) * (N - 1) / (N - 2)
    slope = float(a.sum()) / sxx
    se = math.sqrt(factor * float(np.sum((a - slope * q) ** 2))) / sxx
    v = _sign_vectors(n, replicates, seed)
    # score*_i = v_i·a_i − c*·X_i − β*·Q_i; with v_i² = 1, Σ score*² expands into sums that need only
    # the products of v with four per-participant columns (one BLAS call, no B × n temporaries)
    vs = _weighted_sums(v, np.column_stack([a, big_u, a * big_x, a * q]))
    slope_b, c_b = vs[:, 0] / sxx, vs[:, 1] / N
    ss = (float(a @ a) + c_b * c_b * float(big_x @ big_x) + slope_b * slope_b * float(q @ q)
          - 2.0 * c_b * vs[:, 2] - 2.0 * slope_b * vs[:, 3] + 2.0 * c_b * slope_b * float(big_x @ q))
    se_b = np.sqrt(factor * np.maximum(ss, 0.0)) / sxx
    with np.errstate(invalid="ignore", divide="ignore"):
        t_b = np.abs(slope_b / se_b)
    out["prop_slope"] = slope
    if not se > 0:
        return out
    t_obs = abs(slope / se)
    t_b = np.where(np.isfinite(t_b), t_b, np.inf)  # a replicate with no residual spread: |t*| infinite
    out["prop_p"] = float(np.mean(t_b >= t_obs * (1.0 - 1e-12)))
    crit = float(np.quantile(t_b, confidence))
    if math.isfinite(crit):
        out["prop_slope_ci_low"], out["prop_slope_ci_high"] = slope - crit * se, slope + crit * se
    return out


MOVER_METHOD = "MOVER, variance components (Zou 2013)"


def corrected_limit_intervals(d: np.ndarray, codes: np.ndarray, confidence: float) -> dict[str, float]:
    """CIs of the corrected limits μ ± z·σ, σ² = σ²_b + σ²_w, by the MOVER (Zou 2013, from memory).

    Zou GY (2013) Confidence interval estimation for the Bland–Altman limits
    of agreement with multiple observations per individual. *Stat Methods Med
    Res* 22:630–642. With σ̂² = MS_b/k + (1 − 1/k)·MS_w (k the 2007 divisor,
    so σ̂² is the Bland & Altman 2007 variance before truncation), the CI
    (l₂, u₂) of σ² combines the χ² intervals of the two mean squares (MOVER,
    Zou & Donner 2008), the CI (l₁, u₁) of μ is ``bias_interval``, and
    upper limit: μ̂ + zσ̂ − √((μ̂ − l₁)² + z²(σ̂ − √l₂)²) to μ̂ + zσ̂ + √((u₁ − μ̂)² + z²(√u₂ − σ̂)²);
    the lower limit is its mirror image.
    """
    from scipy import special

    c = _components(d, codes)
    N, n = c["N"], c["n"]
    k, ms_b, ms_w = c["k"], c["ms_between"], c["ms_within"]
    alpha = 1.0 - confidence
    df_b, df_w = n - 1, N - n
    a_b, a_w = ms_b / k, (1.0 - 1.0 / k) * ms_w
    var_u = a_b + a_w
    # χ² quantiles: chdtri(df, p) is the x with P(X > x) = p
    lo_b, hi_b = df_b / special.chdtri(df_b, alpha / 2.0), df_b / special.chdtri(df_b, 1.0 - alpha / 2.0)
    lo_w, hi_w = df_w / special.chdtri(df_w, alpha / 2.0), df_w / special.chdtri(df_w, 1.0 - alpha / 2.0)
    l2 = var_u - math.sqrt((a_b * (1.0 - lo_b)) ** 2 + (a_w * (1.0 - lo_w)) ** 2)
    u2 = var_u + math.sqrt((a_b * (hi_b - 1.0)) ** 2 + (a_w * (hi_w - 1.0)) ** 2)
    sd = math.sqrt(c["var_between"] + ms_w)
    l2, u2 = max(l2, 0.0), max(u2, sd * sd)
    mu = c["mean"]
    l1, u1 = bias_interval(d, codes, confidence)
    z = normal_quantile(confidence)
    down = math.sqrt((mu - l1) ** 2 + z**2 * (sd - math.sqrt(l2)) ** 2)
    up = math.sqrt((u1 - mu) ** 2 + z**2 * (math.sqrt(u2) - sd) ** 2)
    high, low = mu + z * sd, mu - z * sd
    return {"mn_loa_high_ci_low": high - down, "mn_loa_high_ci_high": high + up,
            "mn_loa_low_ci_low": low - up, "mn_loa_low_ci_high": low + down}


_NESTED_KEYS = ("bias_ci_low", "bias_ci_high", "loa_low_ci_low", "loa_low_ci_high", "loa_high_ci_low",
                "loa_high_ci_high", "mn_loa_low_ci_low", "mn_loa_low_ci_high", "mn_loa_high_ci_low",
                "mn_loa_high_ci_high", "ccc_ci_low", "ccc_ci_high", "prop_slope_ci_low", "prop_slope_ci_high",
                "prop_p")


def nested_intervals(row: dict, x: np.ndarray, y: np.ndarray, codes: np.ndarray, *, confidence: float,
                      replicates: int, seed: int, notes: list[str]) -> None:
    """Replace the single-level intervals and test of ``row`` by the participant-level ones (fusion/nested.py)."""
    row.update(dict.fromkeys(_NESTED_KEYS, _NAN))
    n = int(codes.max()) + 1
    if n < 2:
        for key in ("bias_ci_method", "loa_ci_method", "mn_loa_ci_method", "ccc_ci_method", "prop_bias_method"):
            row[key] = ""
        notes.append(ONE_PARTICIPANT_NOTE)
        return
    d = x - y
    row["bias_ci_low"], row["bias_ci_high"] = bias_interval(d, codes, confidence)
    row["bias_ci_method"] = BIAS_METHOD
    boot = cluster_bootstrap(x, y, codes, confidence=confidence, replicates=replicates, seed=seed)
    row.update(boot)
    row.update(corrected_limit_intervals(d, codes, confidence))
    row["mn_loa_ci_method"] = MOVER_METHOD
    row["loa_ci_method"] = bootstrap_method(replicates)
    row["ccc_ci_method"] = bootstrap_method(replicates, ccc=True)
    slope = wild_cluster_slope((x + y) / 2.0, d, codes, confidence=confidence, replicates=replicates, seed=seed)
    row.update(slope)
    row["prop_bias_method"] = wild_method(n, replicates)
