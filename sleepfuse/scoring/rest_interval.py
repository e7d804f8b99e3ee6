"""Automatic rest interval for actigraphy nights without diary times or markers.

sleepfuse's own rule (common practice in spirit, no published source): the
caller passes one noon-to-noon day of 1-min sleep/wake and validity, and
uses the block found here as the sleep opportunity; the night's QC note says
the interval was found automatically.
"""

from __future__ import annotations

import numpy as np

from .runs import runs

REST_INTERVAL_RULE: str = (
    "Automatic rest interval (sleepfuse rule, no published source): within one "
    "noon-to-noon day of 1-minute actigraphy epochs scored sleep or wake, every "
    "stretch of wake lasting at most 30 minutes that lies between two sleep "
    "minutes is bridged; off-wrist or missing minutes are neither sleep nor wake and "
    "are never bridged, so they end a block. The longest resulting block (the "
    "earliest if tied), which begins on its first and ends after its last sleep "
    "minute, is the rest interval if it lasts at least 180 minutes (3 hours); "
    "otherwise the day has no automatic rest interval."
)


def rest_interval(
    sleep_1min: np.ndarray,
    valid_1min: np.ndarray,
    *,
    max_gap_min: float = 30.0,
    min_length_min: float = 180.0,
) -> tuple[int, int] | None:
    """(start_minute, end_minute_exclusive) of the main rest block, or None.

    Indices are minutes from the start of the arrays (one noon-to-noon day).
    Rule, quotable in a codebook: :data:`REST_INTERVAL_RULE` (its text states
    the defaults, ``max_gap_min`` = 30 and ``min_length_min`` = 180). Block
    length counts bridged wake minutes; it is compared with ``min_length_min``.
    """
    s = np.asarray(sleep_1min, dtype=bool)
    v = np.asarray(valid_1min, dtype=bool)
    if s.ndim != 1 or s.shape != v.shape:
        raise ValueError(
            f"sleep_1min and valid_1min must be 1-D arrays of the same length, got {s.shape} and {v.shape}"
        )
    if not max_gap_min >= 0:
        raise ValueError(f"max_gap_min must be zero or more minutes, got {max_gap_min!r}")
    if not min_length_min > 0:
        raise ValueError(f"min_length_min must be a positive number of minutes, got {min_length_min!r}")
    if s.size == 0:
        return None

    # 0 = wake, 1 = sleep, 2 = invalid (off-wrist / missing).
    state = np.where(v, s.astype(np.int8), 2).astype(np.int8)
    starts, lengths, values = runs(state)
    m = starts.size
    prev_val = np.full(m, -1, dtype=np.int8)
    next_val = np.full(m, -1, dtype=np.int8)
    if m > 1:
        prev_val[1:] = values[:-1]
        next_val[:-1] = values[1:]
    bridged = (values == 0) & (lengths <= max_gap_min) & (prev_val == 1) & (next_val == 1)
    in_block = np.repeat((values == 1) | bridged, lengths)

    b_starts, b_lengths, b_values = runs(in_block)
    if not b_values.any():
        return None
    cand = np.where(b_values, b_lengths, -1)
    best = int(np.argmax(cand))  # first maximum = earliest block
    if b_lengths[best] < min_length_min:
        return None
    start = int(b_starts[best])
    return start, start + int(b_lengths[best])
