"""The noon-to-noon night rule and elapsed time across DST (IANA tz rules via zoneinfo)."""

import datetime as dt

import pandas as pd

from sleepfuse.model.clock import clock_on_night, elapsed_min, night_of, nights_of

TZ = "America/Chicago"  # DST ends 2026-11-01 02:00 (IANA tz database), starts 2026-03-08 02:00


def test_night_of_noon_rule():
    # common practice (DESIGN.md): a period starting at 00:40 on 11 March belongs to 10 March
    assert night_of(pd.Timestamp("2026-03-11 00:40", tz=TZ)) == dt.date(2026, 3, 10)
    assert night_of(pd.Timestamp("2026-03-10 12:00", tz=TZ)) == dt.date(2026, 3, 10)
    assert night_of(pd.Timestamp("2026-03-10 11:59", tz=TZ)) == dt.date(2026, 3, 9)


def test_nights_of_uses_wall_clock_on_dst_days():
    times = pd.DatetimeIndex([pd.Timestamp("2026-11-01 11:30", tz=TZ), pd.Timestamp("2026-11-01 12:10", tz=TZ)])
    assert list(nights_of(times)) == [dt.date(2026, 10, 31), dt.date(2026, 11, 1)]


def test_clock_on_night_and_elapsed_across_fall_back():
    tried = clock_on_night(dt.time(23, 0), dt.date(2026, 10, 31), TZ)
    out = clock_on_night(dt.time(7, 0), dt.date(2026, 10, 31), TZ)
    assert out.date() == dt.date(2026, 11, 1)
    # 23:00 CDT to 07:00 CST is 9 h of real time (the 01:00 hour happens twice)
    assert elapsed_min(tried, out) == 9 * 60


def test_elapsed_across_spring_forward():
    tried = clock_on_night(dt.time(23, 0), dt.date(2026, 3, 7), TZ)
    out = clock_on_night(dt.time(7, 0), dt.date(2026, 3, 7), TZ)
    assert elapsed_min(tried, out) == 7 * 60  # 02:00-03:00 does not exist
