"""Wall-clock readings to instants: one value (``localize``, ``place_wall``) or a column (``wall_to_utc``).

Columns are int64 microseconds (wall µs since 1970 in, UTC µs since 1970
out). The DST rules are those of the package docstring; ``wall_to_utc``
resolves a repeated hour by the order of the column (file order).
"""

from __future__ import annotations

import datetime as dt

import numpy as np
import pandas as pd

from .zones import pandas_tzinfo, zone

GAP = "gap"  # the wall time does not exist (spring-forward gap)
REPEAT = "repeat"  # the wall time occurs twice (autumn change); the first was taken

_US = 1_000_000
_HOUR_US = 3600 * _US
_COARSE_US = 6 * _HOUR_US
_EPOCH = dt.datetime(1970, 1, 1)
_UTC = dt.timezone.utc
_NAT = np.iinfo(np.int64).min


def localize(naive: pd.Timestamp | dt.datetime, tz: str, *, fold: int = 0) -> pd.Timestamp:
    """Wall-clock time in zone ``tz``; ``fold=1`` picks the second of a repeated hour.

    A non-existent wall time (inside the spring-forward gap) is read with the
    UTC offset in force before the change (PEP 495), i.e. shifted forward by
    the size of the gap, as a clock that was not changed would show it.
    An aware value is converted to ``tz``.
    """
    ts = pd.Timestamp(naive)
    if ts.tzinfo is not None:
        return ts.tz_convert(tz)
    aware = ts.to_pydatetime().replace(tzinfo=zone(tz), fold=1 if fold else 0)
    out = pd.Timestamp(aware.astimezone(_UTC)).tz_convert(tz)
    if ts.nanosecond:
        out += pd.Timedelta(nanoseconds=ts.nanosecond)
    return out


def place_wall(wall: dt.datetime, tz: str) -> tuple[pd.Timestamp, str]:
    """``localize(wall, tz)`` and what was odd about it: ``GAP``, ``REPEAT`` or "" (PEP 495 on the
    zone pandas uses, so the timestamp carries pandas' own tzinfo)."""
    info = pandas_tzinfo(tz)
    return place_aware(wall.replace(tzinfo=info, fold=0), info)


def place_aware(aware: dt.datetime, info: dt.tzinfo) -> tuple[pd.Timestamp, str]:
    """``place_wall`` for a wall time already carrying ``info`` (fold 0): the PEP 495 steps
    ``astimezone`` takes (UTC of the wall time, back through ``fromutc``), then the fold check."""
    offset = aware.utcoffset()
    local = info.fromutc(aware - offset)
    if local != aware:  # same tzinfo: compares the wall fields; a gap time comes back shifted
        return pd.Timestamp(local), GAP
    if aware.replace(fold=1).utcoffset() != offset:
        return pd.Timestamp(local), REPEAT
    return pd.Timestamp(local), ""


def wall_to_utc(wall_us: np.ndarray, tz: str) -> tuple[np.ndarray, np.ndarray]:
    """UTC µs of a column of wall µs in ``tz``, DST resolved by file order, and the mask of wall
    times inside a spring-forward gap (read with the offset before the change).

    A repeated (autumn) wall time is read on its first pass as the earlier
    instant and, once the wall clock has stepped back by 30–60 min, as the later
    one; a run of repeated times with no step back is the second pass when that
    makes it contiguous with what follows.
    """
    w = np.asarray(wall_us).astype("datetime64[us]", copy=False).view(np.int64)
    n = w.size
    gap = np.zeros(n, dtype=bool)
    if n == 0:
        return np.zeros(0, dtype=np.int64), gap
    offsets = _clean_offsets(w, tz)
    if offsets is not None:  # the common file: no wall time in a gap or a repeated hour (fast path, DEVELOPERS.md)
        return w - offsets, gap
    idx = pd.DatetimeIndex(w.view("datetime64[us]"))
    plain = idx.tz_localize(tz, ambiguous="NaT", nonexistent="NaT").as_unit("us").asi8.copy()
    odd = np.flatnonzero(plain == _NAT)
    if not odd.size:  # a change, but no wall time repeated or skipped
        return plain, gap
    ai = plain.copy()
    bi = plain.copy()
    ai[odd] = idx[odd].tz_localize(tz, ambiguous=np.ones(odd.size, dtype=bool), nonexistent="NaT").as_unit("us").asi8
    bi[odd] = idx[odd].tz_localize(tz, ambiguous=np.zeros(odd.size, dtype=bool), nonexistent="NaT").as_unit("us").asi8
    missing = ai == _NAT
    early, late = np.minimum(ai, bi), np.maximum(ai, bi)
    ambiguous = ~missing & (early != late)
    utc = early.copy()
    if ambiguous.any():
        starts = np.flatnonzero(ambiguous & ~np.r_[False, ambiguous[:-1]])
        ends = np.flatnonzero(ambiguous & ~np.r_[ambiguous[1:], False]) + 1
        for s, e in zip(starts, ends):  # one run per autumn change in the column
            step_back = w[s:e - 1] - w[s + 1:e]
            jumps = np.flatnonzero((step_back >= _HOUR_US // 2) & (step_back <= _HOUR_US))
            if jumps.size:
                utc[s + jumps[0] + 1:e] = late[s + jumps[0] + 1:e]
            elif e < n and not missing[e]:
                if 0 < utc[e] - late[e - 1] < utc[e] - early[e - 1]:
                    utc[s:e] = late[s:e]
    if missing.any():
        info = zone(tz)
        for i in np.flatnonzero(missing):  # inside the spring-forward gap: few rows at most
            naive = _EPOCH + dt.timedelta(microseconds=int(w[i]))
            before = (naive - dt.timedelta(hours=6)).replace(tzinfo=info).utcoffset()
            utc[i] = w[i] - (before.days * 86400 + before.seconds) * _US - before.microseconds
        gap = missing
    return utc, gap


def _clean_offsets(w: np.ndarray, tz: str) -> np.ndarray | int | None:
    """The zone's UTC offset (µs) of each wall µs of ``w``, or None if any lies in a gap or a repeated hour.

    Asks the zone (``tz_localize``, both folds) every 6 h of wall time and at both
    ends; no zone changes its offset twice within 6 h, so equal answers at two
    neighbouring probes mean no change between them (about 60 zone lookups for
    two weeks of data). Between two that differ, the change's instant is found
    by bisection in UTC seconds. Then every wall time before the change's odd
    stretch (the skipped or repeated wall times) has the offset before it, every
    one after it the offset after it, which is what ``tz_localize`` gives them;
    a wall time inside the stretch (or a probe landing in one) returns None and
    the general path applies the DST rules. One offset throughout: an int.
    """
    lo, hi = int(w.min()), int(w.max())
    if hi - lo > 400 * 24 * _HOUR_US:
        return None
    info = zone(tz)
    at = np.append(np.arange(lo, hi, _COARSE_US, dtype=np.int64), np.int64(hi))
    try:  # both folds at once: NaT where a probe is skipped or repeated
        utc = pd.DatetimeIndex(at.view("datetime64[us]")).tz_localize(
            tz, ambiguous="NaT", nonexistent="NaT").as_unit("us").asi8
    except (OverflowError, ValueError, pd.errors.OutOfBoundsDatetime):  # beyond pandas' range: the general path
        return None
    if (utc == _NAT).any():
        return None
    probes = list(zip(at.tolist(), (at - utc).tolist()))
    first = probes[0][1]
    if all(off == first for _, off in probes):
        return first
    offsets = np.full(w.size, first, dtype=np.int64)
    for (p0, before), (p1, after) in zip(probes, probes[1:]):
        if before == after:
            continue
        change = _change_instant(info, (p0 - before) // _US, -((after - p1) // _US), before, after)  # UTC s
        if change is None:
            return None
        odd_from, odd_to = change * _US + min(before, after), change * _US + max(before, after)
        if ((w >= odd_from) & (w < odd_to)).any():
            return None
        offsets[w >= odd_to] = after
    return offsets


def _offset_us(info: dt.tzinfo, second: int) -> int:
    """The zone's UTC offset (µs) at a UTC second."""
    off = dt.datetime.fromtimestamp(second, info).utcoffset()
    return (off.days * 86400 + off.seconds) * _US + off.microseconds


def _change_instant(info: dt.tzinfo, lo: int, hi: int, before: int, after: int) -> int | None:
    """The first UTC second in (lo, hi] with offset ``after``, by bisection, given offset ``before`` at ``lo``
    and ``after`` at ``hi`` (one change between them); None where zoneinfo disagrees with those offsets."""
    try:
        if _offset_us(info, lo) != before or _offset_us(info, hi) != after:
            return None
        while hi - lo > 1:
            mid = (lo + hi) // 2
            if _offset_us(info, mid) == before:
                lo = mid
            else:
                hi = mid
        return hi if _offset_us(info, hi) == after else None  # a third offset between: not one change
    except (OverflowError, ValueError, OSError):
        return None
