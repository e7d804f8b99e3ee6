"""Timestamp columns of the CSV readers: ISO text to UTC instants, vectorised, DST resolved by file order.

Instants are int64 microseconds since 1970 (UTC). Wall-clock times without
an offset are local time in the study zone, turned into instants by
``model.clock.wall_to_utc`` (the DST rules live there). Text in the lab
formats of ``_stamps`` (day-first, month-first, 12-hour...) goes through
``parse_stamps``.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd

from sleepfuse.model.clock import wall_to_utc
from sleepfuse.model.records import Problem
from ._csvtext import line_phrase
from ._stamps import is_iso, parse_wall

_US = 1_000_000  # microseconds per second; instants are int64 µs since 1970 (UTC)
_HOUR_US = 3600 * _US
_OFFSET_RE = r"\d:\d{2}(?:[.,]\d+)?\s*(?:[Zz]|[+-]\d{2}(?::?\d{2})?)$"


def parse_instants(stamps: pd.Series, lines: np.ndarray, tz: str) -> tuple[np.ndarray, np.ndarray, list[Problem]]:
    """UTC instants (int64 µs) of ISO 8601 strings; naive ones are wall clock in ``tz``.

    Returns instants, a mask of readable rows and the problems found.
    """
    n = len(stamps)
    out = np.zeros(n, dtype=np.int64)
    ok = np.zeros(n, dtype=bool)
    problems: list[Problem] = []
    has_offset = _has_offset(stamps)

    aware_idx = np.flatnonzero(has_offset)
    if aware_idx.size:
        parsed = _to_datetime(stamps.iloc[aware_idx], utc=True)
        good = ~np.isnat(parsed)
        out[aware_idx[good]] = parsed[good].astype("datetime64[us]").astype(np.int64)
        ok[aware_idx[good]] = True

    naive_idx = np.flatnonzero(~has_offset)
    if naive_idx.size:
        wall = _to_datetime(stamps.iloc[naive_idx], utc=False)
        good = ~np.isnat(wall)
        idx = naive_idx[good]
        utc, local_ok, wall_problems = _localize_wall(wall[good].astype("datetime64[us]"), lines[idx], tz)
        out[idx[local_ok]] = utc[local_ok]
        ok[idx[local_ok]] = True
        problems += wall_problems

    return out, ok, problems + _unreadable(stamps, lines, out, ok, tz)


def _unreadable(stamps: pd.Series, lines: np.ndarray, out: np.ndarray, ok: np.ndarray, tz: str) -> list[Problem]:
    """One warning for the rows whose time stamp could not be read, placed near the first of them."""
    problems: list[Problem] = []
    bad = np.flatnonzero(~ok)
    if bad.size:
        near = np.flatnonzero(ok)
        near_time = None
        if near.size:  # place the problem at the last readable time before it (or the first after)
            j = near[near < bad[0]][-1] if (near < bad[0]).any() else near[0]
            near_time = pd.Timestamp(int(out[j]), unit="us", tz="UTC").tz_convert(tz)
        examples = "; ".join(f"line {lines[i]}: {stamps.iloc[i][:30]!r}" for i in bad[:5])
        problems.append(
            Problem(
                "warning",
                f"{bad.size} row(s) with an unreadable timestamp skipped ({line_phrase(lines[bad])}); e.g. {examples}",
                time=near_time,
            )
        )
    return problems


def _has_offset(stamps: pd.Series) -> np.ndarray:
    """True where an ISO 8601 string ends in a UTC offset or Z (vectorised, RE2 via pyarrow when possible)."""
    try:
        import pyarrow as pa
        import pyarrow.compute as pc

        return np.asarray(pc.match_substring_regex(pa.array(stamps, type=pa.string()), _OFFSET_RE), dtype=bool)
    except Exception:  # pyarrow missing or the values not plain strings: the slower pandas path
        return stamps.str.contains(_OFFSET_RE, regex=True).to_numpy(dtype=bool)


def _to_datetime(values: pd.Series, *, utc: bool) -> np.ndarray:
    """ISO 8601 strings to datetime64[us] (UTC if ``utc``); NaT where unreadable."""
    try:
        res = pd.to_datetime(values, format="ISO8601", errors="coerce", utc=utc)
    except (ValueError, TypeError, OverflowError):
        # Mixed or odd values: element by element, only for files that need it.
        res = pd.Series([_one_datetime(v, utc) for v in values], dtype="datetime64[us, UTC]" if utc else "datetime64[us]")
    if utc:
        res = res.dt.tz_convert("UTC").dt.tz_localize(None)
    if getattr(res.dt, "tz", None) is not None:
        return np.full(len(values), np.datetime64("NaT"), dtype="datetime64[us]")
    return res.to_numpy(dtype="datetime64[us]")


def _one_datetime(value: str, utc: bool):
    try:
        ts = pd.Timestamp(value)
    except (ValueError, TypeError, OverflowError):
        return pd.NaT
    if (ts.tzinfo is not None) != utc:
        return pd.NaT
    return ts


def _localize_wall(wall: np.ndarray, lines: np.ndarray, tz: str) -> tuple[np.ndarray, np.ndarray, list[Problem]]:
    """Wall-clock datetime64[us] in ``tz`` to UTC µs (``model.clock.wall_to_utc``), with a warning
    naming the lines of wall times inside the spring-forward gap."""
    utc, gap = wall_to_utc(wall, tz)
    problems: list[Problem] = []
    if gap.any():
        first = int(np.flatnonzero(gap)[0])
        problems.append(
            Problem(
                "warning",
                f"{int(gap.sum())} wall-clock time(s) inside the spring-forward gap in {tz} ({line_phrase(lines[gap])}); "
                "read as the time before the change (a device clock that was not changed)",
                time=pd.Timestamp(int(utc[first]), unit="us", tz="UTC").tz_convert(tz),
            )
        )
    return utc, np.ones(len(utc), dtype=bool), problems


def parse_stamps(stamps: pd.Series, lines: np.ndarray, tz: str, date_order: str = ""):
    """``parse_instants`` for ISO text, else the lab formats of ``_stamps.parse_wall``: instants,
    readable mask, problems and a description of the format found."""
    if is_iso(stamps):
        instants, ok, problems = parse_instants(stamps, lines, tz)
        return instants, ok, problems, "ISO 8601"
    wall, fmt = parse_wall(stamps, date_order)
    ok = ~np.isnat(wall)
    out = np.zeros(len(stamps), dtype=np.int64)
    problems: list[Problem] = []
    if ok.any():
        utc, _, problems = _localize_wall(wall[ok], lines[ok], tz)
        out[ok] = utc
    problems += _unreadable(stamps, lines, out, ok, tz)
    return out, ok, problems, fmt.describe() if fmt else "not recognised"


_START_KEYS = ("start", "start time", "recording start", "start date/time", "start datetime", "start date time",
               "start of recording")
_HAS_DATE_TIME = re.compile(r"\d[/.\-]\d.*\d[:.]\d")


def metadata_start(meta: dict[str, str], tz: str, date_order: str = "") -> tuple[int, str] | None:
    """The recording start given on the lines above a header (``Start: 27/10/2026 23:04``, or
    ``Start date`` and ``Start time`` lines) as UTC µs with its format, or None if there is none."""
    text = next((meta[k] for k in _START_KEYS if k in meta and _HAS_DATE_TIME.search(meta[k])), "")
    if not text and "start date" in meta and "start time" in meta:
        text = f"{meta['start date']} {meta['start time']}"
    if not text:
        return None
    wall, fmt = parse_wall(pd.Series([text]), date_order)
    if fmt is None or np.isnat(wall[0]):
        return None
    utc, _ = wall_to_utc(wall, tz)
    return int(utc[0]), fmt.describe()
