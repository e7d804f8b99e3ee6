"""Sleep-diary CSV reader: one entry per participant and night, times in local time.

Clock times ``HH:MM`` follow the noon rule (DESIGN.md): at or after 12:00 on
the night's date, before 12:00 on the next day. Full ISO timestamps are read
as given (with an offset) or as wall clock in the study zone. Problems are
reported, never fixed: a row whose times are in an impossible order is left
out for that night with an error naming the line.
"""

from __future__ import annotations

import datetime as dt
import math
import re
from pathlib import Path
from zoneinfo import ZoneInfo

import pandas as pd

from sleepfuse.model.config import DIARY_COLUMN_KEYS
from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import Diary, DiaryEntry, Problem
from sleepfuse.model.clock import NOON, clock_on_night, localize, pandas_tzinfo, zone
from ._csvtext import blank_rows, find_column, missing_column_message, ragged_problems, read_table

DIARY_DEFAULT_COLUMNS = {k: k for k in DIARY_COLUMN_KEYS}
TIME_KEYS = ("bedtime", "tried_to_sleep", "final_awakening", "out_of_bed")
NUMBER_KEYS = ("sol_min", "nwak", "waso_min", "quality")
_LABEL = {
    "bedtime": "bedtime",
    "tried_to_sleep": "tried to sleep",
    "final_awakening": "final awakening",
    "out_of_bed": "out of bed",
}
# (earlier, later): the later one may not come before the earlier one.
_ORDER = (
    ("bedtime", "tried_to_sleep"),
    ("tried_to_sleep", "final_awakening"),
    ("tried_to_sleep", "out_of_bed"),
    ("final_awakening", "out_of_bed"),
)
_CLOCK_RE = re.compile(r"^(\d{1,2}):(\d{2})(?::(\d{2}))?$")
_DATE_RE = re.compile(r"^\d{4}-\d{2}-\d{2}")


def read_diary(
    path, tz: str, *, columns: dict[str, str] | None = None, participant: str | None = None
) -> Diary:
    """Read a sleep-diary CSV: one DiaryEntry per (participant, night).

    ``participant`` comes from the file name; a ``participant`` column, if the
    file has one, wins. ``columns`` maps our keys to the file's column names
    (study.toml ``[diary] columns``).
    """
    path = Path(path)
    try:
        zone(tz)
    except ValueError as exc:
        raise ReadError(path, str(exc)) from None
    clock = _ClockReader(tz)
    names = dict(DIARY_DEFAULT_COLUMNS)
    names.update(columns or {})
    table = read_table(path)
    problems: list[Problem] = ragged_problems(table)

    col = {key: _find_column(table.header, names[key]) for key in DIARY_COLUMN_KEYS}
    if col["night"] is None:
        raise ReadError(path, missing_column_message("night", names["night"], table.header, "diary"))
    if col["participant"] is None and not participant:
        raise ReadError(
            path,
            "no participant: the file has no "
            + repr(names["participant"])
            + " column and its name gives no participant ID; add the column or name the file <participant>_diary.csv",
        )
    if columns:
        for key in columns:
            if key in col and col[key] is None and key != "night":
                problems.append(Problem("warning", f"column {names[key]!r} (for {key}, set in study.toml) is not in the file"))

    rows = table.values().tolist()  # lists of str: plain indexing beats numpy's per cell
    filled = blank_rows(rows)
    records = [row for row, blank in zip(rows, filled) if not blank]
    lines = [line for line, blank in zip(table.lines.tolist(), filled) if not blank]
    if len(records) == 0:
        raise ReadError(path, "the file has a header but no diary rows")

    j_night = col["night"]
    j_who = col["participant"]
    times = [(key, j, table.header[j]) for key in TIME_KEYS if (j := col[key]) is not None]
    numbers = [(key, j, table.header[j]) for key in NUMBER_KEYS if (j := col[key]) is not None]
    place = getattr(clock, "place", None)  # None: every time through _parse_time (the careful path)
    clocks = _CLOCKS
    entries: list[DiaryEntry] = []
    seen: dict[tuple[str, dt.date], int] = {}
    for row, line in zip(records, lines):
        who = (str(row[j_who]).strip() if j_who is not None else "") or participant
        if not who:
            problems.append(Problem("warning", f"line {line}: no participant ID; row skipped"))
            continue
        night_text = str(row[j_night]).strip()
        night = _parse_night(night_text)
        if night is None:
            problems.append(
                Problem("warning", f"line {line}: night {night_text[:30]!r} is not a date (use YYYY-MM-DD); row skipped")
            )
            continue
        entry = DiaryEntry(participant=who, night=night, line=line)
        for key, j, name in times:
            text = str(row[j]).strip()
            if not text:
                continue
            parsed = clocks.get(text)
            if parsed is not None and place is not None:
                value, note = place(parsed, night)  # an HH:MM[:SS] seen before: straight to the clock reader
            else:
                value, note = _parse_time(text, night, tz, clock)
            if value is None:
                problems.append(
                    Problem(
                        "warning",
                        f"line {line}, night {night}: column {name!r} ({key}) value {text[:30]!r} "
                        "is not a time (use HH:MM or ISO 8601); left empty",
                        night=night,
                        participant=who,
                    )
                )
            else:
                setattr(entry, key, value)
                if note:
                    problems.append(Problem("warning", f"line {line}, night {night}: {key} {text!r} {note}", time=value, night=night, participant=who))
        for key, j, name in numbers:
            text = str(row[j]).strip()
            if not text:
                continue
            number = _NUMBERS.get(text, _UNSEEN)
            if number is _UNSEEN:
                number = _parse_number(text)
                if len(_NUMBERS) >= 4096:
                    _NUMBERS.clear()
                _NUMBERS[text] = number
            if number is None:
                problems.append(
                    Problem(
                        "warning",
                        f"line {line}, night {night}: column {name!r} ({key}) value {text[:30]!r} "
                        "is not a number of zero or more; left empty",
                        night=night,
                        participant=who,
                    )
                )
            else:
                setattr(entry, key, number)

        disorder = _order_problem(entry)
        if disorder:
            problems.append(
                Problem("error", f"line {line}, night {night}: {disorder}; row rejected for this night, fix the diary", night=night, participant=who)
            )
            continue
        if (who, night) in seen:
            problems.append(
                Problem(
                    "error",
                    f"line {line}: participant {who} night {night} already given on line {seen[(who, night)]}; "
                    "this row rejected (first kept)",
                    night=night,
                    participant=who,
                )
            )
            continue
        seen[(who, night)] = line
        entries.append(entry)
    return Diary(path=path, entries=entries, problems=problems)


def _parse_night(text: str) -> dt.date | None:
    """An ISO date (YYYY-MM-DD); a full timestamp is accepted for its date."""
    if not _DATE_RE.match(text):
        return None
    try:
        return dt.date.fromisoformat(text[:10])
    except ValueError:
        return None


class _ClockReader:
    """Diary clock times on a night in one zone, as ``clock_on_night`` places them, with their DST note.

    Works on zoneinfo datetimes (PEP 495) instead of one pandas conversion per
    cell; gives ``clock_on_night`` and ``_dst_note``'s results exactly
    (tests/test_readers_diary_clock.py and tests/test_readers_diary_speed_equivalence.py
    compare them across DST changes).

    Fast path: a wall time that maps to itself through UTC and has the same UTC
    offset for fold=0 and fold=1 is neither in a spring gap nor repeated, so it
    needs no note; that takes two offset look-ups and one ``fromutc``, the same
    ``fromutc`` call (same argument) that ``astimezone`` makes in the careful
    steps. Anything else (gap, repeat, odd zone data) takes the careful steps.
    """

    def __init__(self, tz: str):
        self.tz = tz
        self.info = _pandas_tzinfo(tz)

    def __call__(self, clock: dt.time, night: dt.date) -> tuple[pd.Timestamp, str]:
        if self.info is not None and (clock.fold or clock.tzinfo is not None):  # not from _clock_of: careful steps
            return self._careful(clock, night if clock >= NOON else night + _ONE_DAY)
        return self.place((clock, clock.replace(fold=1), clock < NOON), night)

    def place(self, parsed: tuple[dt.time, dt.time, bool], night: dt.date) -> tuple[pd.Timestamp, str]:
        """``__call__`` for a clock as ``_clock_of`` gives it: (time, the same with fold=1, before noon)."""
        clock, clock1, next_day = parsed
        info = self.info
        if info is None:
            value = clock_on_night(clock, night, self.tz)
            return value, _dst_note(value, clock)
        day = night + _ONE_DAY if next_day else night
        wall = _combine(day, clock, info)  # fold 0, as ``clock`` has fold 0
        offset = info.utcoffset(wall)
        local = info.fromutc(wall - offset)  # what ``astimezone`` from UTC gives: same call, same argument
        # Same tzinfo: == compares the wall fields (date and time), fold aside.
        if local == wall and info.utcoffset(_combine(day, clock1)) == offset:
            return pd.Timestamp(local), ""
        return self._careful(clock, day)

    def _careful(self, clock: dt.time, day: dt.date) -> tuple[pd.Timestamp, str]:
        """The PEP 495 steps in full: UTC of the wall time, back to local, fold=1 for a repeat."""
        first = self._utc(dt.datetime.combine(day, clock), 0)
        local = first.astimezone(self.info)
        value = pd.Timestamp(local)
        if local.time() != clock:
            return value, f"does not exist on that day (spring-forward gap); read as {value:%H:%M%z}"
        if self._utc(local.replace(tzinfo=None), 1) != first:
            return value, f"occurs twice on that day (autumn change); read as the first, {value:%H:%M%z}"
        return value, ""

    def _utc(self, wall: dt.datetime, fold: int) -> dt.datetime:
        """The instant (UTC) of wall time ``wall``; ``fold`` as in PEP 495."""
        return wall.replace(tzinfo=self.info, fold=fold).astimezone(dt.timezone.utc).replace(fold=0)


def _pandas_tzinfo(tz: str) -> dt.tzinfo | None:
    """The tzinfo pandas gives ``tz`` if it is a zoneinfo zone or UTC, else None (then the careful path).

    ``timeutil.pandas_tzinfo`` remembers it per name while ``ZoneInfo(tz)`` gives
    the same object, so each file does not pay for a pandas conversion."""
    info = pandas_tzinfo(tz)
    return info if isinstance(info, ZoneInfo) or info is dt.timezone.utc else None


_COLUMNS: dict[tuple[tuple[str, ...], str], int | None] = {}


def _find_column(header: list[str], name: str) -> int | None:
    """``find_column``, remembered per (header, name): a missing optional column costs a normalising scan."""
    key = (tuple(header), name)
    try:
        return _COLUMNS[key]
    except KeyError:
        pass
    except TypeError:  # an unhashable name: find_column says what it says
        return find_column(header, name)
    j = find_column(header, name)
    if len(_COLUMNS) >= 1024:
        _COLUMNS.clear()
    _COLUMNS[key] = j
    return j


_ONE_DAY = dt.timedelta(days=1)
_combine = dt.datetime.combine
_UNSEEN = object()
# Pure text look-ups, remembered across files (bounded): no zone, no night in them.
_CLOCKS: dict[str, tuple[dt.time, dt.time, bool]] = {}  # valid HH:MM[:SS] text -> (time, time fold=1, before noon)
_NUMBERS: dict[str, float | None] = {}  # number text -> _parse_number's result


def _clock_of(text: str) -> tuple[dt.time, dt.time, bool] | None | bool:
    """An HH:MM[:SS] text as (time, same time with fold=1, before noon); None if out of range; False if not a clock."""
    parsed = _CLOCKS.get(text)
    if parsed is not None:
        return parsed
    m = _CLOCK_RE.match(text)
    if not m:
        return False
    hour, minute, second = int(m.group(1)), int(m.group(2)), int(m.group(3) or 0)
    if hour > 23 or minute > 59 or second > 59:
        return None
    clock = dt.time(hour, minute, second)
    if len(_CLOCKS) >= 4096:
        _CLOCKS.clear()
    _CLOCKS[text] = parsed = (clock, dt.time(hour, minute, second, fold=1), clock < NOON)
    return parsed


def _parse_time(
    text: str, night: dt.date, tz: str, clock_reader: _ClockReader | None = None
) -> tuple[pd.Timestamp | None, str]:
    """A diary clock time (noon rule) or ISO timestamp as a tz-aware local Timestamp, with a note if odd."""
    parsed = _clock_of(text)
    if parsed is None:
        return None, ""
    if parsed is not False:
        clock = parsed[0]
        if clock_reader is not None:
            return clock_reader(clock, night)
        value = clock_on_night(clock, night, tz)
        return value, _dst_note(value, clock)
    if not _DATE_RE.match(text):
        return None, ""
    try:
        ts = pd.Timestamp(text)
    except (ValueError, TypeError, OverflowError):
        return None, ""
    if ts is pd.NaT or pd.isna(ts):
        return None, ""
    if ts.tzinfo is not None:
        return ts.tz_convert(tz), ""
    value = localize(ts, tz)
    return value, _dst_note(value, ts.time())


def _dst_note(value: pd.Timestamp, clock: dt.time) -> str:
    """Say so when a wall time did not exist (spring gap) or occurred twice (autumn) in the zone."""
    if value.time() != clock:
        return f"does not exist on that day (spring-forward gap); read as {value:%H:%M%z}"
    other = localize(value.tz_localize(None), str(value.tz), fold=1)
    if other != value:
        return f"occurs twice on that day (autumn change); read as the first, {value:%H:%M%z}"
    return ""


def _parse_number(text: str) -> float | None:
    """A non-negative finite number (decimal comma accepted), else None."""
    try:
        value = float(text.replace(",", ".")) if text.count(",") == 1 and "." not in text else float(text)
    except ValueError:
        return None
    if not math.isfinite(value) or value < 0:
        return None
    return value


def _order_problem(entry: DiaryEntry) -> str:
    """Describe the first impossible order among the entry's times, or '' if they are in order."""
    for earlier, later in _ORDER:
        a, b = getattr(entry, earlier), getattr(entry, later)
        if a is not None and b is not None and b < a:
            return (
                f"{_LABEL[later]} {b:%Y-%m-%d %H:%M} is before {_LABEL[earlier]} {a:%Y-%m-%d %H:%M}"
            )
    return ""
