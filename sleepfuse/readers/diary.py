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

import pandas as pd

from sleepfuse.model.config import DIARY_COLUMN_KEYS
from sleepfuse.model.errors import ReadError
from sleepfuse.model.records import Diary, DiaryEntry, Problem
from sleepfuse.model.clock import GAP, REPEAT, localize, place_clock, place_wall, zone
from ._stamps import parse_clock
from ._csvtext import missing_column_message
from ._diary_table import TIME_KEYS, diary_table
from ._diarycolumns import column_problems
from ._dialect import MISSING

DIARY_DEFAULT_COLUMNS = {k: k for k in DIARY_COLUMN_KEYS}
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
_CLOCK_RE = re.compile(r"^(\d{1,2}):(\d{2})(?::(\d{2}))?(?:\s*[AaPp]\.?\s?[Mm]\.?)?$")
_DATE_RE = re.compile(r"^\d{4}-\d{2}-\d{2}")


def read_diary(
    path, tz: str, *, columns: dict[str, str] | None = None, participant: str | None = None,
    sheet: str = "", date_order: str = "",
) -> Diary:
    """Read a sleep diary (CSV in any dialect, or an .xlsx/.ods workbook): one DiaryEntry per (participant, night).

    ``participant`` comes from the file name; a ``participant`` column, if the
    file has one, wins. ``columns`` maps our keys to the file's column names
    (study.toml ``[diary] columns``); without it, the contract's names and the
    trade's synonyms are looked for. ``sheet`` names a workbook's sheet;
    ``date_order`` reads dates the file's own values leave open.
    """
    path = Path(path)
    try:
        zone(tz)
    except ValueError as exc:
        raise ReadError(path, str(exc)) from None
    names = dict(DIARY_DEFAULT_COLUMNS)
    names.update(columns or {})
    header, records, lines, col, problems, detected = diary_table(path, names, columns, sheet=sheet,
                                                                  date_order=date_order)
    if col["night"] is None:
        raise ReadError(path, missing_column_message("night", names["night"], header, "diary"))
    if col["participant"] is None and not participant:
        raise ReadError(
            path,
            "no participant: the file has no "
            + repr(names["participant"])
            + " column and its name gives no participant ID; add the column or name the file <participant>_diary.csv",
        )
    problems += column_problems(header, names, col)  # unknown and missing expected columns, once per file
    if len(records) == 0:
        raise ReadError(path, "the file has a header but no diary rows")

    j_night = col["night"]
    j_who = col["participant"]
    times = [(key, j, header[j]) for key in TIME_KEYS if (j := col[key]) is not None]
    numbers = [(key, j, header[j]) for key in NUMBER_KEYS if (j := col[key]) is not None]
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
            if not text or text.casefold() in MISSING:
                continue
            value, note = _parse_time(text, night, tz)
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
            if not text or text.casefold() in MISSING:
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
    return Diary(path=path, entries=entries, problems=problems, detected=detected)


def _parse_night(text: str) -> dt.date | None:
    """An ISO date (YYYY-MM-DD); a full timestamp is accepted for its date."""
    if not _DATE_RE.match(text):
        return None
    try:
        return dt.date.fromisoformat(text[:10])
    except ValueError:
        return None


_UNSEEN = object()
# Pure text look-ups, remembered across files (bounded): no zone, no night in them.
_CLOCKS: dict[str, dt.time] = {}  # valid clock text -> its time
_NUMBERS: dict[str, float | None] = {}  # number text -> _parse_number's result


def _clock_of(text: str) -> dt.time | None | bool:
    """An HH:MM[:SS] text (24-hour, or 12-hour with AM/PM) as a time; None if out of range; False if not a clock."""
    parsed = _CLOCKS.get(text)
    if parsed is not None:
        return parsed
    if not _CLOCK_RE.match(text):
        return False
    hms = parse_clock(text)
    if hms is None:
        return None
    if len(_CLOCKS) >= 4096:
        _CLOCKS.clear()
    _CLOCKS[text] = parsed = dt.time(*hms)
    return parsed


def _parse_time(text: str, night: dt.date, tz: str) -> tuple[pd.Timestamp | None, str]:
    """A diary clock time (noon rule) or ISO timestamp as a tz-aware local Timestamp, with a note if odd."""
    parsed = _clock_of(text)
    if parsed is None:
        return None, ""
    if parsed is not False:
        return _noted(*place_clock(parsed, night, tz))
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
    if ts.nanosecond:
        return localize(ts, tz), ""
    return _noted(*place_wall(ts.to_pydatetime(), tz))


def _noted(value: pd.Timestamp, kind: str) -> tuple[pd.Timestamp, str]:
    """The QC note for a wall time that did not exist (spring gap) or occurred twice (autumn)."""
    if kind == GAP:
        return value, f"does not exist on that day (spring-forward gap); read as {value:%H:%M%z}"
    if kind == REPEAT:
        return value, f"occurs twice on that day (autumn change); read as the first, {value:%H:%M%z}"
    return value, ""


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
