"""The noon rule: which night a time belongs to, and where a diary clock time falls."""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from .instants import localize, place_aware
from .zones import pandas_tzinfo

NOON = dt.time(12, 0)
_ONE_DAY = dt.timedelta(days=1)


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


def place_clock(clock: dt.time, night: dt.date, tz: str) -> tuple[pd.Timestamp, str]:
    """An HH:MM clock time placed by the noon rule (at/after 12:00 on the night's date, before
    12:00 on the next day; common practice, DESIGN.md), and ``GAP``/``REPEAT``/"" as ``place_wall``."""
    day = night if clock >= NOON else night + _ONE_DAY
    if clock.tzinfo is not None or clock.fold:
        clock = clock.replace(tzinfo=None, fold=0)
    info = pandas_tzinfo(tz)
    return place_aware(dt.datetime.combine(day, clock, info), info)


def clock_on_night(clock: dt.time, night: dt.date, tz: str) -> pd.Timestamp:
    """``place_clock`` without the note."""
    return place_clock(clock, night, tz)[0]


def elapsed_min(start: pd.Timestamp, end: pd.Timestamp) -> float:
    """Elapsed minutes from ``start`` to ``end`` (real time, DST-safe)."""
    return (pd.Timestamp(end) - pd.Timestamp(start)).total_seconds() / 60.0
