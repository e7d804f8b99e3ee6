"""Time stamps as labs write them (issue 14): each form parsed, and every instant cross-checked
against ``datetime.strptime`` with the explicit format (Python standard library) localized by
``zoneinfo``. Invented values only."""

from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest

from sleepfuse.model.errors import ReadError
from sleepfuse.readers._stamps import DateOrderUnsettled, parse_clock, parse_wall
from sleepfuse.readers.actigraphy import read_actigraphy

TZ = "America/Chicago"
# Across midnight, so 12-hour clocks pass 11:59 PM -> 12:00 AM; day 14 > 12 settles the order.
WALL = [dt.datetime(2026, 5, 14, 23, 58, 30) + dt.timedelta(seconds=30 * i) for i in range(8)]
COUNTS = list(range(8))

FORMATS = [
    "%Y-%m-%dT%H:%M:%S",        # ISO 8601
    "%Y-%m-%d %H:%M:%S.%f",     # ISO with a space and fractional seconds
    "%Y/%m/%d %H:%M:%S",        # year-first with slashes
    "%m/%d/%Y %I:%M:%S %p",     # month-first, 12-hour clock
    "%d/%m/%Y %H:%M:%S",        # day-first, slashes
    "%d.%m.%Y %H:%M:%S",        # day-first, dots
    "%d-%m-%y %H:%M:%S",        # day-first, dashes, two-digit year
    "%m-%d-%y %I:%M:%S%p",      # month-first, two-digit year, AM/PM without a space
    "%d.%m.%Y %H:%M:%S,%f",     # fractional seconds with a decimal comma
]


def expected_instants(texts, fmt):
    z = ZoneInfo(TZ)
    return np.array([int(dt.datetime.strptime(t, fmt).replace(tzinfo=z).timestamp() * 1_000_000) for t in texts])


@pytest.mark.parametrize("fmt", FORMATS)
def test_one_column_in_each_form_matches_strptime(tmp_path, fmt):
    texts = [t.strftime(fmt) for t in WALL]
    path = tmp_path / "a.csv"
    sep = ";" if "," in fmt else ","  # a decimal comma in the seconds goes with a semicolon-delimited file
    path.write_text(f"timestamp{sep}counts\n" + "".join(f"{s}{sep}{c}\n" for s, c in zip(texts, COUNTS)))
    rec = read_actigraphy(path, TZ)
    got = rec.epoch_times().as_unit("us").asi8
    np.testing.assert_array_equal(got, expected_instants(texts, fmt))
    assert rec.counts.tolist() == COUNTS and rec.epoch_s == 30


@pytest.mark.parametrize("date_fmt,time_fmt", [("%d/%m/%Y", "%H:%M:%S"), ("%m/%d/%Y", "%I:%M:%S %p"),
                                               ("%Y-%m-%d", "%H:%M:%S")])
def test_date_and_time_in_two_columns(tmp_path, date_fmt, time_fmt):
    path = tmp_path / "a.csv"
    path.write_text("date,time,activity\n" + "".join(f"{t:{date_fmt}},{t:{time_fmt}},{c}\n" for t, c in zip(WALL, COUNTS)))
    rec = read_actigraphy(path, TZ)
    texts = [f"{t:{date_fmt}} {t:{time_fmt}}" for t in WALL]
    np.testing.assert_array_equal(rec.epoch_times().as_unit("us").asi8, expected_instants(texts, f"{date_fmt} {time_fmt}"))


def test_optional_seconds_with_one_minute_epochs():
    texts = pd.Series(["14/05/2026 23:58", "14/05/2026 23:59", "15/05/2026 00:00"])
    wall, fmt = parse_wall(texts)
    ref = [dt.datetime.strptime(t, "%d/%m/%Y %H:%M") for t in texts]
    assert wall.astype("datetime64[us]").tolist() == ref and fmt.order == "day-first" and fmt.seconds == "none"


def test_ambiguous_dates_name_the_setting_and_the_setting_settles_them(tmp_path):
    days = [dt.datetime(2026, 3, 4, 22, 0) + dt.timedelta(minutes=i) for i in range(3)]  # 04/03 or 03/04?
    path = tmp_path / "a.csv"
    path.write_text("timestamp,counts\n" + "".join(f"{t:%d/%m/%Y %H:%M},{i}\n" for i, t in enumerate(days)))
    with pytest.raises(ReadError, match=r"\[study\] date_order"):
        read_actigraphy(path, TZ)
    rec = read_actigraphy(path, TZ, date_order="day-first")
    assert rec.start.to_pydatetime().replace(tzinfo=None) == days[0]
    rec = read_actigraphy(path, TZ, date_order="month-first")
    assert rec.start.month == 4 and rec.start.day == 3


def test_the_sequence_of_dates_settles_what_single_values_cannot():
    # 01/11 .. 07/11: each fits both orders, but only day-first steps by one day at a time
    texts = pd.Series([f"{d:02d}/11/2026 22:00" for d in range(1, 8)])
    wall, fmt = parse_wall(texts)
    assert fmt.order == "day-first" and fmt.settled_by == "the sequence of dates"
    assert wall.astype("datetime64[us]").tolist() == [dt.datetime.strptime(t, "%d/%m/%Y %H:%M") for t in texts]


def test_unsettled_without_setting_raises():
    with pytest.raises(DateOrderUnsettled, match="date_order"):
        parse_wall(pd.Series(["03/04/2026 22:00"]))


def test_conflicting_orders_are_an_error():
    with pytest.raises(ValueError, match="neither all day-first nor all month-first"):
        parse_wall(pd.Series(["13/04/2026 22:00", "04/13/2026 22:00"]))


@pytest.mark.parametrize("text,fmt", [("12:00 AM", "%I:%M %p"), ("12:30 PM", "%I:%M %p"), ("1:05 pm", "%I:%M %p"),
                                      ("11:59:59 PM", "%I:%M:%S %p"), ("23:15", "%H:%M"), ("07:05:09", "%H:%M:%S")])
def test_clock_times_match_strptime(text, fmt):
    ref = dt.datetime.strptime(text.upper(), fmt).time()
    assert parse_clock(text) == (ref.hour, ref.minute, ref.second, 0)


@pytest.mark.parametrize("text", ["13:00 PM", "0:30 AM", "24:00", "12:60"])
def test_impossible_clock_times_are_refused(text):
    assert parse_clock(text) is None


def test_epoch_length_and_start_from_header_lines_for_a_counts_only_file(tmp_path):
    path = tmp_path / "a.csv"
    path.write_text("Start: 14/05/2026 23:58:30\nEpoch length: 00:00:30\n\ncounts\n" + "".join(f"{c}\n" for c in COUNTS))
    rec = read_actigraphy(path, TZ)
    assert rec.epoch_s == 30 and rec.counts.tolist() == COUNTS
    np.testing.assert_array_equal(rec.epoch_times().as_unit("us").asi8,
                                  expected_instants([f"{t:%Y-%m-%d %H:%M:%S}" for t in WALL], "%Y-%m-%d %H:%M:%S"))
