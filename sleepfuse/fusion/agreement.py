"""Agreement between two instruments measuring one sleep parameter, night by night.

Plain functions over paired arrays (test, reference), differences always
test − reference (actigraphy − PSG, diary − PSG, diary − actigraphy).
``agreement`` returns one row of ``agreement.csv`` (columns in
``AGREEMENT_COLUMNS``; the caller adds ``parameter`` and ``pair`` first).
"""

from __future__ import annotations

import functools
import math

import numpy as np
import pandas as pd
from scipy import special  # not scipy.stats: its import alone costs ~0.3 s at every start

MIN_PAIRS = 3
"""Fewest paired nights for which agreement statistics are reported."""

AGREEMENT_COLUMNS: list[str] = [
    "n_nights",
    "n_participants",
    "mean_test",
    "mean_reference",
    "bias",
    "bias_ci_low",
    "bias_ci_high",
    "sd",
    "loa_low",
    "loa_high",
    "loa_low_ci_low",
    "loa_low_ci_high",
    "loa_high_ci_low",
    "loa_high_ci_high",
    "prop_slope",
    "prop_slope_ci_low",
    "prop_slope_ci_high",
    "prop_p",
    "prop_intercept",
    "reg_loa_intercept_low",
    "reg_loa_slope_low",
    "reg_loa_intercept_high",
    "reg_loa_slope_high",
    "ratio_gm",
    "ratio_loa_low",
    "ratio_loa_high",
    "mn_sd",
    "mn_loa_low",
    "mn_loa_high",
    "mn_sd_between",
    "mn_sd_within",
    "ccc",
    "ccc_ci_low",
    "ccc_ci_high",
    "icc",
    "note",
]

FEW_PAIRS_NOTE = f"fewer than {MIN_PAIRS} paired nights: no agreement statistics"
ONE_NIGHT_NOTE = "one night per participant: corrected limits equal naive"
RATIO_NOTE = "ratio limits not computed: values <= 0"
PROPORTIONAL_P = 0.05
"""Slope p-value below which proportional bias is reported (common practice)."""

_NAN = float("nan")


@functools.lru_cache(maxsize=64)
def _z(confidence: float) -> float:
    """Two-sided normal quantile, 1.96 for confidence 0.95."""
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be between 0 and 1 (exclusive), got {confidence!r}")
    return float(special.ndtri(0.5 + confidence / 2.0))  # what scipy.stats.norm.ppf computes (tested equal)


@functools.lru_cache(maxsize=4096)
def _t(confidence: float, df: int) -> float:
    """Two-sided t quantile: scipy.stats.t.ppf(0.5 + confidence / 2, df) by the function it calls."""
    return float(special.stdtrit(df, 0.5 + confidence / 2.0))


def _ols(x: np.ndarray, y: np.ndarray) -> tuple[float, float, float, float]:
    """Least-squares line y = intercept + slope·x: (slope, intercept, slope standard error, two-sided p).

    The textbook closed form, p from the t statistic of the correlation on
    n − 2 df (same values as scipy.stats.linregress, checked in
    tests/test_fusion_agreement.py; p is NaN when y is constant). Needs n ≥ 3
    and x not constant.
    """
    n = x.size
    xm, ym = x.mean(), y.mean()
    dx, dy = x - xm, y - ym
    sxx, sxy, syy = float(dx @ dx), float(dx @ dy), float(dy @ dy)
    slope = sxy / sxx
    if syy == 0.0:
        return slope, float(ym - slope * xm), 0.0, _NAN
    r = min(max(sxy / math.sqrt(sxx * syy), -1.0), 1.0)
    df = n - 2
    t = r * math.sqrt(df / ((1.0 - r + 1e-20) * (1.0 + r + 1e-20)))
    stderr = math.sqrt(max(1.0 - r * r, 0.0) * syy / sxx / df)
    # scipy.stats.t.sf(|t|, df) is special.stdtr(df, -|t|) (scipy's own definition), without the
    # distribution machinery's ~40 µs per call
    return slope, float(ym - slope * xm), stderr, float(2.0 * special.stdtr(df, -abs(t)))


def _pair(test, reference) -> tuple[np.ndarray, np.ndarray]:
    """Both arrays as 1-D float, same length; NaN pairs are kept (callers drop them)."""
    x = np.asarray(test, dtype=float).ravel()
    y = np.asarray(reference, dtype=float).ravel()
    if x.shape != y.shape:
        raise ValueError(
            f"test and reference must have the same number of nights, got {x.size} and {y.size}"
        )
    return x, y


def bland_altman(test, reference, *, confidence: float = 0.95) -> dict:
    """Bias, SD and limits of agreement of test − reference, with confidence intervals.

    Bland & Altman 1986 (Lancet i:307–310): bias = mean difference, SD with
    ddof=1, limits = bias ± z·SD (z = 1.96 at 95%). CIs (Bland & Altman 1999,
    Stat Methods Med Res 8:135–160; 1986): SE(bias) = SD/√n,
    SE(limit) ≈ √(3·SD²/n), t with n − 1 df.
    """
    x, y = _pair(test, reference)
    d = x - y
    d = d[np.isfinite(d)]
    n = d.size
    keys = ("bias", "bias_ci_low", "bias_ci_high", "sd", "loa_low", "loa_high",
            "loa_low_ci_low", "loa_low_ci_high", "loa_high_ci_low", "loa_high_ci_high")
    out = dict.fromkeys(keys, _NAN)
    out["n"] = n
    if n < 2:
        if n == 1:
            out["bias"] = float(d[0])
        return out
    z = _z(confidence)
    t = _t(confidence, n - 1)
    bias = float(d.mean())
    sd = float(d.std(ddof=1))
    se_bias = sd / math.sqrt(n)
    se_loa = math.sqrt(3.0 * sd**2 / n)
    low, high = bias - z * sd, bias + z * sd
    out.update(
        bias=bias,
        bias_ci_low=bias - t * se_bias,
        bias_ci_high=bias + t * se_bias,
        sd=sd,
        loa_low=low,
        loa_high=high,
        loa_low_ci_low=low - t * se_loa,
        loa_low_ci_high=low + t * se_loa,
        loa_high_ci_low=high - t * se_loa,
        loa_high_ci_high=high + t * se_loa,
    )
    return out


def proportional_bias(test, reference, *, confidence: float = 0.95) -> dict:
    """OLS regression of the difference on the pair mean, and regression-based limits.

    Slope with its CI (t, n − 2 df) and two-sided p. Regression-based limits
    (Bland & Altman 1999 §3.2): regress |residuals| on the mean,
    limits = (b0 + b1·m) ± z·√(π/2)·(c0 + c1·m); returned as intercept and
    slope of the lower and upper limit lines (computed whatever the p-value;
    ``agreement`` keeps them only when p < 0.05).
    """
    x, y = _pair(test, reference)
    keep = np.isfinite(x) & np.isfinite(y)
    d = (x - y)[keep]
    m = ((x + y) / 2.0)[keep]
    n = d.size
    keys = ("prop_slope", "prop_slope_ci_low", "prop_slope_ci_high", "prop_p",
            "prop_intercept", "reg_loa_intercept_low", "reg_loa_slope_low",
            "reg_loa_intercept_high", "reg_loa_slope_high")
    out = dict.fromkeys(keys, _NAN)
    if n < 3 or np.ptp(m) == 0.0:
        return out
    slope, intercept, stderr, p = _ols(m, d)
    t = _t(confidence, n - 2)
    out.update(
        prop_slope=slope,
        prop_slope_ci_low=slope - t * stderr,
        prop_slope_ci_high=slope + t * stderr,
        prop_p=p,
        prop_intercept=intercept,
    )
    abs_resid = np.abs(d - (intercept + slope * m))
    c1, c0, _, _ = _ols(m, abs_resid)
    k = _z(confidence) * math.sqrt(math.pi / 2.0)
    out.update(
        reg_loa_intercept_low=intercept - k * c0,
        reg_loa_slope_low=slope - k * c1,
        reg_loa_intercept_high=intercept + k * c0,
        reg_loa_slope_high=slope + k * c1,
    )
    return out


def ratio_limits(test, reference, *, confidence: float = 0.95) -> dict:
    """Limits of agreement on the log scale, back-transformed to ratios test/reference.

    Bland & Altman 1999 (Stat Methods Med Res 8:135–160): differences of
    log(test) − log(reference); geometric-mean ratio = exp(mean), limits =
    exp(mean ± z·SD). Undefined when any value ≤ 0: NaN and a note.
    """
    x, y = _pair(test, reference)
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    out = {"ratio_gm": _NAN, "ratio_loa_low": _NAN, "ratio_loa_high": _NAN, "note": ""}
    if np.any(x <= 0) or np.any(y <= 0):
        out["note"] = RATIO_NOTE
        return out
    if x.size < 2:
        return out
    d = np.log(x) - np.log(y)
    mean, sd = float(d.mean()), float(d.std(ddof=1))
    z = _z(confidence)
    out.update(
        ratio_gm=math.exp(mean),
        ratio_loa_low=math.exp(mean - z * sd),
        ratio_loa_high=math.exp(mean + z * sd),
    )
    return out


def multi_night_limits(diff, participant, *, confidence: float = 0.95) -> dict:
    """Limits of agreement corrected for several nights per participant.

    Bland & Altman 2007 (J Biopharm Stat 17:571–582; from memory): one-way
    ANOVA of the differences by participant, σ²_w = MS_within,
    σ²_b = (MS_between − MS_within) / ((N² − Σmᵢ²)/((n − 1)·N)) truncated at 0,
    SD = √(σ²_b + σ²_w), limits = mean difference ± z·SD. With one night per
    participant the naive SD is returned, with a note.
    """
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
    return _multi_night_limits(d, codes, confidence)


def _multi_night_limits(d: np.ndarray, codes: np.ndarray, confidence: float) -> dict:
    """``multi_night_limits`` of finite differences ``d`` whose participants are ``codes``
    (0, 1, ... in order of first appearance, as ``pd.factorize`` numbers them)."""
    out = {"mn_sd": _NAN, "mn_loa_low": _NAN, "mn_loa_high": _NAN,
           "mn_sd_between": _NAN, "mn_sd_within": _NAN, "note": ""}
    N = d.size
    if N < 2:
        return out
    z = _z(confidence)
    mean = float(d.mean())
    n = int(codes.max()) + 1
    m_i = np.bincount(codes, minlength=n).astype(float)
    notes = []
    if n == N:
        sd = float(d.std(ddof=1))
        notes.append(ONE_NIGHT_NOTE)
    elif n == 1:
        sd = float(d.std(ddof=1))
        out["mn_sd_within"] = sd
        notes.append("one participant: between-participant variance not estimable")
    else:
        group_mean = np.bincount(codes, weights=d, minlength=n) / m_i
        ss_between = float(np.sum(m_i * (group_mean - mean) ** 2))
        ss_within = float(np.sum((d - group_mean[codes]) ** 2))
        ms_between = ss_between / (n - 1)
        ms_within = ss_within / (N - n)
        divisor = (N**2 - float(np.sum(m_i**2))) / ((n - 1) * N)
        var_between = (ms_between - ms_within) / divisor
        if var_between < 0:
            var_between = 0.0
            notes.append("between-participant variance negative, set to 0")
        sd = math.sqrt(var_between + ms_within)
        out["mn_sd_between"] = math.sqrt(var_between)
        out["mn_sd_within"] = math.sqrt(ms_within)
    out.update(mn_sd=sd, mn_loa_low=mean - z * sd, mn_loa_high=mean + z * sd)
    out["note"] = "; ".join(notes)
    return out


def lins_ccc(x, y, *, confidence: float = 0.95) -> dict:
    """Lin's concordance correlation coefficient with its confidence interval.

    Lin 1989 (Biometrics 45:255–268): ρc = 2·s_xy / (s_x² + s_y² + (x̄ − ȳ)²)
    with 1/n moments. CI through Fisher's z = atanh(ρc) with the asymptotic
    variance of Lin 1989 as corrected in Lin 2000 (Biometrics 56:324–325):
    var(z) = [(1−r²)ρc²/((1−ρc²)r²) + 2ρc³(1−ρc)u²/(r(1−ρc²)²)
              − ρc⁴u⁴/(2r²(1−ρc²)²)] / (n − 2),  u = (x̄ − ȳ)/√(s_x·s_y).
    """
    a, b = _pair(x, y)
    keep = np.isfinite(a) & np.isfinite(b)
    a, b = a[keep], b[keep]
    n = a.size
    out = {"ccc": _NAN, "ccc_ci_low": _NAN, "ccc_ci_high": _NAN}
    if n < 2:
        return out
    mx, my = a.mean(), b.mean()
    vx, vy = a.var(), b.var()
    sxy = float(np.mean((a - mx) * (b - my)))
    denom = vx + vy + (mx - my) ** 2
    if denom == 0:
        return out
    rc = 2.0 * sxy / denom
    out["ccc"] = float(rc)
    if n < 3 or vx == 0 or vy == 0 or abs(rc) >= 1.0:
        return out
    r = sxy / math.sqrt(vx * vy)
    if r == 0:
        return out
    u = (mx - my) / math.sqrt(math.sqrt(vx * vy))
    one = 1.0 - rc**2
    var_z = (
        (1 - r**2) * rc**2 / (one * r**2)
        + 2 * rc**3 * (1 - rc) * u**2 / (r * one**2)
        - rc**4 * u**4 / (2 * r**2 * one**2)
    ) / (n - 2)
    if not np.isfinite(var_z) or var_z < 0:
        return out
    zc = math.atanh(rc)
    half = _z(confidence) * math.sqrt(var_z)
    out["ccc_ci_low"] = math.tanh(zc - half)
    out["ccc_ci_high"] = math.tanh(zc + half)
    return out


def icc_a1(ratings: np.ndarray) -> float:
    """ICC(A,1): two-way, absolute agreement, single measure, of an n targets × k raters matrix.

    McGraw & Wong 1996 case 2A, equal to ICC(2,1) of Shrout & Fleiss 1979
    (Psychol Bull 86:420–428): (MSR − MSE) / (MSR + (k−1)·MSE + k·(MSC − MSE)/n)
    from the two-way ANOVA mean squares. Targets with any missing rating are dropped.
    """
    r = np.asarray(ratings, dtype=float)
    if r.ndim != 2:
        raise ValueError(f"ratings must be a 2-D targets × raters matrix, got shape {r.shape}")
    r = r[np.all(np.isfinite(r), axis=1)]
    n, k = r.shape
    if n < 2 or k < 2:
        return _NAN
    grand = r.mean()
    ss_rows = k * float(np.sum((r.mean(axis=1) - grand) ** 2))
    ss_cols = n * float(np.sum((r.mean(axis=0) - grand) ** 2))
    ss_err = float(np.sum((r - grand) ** 2)) - ss_rows - ss_cols
    msr = ss_rows / (n - 1)
    msc = ss_cols / (k - 1)
    mse = ss_err / ((n - 1) * (k - 1))
    denom = msr + (k - 1) * mse + k * (msc - mse) / n
    if denom == 0:
        return _NAN
    return float((msr - mse) / denom)


def agreement(
    test: np.ndarray,
    reference: np.ndarray,
    participant: np.ndarray | None = None,
    *,
    log_scale: bool = False,
    confidence: float = 0.95,
) -> dict[str, float | int | str]:
    """All agreement statistics of one parameter for one instrument pair: a row of agreement.csv.

    Pairs where either value is NaN are dropped. Fewer than ``MIN_PAIRS``
    pairs: counts only, every statistic NaN and a note. Ratio limits
    (log scale) are computed only when ``log_scale`` is True (for skewed
    parameters such as SOL and WASO). Regression-based limits are kept only
    when proportional bias is significant (p < 0.05). ICC(A,1) is computed
    on the n × 2 matrix [reference, test].
    """
    x, y = _pair(test, reference)
    if participant is not None:
        ids = np.asarray(participant, dtype=object).ravel()
        if ids.shape != x.shape:
            raise ValueError(
                f"participant must give one ID per night, got {ids.size} IDs for {x.size} nights"
            )
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    ids = ids[keep] if participant is not None else np.arange(x.size)
    n = int(x.size)
    row: dict[str, float | int | str] = dict.fromkeys(AGREEMENT_COLUMNS, _NAN)
    row["n_nights"] = n
    # participants numbered 0, 1, ... in order of first appearance, -1 for a missing ID (pd.factorize)
    codes = pd.factorize(ids)[0] if participant is not None else np.arange(n)
    row["n_participants"] = max(int(codes.max()) + 1, 0) if n else 0  # distinct IDs, missing not counted
    row["note"] = ""
    if n < MIN_PAIRS:
        row["note"] = FEW_PAIRS_NOTE
        return row
    notes: list[str] = []
    row["mean_test"] = float(x.mean())
    row["mean_reference"] = float(y.mean())
    ba = bland_altman(x, y, confidence=confidence)
    ba.pop("n")
    row.update(ba)
    prop = proportional_bias(x, y, confidence=confidence)
    row.update(prop)
    p = prop["prop_p"]
    if np.isfinite(p) and p < PROPORTIONAL_P:
        notes.append(f"proportional bias (p={p:.3g})")
    else:
        for key in ("reg_loa_intercept_low", "reg_loa_slope_low",
                    "reg_loa_intercept_high", "reg_loa_slope_high"):
            row[key] = _NAN
    if log_scale:
        ratio = ratio_limits(x, y, confidence=confidence)
        if ratio.pop("note"):
            notes.append(RATIO_NOTE)
        row.update(ratio)
    if (codes < 0).any():
        raise ValueError(f"participant ID missing for {int((codes < 0).sum())} night(s)")
    mn = _multi_night_limits(x - y, codes, confidence)
    mn_note = mn.pop("note")
    if mn_note:
        notes.append(mn_note)
    row.update(mn)
    row.update(lins_ccc(x, y, confidence=confidence))
    row["icc"] = icc_a1(np.column_stack([y, x]))
    row["note"] = "; ".join(notes)
    return row
