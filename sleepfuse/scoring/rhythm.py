"""Non-parametric rest-activity rhythm measures on hourly means.

Van Someren EJW, Swaab DF, Colenda CC, Cohen W, McCall WV, Rosenquist PB
(1999). Bright light therapy: improved sensitivity to its effects on
rest-activity rhythms in Alzheimer patients by application of nonparametric
methods. *Chronobiol Int* 16:505–518 (formulas from memory): interdaily
stability IS, intradaily variability IV, M10, L5 and relative amplitude RA.
Per participant over the whole recording, not per night.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

RHYTHM_PARAMETERS = ("is", "iv", "m10", "l5", "ra")
HOURS_PER_DAY = 24  # p in Van Someren et al. 1999
_NS_PER_HOUR = 3_600_000_000_000


def _elapsed_ns(start: pd.Timestamp, epoch_s: float, n: int) -> np.ndarray:
    """UTC (or naive) ns of epochs 0..n-1, i.e. start + i·epoch_s, as pandas computes it."""
    ts = pd.Timestamp(start)
    step_ns = float(epoch_s) * 1e9
    if step_ns.is_integer() and float(epoch_s).is_integer():
        # Whole seconds: i·epoch_s is exact in float, so pandas' float-seconds conversion
        # gives exactly i·epoch_s·1e9 ns; integer arithmetic yields the same values.
        return ts.as_unit("ns").value + np.arange(n, dtype=np.int64) * np.int64(step_ns)
    times = pd.DatetimeIndex(ts + pd.to_timedelta(np.arange(n) * float(epoch_s), unit="s"))
    return times.as_unit("ns").asi8


def _ask_offsets(utc_ns: np.ndarray, tz) -> np.ndarray:
    """Local UTC offset (ns) of the zone at each UTC instant (ns), by pandas' public API.

    Called on about one instant per hour of a recording (``_offset_segments``),
    so building the indexes costs well under a millisecond per participant."""
    u = np.asarray(utc_ns, dtype=np.int64)
    local = pd.DatetimeIndex(u.view("datetime64[ns]"), tz="UTC").tz_convert(tz).tz_localize(None)
    return local.as_unit("ns").asi8 - u


def _offset_segments(u0: int, step_ns: int, n: int, tz) -> list[tuple[int, int, int]]:
    """Epochs 0..n-1 at u0 + i·step_ns (UTC ns) as runs of one UTC offset: [(first, end, offset_ns)].

    The zone is asked on a coarse grid (about one instant per hour) and,
    exactly, at every instant of a coarse step whose two ends differ. This
    finds every change because no zone in the tz database changes its offset
    twice within an hour (the shortest gap between two transitions is about a
    week).
    """
    if tz is None:
        return [(0, n, 0)]
    step = max(1, int(_NS_PER_HOUR // max(step_ns, 1)))  # epochs per coarse step (≤ 1 h)
    grid = np.arange(0, n, step)
    if grid[-1] != n - 1:
        grid = np.append(grid, n - 1)
    coarse = _ask_offsets(u0 + grid * np.int64(step_ns), tz)
    cuts, values = [0], [int(coarse[0])]
    for k in np.flatnonzero(coarse[1:] != coarse[:-1]):
        lo, hi = int(grid[k]), int(grid[k + 1])
        fine = _ask_offsets(u0 + np.arange(lo, hi + 1, dtype=np.int64) * np.int64(step_ns), tz)
        for c in np.flatnonzero(fine[1:] != fine[:-1]):
            cuts.append(lo + int(c) + 1)
            values.append(int(fine[c + 1]))
    cuts.append(n)
    return [(cuts[i], cuts[i + 1], values[i]) for i in range(len(values))]


def _hour_runs(start: pd.Timestamp, epoch_s: float, n: int):
    """The local wall-clock hours of epochs 0..n-1 as runs.

    Returns (first epoch of each run, UTC ns of its local hour start, local
    hour of day 0-23, zone), or None where elapsed time is not whole
    nanoseconds per epoch (then ``_hour_keys`` works epoch by epoch). Within
    one UTC offset the wall clock is an arithmetic series, so the epochs where
    it enters a new hour are found by arithmetic, not by converting every
    epoch: the same bins as ``_hour_keys`` (tests/test_scoring_rhythm.py).
    """
    ts = pd.Timestamp(start)
    step_ns = float(epoch_s) * 1e9
    if not (step_ns.is_integer() and float(epoch_s).is_integer()) or n == 0:
        return None
    step_ns = int(step_ns)
    try:
        u0 = int(ts.value)  # ns whatever the unit: the integer as_unit("ns").value gives
    except OverflowError:  # out of the ns range: raise what as_unit raises
        u0 = int(ts.as_unit("ns").value)
    firsts, keys, hours = [], [], []
    segments = _offset_segments(u0, step_ns, n, ts.tz)
    for a, b, off in segments:
        w0 = u0 + off + a * step_ns  # wall clock (ns) of epoch a
        h_first, h_last = w0 // _NS_PER_HOUR, (w0 + (b - 1 - a) * step_ns) // _NS_PER_HOUR
        wall_hour = np.arange(h_first, h_last + 1, dtype=np.int64)  # the hour of epoch a, then those entered
        first = np.empty(wall_hour.size, dtype=np.int64)
        first[0] = a
        # first epoch at or after each hour start
        first[1:] = a + (wall_hour[1:] * _NS_PER_HOUR - w0 + step_ns - 1) // step_ns
        firsts.append(first)
        keys.append(wall_hour * _NS_PER_HOUR - off)
        hours.append(wall_hour % HOURS_PER_DAY)
    if len(segments) == 1:
        # One offset: the keys rise by an hour each, so they are in order and
        # all distinct; the checks below would keep every bin as it is.
        return firsts[0], keys[0], hours[0], ts.tz
    first, key, hour = np.concatenate(firsts), np.concatenate(keys), np.concatenate(hours)
    if (key[1:] < key[:-1]).any():
        return None  # hour starts out of order: leave it to the epoch-by-epoch path
    new = np.concatenate(([True], key[1:] != key[:-1]))  # a run split only by an offset change stays one bin
    return first[new], key[new], hour[new], ts.tz


def _hour_keys(start: pd.Timestamp, epoch_s: float, n: int):
    """Per epoch: UTC ns of its local wall-clock hour start, and the zone (the general path)."""
    tz = pd.Timestamp(start).tz
    utc_ns = _elapsed_ns(start, epoch_s, n)
    if tz is None:
        return (utc_ns // _NS_PER_HOUR) * _NS_PER_HOUR, tz
    offset = np.empty(n, dtype=np.int64)
    if n < 2 or int(utc_ns[-1] - utc_ns[0]) <= 0:
        offset[:] = _ask_offsets(utc_ns, tz)
    else:
        step = int(utc_ns[-1] - utc_ns[0]) // (n - 1)
        for a, b, off in _offset_segments(int(utc_ns[0]), step, n, tz):
            offset[a:b] = off
        # the segments assume a regular series; check them where the grid is not exact
        if not np.array_equal(utc_ns, utc_ns[0] + np.arange(n, dtype=np.int64) * step):
            offset = _ask_offsets(utc_ns, tz)
    key = ((utc_ns + offset) // _NS_PER_HOUR) * _NS_PER_HOUR
    key -= offset
    return key, tz


def _hourly(start, epoch_s, counts, valid, min_valid_fraction):
    """Hourly means (counts per minute) as arrays: UTC ns of each hour start, local hour of day, mean, zone."""
    counts = np.asarray(counts, dtype=float)
    valid = np.asarray(valid, dtype=bool)
    if counts.ndim != 1 or counts.shape != valid.shape:
        raise ValueError(
            f"counts and valid must be 1-D arrays of the same length, got {counts.shape} and {valid.shape}"
        )
    if not epoch_s > 0 or 3600.0 / float(epoch_s) < 1:
        raise ValueError(f"epoch_s must be a positive number of seconds up to 3600, got {epoch_s!r}")
    if not 0 < min_valid_fraction <= 1:
        raise ValueError(f"min_valid_fraction must be in (0, 1], got {min_valid_fraction!r}")
    tz = pd.Timestamp(start).tz
    empty = np.array([], dtype=np.int64)
    if counts.size == 0:
        return empty, empty, np.array([], dtype=float), tz
    ok = valid & (counts == counts)  # valid and not NaN
    runs = _hour_runs(start, epoch_s, counts.size)
    if runs is not None:
        first, bins, hour, tz = runs
        if np.count_nonzero(ok) == ok.size:
            # Every epoch counts: n_ok is the number of epochs per bin (an exact
            # integer, as the float sum of ones is), and where(ok, counts, 0)
            # would be counts itself; the same reduceat sums them.
            n_ok = np.empty(first.size, dtype=np.float64)
            np.subtract(first[1:], first[:-1], out=n_ok[:-1])
            n_ok[-1] = counts.size - first[-1]
            total = np.add.reduceat(np.ascontiguousarray(counts), first)
        else:
            n_ok = np.add.reduceat(ok.astype(np.float64), first)
            total = np.add.reduceat(np.where(ok, counts, 0.0), first)
    else:
        key, tz = _hour_keys(start, epoch_s, counts.size)
        step = np.diff(key)
        if (step >= 0).all():  # elapsed time runs forward: hour bins are runs of equal keys
            new = np.r_[True, step != 0]
            bins, inverse = key[new], np.cumsum(new) - 1
        else:
            bins, inverse = np.unique(key, return_inverse=True)
        n_ok = np.bincount(inverse, weights=ok.astype(float), minlength=bins.size)
        total = np.bincount(inverse, weights=np.where(ok, counts, 0.0), minlength=bins.size)
        hour = None
    per_hour = 3600.0 / float(epoch_s)
    enough = n_ok >= min_valid_fraction * per_hour - 1e-9
    mean = _divide_or_nan(total, n_ok, enough & (n_ok > 0)) * (60.0 / float(epoch_s))
    if hour is None:
        hour = np.asarray(_hour_index(bins, tz).hour, dtype=np.int64)
    return bins, hour, mean, tz


def _divide_or_nan(num: np.ndarray, den: np.ndarray, where: np.ndarray) -> np.ndarray:
    """np.where(where, num / den, nan), dividing only where ``where`` (so no 0/0 to silence)."""
    out = np.full(num.shape, np.nan)
    np.divide(num, den, out=out, where=where)
    return out


def _hour_index(bins: np.ndarray, tz) -> pd.DatetimeIndex:
    index = pd.DatetimeIndex(pd.to_datetime(bins, unit="ns", utc=True), name="hour")
    return index.tz_convert(tz) if tz is not None else index.tz_localize(None)


def hourly_means(
    start: pd.Timestamp,
    epoch_s: float,
    counts: np.ndarray,
    valid: np.ndarray,
    *,
    min_valid_fraction: float = 0.5,
) -> pd.Series:
    """Mean activity per local wall-clock hour, in counts per minute.

    The mean count of the valid epochs in the hour × 60/epoch_s. An hour is
    NaN when fewer than ``min_valid_fraction`` of its 3600/epoch_s epochs are
    valid (``valid`` True and count not NaN), so partial first/last hours
    and non-wear drop out. Index: tz-aware hour starts (local), named "hour".
    """
    bins, _, mean, tz = _hourly(start, epoch_s, counts, valid, min_valid_fraction)
    return pd.Series(mean, index=_hour_index(bins, tz), name="counts_per_min")


def _circular_window_means(profile: np.ndarray, width: int) -> np.ndarray:
    """Mean of ``width`` consecutive hours starting at each hour of the 24-h profile (wraps).

    The windows are a read-only strided view of the extended profile with the
    shape and strides ``sliding_window_view`` gives (so the same reduction
    runs), built directly rather than through its argument checks.
    """
    ext = np.ascontiguousarray(np.concatenate((profile, profile[: width - 1])), dtype=np.float64)
    item = ext.itemsize
    windows = np.ndarray((ext.size - width + 1, width), dtype=np.float64, buffer=ext, strides=(item, item))
    windows.flags.writeable = False
    return windows.mean(axis=1)  # NaN if any hour in the window is NaN


def _first_max(w: np.ndarray) -> int:
    """np.nanargmax(w) for a 1-D float array with a non-NaN value: argmax with NaN read as −inf."""
    return int(np.argmax(np.where(np.isnan(w), -np.inf, w)))


def _first_min(w: np.ndarray) -> int:
    """np.nanargmin(w) for a 1-D float array with a non-NaN value: argmin with NaN read as +inf."""
    return int(np.argmin(np.where(np.isnan(w), np.inf, w)))


def rest_activity_rhythm(
    start: pd.Timestamp,
    epoch_s: float,
    counts: np.ndarray,
    valid: np.ndarray,
    *,
    min_valid_fraction: float = 0.5,
) -> dict[str, float]:
    """IS, IV, M10, L5, RA (Van Someren et al. 1999) on the hourly means.

    With xᵢ the n valid hourly means (NaN hours excluded) and x̄ their mean:

    - IS = Σₕ nₕ(x̄ₕ − x̄)² / Σᵢ(xᵢ − x̄)², x̄ₕ the mean of hour-of-day h over
      days and nₕ its number of valid hours. With complete data nₕ = n/p
      (p = 24) and this is exactly n·Σₕ(x̄ₕ − x̄)² / (p·Σᵢ(xᵢ − x̄)²).
    - IV = n·Σ(xᵢ − xᵢ₋₁)² / (m·Σᵢ(xᵢ − x̄)²), the sum over the m pairs of
      consecutive hours that are both valid; with complete data m = n − 1.
    - M10 / L5: highest 10-h / lowest 5-h mean of the average day (the
      24-value profile x̄ₕ), windows wrapping round midnight; windows that
      touch an hour-of-day without data are skipped. ``m10_onset_h`` /
      ``l5_onset_h``: local clock hour the window starts.
    - RA = (M10 − L5) / (M10 + L5).

    Units: M10 and L5 in counts per minute. ``n_days`` = valid hours / 24.
    Values that cannot be computed (no variance, too few hours) are NaN.
    """
    _, hours, x_all, _ = _hourly(start, epoch_s, counts, valid, min_valid_fraction)
    nan = float("nan")
    out = {k: nan for k in (*RHYTHM_PARAMETERS, "m10_onset_h", "l5_onset_h")}
    ok = ~np.isnan(x_all)
    n = int(ok.sum())
    out["n_days"] = n / HOURS_PER_DAY
    if n == 0:
        return out
    x = x_all[ok]
    h = hours[ok]
    xbar = x.mean()
    ss_total = float(np.sum((x - xbar) ** 2))

    n_h = np.bincount(h, minlength=HOURS_PER_DAY).astype(float)
    sum_h = np.bincount(h, weights=x, minlength=HOURS_PER_DAY)
    profile = _divide_or_nan(sum_h, n_h, n_h > 0)
    if ss_total > 0:
        present = n_h > 0
        out["is"] = float(np.sum(n_h[present] * (profile[present] - xbar) ** 2) / ss_total)
        pair = ok[1:] & ok[:-1]
        m = int(pair.sum())
        if m > 0:
            d2 = float(np.sum((x_all[1:][pair] - x_all[:-1][pair]) ** 2))
            out["iv"] = n * d2 / (m * ss_total)

    m10_w = _circular_window_means(profile, 10)
    l5_w = _circular_window_means(profile, 5)
    if not np.isnan(m10_w).all():
        i = _first_max(m10_w)
        out["m10"], out["m10_onset_h"] = float(m10_w[i]), float(i)
    if not np.isnan(l5_w).all():
        i = _first_min(l5_w)
        out["l5"], out["l5_onset_h"] = float(l5_w[i]), float(i)
    denom = out["m10"] + out["l5"]
    if np.isfinite(denom) and denom > 0:
        out["ra"] = (out["m10"] - out["l5"]) / denom
    return out
