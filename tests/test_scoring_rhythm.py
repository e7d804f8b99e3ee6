"""Rest-activity rhythm (Van Someren et al. 1999, Chronobiol Int 16:505–518; formulas from memory).

Limiting cases that follow from the formulas by hand, on invented series.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

from sleepfuse.scoring import rhythm as R
from sleepfuse.scoring.rhythm import RHYTHM_PARAMETERS, hourly_means, rest_activity_rhythm

TZ = "Europe/Berlin"


def hourly_series(values_per_hour, epoch_s=60.0):
    """Epoch counts holding each hourly value constant for the hour."""
    per_hour = int(3600 / epoch_s)
    return np.repeat(np.asarray(values_per_hour, dtype=float), per_hour)


def start_midnight(day="2024-03-04"):
    return pd.Timestamp(f"{day} 00:00", tz=TZ)


def test_hourly_means_index_units_and_partial_hours():
    start = pd.Timestamp("2024-03-04 12:40", tz=TZ)
    c = np.full(2 * 60 * 3, 10.0)  # 30-s epochs of 10 counts for 3 h -> 20 counts/min
    hm = hourly_means(start, 30.0, c, np.ones(c.size, bool))
    assert str(hm.index.tz) == TZ
    assert list(hm.index.hour) == [12, 13, 14, 15]
    # the 12:00 hour holds 20 min (< 50 % of the hour) -> NaN; 15:00-15:40 holds 40 min -> kept
    assert math.isnan(hm.iloc[0])
    assert hm.iloc[1] == 20.0 and hm.iloc[2] == 20.0 and hm.iloc[3] == 20.0
    # with a stricter threshold the 40-min hour drops too
    assert math.isnan(hourly_means(start, 30.0, c, np.ones(c.size, bool), min_valid_fraction=0.7).iloc[3])
    # non-wear: an hour with only 25 valid min is excluded
    v = np.ones(c.size, bool)
    v[(20 + 35) * 2 : (20 + 60) * 2] = False  # 13:35-14:00 invalid -> 35 valid of 60 in 13:00
    hm2 = hourly_means(start, 30.0, c, v)
    assert hm2.iloc[1] == 20.0
    v[(20 + 25) * 2 : (20 + 60) * 2] = False  # only 25 min valid now
    assert math.isnan(hourly_means(start, 30.0, c, v).iloc[1])


def test_hourly_means_dst_fall_back_has_25_hours():
    # local wall-clock hours; 27 Oct 2024 Berlin repeats 02:00 (elapsed time is real)
    start = pd.Timestamp("2024-10-27 00:00", tz=TZ)
    n = 25 * 60
    hm = hourly_means(start, 60.0, np.ones(n), np.ones(n, bool))
    assert len(hm) == 25
    assert list(hm.index.hour[:5]) == [0, 1, 2, 2, 3]
    assert hm.index[-1] == pd.Timestamp("2024-10-27 23:00", tz=TZ)


def test_perfectly_repeated_day_gives_is_one():
    # IS = 1 when every day repeats the same 24-h profile (Van Someren 1999)
    rng = np.random.default_rng(3)
    profile = rng.uniform(0, 500, 24)
    c = hourly_series(np.tile(profile, 7))
    r = rest_activity_rhythm(start_midnight(), 60.0, c, np.ones(c.size, bool))
    assert set(RHYTHM_PARAMETERS) <= set(r)
    assert r["is"] == pytest.approx(1.0, abs=1e-12)
    assert r["n_days"] == 7.0
    # excluded hours drop out and the repeated pattern still gives 1
    v = np.ones(c.size, bool)
    v[5 * 60 : 9 * 60] = False
    v[50 * 60 : 51 * 60] = False
    r2 = rest_activity_rhythm(start_midnight(), 60.0, c, v)
    assert r2["is"] == pytest.approx(1.0, abs=1e-12)
    assert r2["n_days"] == pytest.approx((7 * 24 - 5) / 24)


def test_is_equals_van_someren_formula_on_complete_data():
    # IS = n·Σh(x̄h − x̄)² / (p·Σi(xi − x̄)²), p = 24 (Van Someren 1999), written out directly
    rng = np.random.default_rng(5)
    x = np.tile(rng.uniform(50, 300, 24), 10) + rng.normal(0, 40, 240)
    r = rest_activity_rhythm(start_midnight(), 60.0, hourly_series(x), np.ones(240 * 60, bool))
    n, p = x.size, 24
    xh = x.reshape(10, 24).mean(axis=0)
    is_ref = n * np.sum((xh - x.mean()) ** 2) / (p * np.sum((x - x.mean()) ** 2))
    iv_ref = n * np.sum(np.diff(x) ** 2) / ((n - 1) * np.sum((x - x.mean()) ** 2))
    assert r["is"] == pytest.approx(is_ref, rel=1e-9)
    assert r["iv"] == pytest.approx(iv_ref, rel=1e-9)
    assert 0 < r["is"] < 1


def test_alternating_hours_give_iv_four():
    # hand-worked from IV = n·Σ(xi − xi−1)² / ((n − 1)·Σ(xi − x̄)²): alternating 10, 0
    # -> x̄ = 5, Σ(xi − x̄)² = 25n, Σ diffs² = 100(n − 1) -> IV = 4 exactly.
    # (The "near 2" often quoted is Gaussian noise, next test; alternation is the maximum.)
    x = np.tile([10.0, 0.0], 7 * 12)
    r = rest_activity_rhythm(start_midnight(), 60.0, hourly_series(x), np.ones(x.size * 60, bool))
    assert r["iv"] == pytest.approx(4.0)


def test_white_noise_gives_iv_near_two():
    # E[Σ diffs²] = 2(n − 1)σ², E[Σ dev²] ≈ nσ² -> IV ≈ 2 for independent hours
    rng = np.random.default_rng(8)
    x = rng.normal(200, 30, 28 * 24)
    r = rest_activity_rhythm(start_midnight(), 60.0, hourly_series(x), np.ones(x.size * 60, bool))
    assert r["iv"] == pytest.approx(2.0, abs=0.25)
    assert r["is"] < 0.1


def test_smooth_daily_sine_gives_iv_near_zero():
    # a 24-h sinusoid sampled hourly: IV -> 2·(1 − cos(2π/24)) = 0.068 (hand-worked limit)
    t = np.arange(14 * 24)
    x = 200 + 150 * np.sin(2 * np.pi * t / 24)
    r = rest_activity_rhythm(start_midnight(), 60.0, hourly_series(x), np.ones(x.size * 60, bool))
    assert r["iv"] == pytest.approx(2 * (1 - math.cos(2 * math.pi / 24)), abs=0.002)
    assert r["is"] == pytest.approx(1.0)


def _profile():
    prof = np.full(24, 50.0)
    prof[8:18] = 100.0  # 10 active hours 08-18
    prof[0:5] = 10.0  # 5 quiet hours 00-05
    return prof


def test_m10_l5_ra_by_hand():
    # M10 = 100 (08:00 onset), L5 = 10 (00:00 onset), RA = (100 − 10)/(100 + 10) = 0.8182
    c = hourly_series(np.tile(_profile(), 5))
    r = rest_activity_rhythm(start_midnight(), 60.0, c, np.ones(c.size, bool))
    assert r["m10"] == pytest.approx(100.0) and r["m10_onset_h"] == 8
    assert r["l5"] == pytest.approx(10.0) and r["l5_onset_h"] == 0
    assert r["ra"] == pytest.approx(90 / 110)


def test_l5_wraps_round_midnight():
    prof = np.full(24, 80.0)
    prof[[22, 23, 0, 1, 2]] = 5.0  # quiet 22:00-03:00
    c = hourly_series(np.tile(prof, 4))
    r = rest_activity_rhythm(start_midnight(), 60.0, c, np.ones(c.size, bool))
    assert r["l5"] == pytest.approx(5.0) and r["l5_onset_h"] == 22


def test_nonwear_hours_are_excluded():
    # an afternoon of zeros marked off-wrist must not change the rhythm measures
    prof_days = np.tile(_profile(), 5)
    c_ref = hourly_series(prof_days)
    v = np.ones(c_ref.size, bool)
    ref = rest_activity_rhythm(start_midnight(), 60.0, c_ref, v)
    c = c_ref.copy()
    c[(2 * 24 + 13) * 60 : (2 * 24 + 16) * 60] = 0.0  # day 3, 13:00-16:00 off wrist
    v[(2 * 24 + 13) * 60 : (2 * 24 + 16) * 60] = False
    r = rest_activity_rhythm(start_midnight(), 60.0, c, v)
    for k in ("is", "m10", "l5", "ra"):
        assert r[k] == pytest.approx(ref[k]), k
    # if the zeros were taken as worn, M10 would drop
    r_bad = rest_activity_rhythm(start_midnight(), 60.0, c, np.ones(c.size, bool))
    assert r_bad["m10"] < ref["m10"]


def test_no_valid_data():
    r = rest_activity_rhythm(start_midnight(), 60.0, np.zeros(600), np.zeros(600, bool))
    assert r["n_days"] == 0 and all(math.isnan(r[k]) for k in RHYTHM_PARAMETERS)


def _reference_hourly(start, epoch_s, counts, valid, min_valid_fraction=0.5):
    """Hourly means by pandas alone, epoch by epoch (common practice): each epoch's local
    wall-clock hour, told apart by its UTC offset where the clock repeats an hour."""
    n = counts.size
    utc = pd.DatetimeIndex(pd.Timestamp(start).tz_convert("UTC") + pd.to_timedelta(np.arange(n) * epoch_s, unit="s"))
    local = utc.tz_convert(start.tz)
    wall = local.tz_localize(None)
    offset = wall - utc.tz_localize(None)
    key = (wall.floor("h") - offset).as_unit("ns").asi8  # UTC instant (ns) of the local hour start
    ok = valid & ~np.isnan(counts)
    df = pd.DataFrame({"key": key, "ok": ok.astype(float), "c": np.where(ok, counts, 0.0)})
    g = df.groupby("key", sort=False).sum()
    per_hour = 3600.0 / epoch_s
    mean = np.where(g["ok"] >= min_valid_fraction * per_hour - 1e-9, g["c"] / g["ok"].where(g["ok"] > 0), np.nan)
    return g.index.to_numpy(), mean * (60.0 / epoch_s)


@pytest.mark.parametrize("tz, start, days, epoch_s", [
    ("Europe/Berlin", "2026-03-27 11:58:30", 4, 30.0),   # spring forward
    ("Europe/Berlin", "2026-10-23 12:00:00", 4, 30.0),   # fall back
    ("America/Chicago", "2026-10-31 21:17:15", 3, 15.0),
    ("Asia/Kolkata", "2026-05-01 07:41:00", 2, 60.0),    # +05:30, no DST
    ("Australia/Lord_Howe", "2026-04-03 12:00:00", 3, 60.0),  # DST of 30 min
    ("Australia/Lord_Howe", "2026-10-02 12:07:00", 3, 30.0),
    ("UTC", "2026-01-01 00:00:00", 1, 3600.0),
    ("Europe/Berlin", "2026-10-24 23:31:00", 2, 3600.0),
    ("Europe/Berlin", "2026-10-24 12:00:00", 1.5, 7.5),   # not whole seconds: the epoch-by-epoch path
])
def test_hourly_means_equal_a_pandas_epoch_by_epoch_reference(tz, start, days, epoch_s):
    rng = np.random.default_rng(3)
    ts = pd.Timestamp(start, tz=tz)
    n = int(days * 86400 / epoch_s)
    counts = rng.gamma(1.0, 50.0, n)
    counts[rng.random(n) < 0.02] = np.nan
    valid = rng.random(n) < 0.9
    hm = hourly_means(ts, epoch_s, counts, valid)
    keys, mean = _reference_hourly(ts, epoch_s, counts, valid)
    np.testing.assert_array_equal(hm.index.as_unit("ns").asi8, keys)
    np.testing.assert_allclose(hm.to_numpy(), mean, rtol=1e-12, equal_nan=True)
    assert list(hm.index.hour) == list(pd.DatetimeIndex(pd.to_datetime(keys, utc=True)).tz_convert(tz).hour)


def test_window_means_and_extremes_match_numpy():
    # M10/L5 windows: the mean of ``width`` consecutive hours of the 24-h profile, wrapping round
    # midnight, NaN when an hour is missing (numpy's nanargmax/nanargmin pick the first extreme).
    rng = np.random.default_rng(31)
    for trial in range(600):
        p = rng.gamma(1.0, 100.0, 24) * (rng.random() * 10) ** rng.integers(-3, 4)
        if trial % 3 == 0:
            p[rng.random(24) < 0.3] = np.nan
        if trial % 11 == 0:
            p = np.round(p / 50.0) * 50.0  # ties: the first extreme wins
        for width in (5, 10, 1, 24):
            w = R._circular_window_means(p, width)
            expected = np.array([np.mean(np.take(p, range(i, i + width), mode="wrap")) for i in range(24)])
            np.testing.assert_allclose(w, expected, rtol=1e-12, equal_nan=True)
            if not np.isnan(w).all():
                assert R._first_max(w) == int(np.nanargmax(w))
                assert R._first_min(w) == int(np.nanargmin(w))


def test_timestamp_value_is_nanoseconds_whatever_the_unit():
    # _hour_runs reads Timestamp.value as ns since the epoch (pandas 2 keeps .value in ns for every unit).
    for unit in ("s", "ms", "us", "ns"):
        for text in ("2026-03-09 11:59:00", "1970-01-01", "1900-02-28 23:59:59", "2261-12-31 23:00"):
            ts = pd.Timestamp(text, tz="Europe/Berlin").as_unit(unit)
            assert ts.value == ts.as_unit("ns").value


@pytest.mark.parametrize("tz", ["Europe/Berlin", "Australia/Lord_Howe", "America/St_Johns", "Asia/Kolkata", "UTC"])
def test_zone_offsets_are_pandas_utcoffset_at_each_instant(tz):
    # The hour bins rest on the zone's UTC offset at each instant (30-min zones and half-hour DST included).
    rng = np.random.default_rng(2)
    lo, hi = pd.Timestamp("1901-01-01", tz="UTC").value, pd.Timestamp("2100-01-01", tz="UTC").value
    u = np.sort(rng.integers(lo, hi, 300, dtype=np.int64))
    expected = [int(pd.Timestamp(x, tz="UTC").tz_convert(tz).utcoffset().total_seconds()) * 10**9 for x in u]
    assert R._ask_offsets(u, pd.Timestamp(0, tz=tz).tz).tolist() == expected
