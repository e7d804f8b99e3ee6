"""Wall-clock CSV timestamps to UTC: the sampled-offset shortcut equals pandas' tz_localize row by row.

``_csvtime._plain_utc`` reads each wall time with the zone offset sampled every
30 min and asks pandas only near an offset change; it must equal
``DatetimeIndex.tz_localize(tz, ambiguous="NaT", nonexistent="NaT")`` (pandas,
with the IANA tz database via zoneinfo) for every row, including times in the
spring-forward gap and the repeated autumn hour. Invented timestamps only.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from sleepfuse.readers._csvtime import _localize_wall, _plain_utc

NAT = np.iinfo(np.int64).min


def reference(wall: np.ndarray, tz: str) -> np.ndarray:
    return pd.DatetimeIndex(wall).tz_localize(tz, ambiguous="NaT", nonexistent="NaT").as_unit("us").asi8


# Windows around offset changes (IANA tz database): EU and US spring/autumn, Lord Howe's 30-min
# change, Apia's skipped day (2011-12-30), Casablanca's Ramadan changes, Dublin's negative DST.
WINDOWS = [
    ("Europe/Berlin", "2026-03-27", "2026-03-31"), ("Europe/Berlin", "2026-10-23", "2026-10-27"),
    ("America/Chicago", "2026-03-06", "2026-03-10"), ("America/Chicago", "2026-10-30", "2026-11-03"),
    ("Australia/Lord_Howe", "2026-04-03", "2026-04-07"), ("Australia/Lord_Howe", "2026-10-02", "2026-10-06"),
    ("Pacific/Apia", "2011-12-28", "2012-01-02"), ("Africa/Casablanca", "2026-02-10", "2026-03-30"),
    ("Europe/Dublin", "2026-10-23", "2026-10-27"), ("Asia/Kolkata", "2026-03-27", "2026-03-31"),
]


@pytest.mark.parametrize("tz,start,end", WINDOWS)
@pytest.mark.parametrize("step_s", [30, 7 * 60 + 13])
def test_plain_utc_equals_pandas_row_by_row(tz, start, end, step_s):
    wall = np.arange(np.datetime64(start, "us"), np.datetime64(end, "us"), np.timedelta64(step_s, "s"))
    np.testing.assert_array_equal(_plain_utc(wall.view(np.int64), tz), reference(wall, tz))


def test_plain_utc_on_unsorted_and_repeated_wall_times():
    rng = np.random.default_rng(7)
    base = np.datetime64("2026-10-24T12:00", "us")
    wall = base + rng.integers(0, 2 * 86400, 5000) * np.timedelta64(1, "s")  # any order, repeats
    np.testing.assert_array_equal(_plain_utc(wall.view(np.int64), "Europe/Berlin"), reference(wall, "Europe/Berlin"))


def test_localize_wall_reads_the_autumn_hour_twice_in_file_order():
    # 30-s epochs through the Berlin autumn change (2026-10-25 03:00 CEST -> 02:00 CET): the wall clock
    # runs 02:00-02:59:30 twice; the first pass is summer time (+02:00), the second winter time (+01:00).
    utc = np.arange(np.datetime64("2026-10-24T23:00", "us"), np.datetime64("2026-10-25T03:00", "us"),
                    np.timedelta64(30, "s"))
    wall = pd.DatetimeIndex(utc).tz_localize("UTC").tz_convert("Europe/Berlin").tz_localize(None).to_numpy()
    out, ok, problems = _localize_wall(wall.astype("datetime64[us]"), np.arange(wall.size) + 2, "Europe/Berlin")
    assert ok.all() and problems == []
    np.testing.assert_array_equal(out, utc.view(np.int64))


@pytest.mark.parametrize("tz,start,end", WINDOWS + [
    ("Europe/Berlin", "2026-06-01", "2026-06-15"), ("America/Chicago", "2026-01-05", "2026-01-19"),
    ("Australia/Lord_Howe", "2026-07-01", "2026-07-15"), ("UTC", "2026-03-27", "2026-03-31"),
    ("Asia/Kathmandu", "2026-05-01", "2026-05-09"),
])
def test_single_offset_shortcut_answers_only_when_one_offset_holds(tz, start, end):
    # Reference: pandas tz_localize of every wall time (IANA tz database via zoneinfo).
    from sleepfuse.readers._csvtime import _single_offset

    wall = np.arange(np.datetime64(start, "us"), np.datetime64(end, "us"), np.timedelta64(30, "s"))
    utc = reference(wall, tz)
    w = wall.view(np.int64)
    offsets = set((w - utc)[utc != NAT].tolist())
    one = len(offsets) == 1 and (utc != NAT).all()
    got = _single_offset(w, tz)
    if one:
        assert got == offsets.pop()
    else:
        assert got is None
