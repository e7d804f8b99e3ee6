"""IANA zones: checked names, the machine's zone, and the tzinfo pandas uses for a name."""

from __future__ import annotations

import datetime as dt
import os
from zoneinfo import ZoneInfo, ZoneInfoNotFoundError

import pandas as pd


def zone(name: str) -> ZoneInfo:
    """The IANA zone called ``name``; raises ValueError if it is unknown."""
    try:
        return ZoneInfo(name)
    except (ZoneInfoNotFoundError, ValueError, TypeError) as exc:
        raise ValueError(f"unknown IANA time zone {name!r}") from exc


_PANDAS_TZINFO: dict[str, tuple[ZoneInfo, dt.tzinfo]] = {}


def pandas_tzinfo(tz: str) -> dt.tzinfo:
    """The tzinfo object pandas gives its timestamps in zone ``tz`` (remembered per name while
    ``ZoneInfo(tz)`` returns the same object), so timestamps built here carry the very tzinfo
    of pandas' own (identity, not just equality)."""
    key = zone(tz)
    known = _PANDAS_TZINFO.get(tz)
    if known is not None and known[0] is key:
        return known[1]
    info = pd.Timestamp("2000-01-01", tz="UTC").tz_convert(tz).tzinfo
    if len(_PANDAS_TZINFO) >= 256:
        _PANDAS_TZINFO.clear()
    _PANDAS_TZINFO[tz] = (key, info)
    return info


def machine_timezone() -> str:
    """IANA name of the machine's zone, or 'UTC' if it cannot be found."""
    try:
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
