"""Tests for sleepfuse.readers.diary: noon rule, ISO times, rejected rows, DST, robustness.

All diaries are invented, for invented participants.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sleepfuse.model.config import DIARY_COLUMN_KEYS
from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import Diary
from sleepfuse.readers.diary import DIARY_DEFAULT_COLUMNS, read_diary
from sleepfuse.model.clock import elapsed_min

HEADER = "night,bedtime,tried_to_sleep,sol_min,nwak,waso_min,final_awakening,out_of_bed,quality"


def write(path: Path, *rows: str, header: str = HEADER) -> Path:
    path.write_text("\n".join((header, *rows)) + "\n", encoding="utf-8")
    return path


def test_default_columns_are_the_config_keys():
    assert DIARY_DEFAULT_COLUMNS == {k: k for k in DIARY_COLUMN_KEYS}


def test_noon_rule_places_clock_times_on_the_right_day(tmp_path):
    # Source: DESIGN.md / SLEEP_PARAMETERS.md noon-to-noon night rule (common practice).
    path = write(tmp_path / "P01_diary.csv", "2026-04-10,12:00,0:20,10,1,5,11:58,11:59,3")
    diary = read_diary(path, "Europe/Berlin", participant="P01")
    (e,) = diary.entries
    assert diary.problems == []
    assert e.participant == "P01" and e.night == dt.date(2026, 4, 10) and e.line == 2
    assert e.bedtime == pd.Timestamp("2026-04-10T12:00", tz="Europe/Berlin")  # at 12:00: the night's own date
    assert e.tried_to_sleep == pd.Timestamp("2026-04-11T00:20", tz="Europe/Berlin")  # 00:20 belongs to the night before
    assert e.final_awakening == pd.Timestamp("2026-04-11T11:58", tz="Europe/Berlin")
    assert e.out_of_bed == pd.Timestamp("2026-04-11T11:59", tz="Europe/Berlin")
    assert (e.sol_min, e.nwak, e.waso_min, e.quality) == (10.0, 1.0, 5.0, 3.0)


def test_evening_times_stay_on_the_nights_date_and_seconds_are_read(tmp_path):
    path = write(tmp_path / "P01_diary.csv", "2026-04-10,22:15:30,23:05,,,,06:30,06:45,")
    (e,) = read_diary(path, "Europe/Berlin", participant="P01").entries
    assert e.bedtime == pd.Timestamp("2026-04-10T22:15:30", tz="Europe/Berlin")
    assert e.out_of_bed == pd.Timestamp("2026-04-11T06:45", tz="Europe/Berlin")


def test_iso_timestamps_with_and_without_offset(tmp_path):
    # Source: ISO 8601; 2026-04-11T04:30:00Z is 06:30 in Berlin (CEST, UTC+2, IANA rules).
    path = write(tmp_path / "P01_diary.csv", "2026-04-10,2026-04-10T22:00:00,2026-04-10 22:30,,,,2026-04-11T04:30:00Z,2026-04-11T07:00:00+02:00,")
    (e,) = read_diary(path, "Europe/Berlin", participant="P01").entries
    assert e.bedtime.isoformat() == "2026-04-10T22:00:00+02:00"
    assert e.tried_to_sleep.isoformat() == "2026-04-10T22:30:00+02:00"
    assert e.final_awakening.isoformat() == "2026-04-11T06:30:00+02:00"
    assert e.out_of_bed.isoformat() == "2026-04-11T07:00:00+02:00"


def test_impossible_order_rejects_the_row_for_that_night(tmp_path):
    # Source: SLEEP_PARAMETERS.md "rejected for that night with a clear QC message naming the row".
    path = write(
        tmp_path / "P01_diary.csv",
        "2026-04-10,22:00,22:30,10,1,5,06:00,07:00,4",
        "2026-04-11,22:00,23:00,10,1,5,07:30,07:00,4",  # line 3: final awakening after out of bed
        "2026-04-12,23:30,23:00,10,1,5,06:00,07:00,4",  # line 4: bedtime after tried to sleep
        "2026-04-13,22:00,13:00,10,1,5,06:00,12:30,4",  # line 5: out of bed before tried to sleep
    )
    diary = read_diary(path, "Europe/Berlin", participant="P01")
    assert [e.night for e in diary.entries] == [dt.date(2026, 4, 10)]
    errors = [p for p in diary.problems if p.severity == "error"]
    assert [p.night for p in errors] == [dt.date(2026, 4, 11), dt.date(2026, 4, 12), dt.date(2026, 4, 13)]
    assert "line 3" in errors[0].message and "2026-04-11" in errors[0].message
    assert "out of bed 2026-04-12 07:00" in errors[0].message and "final awakening 2026-04-12 07:30" in errors[0].message
    assert "line 4" in errors[1].message and "tried to sleep" in errors[1].message and "bedtime" in errors[1].message
    assert "line 5" in errors[2].message and "rejected" in errors[2].message


@pytest.mark.parametrize(
    "tz,night,expected_tib",
    [
        # Source: IANA tz rules. Chicago springs forward 2026-03-08 02:00 (23:10 -> 07:00 is 6 h 50 min real time);
        ("America/Chicago", "2026-03-07", 410.0),
        # Chicago falls back 2026-11-01 02:00 (23:10 -> 07:00 is 8 h 50 min);
        ("America/Chicago", "2026-10-31", 530.0),
        # Berlin springs forward 2026-03-29 and falls back 2026-10-25.
        ("Europe/Berlin", "2026-03-28", 410.0),
        ("Europe/Berlin", "2026-10-24", 530.0),
        ("Europe/Berlin", "2026-06-13", 470.0),
    ],
)
def test_elapsed_minutes_across_midnight_and_dst(tmp_path, tz, night, expected_tib):
    path = write(tmp_path / "P03_diary.csv", f"{night},22:50,23:10,15,2,20,06:40,07:00,3")
    diary = read_diary(path, tz, participant="P03")
    (e,) = diary.entries
    assert elapsed_min(e.tried_to_sleep, e.out_of_bed) == expected_tib
    assert elapsed_min(e.bedtime, e.tried_to_sleep) == 20.0
    assert elapsed_min(e.final_awakening, e.out_of_bed) == 20.0


def test_clock_time_inside_the_spring_forward_gap_is_noted(tmp_path):
    # Source: IANA rules: 02:30 on 2026-03-08 does not exist in America/Chicago (02:00 CST -> 03:00 CDT).
    path = write(tmp_path / "P01_diary.csv", "2026-03-07,23:00,02:30,,,,06:30,07:00,")
    diary = read_diary(path, "America/Chicago", participant="P01")
    (e,) = diary.entries
    assert e.tried_to_sleep.utcoffset() == dt.timedelta(hours=-5)
    assert any("spring-forward gap" in p.message and "line 2" in p.message for p in diary.problems)


def test_missing_columns_and_blank_cells_are_none(tmp_path):
    path = write(tmp_path / "P01_diary.csv", "2026-04-10,23:00,", "2026-04-11,,", header="night,tried_to_sleep,quality")
    diary = read_diary(path, "UTC", participant="P01")
    # the absent expected columns are reported once for the file (issue 12 item 3), the blank cells are not
    (problem,) = diary.problems
    for name in ("bedtime", "sol_min", "nwak", "waso_min", "final_awakening", "out_of_bed"):
        assert f"expected column {name!r} is missing" in problem.message
    assert "'quality'" not in problem.message and "'tried_to_sleep'" not in problem.message
    first, second = diary.entries
    assert first.tried_to_sleep == pd.Timestamp("2026-04-10T23:00", tz="UTC")
    assert first.quality is None and first.bedtime is None and first.sol_min is None
    assert second.tried_to_sleep is None and second.line == 3


def test_bad_numbers_and_times_are_none_with_a_problem(tmp_path):
    path = write(tmp_path / "P01_diary.csv", "2026-04-10,late,23:00,ten,-1,5,06:00,06:30,3.5")
    diary = read_diary(path, "UTC", participant="P01")
    (e,) = diary.entries
    assert e.bedtime is None and e.sol_min is None and e.nwak is None
    assert e.waso_min == 5.0 and e.quality == 3.5
    msgs = [p.message for p in diary.problems]
    assert any("line 2" in m and "'sol_min'" in m and "'ten'" in m for m in msgs)
    assert any("line 2" in m and "'nwak'" in m and "'-1'" in m for m in msgs)
    assert any("line 2" in m and "'bedtime'" in m and "'late'" in m for m in msgs)
    assert all(p.severity == "warning" and p.night == dt.date(2026, 4, 10) for p in diary.problems)


def test_unreadable_night_skips_the_row_and_duplicate_night_is_rejected(tmp_path):
    path = write(
        tmp_path / "P01_diary.csv",
        "10/04/2026,23:00,23:10,,,,06:00,06:30,",
        "2026-04-10,23:00,23:10,,,,06:00,06:30,",
        "2026-04-10,23:30,23:40,,,,06:00,06:30,",
    )
    diary = read_diary(path, "UTC", participant="P01")
    assert [e.line for e in diary.entries] == [3]
    assert any("line 2" in p.message and "not a date" in p.message for p in diary.problems)
    dup = [p for p in diary.problems if "already given" in p.message]
    assert len(dup) == 1 and "line 4" in dup[0].message and "line 3" in dup[0].message


def test_participant_column_wins_and_is_required_without_a_name(tmp_path):
    header = "participant," + HEADER
    path = write(tmp_path / "diary.csv", "P01,2026-04-10,23:00,23:10,,,,06:00,06:30,", "P02,2026-04-10,22:00,22:10,,,,06:00,06:30,", header=header)
    diary = read_diary(path, "UTC", participant="diary")
    assert [e.participant for e in diary.entries] == ["P01", "P02"]  # same night, two participants: no duplicate
    with pytest.raises(ReadError, match="no participant"):
        read_diary(write(tmp_path / "x.csv", "2026-04-10,23:00,23:10,,,,06:00,06:30,"), "UTC")


def test_missing_night_column_lists_columns_and_mapping_works(tmp_path):
    path = write(tmp_path / "P01_diary.csv", "2026-04-10,23:10,06:30", header="Evening of,Settled,Up")
    with pytest.raises(ReadError) as err:
        read_diary(path, "UTC", participant="P01")
    assert "'Evening of'" in str(err.value) and "'Settled'" in str(err.value) and "[diary] columns" in str(err.value)
    diary = read_diary(path, "UTC", participant="P01",
                       columns={"night": "evening of", "tried_to_sleep": "Settled", "out_of_bed": "Up"})
    (e,) = diary.entries
    assert e.tried_to_sleep.hour == 23 and e.out_of_bed.day == 11


@pytest.mark.parametrize("text", ["", "night,bedtime\n", "\n\n"])
def test_empty_files_raise_read_error(tmp_path, text):
    path = tmp_path / "P01_diary.csv"
    path.write_text(text)
    with pytest.raises(ReadError):
        read_diary(path, "UTC", participant="P01")


def test_source_file_unchanged(tmp_path):
    path = write(tmp_path / "P01_diary.csv", "2026-10-24,22:50,23:10,15,2,20,06:40,07:00,3", "bad,row")
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    read_diary(path, "Europe/Berlin", participant="P01")
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before


# --- property-based: any input gives a Diary or our own ReadError (common practice)

FUZZ = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def _check_outcome(path: Path):
    try:
        diary = read_diary(path, "America/Chicago", participant="P09")
    except ReadError as exc:
        assert exc.path == path and exc.reason
        return
    assert isinstance(diary, Diary)
    for e in diary.entries:
        assert isinstance(e.night, dt.date) and e.line >= 2
        times = [t for t in (e.bedtime, e.tried_to_sleep, e.final_awakening, e.out_of_bed) if t is not None]
        assert all(t.tzinfo is not None for t in times)


@FUZZ
@given(data=st.binary(max_size=400))
def test_random_bytes_never_crash(tmp_path, data):
    path = tmp_path / "fuzz.csv"
    path.write_bytes(data)
    _check_outcome(path)


_cell = st.one_of(
    st.sampled_from(["", "00:20", "23:59", "12:00", "24:00", "7:5", "01:30", "02:30", "2026-11-01T01:30:00", "2026-03-08T02:30", "2026-11-01T07:00Z", "-3", "1e9", "nan", "x"]),
    st.dates(min_value=dt.date(2026, 1, 1), max_value=dt.date(2026, 12, 31)).map(str),
    st.text(max_size=10),
)


@FUZZ
@given(
    header=st.lists(st.sampled_from([*DIARY_COLUMN_KEYS, "Night ", "other"]), min_size=1, max_size=8),
    rows=st.lists(st.lists(_cell, min_size=0, max_size=9), max_size=12),
    sep=st.sampled_from([",", ";"]),
)
def test_plausible_random_diary_never_crashes(tmp_path, header, rows, sep):
    text = "\n".join([sep.join(header)] + [sep.join(r) for r in rows]) + "\n"
    path = tmp_path / "fuzz.csv"
    path.write_text(text, encoding="utf-8")
    _check_outcome(path)
