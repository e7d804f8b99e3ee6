"""Hypnograms saved as text (CSV, TSV or TXT in ``psg/``): one row per scored epoch.

Each row gives an epoch's stage and either its start (a date-time, or a date
and a time column, in any form ``_stamps`` reads) or its epoch number, with
the recording's start on a line above the header (``Start: 2026-10-27
23:04:30``). Labels go through the EDF+ reader's map (``stage_labels``:
W/Wake/0, N1/1, N2/2, N3/3/4, R/REM/5, ?/unscored, plus study.toml
``[psg] labels``). Rows whose label is a lights marker ("Lights off", "Lights
on") set the sleep opportunity; without them scoring uses first to last scored
epoch and says so in the QC log, as for EDF+.
"""

from __future__ import annotations

import hashlib
from pathlib import Path

import numpy as np
import pandas as pd

from sleepfuse.model.clock import wall_to_utc
from sleepfuse.model.errors import ConfigError, ReadError
from sleepfuse.model.records import Hypnogram, Problem
from sleepfuse.model.stages import STAGE_DTYPE, Stage
from ._columns import match_columns, role_counter
from ._csvtext import is_blank_row, line_phrase, missing_column_message, read_raw, read_table
from ._csvtime import metadata_start, parse_stamps
from ._stamps import DateOrderConflict, DateOrderUnsettled, parse_clock, parse_wall
from .stage_labels import DEFAULT_SIGNAL_CODES, TARGET_CODES, lights_marker, merged_labels, normalise_label

ROLES = ("timestamp", "date", "time", "epoch", "stage", "marker")  # marker: an event column with lights rows
MAX_EPOCHS = 14 * 2880  # two weeks of 30-s epochs: longer is a damaged file
_US = 1_000_000


def read_text_hypnogram(path, tz: str, *, epoch_s: float = 30.0, labels: dict[str, str] | None = None,
                        date_order: str = "") -> Hypnogram:
    """Read a text hypnogram; times in the IANA zone ``tz``. Raises ReadError with the reason."""
    path = Path(path)
    try:
        table_labels = merged_labels(labels)
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
    texts = cells[col["stage"]].str.strip().to_numpy()[ok]
    instants, lines = instants[ok], lines[ok]
    marks = np.array([lights_marker(t) or "" for t in texts])
    epoch = marks == ""
    if col["marker"] is not None:  # lights in an event column: on a row of its own, or beside a stage
        events = np.array([lights_marker(t) or "" for t in cells[col["marker"]].str.strip().to_numpy()[ok]])
        epoch &= ~((texts == "") & (events != ""))
        marks = np.where(marks == "", events, marks)
    lights = {k: instants[marks == k] for k in ("off", "on")}
    t0 = int(instants[epoch].min()) if epoch.any() else None
    if t0 is None:
        raise ReadError(path, "no stage rows (only lights rows)")
    rel = instants[epoch] - t0
    slots = (rel + step // 2) // step
    if int(slots.max()) + 1 > MAX_EPOCHS:
        raise ReadError(path, f"the epochs span more than {MAX_EPOCHS} epochs; check the time stamps")
    stages = np.full(int(slots.max()) + 1, Stage.UNSCORED, dtype=STAGE_DTYPE)
    codes, unknown = _codes(texts[epoch], table_labels)
    order = np.argsort(slots, kind="stable")
    first = np.r_[True, np.diff(slots[order]) != 0]
    stages[slots[order][first]] = codes[order][first]
    dup = lines[epoch][order][~first]
    if dup.size:
        problems.append(Problem("warning", f"{dup.size} row(s) for an epoch already given; the first kept "
                                           f"({line_phrase(dup)})"))
    off_grid = np.flatnonzero(rel - slots * step)
    if off_grid.size:
        problems.append(Problem("warning", f"{off_grid.size} row(s) not on the {epoch_s:g}-s epoch grid moved to the "
                                           f"nearest epoch ({line_phrase(lines[epoch][off_grid])})"))
    if unknown:
        listed = ", ".join(f"{k!r} ({v} × {epoch_s:g} s)" for k, v in unknown.items())
        problems.append(Problem("warning", f"unknown stage labels counted as unscored: {listed}; map them in "
                                           "study.toml [psg] labels to W, N1, N2, N3, R or unscored"))
    start = pd.Timestamp(t0, unit="us", tz="UTC").tz_convert(tz)
    lights_off = _local(lights["off"].min(), tz) if lights["off"].size else None
    lights_on = _local(lights["on"].max(), tz) if lights["on"].size else None
    if lights_off is not None and lights_on is not None and lights_on <= lights_off:
        problems.append(Problem("warning", "lights on is not after lights off; lights on is ignored", lights_on))
        lights_on = None
    detected["epochs"] = f"{stages.size} × {epoch_s:g} s"
    detected["lights rows"] = ("yes" if lights["off"].size or lights["on"].size
                               else "none: first to last scored epoch")
    problems.insert(0, Problem("info", "read as: " + "; ".join(f"{k}: {v}" for k, v in detected.items())))
    return Hypnogram(path, start, start, float(epoch_s), stages, lights_off, lights_on, unknown, problems,
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


def _codes(texts: np.ndarray, labels: dict[str, str]) -> tuple[np.ndarray, dict[str, int]]:
    """Stage code of every label; unknown labels become UNSCORED and are counted."""
    codes = np.empty(texts.size, dtype=STAGE_DTYPE)
    unknown: dict[str, int] = {}
    known: dict[str, int] = {}
    for i, text in enumerate(texts):
        code = known.get(text)
        if code is None:
            target = labels.get(normalise_label(text)) if text else "unscored"
            if target is None and text.strip().isdigit() and int(text) in DEFAULT_SIGNAL_CODES:
                target = DEFAULT_SIGNAL_CODES[int(text)]  # numeric coding as in EDF hypnogram signals (5 = R)
            code = known[text] = TARGET_CODES[target] if target else Stage.UNSCORED
            if target is None:
                unknown[text] = 0
        if text in unknown:
            unknown[text] += 1
        codes[i] = code
    return codes, unknown


def _local(us, tz: str) -> pd.Timestamp:
    return pd.Timestamp(int(us), unit="us", tz="UTC").tz_convert(tz)
