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

from .runs import fill_runs, run_bounds


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

    # 0 = zero count, 1 = non-zero count, 2 = missing (NaN != 0 is True: 1 + 1).
    state = np.add(a != 0, np.isnan(a), dtype=np.int8)
    bounds = run_bounds(state)
    starts, lengths = bounds[:-1], np.diff(bounds)
    values = state[starts]
    m = starts.size

    # Interruptions that are allowed become part of the zero stretch. The first
    # and the last run have no run on one side, so only runs 1 … m−2 can be
    # allowed; for them the neighbours are the runs just before and after.
    allowed = np.zeros(m, dtype=bool)
    if m > 2:
        allowed[1:-1] = (
            (values[1:-1] == 1)
            & (lengths[1:-1] <= spike_tolerance_min)
            & (values[:-2] == 0)
            & (lengths[:-2] >= window_min)
            & (values[2:] == 0)
            & (lengths[2:] >= window_min)
        )
    quiet = (values == 0) | allowed

    # Periods: maximal quiet stretches of >= min_length_min minutes. A stretch
    # is a group of consecutive runs with the same ``quiet``, found on the run
    # table: the same stretches as the runs of np.repeat(quiet, lengths).
    groups = run_bounds(quiet)  # run indices where ``quiet`` changes
    g_start, g_end = bounds[groups[:-1]], bounds[groups[1:]]
    long_enough = quiet[groups[:-1]] & (g_end - g_start >= min_length_min)
    out = np.zeros(a.size, dtype=bool)
    fill_runs(out, g_start[long_enough], (g_end - g_start)[long_enough], True)
    return out
