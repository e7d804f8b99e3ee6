"""One row of the night table: its columns, a blank row, its window as text, and its QC notes.

``scoring.nights`` fills the rows; the checks here (invalid and missing
minutes) are the notes and exclusions every source's row gets the same way.
"""

from __future__ import annotations

import datetime as dt
import functools
import math

import numpy as np
import pandas as pd

from sleepfuse.model.config import StudyConfig
from sleepfuse.model.qc import QCLog
from sleepfuse.model.stages import Stage

from .opportunity import Window
from .parameters import COMMON_PARAMETERS, STAGE_PARAMETERS

KEY_COLUMNS = ["participant", "night", "source"]
WINDOW_COLUMNS = ["window_start", "window_end", "window_rule"]
PARAMETER_COLUMNS = list(
    dict.fromkeys([*COMMON_PARAMETERS, *STAGE_PARAMETERS, "unscored_min", "offwrist_min", "missing_min", "in_bed_min",
                   "quality"])
)
NIGHT_COLUMNS = KEY_COLUMNS + WINDOW_COLUMNS + PARAMETER_COLUMNS + ["included", "qc"]

_BLANK_ROW = {c: math.nan for c in PARAMETER_COLUMNS}
_NS = 1_000_000_000


def _row(participant: str, night: dt.date, source: str) -> dict:
    row = _BLANK_ROW.copy()
    row.update(participant=participant, night=night.isoformat(), source=source,
               window_start="", window_end="", window_rule="", included=True, qc="")
    return row


def _iso(t: pd.Timestamp) -> str:
    """One time as ``iso_seconds`` writes it."""
    return iso_seconds([t])[0]


def iso_seconds(times: list[pd.Timestamp]) -> list[str]:
    """Each time in whole seconds with its offset ('2026-10-28T06:47:30-06:00'), rounded to the nearest second.

    A window may start at a fraction of a second (an EDF+ record onset); printing
    it as is gave float noise ('06:47:30.430999999') beside microseconds. Whole
    seconds keep every time stamp of the table in one form; the parameters are
    computed from the exact times. Rounding is pandas' ``Timestamp.round("s")``
    (half to even) of the UTC time, since wall-clock rounding fails on the
    repeated DST hour; the text is ``datetime.isoformat``'s. All the times of a
    participant in one pass: their offsets from one ``tz_convert`` per zone.
    """
    out: list[str] = [""] * len(times)
    by_zone: dict[object, list[int]] = {}
    for i, t in enumerate(times):
        by_zone.setdefault(t.tzinfo, []).append(i)
    for info, where in by_zone.items():
        q, r = np.divmod(np.array([times[i].value for i in where], dtype=np.int64), _NS)
        q += (r > _NS // 2) | ((r == _NS // 2) & (q % 2 == 1))  # half to even, as Timestamp.round
        utc = q * _NS
        if info is None:
            offsets = np.zeros(len(where), dtype=np.int64)
        else:
            local = pd.DatetimeIndex(utc.view("datetime64[ns]"), tz="UTC").tz_convert(times[where[0]].tz)
            offsets = local.tz_localize(None).asi8 - utc
        wall = np.datetime_as_string((utc + offsets).view("datetime64[ns]"), unit="s")
        for i, text, off in zip(where, wall.tolist(), offsets.tolist()):
            out[i] = text + ("" if info is None else _offset_text(off))
    return out


@functools.lru_cache(maxsize=64)
def _offset_text(offset_ns: int) -> str:
    """'+01:00' (or '+00:53:28'): a UTC offset as ``datetime.isoformat`` ends a time with it."""
    zone = dt.timezone(dt.timedelta(microseconds=offset_ns // 1000))
    return dt.datetime(2000, 1, 1, tzinfo=zone).isoformat()[19:]


def _set_window(row: dict, w: Window) -> None:
    """The window's rule, and its times for ``window_texts`` to write (``score_participant`` does, once)."""
    row["window_start"] = w.start
    row["window_end"] = w.end
    row["window_rule"] = w.rule


def window_texts(rows: list[dict]) -> None:
    """Write the window times ``_set_window`` left on the rows as text, all in one ``iso_seconds`` pass."""
    timed = [row for row in rows if not isinstance(row["window_start"], str)]
    if timed:
        texts = iso_seconds([row["window_start"] for row in timed] + [row["window_end"] for row in timed])
        for row, start, end in zip(timed, texts, texts[len(timed):]):
            row["window_start"], row["window_end"] = start, end


class _Notes:
    """QC notes for one row: kept on the row and appended to the study's QC log."""

    def __init__(self, qc: QCLog, row: dict, file: str):
        self.qc, self.row, self.file = qc, row, file

    def __call__(self, severity: str, message: str, *, exclude: bool = False, logged: bool = False) -> None:
        """``logged``: the reader already put this problem in the QC log; note it on the row only."""
        if not logged:
            self.qc.add(severity, f"{self.row['source']}: {message}", file=self.file,
                        participant=self.row["participant"], night=self.row["night"])
        self.row["qc"] = f"{self.row['qc']}; {message}" if self.row["qc"] else message
        if exclude:
            self.row["included"] = False


def _check_invalid(row: dict, params: dict, note: _Notes, config: StudyConfig) -> None:
    tib = params.get("tib_min", math.nan)
    invalid = (params.get("unscored_min") or 0.0) + (params.get("offwrist_min") or 0.0)
    if tib and tib > 0 and 100.0 * invalid / tib > config.scoring.max_invalid_pct:
        note("warning", f"{invalid:.0f} of {tib:.0f} min of the sleep opportunity are unscored or off-wrist "
                        f"(over {config.scoring.max_invalid_pct:g}%): night not included", exclude=True)


def _gap_text(start: pd.Timestamp, codes: np.ndarray, limit: int = 3) -> str:
    """'02:00-05:00 (180 min)' for each run of minutes without data (UNSCORED) in a window's codes;
    ``start`` is the time of the window's first minute."""
    missing = (codes == Stage.UNSCORED).view(np.int8)
    edges = np.diff(missing, prepend=np.int8(0), append=np.int8(0))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    parts = []
    for a, b in zip(starts[:limit].tolist(), ends[:limit].tolist()):
        t0, t1 = start + pd.Timedelta(minutes=a), start + pd.Timedelta(minutes=b)
        parts.append(f"{t0:%Y-%m-%d %H:%M} to {t1:%H:%M}, {b - a} min")
    more = f" and {starts.size - limit} more" if starts.size > limit else ""
    return "; ".join(parts) + more


def _check_missing(row: dict, window_start: pd.Timestamp, head: float, codes: np.ndarray, note: _Notes,
                   config: StudyConfig) -> None:
    """Minutes of the opportunity without data (a gap in the file, or outside the recording): named on
    the row; more than ``[scoring] max_missing_pct`` of the opportunity excludes the night. ``codes``
    are the window's minutes, the first ``head`` minutes after ``window_start``."""
    missing, tib = row["missing_min"], row["tib_min"]
    if not missing or not tib or tib <= 0 or math.isnan(missing):
        return
    where = _gap_text(window_start + pd.Timedelta(minutes=head), codes)
    limit = config.scoring.max_missing_pct
    pct = 100.0 * missing / tib
    if pct > limit:
        note("warning", f"no data for {missing:.0f} of {tib:.0f} min of the sleep opportunity ({where}; {pct:.0f}%, "
                        f"over [scoring] max_missing_pct = {limit:g}%): night not included", exclude=True)
    else:
        note("warning", f"no data for {missing:.0f} of {tib:.0f} min of the sleep opportunity ({where}); "
                        "these minutes are neither sleep nor wake")
