"""Activity counts as the 1-min algorithms read them: checked arrays, epochs summed into minutes.

An infinite count is not a measurement: it is a missing minute here, as the
reader reads it (with the plausibility ceiling, ``readers/_countcheck.py``).
"""

from __future__ import annotations

import numpy as np


def _as_1d_float(x: np.ndarray, name: str) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if a.ndim != 1:
        raise ValueError(f"{name} must be a 1-D array, got shape {a.shape}")
    return a


def _as_counts(x: np.ndarray, name: str) -> np.ndarray:
    """1-D float counts, an infinite count missing (NaN), as the reader reads it."""
    a = _as_1d_float(x, name)
    return a if np.isfinite(a).all() else np.where(np.isinf(a), np.nan, a)


def epochs_to_minutes(counts: np.ndarray, epoch_s: float) -> np.ndarray:
    """Sum consecutive epochs into 1-min counts (common practice).

    ``epoch_s`` (seconds) must divide 60 exactly (15, 30, 60 s...). A minute
    is NaN if any of its epochs is NaN or infinite (or the sum overflows); a
    trailing partial minute is dropped.
    """
    counts = _as_counts(counts, "counts")
    if not epoch_s > 0:
        raise ValueError(f"epoch_s must be a positive number of seconds, got {epoch_s!r}")
    per_min = 60.0 / float(epoch_s)
    k = int(round(per_min))
    if k < 1 or abs(per_min - k) > 1e-9:
        raise ValueError(
            f"epoch length {epoch_s!r} s does not divide one minute; "
            "1-min algorithms need epochs of 60 s or an exact fraction of it (e.g. 15, 30 s)"
        )
    n_min = counts.size // k
    blocks = counts[: n_min * k].reshape(n_min, k)
    if k == 1:
        return blocks[:, 0].copy()
    with np.errstate(over="ignore"):  # a sum beyond float range is not a count: made missing below
        if k >= 8:  # numpy's pairwise summation order for longer rows: keep it
            out = blocks.sum(axis=1)
        else:
            # Column by column, left to right: the same additions, in the same order, as
            # blocks.sum(axis=1) for rows shorter than 8 (bit-identical), and far faster.
            out = np.add(blocks[:, 0], blocks[:, 1])
            for j in range(2, k):
                out += blocks[:, j]
    out[np.isinf(out)] = np.nan
    return out
