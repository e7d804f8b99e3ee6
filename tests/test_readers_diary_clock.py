"""The diary reader's per-file clock reader gives ``clock_on_night`` and ``_dst_note``'s results exactly.

``diary._ClockReader`` places HH:MM diary times with zoneinfo datetimes (PEP 495)
instead of one pandas conversion per cell; the careful path is
``timeutil.clock_on_night`` plus ``diary._dst_note``. Zone rules from the IANA
tz database (via zoneinfo); the EU change dates from Directive 2000/84/EC
(last Sunday of March / October at 01:00 UTC). Invented nights only.
"""

from __future__ import annotations

import datetime as dt

import pytest

from sleepfuse.readers import diary
from sleepfuse.model.clock import clock_on_night


def careful(clock: dt.time, night: dt.date, tz: str):
    value = clock_on_night(clock, night, tz)
    return value, diary._dst_note(value, clock)


def assert_same(a, b):
    (va, na), (vb, nb) = a, b
    assert va == vb and repr(va) == repr(vb) and va.fold == vb.fold and va.tzinfo is vb.tzinfo
    assert na == nb


# Nights that hold a DST change (spring or autumn), plus an ordinary one, per zone (IANA tz database).
CASES = [
    ("Europe/Berlin", [dt.date(2026, 3, 28), dt.date(2026, 10, 24), dt.date(2026, 6, 1)]),
    ("America/New_York", [dt.date(2026, 3, 7), dt.date(2026, 10, 31)]),
    ("Australia/Lord_Howe", [dt.date(2026, 4, 4), dt.date(2026, 10, 3)]),  # 30-minute change
    ("America/Havana", [dt.date(2026, 3, 7), dt.date(2026, 10, 31)]),  # changes at midnight
    ("UTC", [dt.date(2026, 3, 28)]),
    ("Asia/Kolkata", [dt.date(2026, 3, 28)]),
]


@pytest.mark.parametrize("tz,nights", CASES)
def test_clock_reader_matches_the_careful_path_every_five_minutes(tz, nights):
    reader = diary._ClockReader(tz)
    for night in nights:
        for minute in range(0, 24 * 60, 5):
            clock = dt.time(minute // 60, minute % 60, 7 * (minute % 3))
            assert_same(reader(clock, night), careful(clock, night, tz))


def test_clock_reader_notes_gap_and_repeat_as_the_eu_rule_gives():
    reader = diary._ClockReader("Europe/Berlin")
    # 2026-03-29 02:00-03:00 does not exist in Berlin: 02:30 is read with the winter offset (PEP 495).
    value, note = reader(dt.time(2, 30), dt.date(2026, 3, 28))
    assert value.isoformat() == "2026-03-29T03:30:00+02:00" and "does not exist" in note
    # 2026-10-25 02:00-03:00 occurs twice: the first (summer time, +02:00) is used.
    value, note = reader(dt.time(2, 30), dt.date(2026, 10, 24))
    assert value.isoformat() == "2026-10-25T02:30:00+02:00" and "occurs twice" in note
    value, note = reader(dt.time(23, 0), dt.date(2026, 10, 24))
    assert value.isoformat() == "2026-10-24T23:00:00+02:00" and note == ""


def test_read_diary_uses_the_clock_reader_and_the_careful_path_alike(tmp_path, monkeypatch):
    path = tmp_path / "P01_diary.csv"
    path.write_text("night,bedtime,tried_to_sleep,final_awakening,out_of_bed\n"
                    "2026-03-28,22:10,22:30,02:30,07:00\n"
                    "2026-10-24,23:50,00:10,02:40,2026-10-25T08:00\n", encoding="utf-8")
    fast = diary.read_diary(path, "Europe/Berlin", participant="P01")
    monkeypatch.setattr(diary, "_ClockReader", lambda tz: None)
    slow = diary.read_diary(path, "Europe/Berlin", participant="P01")
    assert fast.entries == slow.entries
    assert [(p.severity, p.message, p.time) for p in fast.problems] == [(p.severity, p.message, p.time) for p in slow.problems]
    assert any("does not exist" in p.message for p in fast.problems)
    assert any("occurs twice" in p.message for p in fast.problems)
