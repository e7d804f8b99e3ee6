"""Times of an EDF(+) hypnogram: the header start in the study zone, record onsets, lights markers.

All times are seconds from the header start time (a naive wall-clock time,
whole seconds) turned into tz-aware pandas Timestamps by ``model.clock``.
Shortcuts, each giving the same instant, unit, zone and fold as the general
computation (checked in tests/test_readers_edf_speed_equivalence.py):

- ``_after`` returns the start itself for an offset of 0 s;
- ``_record_steps`` caches the contiguous record offsets a study's files share.
"""

from __future__ import annotations

import datetime as dt
import functools
import math

import numpy as np
import pandas as pd

from sleepfuse.model.records import Problem
from sleepfuse.model.clock import localize

MAX_RECORDING_DAYS = 14  # longer stage series are taken for a damaged file


def _seconds(s: float) -> pd.Timedelta:
    return pd.Timedelta(seconds=float(s))


_NO_TIME = _seconds(0.0)


def _after(start: pd.Timestamp, seconds: float) -> pd.Timestamp:
    """``start + _seconds(seconds)``; for 0 s in the unit of ``start``, ``start`` itself (the same
    instant, unit, zone and fold; checked in tests/test_readers_edf_speed_equivalence.py)."""
    if seconds == 0.0 and start.unit == _NO_TIME.unit:
        return start
    return start + _seconds(seconds)


def _local_start(naive: dt.datetime, tz: str) -> pd.Timestamp:
    """The header start (a naive wall-clock time) in the study zone: ``model.clock.localize``."""
    return localize(naive, tz)


def _record_onsets(header, keep, problems) -> np.ndarray:
    """Onset (s from the header start) of every data record: the time-keeping TALs of EDF+
    (``keep``, NaN where a record has none), else contiguous records from the first one
    (Kemp & Olivan 2003)."""
    first = float(keep[0])
    if not math.isfinite(first) or abs(first) > 86400 * MAX_RECORDING_DAYS:
        first = 0.0
    if first != 0.0 and not 0.0 <= first < 1.0:
        problems.append(Problem("info", f"the first data record starts {first:g} s after the header start time"))
    n, duration = header.n_records, header.record_duration_s
    contiguous = first + (_record_steps(n, duration) if n <= 100_000 else np.arange(n) * duration)
    if header.variant != "EDF+D":
        drift = np.abs(keep - contiguous)
        if header.annotation_indices and (drift > 1e-3).any():  # NaN (no time-keeping TAL) is no drift
            problems.append(Problem("warning", "EDF+C data records are not contiguous by their time-keeping "
                                               "annotations; records are taken as contiguous"))
        return contiguous
    return np.where(np.isfinite(keep), keep, contiguous)


GAP_TOLERANCE_S = 1e-3  # record onsets closer than this to the end of the previous record are contiguous


def record_gaps(header, onsets: np.ndarray) -> list[tuple[float, float]]:
    """Gaps between the data records of an EDF+D file: (start, length) in seconds from the header start.

    EDF+ spec (Kemp & Olivan 2003): in EDF+D the records need not be
    contiguous; a record starting later than the end of the one before it
    leaves a gap in which nothing was recorded (its epochs read as unscored).
    """
    if header.variant != "EDF+D" or onsets.size < 2:
        return []
    ends = onsets[:-1] + header.record_duration_s
    length = onsets[1:] - ends
    where = np.flatnonzero(np.isfinite(length) & (length > GAP_TOLERANCE_S))
    return [(float(ends[i]), float(length[i])) for i in where]


def gap_problem(gaps: list[tuple[float, float]], header_start: pd.Timestamp) -> Problem | None:
    """One QC note for the gaps of an EDF+D recording: how many, how long in all, the longest and when."""
    if not gaps:
        return None
    total = sum(length for _, length in gaps)
    start, longest = max(gaps, key=lambda g: g[1])
    when = header_start + _seconds(start)
    return Problem("warning", f"EDF+D recording interrupted {len(gaps)} time(s), {total / 60.0:.1f} min in all "
                              f"(longest {longest / 60.0:.1f} min from {when.strftime('%H:%M:%S')}); "
                              "epochs in the gaps are unscored", when)


@functools.lru_cache(maxsize=16)
def _record_steps(n_records: int, record_duration_s: float) -> np.ndarray:
    """np.arange(n_records) * record_duration_s, read-only: files of one study share it."""
    steps = np.arange(n_records) * record_duration_s
    steps.flags.writeable = False
    return steps


def _lights(markers, header_start, problems):
    """Lights off (first marker) and lights on (last marker) as tz-aware times."""
    limit = 86400.0 * MAX_RECORDING_DAYS
    if any(abs(t) > limit for _, t in markers):
        problems.append(Problem("warning", f"lights markers more than {MAX_RECORDING_DAYS} days from the start are ignored"))
        markers = [(kind, t) for kind, t in markers if abs(t) <= limit]
    offs = sorted(t for kind, t in markers if kind == "off")
    ons = sorted(t for kind, t in markers if kind == "on")
    if len(offs) > 1:
        problems.append(Problem("info", f"lights-off markers: {len(offs)}; the first is used"))
    if len(ons) > 1:
        problems.append(Problem("info", f"lights-on markers: {len(ons)}; the last is used"))
    off = header_start + _seconds(offs[0]) if offs else None
    on = header_start + _seconds(ons[-1]) if ons else None
    if off is not None and on is not None and on <= off:
        problems.append(Problem("warning", f"lights on ({on}) is not after lights off ({off}); lights on is ignored", on))
        on = None
    return off, on
