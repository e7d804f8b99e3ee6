"""Tests for sleepfuse.readers.actigraphy: grid, DST, problems, epochs, robustness.

All data are invented counts for invented participants, generated deterministically.
"""

from __future__ import annotations

import datetime as dt
import hashlib
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import ActigraphyRecord
from sleepfuse.readers.actigraphy import ACTIGRAPHY_DEFAULT_COLUMNS, read_actigraphy

UTC = dt.timezone.utc


def wall_clock_rows(start_utc: dt.datetime, n: int, epoch_s: int, tz: str) -> list[str]:
    """Naive local wall-clock strings of n epochs, converted by zoneinfo (reference: IANA tz data, PEP 495)."""
    z = ZoneInfo(tz)
    return [
        (start_utc + dt.timedelta(seconds=i * epoch_s)).astimezone(z).replace(tzinfo=None).isoformat()
        for i in range(n)
    ]


def write_csv(path: Path, stamps, counts=None, extra: dict | None = None, header=("timestamp", "counts")) -> Path:
    counts = list(range(len(stamps))) if counts is None else counts
    cols = {header[0]: stamps, header[1]: counts}
    cols.update(extra or {})
    names = list(cols)
    lines = [",".join(names)]
    for i in range(len(stamps)):
        lines.append(",".join(str(cols[k][i]) for k in names))
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


# --- DST: source: IANA tz database rules (US: second Sunday of March 02:00 -> 03:00,
# first Sunday of November 02:00 -> 01:00; EU: last Sunday of March / October at 01:00 UTC),
# and Python's zoneinfo with PEP 495 fold for the reference wall-clock strings.

DST_CASES = [
    # zone, UTC start, epochs, epoch_s, (index, expected local ISO time of that epoch)
    ("America/Chicago", dt.datetime(2026, 3, 8, 7, 0, tzinfo=UTC), 480, 30, (120, "2026-03-08T03:00:00-05:00")),
    ("America/Chicago", dt.datetime(2026, 11, 1, 5, 0, tzinfo=UTC), 480, 30, (240, "2026-11-01T01:00:00-06:00")),
    ("Europe/Berlin", dt.datetime(2026, 3, 29, 0, 0, tzinfo=UTC), 240, 60, (60, "2026-03-29T03:00:00+02:00")),
    ("Europe/Berlin", dt.datetime(2026, 10, 25, 0, 0, tzinfo=UTC), 960, 15, (240, "2026-10-25T02:00:00+01:00")),
]


@pytest.mark.parametrize("tz,start,n,epoch_s,check", DST_CASES)
def test_dst_change_gives_elapsed_time_without_gap_or_duplicate(tmp_path, tz, start, n, epoch_s, check):
    path = write_csv(tmp_path / "P01_act.csv", wall_clock_rows(start, n, epoch_s, tz))
    rec = read_actigraphy(path, tz)
    assert rec.problems == []
    assert rec.epoch_s == epoch_s
    assert rec.n_epochs == n
    assert rec.end - rec.start == pd.Timedelta(seconds=n * epoch_s)
    assert rec.start == pd.Timestamp(start)
    assert np.array_equal(rec.counts, np.arange(n, dtype=float))
    index, expected = check
    assert rec.epoch_times()[index] == pd.Timestamp(expected)
    assert rec.epoch_times()[index].isoformat() == expected
    # the epoch just before the change is one epoch earlier in elapsed time
    assert rec.epoch_times()[index] - rec.epoch_times()[index - 1] == pd.Timedelta(seconds=epoch_s)


def test_fall_back_file_starting_inside_the_second_pass(tmp_path):
    # Source: IANA rules (Chicago 2026-11-01 01:30 CST = 07:30 UTC); common practice: contiguous with what follows.
    start = dt.datetime(2026, 11, 1, 7, 30, tzinfo=UTC)
    path = write_csv(tmp_path / "P01_act.csv", wall_clock_rows(start, 240, 30, "America/Chicago"))
    rec = read_actigraphy(path, "America/Chicago")
    assert rec.problems == []
    assert rec.start.isoformat() == "2026-11-01T01:30:00-06:00"
    assert rec.n_epochs == 240


def test_timestamps_with_offsets_are_taken_as_given_and_mixed_with_wall_clock(tmp_path):
    # Source: ISO 8601 offsets; 01:59:30-06:00 is 07:59:30 UTC, 03:00:00 Chicago on 2026-03-08 is 08:00 UTC (IANA).
    stamps = ["2026-03-08T01:59:00-06:00", "2026-03-08T07:59:30Z", "2026-03-08T03:00:00", "2026-03-08T03:00:30-05:00"]
    rec = read_actigraphy(write_csv(tmp_path / "a.csv", stamps), "America/Chicago")
    assert rec.problems == []
    assert rec.n_epochs == 4
    assert rec.epoch_times()[2].isoformat() == "2026-03-08T03:00:00-05:00"
    assert str(rec.start.tz) == "America/Chicago"


# --- problems, with 1-based file lines (header = line 1): common practice


def test_gap_duplicate_and_bad_values_are_reported_with_line_numbers(tmp_path):
    text = (
        "timestamp,counts\n"
        "2026-01-10T22:00:00,5\n"  # line 2
        "2026-01-10T22:00:30,abc\n"  # line 3: not a number
        "2026-01-10T22:00:30,7\n"  # line 4: duplicate of line 3
        "2026-01-10T22:01:00,-3\n"  # line 5: negative
        "not a time,9\n"  # line 6: unreadable timestamp
        "2026-01-10T22:03:00,11\n"  # line 7: gap of 3 epochs before it
        "2026-01-10T22:03:31,12\n"  # line 8: off the grid by 1 s
    )
    path = tmp_path / "P02_act.csv"
    path.write_text(text, encoding="utf-8")
    rec = read_actigraphy(path, "UTC")
    msgs = [p.message for p in rec.problems]
    assert rec.n_epochs == 8
    assert np.array_equal(np.isnan(rec.counts), [False, True, True, True, True, True, False, False])
    assert rec.counts[0] == 5 and rec.counts[6] == 11 and rec.counts[7] == 12

    def one(fragment):
        hits = [m for m in msgs if fragment in m]
        assert hits, f"{fragment!r} not in {msgs}"
        return hits[0]

    assert "line 3" in one("not a number")
    assert "line 5" in one("negative counts")
    assert "line 4" in one("duplicate") and "line 3" in one("duplicate")
    assert "line 6" in one("unreadable timestamp")
    gap = one("gap")
    assert "3 missing epoch" in gap and "line 5" in gap and "line 7" in gap and "22:01:30" in gap
    assert "line 8" in one("not on the 30-s epoch grid")
    assert all(p.severity == "warning" for p in rec.problems)
    gap_problem = next(p for p in rec.problems if "gap" in p.message)
    assert gap_problem.time == pd.Timestamp("2026-01-10T22:01:30", tz="UTC")


def test_time_going_backwards_is_reported(tmp_path):
    stamps = ["2026-01-10T22:00:00", "2026-01-10T22:00:30", "2026-01-10T22:01:00", "2026-01-10T22:00:30", "2026-01-10T22:01:30"]
    rec = read_actigraphy(write_csv(tmp_path / "a.csv", stamps), "Europe/Berlin")
    back = [p for p in rec.problems if "backwards" in p.message]
    assert len(back) == 1 and "line 5" in back[0].message and "line 4" in back[0].message
    assert rec.n_epochs == 4


def test_wrong_column_name_lists_columns_found_and_the_study_toml_key(tmp_path):
    path = write_csv(tmp_path / "a.csv", ["2026-01-10T22:00:00", "2026-01-10T22:01:00"], header=("Moment", "Movement"))
    with pytest.raises(ReadError) as err:
        read_actigraphy(path, "UTC")
    msg = str(err.value)
    assert "'Moment'" in msg and "'Movement'" in msg and "[actigraphy] columns" in msg and "counts" in msg
    assert err.value.path == path
    rec = read_actigraphy(path, "UTC", columns={"timestamp": "MOMENT", "counts": "movement"})  # case-insensitive
    assert rec.n_epochs == 2 and rec.epoch_s == 60


def test_default_columns_constant():
    assert ACTIGRAPHY_DEFAULT_COLUMNS == {"timestamp": "timestamp", "counts": "counts", "off_wrist": "off_wrist", "marker": "marker"}


# --- epoch inference: 15, 30 and 60 s are the allowed actigraphy epochs (common practice)


@pytest.mark.parametrize("epoch_s", [15, 30, 60])
def test_epoch_length_is_inferred(tmp_path, epoch_s):
    start = dt.datetime(2026, 2, 1, 20, 0, tzinfo=UTC)
    stamps = wall_clock_rows(start, 50, epoch_s, "UTC")
    del stamps[10:13]  # a gap does not change the inferred epoch
    rec = read_actigraphy(write_csv(tmp_path / "a.csv", stamps), "UTC")
    assert rec.epoch_s == epoch_s and rec.n_epochs == 50
    assert np.isnan(rec.counts).sum() == 3


def test_45_s_epochs_are_rejected(tmp_path):
    stamps = wall_clock_rows(dt.datetime(2026, 2, 1, 20, 0, tzinfo=UTC), 20, 45, "UTC")
    with pytest.raises(ReadError, match=r"45 s.*allowed: 15, 30, 60"):
        read_actigraphy(write_csv(tmp_path / "a.csv", stamps), "UTC")


def test_off_wrist_and_marker_columns_become_bool_arrays(tmp_path):
    stamps = wall_clock_rows(dt.datetime(2026, 2, 1, 20, 0, tzinfo=UTC), 6, 60, "UTC")
    path = write_csv(tmp_path / "a.csv", stamps, extra={"off_wrist": ["0", "1", "1", "", "0", "0"], "marker": ["0", "", "1", "0", "0", "1"]})
    rec = read_actigraphy(path, "UTC")
    assert rec.off_wrist.dtype == bool and rec.marker.dtype == bool
    assert rec.off_wrist.tolist() == [False, True, True, False, False, False]
    assert rec.marker.tolist() == [False, False, True, False, False, True]
    assert [p for p in rec.problems if "off_wrist missing" in p.message and "line 5" in p.message]
    assert not [p for p in rec.problems if "marker" in p.message]  # blank marker = no press


def test_no_flags_columns_give_none(tmp_path):
    stamps = wall_clock_rows(dt.datetime(2026, 2, 1, 20, 0, tzinfo=UTC), 3, 60, "UTC")
    rec = read_actigraphy(write_csv(tmp_path / "a.csv", stamps), "UTC")
    assert rec.off_wrist is None and rec.marker is None


def test_bom_semicolon_crlf_and_trailing_blank_lines(tmp_path):
    body = "timestamp;counts\r\n2026-02-01T20:00:00;3\r\n2026-02-01T20:00:30;4\r\n\r\n\r\n"
    path = tmp_path / "a.csv"
    path.write_bytes(b"\xef\xbb\xbf" + body.encode())
    rec = read_actigraphy(path, "UTC")
    assert rec.counts.tolist() == [3.0, 4.0]
    (info,) = rec.problems  # the dialect, logged as info (issue 14)
    assert info.severity == "info" and "utf-8 with BOM" in info.message and "semicolon" in info.message


def test_quoted_file_keeps_line_numbers(tmp_path):
    text = 'timestamp,counts\n"2026-02-01T20:00:00","3"\n"2026-02-01T20:00:30","x"\n'
    path = tmp_path / "a.csv"
    path.write_text(text)
    rec = read_actigraphy(path, "UTC")
    assert any("line 3" in p.message and "not a number" in p.message for p in rec.problems)


def test_rows_with_extra_fields_are_reported_by_line(tmp_path):
    path = tmp_path / "a.csv"
    path.write_text("timestamp,counts\n2026-02-01T20:00:00,3\n2026-02-01T20:00:30,4,7\n2026-02-01T20:01:00,5\n")
    rec = read_actigraphy(path, "UTC")
    assert rec.counts.tolist() == [3.0, 4.0, 5.0]
    assert [p.message for p in rec.problems] == ["line 3: more fields than the header has; extra fields ignored"]


def test_wall_time_inside_the_spring_forward_gap_is_reported(tmp_path):
    # Source: IANA rules: 2026-03-08 02:00-02:59 does not exist in America/Chicago; read with the offset
    # before the change (CST, UTC-6), so 02:30 is 08:30 UTC (common practice for an unchanged device clock).
    stamps = ["2026-03-08T01:59:00", "2026-03-08T02:30:00", "2026-03-08T03:31:00"]
    rec = read_actigraphy(write_csv(tmp_path / "a.csv", stamps), "America/Chicago")
    gap_notes = [p for p in rec.problems if "spring-forward gap" in p.message]
    assert len(gap_notes) == 1 and "line 3" in gap_notes[0].message
    assert gap_notes[0].time == pd.Timestamp("2026-03-08T08:30:00Z")


@pytest.mark.parametrize(
    "text,fragment",
    [
        ("", "empty"),
        ("\n\n", "empty"),
        ("timestamp,counts\n", "no data rows"),
        ("timestamp,counts\nfoo,1\nbar,2\n", "no readable timestamps"),
        ("timestamp,counts\n2026-02-01T20:00:00,1\n", "fewer than two"),
    ],
)
def test_unusable_files_raise_read_error(tmp_path, text, fragment):
    path = tmp_path / "a.csv"
    path.write_text(text)
    with pytest.raises(ReadError, match=fragment):
        read_actigraphy(path, "UTC")


def test_missing_file_and_unknown_zone_raise_read_error(tmp_path):
    with pytest.raises(ReadError, match="not found"):
        read_actigraphy(tmp_path / "nope.csv", "UTC")
    path = write_csv(tmp_path / "a.csv", ["2026-02-01T20:00:00", "2026-02-01T20:01:00"])
    with pytest.raises(ReadError, match="time zone"):
        read_actigraphy(path, "Mars/Olympus")


def test_isolated_far_timestamp_is_ignored_not_a_huge_grid(tmp_path):
    stamps = wall_clock_rows(dt.datetime(2026, 2, 1, 20, 0, tzinfo=UTC), 10, 60, "UTC")
    stamps[5] = "2099-01-01T00:00:00"
    rec = read_actigraphy(write_csv(tmp_path / "a.csv", stamps), "UTC")
    assert rec.n_epochs == 10
    assert any("out of sequence" in p.message and "line 7" in p.message for p in rec.problems)


def test_source_file_unchanged(tmp_path):
    stamps = wall_clock_rows(dt.datetime(2026, 11, 1, 5, 0, tzinfo=UTC), 300, 30, "America/Chicago")
    path = write_csv(tmp_path / "a.csv", stamps)
    before = hashlib.sha256(path.read_bytes()).hexdigest()
    stat = path.stat()
    read_actigraphy(path, "America/Chicago")
    assert hashlib.sha256(path.read_bytes()).hexdigest() == before
    assert path.stat().st_mtime_ns == stat.st_mtime_ns


# --- property-based: any input gives a record or our own ReadError (common practice)

FUZZ = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])


def _check_outcome(path: Path):
    try:
        rec = read_actigraphy(path, "America/Chicago")
    except ReadError as exc:
        assert exc.path == path and exc.reason
        return
    assert isinstance(rec, ActigraphyRecord)
    assert rec.counts.dtype == np.float64 and rec.n_epochs >= 1
    assert rec.epoch_s in (15, 30, 60)


@FUZZ
@given(data=st.binary(max_size=400))
def test_random_bytes_never_crash(tmp_path, data):
    path = tmp_path / "fuzz.csv"
    path.write_bytes(data)
    _check_outcome(path)


_cell_stamp = st.one_of(
    st.datetimes(min_value=dt.datetime(2026, 10, 31, 22), max_value=dt.datetime(2026, 11, 1, 4)).map(lambda d: d.isoformat()),
    st.sampled_from(["2026-11-01T01:30:00", "2026-11-01T01:30:00-06:00", "2026-03-08T02:30:00", "", "x", "2026-13-01", "24:00"]),
    st.text(max_size=12),
)
_cell_value = st.one_of(st.integers(-5, 10**6).map(str), st.sampled_from(["", "nan", "inf", "1e400", "-0", "1.5", "x"]), st.text(max_size=6))


@FUZZ
@given(
    header=st.lists(st.sampled_from(["timestamp", "counts", "off_wrist", "marker", "Counts ", "x"]), min_size=1, max_size=5),
    rows=st.lists(st.tuples(_cell_stamp, _cell_value, _cell_value, _cell_value), max_size=30),
    sep=st.sampled_from([",", ";", "\t"]),
    quote=st.booleans(),
)
def test_plausible_random_csv_never_crashes(tmp_path, header, rows, sep, quote):
    q = (lambda c: '"' + c.replace('"', '""') + '"') if quote else (lambda c: c)
    lines = [sep.join(q(h) for h in header)]
    for row in sorted(rows) if len(rows) % 2 else rows:
        lines.append(sep.join(q(c) for c in row[: len(header) + 1]))
    path = tmp_path / "fuzz.csv"
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    _check_outcome(path)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    tz_start=st.sampled_from(
        [("America/Chicago", dt.datetime(2026, 11, 1, 4, 0, tzinfo=UTC)), ("Europe/Berlin", dt.datetime(2026, 10, 24, 23, 0, tzinfo=UTC)),
         ("America/Chicago", dt.datetime(2026, 3, 8, 6, 0, tzinfo=UTC)), ("Europe/Berlin", dt.datetime(2026, 3, 28, 23, 0, tzinfo=UTC))]
    ),
    offset=st.integers(0, 200),
    drop=st.sets(st.integers(1, 358), max_size=40),
)
def test_rows_missing_around_a_dst_change_land_on_their_true_epoch(tmp_path, tz_start, offset, drop):
    # Source: IANA tz rules via zoneinfo (PEP 495) for the wall clock; every row's count is its true epoch index,
    # so each kept row must land on that index (a row lost in the repeated hour must not shift the second pass).
    tz, start = tz_start
    start = start + dt.timedelta(seconds=30 * offset)
    stamps = wall_clock_rows(start, 360, 30, tz)
    keep = [i for i in range(360) if i not in drop]
    path = write_csv(tmp_path / "a.csv", [stamps[i] for i in keep], counts=keep)
    rec = read_actigraphy(path, tz)
    assert rec.start == pd.Timestamp(start)
    assert rec.n_epochs == 360  # first and last rows are always kept
    present = ~np.isnan(rec.counts)
    assert np.array_equal(np.flatnonzero(present), np.array(keep))
    assert np.array_equal(rec.counts[present], np.array(keep, dtype=float))
    assert not [p for p in rec.problems if "duplicate" in p.message or "backwards" in p.message]
