"""Local time, the noon-to-noon night rule and elapsed durations.

All clock times are wall-clock times in the study's IANA zone unless the
value carries its own UTC offset (SLEEP_PARAMETERS.md, "Time, nights and
intervals"). Durations are elapsed time, so a night across a DST change is
the real length.
"""

from __future__ import annotations

import datetime as dt
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import numpy as np
import pandas as pd

NOON = dt.time(12, 0)


def zone(name: str) -> ZoneInfo:
    """The IANA zone called ``name``; raises ValueError if it is unknown."""
    try:
        return ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError, TypeError) as exc:
        raise ValueError(f"unknown IANA time zone {name!r}") from exc


_PANDAS_TZINFO: dict[str, tuple[ZoneInfo, dt.tzinfo]] = {}


def pandas_tzinfo(tz: str) -> dt.tzinfo:
    """The tzinfo object that ``localize`` (pandas) gives its results in zone ``tz``.

    Remembered per name only while ``ZoneInfo(tz)`` still returns the same
    object: after ``ZoneInfo.clear_cache()`` pandas hands out a new object and
    so does this function. Readers that build timestamps by hand use it, so
    theirs carry the very tzinfo of pandas' own (identity, not just equality).
    """
    key = zone(tz)
    known = _PANDAS_TZINFO.get(tz)
    if known is not None and known[0] is key:
        return known[1]
    info = localize(dt.datetime(2000, 1, 1), tz).tzinfo
    if len(_PANDAS_TZINFO) >= 256:
        _PANDAS_TZINFO.clear()
    _PANDAS_TZINFO[tz] = (key, info)
    return info


def machine_timezone() -> str:
    """IANA name of the machine's zone, or 'UTC' if it cannot be found."""
    try:
        import os

        tz = os.environ.get("TZ")
        if tz:
            zone(tz.lstrip(":"))
            return tz.lstrip(":")
        link = os.path.realpath("/etc/localtime")
        if "zoneinfo/" in link:
            name = link.split("zoneinfo/", 1)[1]
            zone(name)
            return name
    except (OSError, ValueError):
        pass
    return "UTC"


def localize(naive: pd.Timestamp | dt.datetime, tz: str, *, fold: int = 0) -> pd.Timestamp:
    """Wall-clock time in zone ``tz``; ``fold=1`` picks the second of a repeated hour.

    A non-existent wall time (inside the spring-forward gap) is read with the
    UTC offset in force before the change (PEP 495), i.e. shifted forward by
    the size of the gap, as a clock that was not changed would show it.
    """
    ts = pd.Timestamp(naive)
    if ts.tzinfo is not None:
        return ts.tz_convert(tz)
    aware = ts.to_pydatetime().replace(tzinfo=zone(tz), fold=1 if fold else 0)
    out = pd.Timestamp(aware.astimezone(dt.timezone.utc)).tz_convert(tz)
    if ts.nanosecond:
        out += pd.Timedelta(nanoseconds=ts.nanosecond)
    return out


def night_of(ts: pd.Timestamp) -> dt.date:
    """The night (noon-to-noon) a local time belongs to: the date of the preceding noon."""
    local = pd.Timestamp(ts)
    if local.time() < NOON:
        return (local - pd.Timedelta(days=1)).date()
    return local.date()


def nights_of(times: pd.DatetimeIndex) -> np.ndarray:
    """Vectorised ``night_of`` for tz-aware local times: array of datetime.date."""
    wall = times.tz_localize(None) if times.tz is not None else times
    return np.asarray((wall - pd.Timedelta(hours=12)).date)


def noon_of(night: dt.date, tz: str) -> pd.Timestamp:
    """Local noon that opens ``night``."""
    return localize(dt.datetime.combine(night, NOON), tz)


def clock_on_night(clock: dt.time, night: dt.date, tz: str) -> pd.Timestamp:
    """An HH:MM clock time placed by the noon rule: at/after 12:00 on the night's date,
    before 12:00 on the next day (common practice, DESIGN.md)."""
    day = night if clock >= NOON else night + dt.timedelta(days=1)
    return localize(dt.datetime.combine(day, clock), tz)


def elapsed_min(start: pd.Timestamp, end: pd.Timestamp) -> float:
    """Elapsed minutes from ``start`` to ``end`` (real time, DST-safe)."""
    return (pd.Timestamp(end) - pd.Timestamp(start)).total_seconds() / 60.0
