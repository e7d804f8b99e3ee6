"""The one time module (sleepfuse.model.clock): wall-clock readings to instants, DST rules, the noon rule.

References: the IANA tz database through ``zoneinfo`` (PEP 495 folds) and
pandas' ``tz_localize``; hand-worked DST cases from the published change
dates (EU: Directive 2000/84/EC, last Sunday of March / October at 01:00 UTC;
US: Energy Policy Act of 2005, second Sunday of March / first Sunday of
November at 02:00 local). Invented times only.
"""

from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest

from sleepfuse.model.clock import (GAP, REPEAT, clock_on_night, elapsed_min, localize, night_of, nights_of,
                                   place_clock, place_wall, wall_to_utc)
from sleepfuse.model.clock.instants import _clean_offsets

NAT = np.iinfo(np.int64).min
CHICAGO = "America/Chicago"


def pandas_reference(wall: np.ndarray, tz: str) -> np.ndarray:
    return pd.DatetimeIndex(wall).tz_localize(tz, ambiguous="NaT", nonexistent="NaT").as_unit("us").asi8


# Windows around offset changes (IANA tz database): EU and US spring/autumn, Lord Howe's 30-min change,
# Apia's skipped day (2011-12-30), Casablanca's Ramadan changes, Dublin's negative DST, a zone without DST.
WINDOWS = [
    ("Europe/Berlin", "2026-03-27", "2026-03-31"), ("Europe/Berlin", "2026-10-23", "2026-10-27"),
    ("America/Chicago", "2026-03-06", "2026-03-10"), ("America/Chicago", "2026-10-30", "2026-11-03"),
    ("Australia/Lord_Howe", "2026-04-03", "2026-04-07"), ("Australia/Lord_Howe", "2026-10-02", "2026-10-06"),
    ("Pacific/Apia", "2011-12-28", "2012-01-02"), ("Africa/Casablanca", "2026-02-10", "2026-03-30"),
    ("Europe/Dublin", "2026-10-23", "2026-10-27"), ("Asia/Kolkata", "2026-03-27", "2026-03-31"),
]


@pytest.mark.parametrize("tz,start,end", WINDOWS)
def test_wall_to_utc_is_pandas_tz_localize_wherever_the_wall_time_exists_once(tz, start, end):
    wall = np.arange(np.datetime64(start, "us"), np.datetime64(end, "us"), np.timedelta64(7 * 60 + 13, "s"))
    utc, gap = wall_to_utc(wall, tz)
    ref = pandas_reference(wall, tz)
    once = ref != NAT
    np.testing.assert_array_equal(utc[once], ref[once])
    assert not gap[once].any()


def test_the_autumn_hour_is_read_twice_in_file_order():
    # Berlin 2026-10-25 03:00 CEST -> 02:00 CET (EU rule): 30-s epochs run 02:00-02:59:30 twice;
    # the first pass is +02:00, the second +01:00.
    utc = np.arange(np.datetime64("2026-10-24T23:00", "us"), np.datetime64("2026-10-25T03:00", "us"),
                    np.timedelta64(30, "s"))
    wall = pd.DatetimeIndex(utc).tz_localize("UTC").tz_convert("Europe/Berlin").tz_localize(None).to_numpy()
    out, gap = wall_to_utc(wall.astype("datetime64[us]"), "Europe/Berlin")
    np.testing.assert_array_equal(out, utc.view(np.int64))
    assert not gap.any()


def test_a_spring_gap_time_is_read_with_the_offset_before_the_change_and_flagged():
    # Chicago 2026-03-08 02:00 CST -> 03:00 CDT (US rule): 02:30 does not exist; read at -06:00 = 08:30 UTC.
    wall = np.array(["2026-03-08T01:30", "2026-03-08T02:30", "2026-03-08T03:30"], dtype="datetime64[us]")
    out, gap = wall_to_utc(wall, CHICAGO)
    expected = np.array(["2026-03-08T07:30", "2026-03-08T08:30", "2026-03-08T08:30"], dtype="datetime64[us]")
    np.testing.assert_array_equal(out, expected.view(np.int64))
    assert gap.tolist() == [False, True, False]


@pytest.mark.parametrize("tz,start,end", WINDOWS + [
    ("Europe/Berlin", "2026-06-01", "2026-06-15"), ("UTC", "2026-03-27", "2026-03-31"),
    ("Asia/Kathmandu", "2026-05-01", "2026-05-09"), ("Europe/Berlin", "2026-03-16", "2026-03-31"),
    ("America/Chicago", "2026-02-20", "2027-01-10"), ("Africa/Casablanca", "2026-01-01", "2026-12-31"),
])
@pytest.mark.parametrize("holes", [False, True])
def test_clean_offsets_fast_path_is_tz_localize_and_declines_gap_or_repeated_times(tz, start, end, holes):
    """The fast path's offsets are pandas' wherever every wall time exists once (source: pandas
    ``tz_localize`` on the IANA database); it answers None whenever one does not. With ``holes`` the
    skipped and repeated wall times are left out of the column, as a device clock that follows the
    change records them: the fast path must then answer across the change."""
    wall = np.arange(np.datetime64(start, "us"), np.datetime64(end, "us"), np.timedelta64(30, "s"))
    ref = pandas_reference(wall, tz)
    if holes:
        wall, ref = wall[ref != NAT], ref[ref != NAT]
    w = wall.view(np.int64)
    got = _clean_offsets(w, tz)
    if (ref == NAT).any():
        assert got is None
        return
    np.testing.assert_array_equal(wall_to_utc(wall, tz)[0], ref)
    if got is None:  # declines only when a 6-h probe lands on a skipped wall time: Apia's missing day
        assert holes and tz == "Pacific/Apia"
    else:
        np.testing.assert_array_equal(w - got, ref)


def test_clean_offsets_declines_a_single_time_in_the_gap_between_probes():
    # Berlin 2026-03-29 02:00-03:00 does not exist (EU rule); one reading at 02:17:30 among hourly ones
    wall = np.arange(np.datetime64("2026-03-27T12:00", "us"), np.datetime64("2026-03-31T12:00", "us"),
                     np.timedelta64(1, "h"))
    wall = wall[(wall < np.datetime64("2026-03-29T02:00")) | (wall >= np.datetime64("2026-03-29T03:00"))]
    assert _clean_offsets(wall.view(np.int64), "Europe/Berlin") is not None
    odd = np.sort(np.r_[wall, np.datetime64("2026-03-29T02:17:30", "us")])
    assert _clean_offsets(odd.view(np.int64), "Europe/Berlin") is None
    _, gap = wall_to_utc(odd, "Europe/Berlin")
    assert gap.sum() == 1


ZONES = ["Europe/Berlin", "America/New_York", "Australia/Lord_Howe", "America/Havana", "UTC", "Asia/Kolkata"]


@pytest.mark.parametrize("tz", ZONES)
def test_place_wall_against_zoneinfo_every_ten_minutes_of_a_year_of_changes(tz):
    info = ZoneInfo(tz)
    for day in (dt.date(2026, 3, 7), dt.date(2026, 3, 29), dt.date(2026, 4, 5), dt.date(2026, 10, 4),
                dt.date(2026, 10, 25), dt.date(2026, 11, 1), dt.date(2026, 6, 1)):
        for minute in range(0, 24 * 60, 10):
            wall = dt.datetime.combine(day, dt.time(minute // 60, minute % 60))
            value, kind = place_wall(wall, tz)
            first, second = wall.replace(tzinfo=info), wall.replace(tzinfo=info, fold=1)
            exists = first.astimezone(dt.timezone.utc).astimezone(info).replace(tzinfo=None) == wall
            assert value.timestamp() == first.timestamp()  # fold=0 (PEP 495): first pass, or the offset before a gap
            assert kind == ("" if exists and first.utcoffset() == second.utcoffset() else (REPEAT if exists else GAP))
            assert value.value == localize(wall, tz).value and value.tzinfo is localize(wall, tz).tzinfo


def test_noon_rule_and_notes_hand_worked_in_berlin():
    value, kind = place_clock(dt.time(2, 30), dt.date(2026, 3, 28), "Europe/Berlin")
    assert value.isoformat() == "2026-03-29T03:30:00+02:00" and kind == GAP
    value, kind = place_clock(dt.time(2, 30), dt.date(2026, 10, 24), "Europe/Berlin")
    assert value.isoformat() == "2026-10-25T02:30:00+02:00" and kind == REPEAT
    value, kind = place_clock(dt.time(23, 0), dt.date(2026, 10, 24), "Europe/Berlin")
    assert value.isoformat() == "2026-10-24T23:00:00+02:00" and kind == ""


def test_night_of_noon_rule():
    # common practice (DESIGN.md): a period starting at 00:40 on 11 March belongs to 10 March
    assert night_of(pd.Timestamp("2026-03-11 00:40", tz=CHICAGO)) == dt.date(2026, 3, 10)
    assert night_of(pd.Timestamp("2026-03-10 12:00", tz=CHICAGO)) == dt.date(2026, 3, 10)
    assert night_of(pd.Timestamp("2026-03-10 11:59", tz=CHICAGO)) == dt.date(2026, 3, 9)


def test_nights_of_uses_wall_clock_on_dst_days():
    times = pd.DatetimeIndex([pd.Timestamp("2026-11-01 11:30", tz=CHICAGO), pd.Timestamp("2026-11-01 12:10", tz=CHICAGO)])
    assert list(nights_of(times)) == [dt.date(2026, 10, 31), dt.date(2026, 11, 1)]


def test_clock_on_night_and_elapsed_across_fall_back_and_spring_forward():
    tried = clock_on_night(dt.time(23, 0), dt.date(2026, 10, 31), CHICAGO)
    out = clock_on_night(dt.time(7, 0), dt.date(2026, 10, 31), CHICAGO)
    assert out.date() == dt.date(2026, 11, 1)
    assert elapsed_min(tried, out) == 9 * 60  # 23:00 CDT to 07:00 CST: the 01:00 hour happens twice
    tried = clock_on_night(dt.time(23, 0), dt.date(2026, 3, 7), CHICAGO)
    out = clock_on_night(dt.time(7, 0), dt.date(2026, 3, 7), CHICAGO)
    assert elapsed_min(tried, out) == 7 * 60  # 02:00-03:00 does not exist


def test_read_diary_notes_gap_and_repeat(tmp_path):
    from sleepfuse.readers.diary import read_diary

    path = tmp_path / "P01_diary.csv"
    path.write_text("night,bedtime,tried_to_sleep,final_awakening,out_of_bed\n"
                    "2026-03-28,22:10,22:30,02:30,07:00\n"
                    "2026-10-24,23:50,00:10,02:40,2026-10-25T08:00\n", encoding="utf-8")
    diary = read_diary(path, "Europe/Berlin", participant="P01")
    first, second = diary.entries
    assert first.final_awakening.isoformat() == "2026-03-29T03:30:00+02:00"
    assert second.final_awakening.isoformat() == "2026-10-25T02:40:00+02:00"
    assert second.out_of_bed.isoformat() == "2026-10-25T08:00:00+01:00"
    assert any("does not exist" in p.message for p in diary.problems)
    assert any("occurs twice" in p.message for p in diary.problems)
