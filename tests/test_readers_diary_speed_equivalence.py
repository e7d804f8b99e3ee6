"""The diary reader's fast clock path gives the careful path's results exactly.

The careful path is ``timeutil.clock_on_night`` (noon rule) plus ``diary._dst_note``
(one pandas conversion per cell); the fast path is ``diary._ClockReader`` (zoneinfo
offsets, PEP 495), which ``read_diary`` calls through ``_ClockReader.place`` with
clock texts it has parsed before. Each value must be the same Timestamp (value,
repr, unit, fold, the very tzinfo object) and each note the same text, across DST
changes. Zone rules come from the IANA tz database (via zoneinfo); the DST-change
nights are found from zoneinfo itself, and a few are spot-checked against the
rules that set them: the EU's Directive 2000/84/EC (last Sunday of March /
October, 01:00 UTC), the US Energy Policy Act of 2005 (second Sunday of March /
first Sunday of November, 02:00 local), Lord Howe Island's half-hour change
(first Sunday of October / April, 02:00 local; from memory, matches the tz
database). All diaries here are invented, for invented participants.
"""

from __future__ import annotations

import datetime as dt
import functools
from zoneinfo import ZoneInfo

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sleepfuse.readers import diary
from sleepfuse.model.clock import clock_on_night, localize

ZONES = ("Europe/Berlin", "America/Chicago", "Australia/Lord_Howe", "UTC")


def careful(clock: dt.time, night: dt.date, tz: str):
    value = clock_on_night(clock, night, tz)
    return value, diary._dst_note(value, clock)


def same_time(a, b) -> bool:
    if a is None or b is None:
        return a is b
    return a == b and repr(a) == repr(b) and a.unit == b.unit and a.fold == b.fold and a.tzinfo is b.tzinfo


def assert_same(fast, slow):
    (va, na), (vb, nb) = fast, slow
    assert same_time(va, vb), (va, vb)
    assert na == nb


@functools.lru_cache(maxsize=None)
def change_nights(tz: str, first_year: int = 2025, last_year: int = 2027) -> tuple[dt.date, ...]:
    """Nights (noon-rule dates) whose noon-to-noon span holds a UTC-offset change in ``tz``."""
    info = ZoneInfo(tz)
    out = []
    night = dt.date(first_year, 1, 1)
    while night.year <= last_year:
        a = dt.datetime.combine(night, dt.time(12), info).utcoffset()
        b = dt.datetime.combine(night + dt.timedelta(days=1), dt.time(12), info).utcoffset()
        if a != b:
            out.append(night)
        night += dt.timedelta(days=1)
    return tuple(out)


def test_change_nights_are_the_ones_the_rules_give():
    # Directive 2000/84/EC: 2026-03-29 and 2026-10-25 (last Sundays), i.e. the nights of the Saturdays before.
    assert {dt.date(2026, 3, 28), dt.date(2026, 10, 24)} <= set(change_nights("Europe/Berlin"))
    # Energy Policy Act of 2005: 2026-03-08 (second Sunday of March) and 2026-11-01 (first Sunday of November).
    assert {dt.date(2026, 3, 7), dt.date(2026, 10, 31)} <= set(change_nights("America/Chicago"))
    # Lord Howe Island: 2026-04-05 and 2026-10-04 (first Sundays of April and October).
    assert {dt.date(2026, 4, 4), dt.date(2026, 10, 3)} <= set(change_nights("Australia/Lord_Howe"))
    assert change_nights("UTC") == ()
    assert len(change_nights("Europe/Berlin")) == 6  # two a year, 2025-2027


@pytest.mark.parametrize(
    "tz,night,clock,iso,note",
    [
        # Chicago: 02:00 CST -> 03:00 CDT on 2026-03-08; 02:30 is read with the offset before (PEP 495).
        ("America/Chicago", dt.date(2026, 3, 7), dt.time(2, 30), "2026-03-08T03:30:00-05:00", "does not exist"),
        # Chicago: 02:00 CDT -> 01:00 CST on 2026-11-01; 01:30 occurs twice, the first (CDT) is used.
        ("America/Chicago", dt.date(2026, 10, 31), dt.time(1, 30), "2026-11-01T01:30:00-05:00", "occurs twice"),
        # Lord Howe: 02:00 -> 02:30 on 2026-10-04 (+10:30 -> +11:00): 02:15 does not exist.
        ("Australia/Lord_Howe", dt.date(2026, 10, 3), dt.time(2, 15), "2026-10-04T02:45:00+11:00", "does not exist"),
        # Lord Howe: 02:00 -> 01:30 on 2026-04-05: 01:45 occurs twice.
        ("Australia/Lord_Howe", dt.date(2026, 4, 4), dt.time(1, 45), "2026-04-05T01:45:00+11:00", "occurs twice"),
        # Berlin 2026-10-25: 03:00 is after the repeat, 01:59:59 before it; neither is odd.
        ("Europe/Berlin", dt.date(2026, 10, 24), dt.time(3, 0), "2026-10-25T03:00:00+01:00", ""),
        ("Europe/Berlin", dt.date(2026, 10, 24), dt.time(1, 59, 59), "2026-10-25T01:59:59+02:00", ""),
        # Berlin 2026-03-29: 02:00 itself is the first minute of the gap.
        ("Europe/Berlin", dt.date(2026, 3, 28), dt.time(2, 0), "2026-03-29T03:00:00+02:00", "does not exist"),
        ("UTC", dt.date(2026, 3, 28), dt.time(2, 30), "2026-03-29T02:30:00+00:00", ""),
    ],
)
def test_fast_path_spot_checks_against_the_rules(tz, night, clock, iso, note):
    fast = diary._ClockReader(tz)(clock, night)
    assert fast[0].isoformat() == iso
    assert (note in fast[1]) if note else fast[1] == ""
    assert_same(fast, careful(clock, night, tz))


@pytest.mark.parametrize("tz", ZONES)
def test_fast_path_matches_the_careful_path_every_minute_of_the_change_hours(tz):
    """Every minute from 00:00 to 04:59 (where the changes are) and every 7 minutes otherwise,
    on every change night 2025-2027 and an ordinary night; seconds vary."""
    reader = diary._ClockReader(tz)
    nights = change_nights(tz) + (dt.date(2026, 6, 1),)
    notes = {"does not exist": 0, "occurs twice": 0}
    for night in nights:
        for minute in range(24 * 60):
            if minute >= 5 * 60 and minute % 7:
                continue
            clock = dt.time(minute // 60, minute % 60, (minute * 13) % 60 if minute % 4 == 0 else 0)
            slow = careful(clock, night, tz)
            assert_same(reader(clock, night), slow)
            assert_same(reader.place((clock, clock.replace(fold=1), clock < diary.NOON), night), slow)
            for key in notes:
                notes[key] += key in slow[1]
    if tz == "UTC":
        assert notes == {"does not exist": 0, "occurs twice": 0}
    else:  # each change night holds a gap or a repeat of 30 or 60 minutes
        assert notes["does not exist"] >= 3 * 30 and notes["occurs twice"] >= 3 * 30


def _nights_near_changes():
    return st.sampled_from(ZONES).flatmap(
        lambda tz: st.tuples(
            st.just(tz),
            st.one_of(
                st.sampled_from(change_nights(tz) or (dt.date(2026, 3, 28),)),
                st.dates(min_value=dt.date(1990, 1, 1), max_value=dt.date(2035, 12, 31)),
            ),
        )
    )


@settings(max_examples=400, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    zone_night=_nights_near_changes(),
    hour=st.one_of(st.integers(0, 4), st.integers(0, 23)),
    minute=st.integers(0, 59),
    second=st.sampled_from([0, 0, 0, 1, 30, 59]),
)
def test_fast_path_matches_the_careful_path_property(zone_night, hour, minute, second):
    tz, night = zone_night
    clock = dt.time(hour, minute, second)
    slow = careful(clock, night, tz)
    assert_same(diary._ClockReader(tz)(clock, night), slow)
    parsed = diary._clock_of(f"{hour:02d}:{minute:02d}:{second:02d}")
    assert parsed == (clock, clock, clock < diary.NOON) and parsed[1].fold == 1
    assert_same(diary._ClockReader(tz).place(parsed, night), slow)


def test_clock_text_parsing_is_unchanged_and_remembered_texts_stay_right():
    assert diary._clock_of("7:05")[0] == dt.time(7, 5)
    assert diary._clock_of("23:59:59")[0] == dt.time(23, 59, 59)
    for bad in ("24:00", "12:60", "23:59:60", "99:99"):
        assert diary._clock_of(bad) is None
    for not_clock in ("7:5", "22.30", "1:30am", "2026-03-29T02:30", "x", "123:00"):
        assert diary._clock_of(not_clock) is False
    # Asked again (now from the cache): the same answers.
    assert diary._clock_of("7:05")[0] == dt.time(7, 5) and diary._clock_of("24:00") is None


def test_zone_cache_follows_a_cleared_zoneinfo_cache():
    """The reader remembers pandas' tzinfo per zone name; after ZoneInfo.clear_cache() it must give
    the tzinfo pandas gives now, as the careful path does."""
    before = diary._ClockReader("Europe/Berlin")(dt.time(22, 0), dt.date(2026, 6, 1))[0]
    ZoneInfo.clear_cache(only_keys=["Europe/Berlin"])
    after_fast = diary._ClockReader("Europe/Berlin")(dt.time(22, 0), dt.date(2026, 6, 1))[0]
    after_slow = clock_on_night(dt.time(22, 0), dt.date(2026, 6, 1), "Europe/Berlin")
    assert after_fast.tzinfo is after_slow.tzinfo is localize(dt.datetime(2000, 1, 1), "Europe/Berlin").tzinfo
    assert after_fast == before


# --- whole files: the fast reader against the same reader with the careful path only -------------

HEADER = "night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality"


def read_both(path, tz, monkeypatch, **kw):
    fast = diary.read_diary(path, tz, **kw)
    with monkeypatch.context() as m:
        m.setattr(diary, "_ClockReader", lambda tz: None)  # every time through clock_on_night + _dst_note
        slow = diary.read_diary(path, tz, **kw)
    return fast, slow


def assert_same_diary(fast, slow):
    assert fast.path == slow.path
    assert fast.entries == slow.entries
    for a, b in zip(fast.entries, slow.entries):
        for key in diary.TIME_KEYS:
            assert same_time(getattr(a, key), getattr(b, key)), key
    assert len(fast.problems) == len(slow.problems)
    for a, b in zip(fast.problems, slow.problems):
        assert (a.severity, a.message, a.night, a.participant) == (b.severity, b.message, b.night, b.participant)
        assert same_time(a.time, b.time)


_clock_cell = st.builds(lambda h, m: f"{h:02d}:{m:02d}", st.integers(0, 23), st.integers(0, 59))
_time_cell = st.one_of(
    _clock_cell,
    _clock_cell,
    st.sampled_from(["", "24:00", "7:5", "12:60", "x", "2026-03-29T02:30", "2026-10-25T02:30", "2026-10-25T02:30+01:00",
                     "2026-11-01T01:30:00", "2026-03-08T02:30", "2026-11-01T07:00Z", "2026-02-30T22:00", "2026-10-24 23:10"]),
)
_number_cell = st.sampled_from(["", "0", "5", "2,5", "-1", "nan", "x", "1e3", "10.5"])


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(
    tz=st.sampled_from(ZONES),
    rows=st.lists(
        st.tuples(
            st.integers(-1, 1),  # night: a change night's neighbour or itself
            st.sampled_from([0, 1, 2, 3]),  # which change night
            st.lists(_time_cell, min_size=4, max_size=4),
            st.lists(_number_cell, min_size=4, max_size=4),
        ),
        min_size=1,
        max_size=14,
    ),
)
def test_read_diary_fast_equals_careful_on_dst_nights(tmp_path_factory, monkeypatch, tz, rows):
    nights = change_nights(tz) or (dt.date(2026, 3, 28), dt.date(2026, 10, 24))
    lines = [HEADER]
    for shift, which, (bt, tts, fa, oob), (sol, nwak, waso, q) in rows:
        night = nights[which % len(nights)] + dt.timedelta(days=shift)
        lines.append(",".join([night.isoformat(), bt, tts, sol, nwak, waso, fa, oob, q]))
    path = tmp_path_factory.mktemp("diary") / "P01_diary.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    assert_same_diary(*read_both(path, tz, monkeypatch, participant="P01"))


def test_read_diary_fast_equals_careful_and_names_every_problem(tmp_path, monkeypatch):
    """One file with every kind of row; the messages are the reader's documented wording."""
    path = tmp_path / "P01_diary.csv"
    path.write_text(
        "participant,night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality\n"
        "P01,2026-03-28,22:10,22:30,10,1,5,02:30,07:00,4\n"  # 02:30 in the spring gap
        "P01,2026-10-24,23:50,00:10,5,0,0,02:40,2026-10-25T08:00,3\n"  # 02:40 occurs twice
        "P01,2026-10-24,23:00,23:10,,,,06:00,06:30,\n"  # duplicate night
        "P02,2026-05-01,23:00,22:00,x,,,06:00,06:30,\n"  # tried to sleep before bedtime; bad number
        ",2026-05-02,23:00,23:10,,,,06:00,06:30,\n"  # participant from the file name
        "P03,05/03/2026,23:00,23:10,,,,06:00,06:30,\n"  # not a date
        "P03,2026-05-04,25:00,2026-05-04T23:30+02:00,,,,06:00,06:30,\n"  # bad clock; ISO with offset
        "\n",
        encoding="utf-8",
    )
    fast, slow = read_both(path, "Europe/Berlin", monkeypatch, participant="P09")
    assert_same_diary(fast, slow)
    assert [(e.participant, e.night, e.line) for e in fast.entries] == [
        ("P01", dt.date(2026, 3, 28), 2),
        ("P01", dt.date(2026, 10, 24), 3),
        ("P09", dt.date(2026, 5, 2), 6),
        ("P03", dt.date(2026, 5, 4), 8),
    ]
    assert [p.message for p in fast.problems] == [
        "line 2, night 2026-03-28: final_awakening '02:30' does not exist on that day (spring-forward gap); read as 03:30+0200",
        "line 3, night 2026-10-24: final_awakening '02:40' occurs twice on that day (autumn change); read as the first, 02:40+0200",
        "line 4: participant P01 night 2026-10-24 already given on line 3; this row rejected (first kept)",
        "line 5, night 2026-05-01: column 'sol_min' (sol_min) value 'x' is not a number of zero or more; left empty",
        "line 5, night 2026-05-01: tried to sleep 2026-05-01 22:00 is before bedtime 2026-05-01 23:00; "
        "row rejected for this night, fix the diary",
        "line 7: night '05/03/2026' is not a date (use YYYY-MM-DD); row skipped",
        "line 8, night 2026-05-04: column 'bedtime' (bedtime) value '25:00' is not a time (use HH:MM or ISO 8601); left empty",
    ]
    assert [p.severity for p in fast.problems] == ["warning", "warning", "error", "warning", "error", "warning", "warning"]
    gap = fast.problems[0]
    assert gap.time == pd.Timestamp("2026-03-29T03:30", tz="Europe/Berlin") and gap.participant == "P01"
    e = fast.entries[3]
    assert e.bedtime is None and e.tried_to_sleep.isoformat() == "2026-05-04T23:30:00+02:00"


@pytest.mark.parametrize("tz", ["Europe/Berlin", "America/Chicago"])
def test_reading_again_and_in_another_zone_gives_the_careful_result(tmp_path, monkeypatch, tz):
    """The text caches (clock texts, numbers, columns, zones) carry no zone or night: the same file
    read twice, and in two zones one after the other, gives the careful result each time."""
    path = tmp_path / "P01_diary.csv"
    path.write_text(HEADER + "\n2026-03-07,22:15,23:00,10,1,5,02:30,07:00,4\n2026-10-31,23:15,00:00,10,1,5,01:30,07:00,4\n",
                    encoding="utf-8")
    for _ in range(2):
        assert_same_diary(*read_both(path, "Europe/Berlin", monkeypatch, participant="P01"))
        assert_same_diary(*read_both(path, tz, monkeypatch, participant="P01"))
