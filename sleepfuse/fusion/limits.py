"""Confidence intervals of the limits of agreement, and where regression-based limits hold.

Single-level data (one night per participant):

- exact interval (Carkeet 2015, *Optom Vis Sci* 92:e71–e80): the upper
  limit d̄ + z·s has the CI d̄ + s·t'_{q}(n − 1, z√n)/√n for q = α/2 and
  1 − α/2, t' the noncentral t quantile with noncentrality z√n (the limit is
  a one-sided tolerance bound); the lower limit is its mirror image;
- approximate interval (Bland & Altman 1986, Lancet i:307–310):
  limit ± t_{n−1}·√(3s²/n), which undercovers for small n (about 91% at
  n = 5, Carkeet 2015); used only when ``[agreement] loa_ci = "approximate"``
  and then labelled so.
"""

from __future__ import annotations

import math

from .quantiles import noncentral_t_quantile, normal_quantile, t_quantile

LOA_CI_CHOICES = ("exact", "approximate")
EXACT_METHOD = "exact, noncentral t (Carkeet 2015)"
APPROXIMATE_METHOD = "approximate, SE sqrt(3 s^2/n), t on n-1 df (Bland & Altman 1986)"
NOT_POSITIVE_NOTE = "regression-based limits not reported: the fitted SD of the differences is not positive over the observed means"


def limit_intervals(mean: float, sd: float, n: int, *, confidence: float = 0.95,
                    method: str = "exact") -> dict[str, float | str]:
    """CIs of the limits mean ± z·sd of n single-level differences, by ``method`` ("exact" or "approximate")."""
    if method not in LOA_CI_CHOICES:
        raise ValueError(f"loa_ci must be one of {', '.join(LOA_CI_CHOICES)}, got {method!r}")
    z = normal_quantile(confidence)
    low, high = mean - z * sd, mean + z * sd
    if method == "approximate":
        half = t_quantile(confidence, n - 1) * math.sqrt(3.0 * sd**2 / n)
        return {"loa_low_ci_low": low - half, "loa_low_ci_high": low + half,
                "loa_high_ci_low": high - half, "loa_high_ci_high": high + half, "method": APPROXIMATE_METHOD}
    alpha = 1.0 - confidence
    root = math.sqrt(n)
    q_low = noncentral_t_quantile(alpha / 2.0, n - 1, z * root) / root
    q_high = noncentral_t_quantile(1.0 - alpha / 2.0, n - 1, z * root) / root
    return {"loa_low_ci_low": mean - q_high * sd, "loa_low_ci_high": mean - q_low * sd,
            "loa_high_ci_low": mean + q_low * sd, "loa_high_ci_high": mean + q_high * sd,
            "method": EXACT_METHOD}


def positive_spread_range(c0: float, c1: float, m_min: float, m_max: float) -> tuple[float, float] | None:
    """The part of [m_min, m_max] where the fitted spread c0 + c1·m is positive, or None.

    Regression-based limits (Bland & Altman 1999, Stat Methods Med Res 8:135–160,
    §3.2) are (b0 + b1·m) ± k·(c0 + c1·m); where the fitted spread is not
    positive the two lines have met or crossed, so they are reported only on
    this range (its ends included: there the lines at most touch).
    """
    if not (math.isfinite(c0) and math.isfinite(c1)):
        return None
    if c1 == 0.0:
        return (m_min, m_max) if c0 > 0 else None
    root = -c0 / c1
    if c1 > 0:
        return None if root >= m_max else (max(m_min, root), m_max)
    return None if root <= m_min else (m_min, min(m_max, root))
