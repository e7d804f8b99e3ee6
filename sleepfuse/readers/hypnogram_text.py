"""Hypnograms saved as text (CSV, TSV or TXT in ``psg/``): one row per scored epoch, or an annotation list.

Each row gives a stage and its start: a date-time (or a date and a time
column, in any form ``_stamps`` reads), times of day with the date on a line
above the header, an epoch number or an onset in seconds with the start on a
line above the header (``Start: 2026-10-27 23:04:30``). An optional duration
column makes it an annotation list (onset, duration, description). The rows
are then read exactly as the EDF+ reader reads its annotations
(``_edfstages``: the same label map W/Wake/0, N1/1, N2/2, N3/3/4, R/REM/5,
?/unscored plus study.toml ``[psg] labels``, the same epoch grid, unknown
labels counted as unscored and reported, events ignored). Rows whose label
is a lights marker ("Lights off", "Lights on"), in the stage or an event
column, set the sleep opportunity; without them scoring uses first to last
scored epoch and says so in the QC log, as for EDF+.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.model.clock import wall_to_utc
from sleepfuse.model.errors import ConfigError, ReadError
from sleepfuse.model.records import Hypnogram, Problem
from ._columns import match_columns, role_counter
from ._csvtext import is_blank_row, missing_column_message, read_raw, read_table
from ._csvtime import metadata_start, parse_stamps
from ._stamps import DateOrderConflict, DateOrderUnsettled, parse_clock, parse_wall
from ._edfstages import _classify, _stage_grid
from ._edftimes import _lights
from .stage_labels import DEFAULT_SIGNAL_CODES, lights_marker, merged_labels

ROLES = ("timestamp", "date", "time", "epoch", "duration", "stage", "marker")  # marker: an event column
_US = 1_000_000


def read_text_hypnogram(path, tz: str, *, epoch_s: float = 30.0, labels: dict[str, str] | None = None,
                        date_order: str = "") -> Hypnogram:
    """Read a text hypnogram; times in the IANA zone ``tz``. Raises ReadError with the reason."""
    path = Path(path)
    try:  # the EDF+ label map, with R&K's numeric codes as EDF hypnogram signals use them (5 = R)
        table_labels = {**{str(k): v for k, v in DEFAULT_SIGNAL_CODES.items()}, **merged_labels(labels)}
    except ValueError as exc:
        raise ConfigError("psg.labels", labels, str(exc)) from None
    digest = hashlib.sha256(read_raw(path)).hexdigest()
    table = read_table(path, role_counter(ROLES))
    match = match_columns(table.header, ROLES)
    col = dict(match.index)
    if col["timestamp"] is None and col["date"] is None and col["time"] is not None:
        col["timestamp"], col["time"] = col["time"], None
    if col["stage"] is None:
        raise ReadError(path, missing_column_message("stage", "stage", table.header, "psg")
                        .split(". If the file")[0] + "; name the column 'stage' (or 'sleep stage', 'hypnogram')")
    filled = ~is_blank_row(table.cells)
    cells, lines = table.cells[filled], table.lines[filled]
    if len(cells) == 0:
        raise ReadError(path, "the file has a header but no epoch rows")
    problems: list[Problem] = []
    detected = {"dialect": table.dialect.describe(), "columns": match.describe(table.header)}
    step = int(round(epoch_s * _US))
    try:
        clocks = _clock_only(cells, col)
        if clocks is not None:  # times of day only: the date comes from a line above the header
            instants, ok, fmt = _clocks_on_start_date(path, clocks, table.dialect.metadata, tz, date_order)
            detected["time stamps"] = fmt
        elif col["timestamp"] is not None or (col["date"] is not None and col["time"] is not None):
            stamps = (cells[col["timestamp"]] if col["timestamp"] is not None
                      else cells[col["date"]].str.strip() + " " + cells[col["time"]].str.strip()).str.strip()
            seconds = pd.to_numeric(stamps.str.replace(",", ".", regex=False), errors="coerce").to_numpy()
            if np.isfinite(seconds).mean() > 0.9:  # onsets in seconds from a start on the header lines
                start = metadata_start(table.dialect.metadata, tz, date_order)
                if start is None:
                    raise ReadError(path, "onsets in seconds but no start time: give 'Start: <date time>' on a "
                                          "line above the header")
                ok = np.isfinite(seconds)
                instants = start[0] + np.round(np.nan_to_num(seconds) * _US).astype(np.int64)
                detected["time stamps"] = f"seconds from a start on the header lines ({start[1]})"
            else:
                instants, ok, stamp_problems, fmt = parse_stamps(stamps, lines, tz, date_order)
                problems += stamp_problems
                detected["time stamps"] = fmt
        elif col["epoch"] is not None:
            start = metadata_start(table.dialect.metadata, tz, date_order)
            if start is None:
                raise ReadError(path, "epoch numbers but no start time: give 'Start: <date time>' on a line above "
                                      "the header, or a time column")
            numbers = pd.to_numeric(cells[col["epoch"]].str.strip(), errors="coerce").to_numpy()
            ok = np.isfinite(numbers)
            instants = np.where(ok, start[0] + (np.nan_to_num(numbers) - np.nanmin(numbers)) * step, 0).astype(np.int64)
            detected["time stamps"] = f"epoch numbers from a start on the header lines ({start[1]})"
        else:
            start = metadata_start(table.dialect.metadata, tz, date_order)
            if start is None:
                raise ReadError(path, "no time column, no epoch column and no start time on the lines above the header")
            ok = np.ones(len(cells), dtype=bool)
            instants = start[0] + np.arange(len(cells), dtype=np.int64) * step
            detected["time stamps"] = f"one row per epoch from a start on the header lines ({start[1]})"
    except (DateOrderUnsettled, DateOrderConflict) as exc:
        raise ReadError(path, str(exc)) from None
    if not ok.any():
        raise ReadError(path, "no epoch has a readable time or number")
    # From here on, the rows are an annotation list, read as the EDF+ reader reads one (same label
    # map, same epoch grid rules, same lights and unknown-label handling).
    texts = cells[col["stage"]].str.strip().to_numpy()[ok]
    instants = instants[ok]
    reference = int(instants.min())
    onsets = ((instants - reference) / _US).tolist()
    if col["duration"] is not None:
        seconds = pd.to_numeric(cells[col["duration"]].str.strip().str.replace(",", ".", regex=False),
                                errors="coerce").to_numpy()[ok]
        durations = [float(d) if np.isfinite(d) and d > 0 else None for d in seconds]
        detected["durations"] = f"column {table.header[col['duration']]!r} (s)"
    else:
        durations = [float(epoch_s)] * len(texts)  # one row per epoch
    rows = [(o, d, t) for o, d, t in zip(onsets, durations, texts) if t]
    if col["marker"] is not None:  # lights (or other events) in a column of their own
        events = cells[col["marker"]].str.strip().to_numpy()[ok]
        rows += [(o, None, e) for o, e in zip(onsets, events) if e and lights_marker(e)]
    header_start = _local(reference, tz)
    stage_rows, lights = _classify(*(list(c) for c in zip(*rows)), float(epoch_s), table_labels) if rows else ([], [])
    if not stage_rows:
        raise ReadError(path, f"no sleep stages found in column {table.header[col['stage']]!r}; map the labels in "
                              "study.toml ([psg] labels)")
    t0, stages, unknown = _stage_grid(path, stage_rows, float(epoch_s), header_start, problems)
    lights_off, lights_on = _lights(lights, header_start, problems)
    start = header_start + pd.Timedelta(seconds=t0)
    detected["epochs"] = f"{stages.size} × {epoch_s:g} s"
    detected["lights rows"] = "yes" if lights else "none: first to last scored epoch"
    problems.insert(0, Problem("info", "read as: " + "; ".join(f"{k}: {v}" for k, v in detected.items())))
    return Hypnogram(path, header_start, start, float(epoch_s), stages, lights_off, lights_on, unknown, problems,
                     sha256=digest, detected=detected)


def _clock_only(cells: pd.DataFrame, col: dict) -> pd.Series | None:
    """The time column when it holds times of day without a date (and no date column), else None."""
    j = col["timestamp"] if col["date"] is None else None
    if j is None:
        return None
    sample = [t for t in cells[j].str.strip().iloc[:20] if t]
    return cells[j].str.strip() if sample and all(parse_clock(t) for t in sample) else None


_DATE_KEYS = ("start date", "recording date", "date", "start", "recording start", "night", "study date")


def _clocks_on_start_date(path, clocks: pd.Series, meta: dict[str, str], tz: str, date_order: str):
    """Times of day on the recording's date (a line above the header), a day later each time the
    clock steps back by more than 12 h (past midnight)."""
    day = None
    for key in _DATE_KEYS:
        if key in meta:
            wall, fmt = parse_wall(pd.Series([meta[key]]), date_order)
            if fmt is not None and not np.isnat(wall[0]):
                day = wall[0].astype("datetime64[D]")
                break
    if day is None:
        raise ReadError(path, "times of day without a date: give the recording date on a line above the header "
                              "(e.g. 'Date: 2026-05-14'), or a date column")
    parts = [parse_clock(t) for t in clocks]
    ok = np.array([p is not None for p in parts])
    of_day = np.array([((p[0] * 60 + p[1]) * 60 + p[2]) * _US + p[3] if p else 0 for p in parts], dtype=np.int64)
    back = np.r_[0, np.diff(of_day[ok]) < -12 * 3600 * _US].cumsum()
    wall = np.zeros(len(parts), dtype=np.int64)
    wall[ok] = day.astype("datetime64[us]").astype(np.int64) + back * 86400 * _US + of_day[ok]
    utc, _ = wall_to_utc(wall, tz)
    return utc, ok, f"times of day from {day} (the date on the header lines)"


def _local(us, tz: str) -> pd.Timestamp:
    return pd.Timestamp(int(us), unit="us", tz="UTC").tz_convert(tz)
