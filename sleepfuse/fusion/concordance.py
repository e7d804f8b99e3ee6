"""Lin's concordance correlation coefficient and ICC(A,1) of paired measurements."""

from __future__ import annotations

import math

import numpy as np

from .quantiles import normal_quantile

_NAN = float("nan")


def _finite_pairs(x, y) -> tuple[np.ndarray, np.ndarray]:
    a = np.asarray(x, dtype=float).ravel()
    b = np.asarray(y, dtype=float).ravel()
    if a.shape != b.shape:
        raise ValueError(f"x and y must have the same number of nights, got {a.size} and {b.size}")
    keep = np.isfinite(a) & np.isfinite(b)
    return a[keep], b[keep]


def lins_ccc(x, y, *, confidence: float = 0.95) -> dict:
    """Lin's concordance correlation coefficient with its confidence interval.

    Lin 1989 (Biometrics 45:255–268): ρc = 2·s_xy / (s_x² + s_y² + (x̄ − ȳ)²)
    with 1/n moments. CI through Fisher's z = atanh(ρc) with the asymptotic
    variance of Lin 1989 as corrected in Lin 2000 (Biometrics 56:324–325):
    var(z) = [(1−r²)ρc²/((1−ρc²)r²) + 2ρc³(1−ρc)u²/(r(1−ρc²)²)
              − ρc⁴u⁴/(2r²(1−ρc²)²)] / (n − 2),  u = (x̄ − ȳ)/√(s_x·s_y).
    """
    a, b = _finite_pairs(x, y)
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
    half = normal_quantile(confidence) * math.sqrt(var_z)
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
