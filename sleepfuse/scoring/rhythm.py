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


def _utc_offsets_ns(utc_ns: np.ndarray, tz) -> np.ndarray:
    """Local UTC offset (ns) at each instant of a sorted-by-construction regular series.

    The time zone is asked only on a coarse grid (about one instant per hour)
    and, exactly, at every instant of a coarse step whose two ends differ.
    This equals asking at every instant because no zone in the tz database
    changes its offset twice within an hour (the shortest gap between two
    transitions is about a week).
    """
    n = utc_ns.size

    def ask(ns: np.ndarray) -> np.ndarray:
        idx = pd.DatetimeIndex(ns.astype("datetime64[ns]")).tz_localize("UTC").tz_convert(tz)
        return idx.tz_localize(None).as_unit("ns").asi8 - ns

    if n < 2:
        return ask(utc_ns)
    span = int(utc_ns[-1] - utc_ns[0])
    if span <= 0:  # not a forward series: ask at every instant
        return ask(utc_ns)
    step = max(1, int(_NS_PER_HOUR // max(span // (n - 1), 1)))  # epochs per coarse step (≤ 1 h)
    grid = np.arange(0, n, step)
    if grid[-1] != n - 1:
        grid = np.r_[grid, n - 1]
    coarse = ask(utc_ns[grid])
    offsets = np.repeat(coarse[:-1], np.diff(grid))
    offsets = np.r_[offsets, coarse[-1:]]
    for k in np.flatnonzero(coarse[1:] != coarse[:-1]):
        lo, hi = int(grid[k]), int(grid[k + 1])
        offsets[lo: hi + 1] = ask(utc_ns[lo: hi + 1])
    return offsets


def _hour_keys(start: pd.Timestamp, epoch_s: float, n: int):
    """Per epoch: UTC ns of its local wall-clock hour start, the wall-clock hour count, the zone."""
    tz = pd.Timestamp(start).tz
    utc_ns = _elapsed_ns(start, epoch_s, n)
    if tz is None:
        wall_hour = utc_ns // _NS_PER_HOUR
        return wall_hour * _NS_PER_HOUR, wall_hour, tz
    offset = _utc_offsets_ns(utc_ns, tz)
    wall_hour = (utc_ns + offset) // _NS_PER_HOUR
    key = wall_hour * _NS_PER_HOUR
    key -= offset
    return key, wall_hour, tz


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
    if counts.size == 0:
        return pd.Series([], index=pd.DatetimeIndex([], tz=tz, name="hour"), dtype=float, name="counts_per_min")
    key, _, tz = _hour_keys(start, epoch_s, counts.size)
    step = np.diff(key)
    if (step >= 0).all():  # elapsed time runs forward: hour bins are runs of equal keys (np.unique's answer)
        first = np.r_[True, step != 0]
        bins, inverse = key[first], np.cumsum(first) - 1
    else:
        bins, inverse = np.unique(key, return_inverse=True)
    ok = valid & ~np.isnan(counts)
    n_ok = np.bincount(inverse, weights=ok.astype(float), minlength=bins.size)
    total = np.bincount(inverse, weights=np.where(ok, counts, 0.0), minlength=bins.size)
    per_hour = 3600.0 / float(epoch_s)
    enough = n_ok >= min_valid_fraction * per_hour - 1e-9
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(enough & (n_ok > 0), total / n_ok, np.nan) * (60.0 / float(epoch_s))
    index = pd.DatetimeIndex(pd.to_datetime(bins, unit="ns", utc=True), name="hour")
    index = index.tz_convert(tz) if tz is not None else index.tz_localize(None)
    return pd.Series(mean, index=index, name="counts_per_min")


def _circular_window_means(profile: np.ndarray, width: int) -> np.ndarray:
    """Mean of ``width`` consecutive hours starting at each hour of the 24-h profile (wraps)."""
    ext = np.concatenate((profile, profile[: width - 1]))
    windows = np.lib.stride_tricks.sliding_window_view(ext, width)
    return windows.mean(axis=1)  # NaN if any hour in the window is NaN


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
    hm = hourly_means(start, epoch_s, counts, valid, min_valid_fraction=min_valid_fraction)
    nan = float("nan")
    out = {k: nan for k in (*RHYTHM_PARAMETERS, "m10_onset_h", "l5_onset_h")}
    x_all = hm.to_numpy(dtype=float)
    ok = ~np.isnan(x_all)
    n = int(ok.sum())
    out["n_days"] = n / HOURS_PER_DAY
    if n == 0:
        return out
    hours = np.asarray(hm.index.hour, dtype=np.int64)
    x = x_all[ok]
    h = hours[ok]
    xbar = x.mean()
    ss_total = float(np.sum((x - xbar) ** 2))

    n_h = np.bincount(h, minlength=HOURS_PER_DAY).astype(float)
    sum_h = np.bincount(h, weights=x, minlength=HOURS_PER_DAY)
    with np.errstate(invalid="ignore", divide="ignore"):
        profile = np.where(n_h > 0, sum_h / n_h, np.nan)
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
    if np.any(~np.isnan(m10_w)):
        i = int(np.nanargmax(m10_w))
        out["m10"], out["m10_onset_h"] = float(m10_w[i]), float(i)
    if np.any(~np.isnan(l5_w)):
        i = int(np.nanargmin(l5_w))
        out["l5"], out["l5_onset_h"] = float(l5_w[i]), float(i)
    denom = out["m10"] + out["l5"]
    if np.isfinite(denom) and denom > 0:
        out["ra"] = (out["m10"] - out["l5"]) / denom
    return out
