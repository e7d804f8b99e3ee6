"""Non-wear detection from 1-min activity counts (Choi et al. 2011).

Choi L, Liu Z, Matthews CE, Buchowski MS (2011). Validation of accelerometer
wear and nonwear time classification algorithm. *Med Sci Sports Exerc*
43:357–364. The three lengths (90-min period, 2-min artefactual-movement
allowance, 30-min zero windows up- and downstream of it) were checked
against secondary descriptions of the paper; the rest of the reading below
is ours and documented. Non-wear minutes are neither sleep nor wake.
"""

from __future__ import annotations

import numpy as np

from .parameters import _runs


def choi_nonwear(
    counts_1min: np.ndarray,
    *,
    min_length_min: int = 90,
    spike_tolerance_min: int = 2,
    window_min: int = 30,
) -> np.ndarray:
    """Non-wear (True) per minute by the Choi et al. 2011 rule.

    A non-wear period is ≥ ``min_length_min`` consecutive minutes of zero
    counts, in which an interruption of ≤ ``spike_tolerance_min`` minutes of
    non-zero counts is allowed when ≥ ``window_min`` consecutive zero minutes
    lie immediately before AND after it. The whole period, the allowed
    interruptions included, is non-wear; the period begins and ends on a zero.

    A NaN (missing) minute is not a zero and cannot be an allowed
    interruption: it ends any period. Lengths are in minutes (1-min epochs).
    """
    a = np.asarray(counts_1min, dtype=float)
    if a.ndim != 1:
        raise ValueError(f"counts_1min must be a 1-D array, got shape {a.shape}")
    for name, v in (("min_length_min", min_length_min), ("window_min", window_min)):
        if not v > 0:
            raise ValueError(f"{name} must be a positive number of minutes, got {v!r}")
    if not spike_tolerance_min >= 0:
        raise ValueError(f"spike_tolerance_min must be zero or more minutes, got {spike_tolerance_min!r}")
    if a.size == 0:
        return np.zeros(0, dtype=bool)

    # 0 = zero count, 1 = non-zero count, 2 = missing.
    state = np.where(np.isnan(a), 2, np.where(a == 0, 0, 1)).astype(np.int8)
    starts, lengths, values = _runs(state)
    m = starts.size
    prev_len = np.zeros(m, dtype=np.intp)
    next_len = np.zeros(m, dtype=np.intp)
    prev_val = np.full(m, -1, dtype=np.int8)
    next_val = np.full(m, -1, dtype=np.int8)
    if m > 1:
        prev_len[1:], prev_val[1:] = lengths[:-1], values[:-1]
        next_len[:-1], next_val[:-1] = lengths[1:], values[1:]

    # Interruptions that are allowed become part of the zero stretch.
    allowed = (
        (values == 1)
        & (lengths <= spike_tolerance_min)
        & (prev_val == 0)
        & (prev_len >= window_min)
        & (next_val == 0)
        & (next_len >= window_min)
    )
    quiet = (values == 0) | allowed
    q = np.repeat(quiet, lengths)

    # Periods: maximal quiet stretches of >= min_length_min minutes.
    q_starts, q_lengths, q_values = _runs(q)
    long_enough = q_values & (q_lengths >= min_length_min)
    return np.repeat(long_enough, q_lengths)
