"""Timestamp columns of the CSV readers: ISO text to UTC instants, vectorised, DST resolved by file order.

Instants are int64 microseconds since 1970 (UTC). Wall-clock times without
an offset are local time in the study zone: the spring-forward hour is no
gap, the repeated autumn hour is no duplicate (the first pass is daylight
time, the second standard time).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from sleepfuse.model.records import Problem
from sleepfuse.model.clock import zone
from ._csvtext import line_phrase

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
    return out, ok, problems


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


_HALF_HOUR_US = _HOUR_US // 2


_COARSE_US = 6 * _HOUR_US
_EPOCH = dt.datetime(1970, 1, 1)


def _single_offset(w: np.ndarray, tz: str) -> int | None:
    """The zone's UTC offset (µs) if one offset holds over the whole span of wall µs ``w``, else None.

    Asks the zone (both PEP 495 folds) every 6 h of wall time from the first to
    the last value and at both ends: equal answers everywhere mean no change in
    between, since no zone changes its offset twice within 6 h. About 60 zone
    lookups for two weeks, against ~700 in ``_sample_offsets`` (same answer
    when it answers: tests/test_readers_csv_wallclock.py).
    """
    lo, hi = int(w.min()), int(w.max())
    if hi - lo > 400 * 24 * _HOUR_US:
        return None
    info = zone(tz)
    points = list(range(lo, hi, _COARSE_US)) + [hi]
    first = None
    for us in points:
        try:
            naive = _EPOCH + dt.timedelta(microseconds=us)
            a = naive.replace(tzinfo=info).utcoffset()
            b = naive.replace(tzinfo=info, fold=1).utcoffset()
        except (OverflowError, ValueError):  # beyond datetime's years 1-9999: the careful path decides
            return None
        if a is None or b != a:
            return None  # an ambiguous or skipped wall time: the careful path
        if first is None:
            first = a
        elif a != first:
            return None
    return (first.days * 86400 + first.seconds) * _US + first.microseconds


def _sample_offsets(w: np.ndarray, tz: str) -> tuple[int, np.ndarray, np.ndarray]:
    """The zone's UTC offset (µs) every 30 min of wall time from just before the first to just
    after the last of ``w`` (wall µs): (first sample, offsets, mask of samples neither skipped
    nor repeated)."""
    lo, hi = int(w.min()), int(w.max())
    lo -= lo % _HALF_HOUR_US + _HALF_HOUR_US
    samples = np.arange(lo, hi + 2 * _HOUR_US, _HALF_HOUR_US, dtype=np.int64)
    loc = pd.DatetimeIndex(samples.astype("datetime64[us]")).tz_localize(tz, ambiguous="NaT", nonexistent="NaT")
    utc = loc.as_unit("us").asi8
    valid = utc != np.iinfo(np.int64).min
    return lo, samples - utc, valid


def _plain_utc(w: np.ndarray, tz: str, sampled: tuple[int, np.ndarray, np.ndarray] | None = None) -> np.ndarray:
    """``tz_localize(tz, ambiguous="NaT", nonexistent="NaT")`` of wall µs ``w``, as UTC µs (NaT: int64 min).

    Between two 30-min samples with the same offset, neither skipped nor repeated,
    no change happens (zones change offset at most once within hours), so
    wall − offset is the instant; only rows near a change go through pandas.
    """
    lo, offsets, valid = sampled if sampled is not None else _sample_offsets(w, tz)
    k = (w - lo) // _HALF_HOUR_US
    clean_segment = valid[:-1] & valid[1:] & (offsets[:-1] == offsets[1:])
    clean = clean_segment[k]
    out = w - offsets[k]
    near = np.flatnonzero(~clean)
    if near.size:
        local = pd.DatetimeIndex(w[near].astype("datetime64[us]")).tz_localize(tz, ambiguous="NaT", nonexistent="NaT")
        out[near] = local.as_unit("us").asi8
    return out


def _localize_wall(wall: np.ndarray, lines: np.ndarray, tz: str) -> tuple[np.ndarray, np.ndarray, list[Problem]]:
    """Wall-clock datetime64[us] in ``tz`` to UTC µs, resolving DST by file order.

    A repeated (autumn) wall time is read on its first pass as the earlier
    instant (fold=0) and, once the wall clock has stepped back by 30–60 min,
    as the later one (fold=1). A wall time inside the spring-forward gap is
    read with the offset in force before the gap (a clock that was not changed).
    """
    problems: list[Problem] = []
    n = len(wall)
    if n == 0:
        return np.zeros(0, dtype=np.int64), np.ones(0, dtype=bool), problems
    w = wall.astype("datetime64[us]", copy=False).view(np.int64)
    single = _single_offset(w, tz)
    if single is not None:  # the common case, found with a few zone lookups
        return w - single, np.ones(n, dtype=bool), problems
    sampled = _sample_offsets(w, tz)
    _, offsets, valid = sampled
    if valid.all() and (offsets == offsets[0]).all():  # the common case: one offset over the file's span
        return w - offsets[0], np.ones(n, dtype=bool), problems
    nat = np.iinfo(np.int64).min
    plain = _plain_utc(w, tz, sampled)
    odd = np.flatnonzero(plain == nat)
    if not odd.size:  # a change, but no wall time repeated or skipped
        return plain, np.ones(n, dtype=bool), problems
    # Skipped or repeated wall times: both readings, element by element, for those rows only.
    idx = pd.DatetimeIndex(wall[odd])
    ai = plain.copy()
    bi = plain.copy()
    ai[odd] = idx.tz_localize(tz, ambiguous=np.ones(odd.size, dtype=bool), nonexistent="NaT").as_unit("us").asi8
    bi[odd] = idx.tz_localize(tz, ambiguous=np.zeros(odd.size, dtype=bool), nonexistent="NaT").as_unit("us").asi8
    missing = ai == nat
    early = np.minimum(ai, bi)
    late = np.maximum(ai, bi)
    ambiguous = ~missing & (early != late)
    utc = early.copy()
    ok = ~missing

    if ambiguous.any():
        wall_us = wall.astype(np.int64)
        utc[ambiguous] = early[ambiguous]
        run_starts = np.flatnonzero(ambiguous & ~np.r_[False, ambiguous[:-1]])
        run_ends = np.flatnonzero(ambiguous & ~np.r_[ambiguous[1:], False]) + 1
        for s, e in zip(run_starts, run_ends):  # one run per autumn change in the file
            step_back = wall_us[s:e - 1] - wall_us[s + 1:e]
            jumps = np.flatnonzero((step_back >= _HOUR_US // 2) & (step_back <= _HOUR_US))
            if jumps.size:
                utc[s + jumps[0] + 1:e] = late[s + jumps[0] + 1:e]
            elif e < n and ok[e]:
                # No step back seen: the run is the second pass if that makes it contiguous with what follows.
                gap_early = utc[e] - early[e - 1]
                gap_late = utc[e] - late[e - 1]
                if 0 < gap_late < gap_early:
                    utc[s:e] = late[s:e]

    if missing.any():
        z = zone(tz)
        fixed = []
        for i in np.flatnonzero(missing):  # wall times inside the spring-forward gap: few rows at most
            naive = pd.Timestamp(wall[i]).to_pydatetime()
            before = (naive - dt.timedelta(hours=6)).replace(tzinfo=z).utcoffset()
            utc[i] = int((pd.Timestamp(naive) - pd.Timedelta(before)).value // 1000)
            ok[i] = True
            fixed.append(lines[i])
        problems.append(
            Problem(
                "warning",
                f"{len(fixed)} wall-clock time(s) inside the spring-forward gap in {tz} ({line_phrase(fixed)}); "
                "read as the time before the change (a device clock that was not changed)",
                time=pd.Timestamp(int(utc[np.flatnonzero(missing)[0]]), unit="us", tz="UTC").tz_convert(tz),
            )
        )
    return utc, ok, problems
