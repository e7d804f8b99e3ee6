"""Quantiles of the normal, t and noncentral t distributions for agreement intervals.

Computed with the scipy.special functions that scipy.stats' ``ppf`` methods
call (tested equal in tests/test_fusion_agreement.py and
tests/test_fusion_limits.py): importing scipy.stats alone costs about 0.3 s at
every start of the batch command.
"""

from __future__ import annotations

import functools

from scipy import special


@functools.lru_cache(maxsize=64)
def normal_quantile(confidence: float) -> float:
    """Two-sided normal quantile, 1.96 for confidence 0.95 (scipy.stats.norm.ppf(0.5 + confidence / 2))."""
    if not 0.0 < confidence < 1.0:
        raise ValueError(f"confidence must be between 0 and 1 (exclusive), got {confidence!r}")
    return float(special.ndtri(0.5 + confidence / 2.0))


@functools.lru_cache(maxsize=4096)
def t_quantile(confidence: float, df: int) -> float:
    """Two-sided t quantile: scipy.stats.t.ppf(0.5 + confidence / 2, df) by the function it calls."""
    return float(special.stdtrit(df, 0.5 + confidence / 2.0))


@functools.lru_cache(maxsize=4096)
def noncentral_t_quantile(p: float, df: int, noncentrality: float) -> float:
    """Quantile p of the noncentral t with ``df`` degrees of freedom: scipy.stats.nct.ppf(p, df, nc)."""
    return float(special.nctdtrit(df, noncentrality, p))
