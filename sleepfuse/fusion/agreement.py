"""Agreement between two instruments measuring one sleep parameter, night by night.

Plain functions over paired arrays (test, reference), differences always
test − reference (actigraphy − PSG, diary − PSG, diary − actigraphy).
``agreement`` returns one row of ``agreement.csv`` (columns in
``AGREEMENT_COLUMNS``; the caller adds ``parameter`` and ``pair`` first).
With one night per participant every statistic is single-level; where a
participant has several nights the intervals and the proportional-bias test
account for the nesting (``fusion/nested.py``), and the ``*_method`` columns
say which method gave each interval.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from scipy import special  # not scipy.stats: its import alone costs ~0.3 s at every start

from .concordance import icc_a1, lins_ccc
from .limits import NOT_POSITIVE_NOTE, limit_intervals, positive_spread_range
from .nested import (
    BIAS_METHOD,
    MOVER_METHOD,
    ONE_NIGHT_NOTE,
    bootstrap_method,
    corrected_limits,
    multi_night_limits,
    nested_intervals,
    wild_method,
)
from .quantiles import normal_quantile as _z
from .quantiles import t_quantile as _t

__all__ = ["AGREEMENT_COLUMNS", "MIN_PAIRS", "agreement", "bland_altman", "proportional_bias", "ratio_limits",
           "multi_night_limits", "lins_ccc", "icc_a1", "ONE_NIGHT_NOTE"]

MIN_PAIRS = 3
"""Fewest paired nights for which agreement statistics are reported."""
BOOTSTRAP_REPLICATES = 1000
"""Default B of the cluster bootstrap (``[agreement] bootstrap_replicates``)."""
BOOTSTRAP_SEED = 20261205
"""Default seed of the cluster bootstrap (``[agreement] bootstrap_seed``): results repeat exactly."""

AGREEMENT_COLUMNS: list[str] = [
    "n_nights",
    "n_participants",
    "by_construction",
    "n_inf_dropped",
    "mean_test",
    "mean_reference",
    "bias",
    "bias_ci_low",
    "bias_ci_high",
    "bias_ci_method",
    "sd",
    "loa_low",
    "loa_high",
    "loa_low_ci_low",
    "loa_low_ci_high",
    "loa_high_ci_low",
    "loa_high_ci_high",
    "loa_ci_method",
    "prop_slope",
    "prop_slope_ci_low",
    "prop_slope_ci_high",
    "prop_p",
    "prop_intercept",
    "prop_bias_method",
    "reg_loa_intercept_low",
    "reg_loa_slope_low",
    "reg_loa_intercept_high",
    "reg_loa_slope_high",
    "reg_loa_m_min",
    "reg_loa_m_max",
    "ratio_gm",
    "ratio_loa_low",
    "ratio_loa_high",
    "mn_sd",
    "mn_loa_low",
    "mn_loa_high",
    "mn_loa_low_ci_low",
    "mn_loa_low_ci_high",
    "mn_loa_high_ci_low",
    "mn_loa_high_ci_high",
    "mn_loa_ci_method",
    "mn_sd_between",
    "mn_sd_within",
    "ccc",
    "ccc_ci_low",
    "ccc_ci_high",
    "ccc_ci_method",
    "icc",
    "note",
]
TEXT_COLUMNS = ("bias_ci_method", "loa_ci_method", "prop_bias_method", "mn_loa_ci_method", "ccc_ci_method", "note")

FEW_PAIRS_NOTE = f"fewer than {MIN_PAIRS} paired nights: no agreement statistics"
RATIO_NOTE = "ratio limits not computed: values <= 0"
CONSTRUCTION_NOTE = "identical by construction"
PROPORTIONAL_P = 0.05
"""Slope p-value below which proportional bias is reported (common practice)."""
SINGLE_BIAS_METHOD = "t on n-1 df (Bland & Altman 1999)"
SINGLE_PROP_METHOD = "OLS, t on n-2 df (Bland & Altman 1999)"
SINGLE_CCC_METHOD = "Fisher z, asymptotic variance (Lin 1989, 2000)"
_REG_KEYS = ("reg_loa_intercept_low", "reg_loa_slope_low", "reg_loa_intercept_high", "reg_loa_slope_high",
             "reg_loa_m_min", "reg_loa_m_max")

_NAN = float("nan")


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


def bland_altman(test, reference, *, confidence: float = 0.95, loa_ci: str = "exact") -> dict:
    """Bias, SD and limits of agreement of test − reference, with confidence intervals (single level).

    Bland & Altman 1986 (Lancet i:307–310): bias = mean difference, SD with
    ddof=1, limits = bias ± z·SD (z = 1.96 at 95%). Bias CI: t with n − 1 df,
    SE = SD/√n (Bland & Altman 1999, Stat Methods Med Res 8:135–160). Limits'
    CIs: exact by the noncentral t (Carkeet 2015, default) or the approximate
    SE √(3·SD²/n) (Bland & Altman 1986), see ``fusion/limits.py``;
    ``loa_ci_method`` names the one used.
    """
    x, y = _pair(test, reference)
    d = x - y
    d = d[np.isfinite(d)]
    n = d.size
    keys = ("bias", "bias_ci_low", "bias_ci_high", "sd", "loa_low", "loa_high",
            "loa_low_ci_low", "loa_low_ci_high", "loa_high_ci_low", "loa_high_ci_high")
    out: dict = dict.fromkeys(keys, _NAN)
    out["n"] = n
    out["loa_ci_method"] = ""
    if n < 2:
        if n == 1:
            out["bias"] = float(d[0])
        return out
    z = _z(confidence)
    t = _t(confidence, n - 1)
    bias = float(d.mean())
    sd = float(d.std(ddof=1))
    se_bias = sd / math.sqrt(n)
    out.update(bias=bias, bias_ci_low=bias - t * se_bias, bias_ci_high=bias + t * se_bias, sd=sd,
               loa_low=bias - z * sd, loa_high=bias + z * sd)
    ci = limit_intervals(bias, sd, n, confidence=confidence, method=loa_ci)
    out["loa_ci_method"] = ci.pop("method")
    out.update(ci)
    return out


def proportional_bias(test, reference, *, confidence: float = 0.95) -> dict:
    """OLS regression of the difference on the pair mean, and regression-based limits (single level).

    Slope with its CI (t, n − 2 df) and two-sided p. Regression-based limits
    (Bland & Altman 1999 §3.2): regress |residuals| on the mean,
    limits = (b0 + b1·m) ± z·√(π/2)·(c0 + c1·m); returned as intercept and
    slope of the lower and upper limit lines with the range of means
    (``reg_loa_m_min`` … ``reg_loa_m_max``) inside the observed one where the
    fitted spread c0 + c1·m is positive, so the lines never cross there; when
    it is nowhere positive the lines are NaN and ``reg_note`` says why.
    Computed whatever the p-value; ``agreement`` keeps them only when p < 0.05.
    """
    x, y = _pair(test, reference)
    keep = np.isfinite(x) & np.isfinite(y)
    d = (x - y)[keep]
    m = ((x + y) / 2.0)[keep]
    n = d.size
    keys = ("prop_slope", "prop_slope_ci_low", "prop_slope_ci_high", "prop_p", "prop_intercept", *_REG_KEYS)
    out: dict = dict.fromkeys(keys, _NAN)
    out["reg_note"] = ""
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
    m_min, m_max = float(m.min()), float(m.max())
    valid = positive_spread_range(c0, c1, m_min, m_max)
    if valid is None:
        out["reg_note"] = NOT_POSITIVE_NOTE
        return out
    if valid != (m_min, m_max):
        out["reg_note"] = (f"regression-based limits valid only for means {valid[0]:.4g} to {valid[1]:.4g} "
                           "(fitted SD of the differences not positive beyond)")
    k = _z(confidence) * math.sqrt(math.pi / 2.0)
    out.update(
        reg_loa_intercept_low=intercept - k * c0,
        reg_loa_slope_low=slope - k * c1,
        reg_loa_intercept_high=intercept + k * c0,
        reg_loa_slope_high=slope + k * c1,
        reg_loa_m_min=valid[0],
        reg_loa_m_max=valid[1],
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


def agreement_provenance(loa_ci: str, replicates: int, seed: int) -> dict[str, str | int]:
    """provenance.json's "agreement_methods": the method of every interval and test in agreement.csv."""
    single = limit_intervals(0.0, 1.0, 3, method=loa_ci)["method"]
    return {"single_level": f"bias CI {SINGLE_BIAS_METHOD}; limits CI {single}; CCC CI {SINGLE_CCC_METHOD}; "
                            f"proportional bias {SINGLE_PROP_METHOD}",
            "nested_nights": f"bias CI {BIAS_METHOD}; limits and CCC CIs {bootstrap_method(replicates)}; "
                             f"corrected limits CI {MOVER_METHOD}; proportional bias {wild_method(99, replicates)} "
                             "(all sign vectors up to 12 participants)",
            "bootstrap_replicates": replicates, "bootstrap_seed": seed}


def _blank_row(n: int, n_participants: int, n_inf: int) -> dict:
    row: dict = dict.fromkeys(AGREEMENT_COLUMNS, _NAN)
    row.update(dict.fromkeys(TEXT_COLUMNS, ""))
    row.update(n_nights=n, n_participants=n_participants, by_construction=False, n_inf_dropped=n_inf)
    return row


def agreement(
    test: np.ndarray,
    reference: np.ndarray,
    participant: np.ndarray | None = None,
    *,
    log_scale: bool = False,
    confidence: float = 0.95,
    loa_ci: str = "exact",
    replicates: int = BOOTSTRAP_REPLICATES,
    seed: int = BOOTSTRAP_SEED,
    by_construction: str = "",
) -> dict[str, float | int | str | bool]:
    """All agreement statistics of one parameter for one instrument pair: a row of agreement.csv.

    Pairs where either value is NaN are dropped, and so are pairs with an
    infinite value (counted in ``n_inf_dropped``, with a note). Fewer than
    ``MIN_PAIRS`` pairs: counts only, every statistic NaN and a note.
    ``by_construction`` (a reason, e.g. "the actigraphy sleep opportunity is
    the diary's window"): the two values share their source, so the row keeps
    its counts, ``by_construction`` is True and every statistic is blank.
    Ratio limits (log scale) only when ``log_scale`` (skewed parameters).
    Regression-based limits are kept only when proportional bias has
    p < 0.05. ICC(A,1) is computed on the n × 2 matrix [reference, test].

    One night per participant (or no IDs): the single-level formulas
    (``bland_altman``, ``proportional_bias``, ``lins_ccc``). Several nights
    for some participant: bias CI from the participant-level variance, CIs of
    the limits, corrected limits and CCC by a cluster bootstrap of
    ``replicates`` resamples (``seed``), proportional bias by the wild
    cluster bootstrap (``fusion/nested.py``).
    """
    x, y = _pair(test, reference)
    if participant is not None:
        ids = np.asarray(participant, dtype=object).ravel()
        if ids.shape != x.shape:
            raise ValueError(
                f"participant must give one ID per night, got {ids.size} IDs for {x.size} nights"
            )
    n_inf = int(np.count_nonzero(np.isinf(x) | np.isinf(y)))
    keep = np.isfinite(x) & np.isfinite(y)
    x, y = x[keep], y[keep]
    ids = ids[keep] if participant is not None else np.arange(x.size)
    n = int(x.size)
    # participants numbered 0, 1, ... in order of first appearance, -1 for a missing ID (pd.factorize)
    codes = pd.factorize(ids)[0] if participant is not None else np.arange(n)
    n_participants = max(int(codes.max()) + 1, 0) if n else 0  # distinct IDs, missing not counted
    row = _blank_row(n, n_participants, n_inf)
    notes: list[str] = []
    if n_inf:
        notes.append(f"{n_inf} pair(s) with an infinite value dropped")
    if by_construction:
        row["by_construction"] = True
        row["note"] = "; ".join([f"{CONSTRUCTION_NOTE} ({by_construction}): no agreement statistics", *notes])
        return row
    if n < MIN_PAIRS:
        row["note"] = "; ".join([FEW_PAIRS_NOTE, *notes])
        return row
    if (codes < 0).any():
        raise ValueError(f"participant ID missing for {int((codes < 0).sum())} night(s)")
    nested = n_participants < n
    row["mean_test"] = float(x.mean())
    row["mean_reference"] = float(y.mean())
    ba = bland_altman(x, y, confidence=confidence, loa_ci=loa_ci)
    ba.pop("n")
    row.update(ba)
    row["bias_ci_method"] = SINGLE_BIAS_METHOD
    prop = proportional_bias(x, y, confidence=confidence)
    reg_note = prop.pop("reg_note")
    row.update(prop)
    row["prop_bias_method"] = SINGLE_PROP_METHOD
    d = x - y
    mn = corrected_limits(d, codes, confidence)
    mn_note = mn.pop("note")
    row.update(mn)
    row.update(lins_ccc(x, y, confidence=confidence))
    row["ccc_ci_method"] = SINGLE_CCC_METHOD
    if not nested:
        for side in ("low", "high"):
            for end in ("low", "high"):
                row[f"mn_loa_{side}_ci_{end}"] = row[f"loa_{side}_ci_{end}"]
        row["mn_loa_ci_method"] = row["loa_ci_method"]
    else:
        nested_intervals(row, x, y, codes, confidence=confidence, replicates=replicates, seed=seed, notes=notes)
    if mn_note:
        notes.insert(0, mn_note)
    p = row["prop_p"]
    if np.isfinite(p) and p < PROPORTIONAL_P:
        notes.append(f"proportional bias (p={p:.3g})")
        if reg_note:
            notes.append(reg_note)
    else:
        row.update(dict.fromkeys(_REG_KEYS, _NAN))
    if log_scale:
        ratio = ratio_limits(x, y, confidence=confidence)
        if ratio.pop("note"):
            notes.append(RATIO_NOTE)
        row.update(ratio)
    row["icc"] = icc_a1(np.column_stack([y, x]))
    row["note"] = "; ".join(notes)
    return row
